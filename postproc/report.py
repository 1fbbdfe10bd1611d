#!/usr/bin/python3
"""Summary of a thermorph result: heat budget over a window, time in water and in contact with the substrate (and
the heat lost there), time above/below thresholds, time to reach them.

    report.py RESULT.h5 [--window t0,t1 ...] [--above KEY=TEMP ...] [--below KEY=TEMP ...]
              [--segments a,b] [--csv FILE]

KEY is core, blood, skin (mean skin), or SEGMENT.mean, SEGMENT.min, SEGMENT.max
(volume-weighted mean, lowest and highest tissue temperature of the segment,
coat excluded). TEMP in degC, or with a unit: 39.5, 39.5degC, 312.65K.
Times in s, or with a unit: 600, 10min, 1.5h. See postproc/README.md, "Reports".
"""

from __future__ import annotations

import argparse
import csv
import re
import sys
import textwrap
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from thermorph_post import CAUTION  # the text of models/caution.hpp (tests/test_docs.py)
from thermorph_post.budget import WindowBudget, cumulative_at, locate, step_index, window_budget
from thermorph_post.results import ZERO_CELSIUS_IN_KELVIN, Results, ResultsError, time_average
from thermorph_post.results import TIME_UNITS, parse_time as results_parse_time  # noqa: F401 (TIME_UNITS: re-exported)

THRESHOLDS = ("Thresholds such as critical tissue temperatures are species-specific and must come from your own "
              "sources.")
BODY_KEYS = {"core": ("/body/core_temperature", "core temperature"),
             "blood": ("/body/blood_temperature", "blood temperature"),
             "skin": ("/body/mean_skin_temperature", "mean skin temperature")}
SEGMENT_STATS = {"mean": "mean tissue temperature", "min": "lowest tissue temperature",
                 "max": "highest tissue temperature"}


class ArgumentError(Exception):
    """A bad command-line value (reported with exit code 2)."""


# ---- parsing ------------------------------------------------------------------------------
def parse_time(text: str) -> float:
    """A time such as '600', '10 min' or '1.5h' [s] (thermorph_post.results.parse_time)."""
    try:
        return results_parse_time(text)
    except ValueError as err:
        raise ArgumentError(str(err)) from None


def parse_temperature(text: str) -> float:
    """A temperature such as '39.5', '39.5 degC' or '312.65 K' [degC]."""
    match = re.fullmatch(r"\s*([-+]?[0-9.]+(?:[eE][-+]?[0-9]+)?)\s*(degC|°C|C|K)?\s*", text)
    try:
        value = float(match.group(1)) if match else float("nan")
    except ValueError:
        value = float("nan")
    if not np.isfinite(value):
        raise ArgumentError(f"bad temperature {text!r}: expected a number in degC, or with a unit "
                            f"(degC or K), e.g. 39.5 or 312.65K")
    return value - ZERO_CELSIUS_IN_KELVIN if match.group(2) == "K" else value


def parse_window(res: Results, text: str | None) -> tuple[float, float]:
    """`t0,t1` [s] inside the run; default the whole run. ArgumentError when outside or reversed."""
    t_first, t_last = float(res.time[0]), float(res.time[-1])
    if text is None:
        return t_first, t_last
    # t0,t1 or t0:t1 (the form of thermorph sweep --window): one separator; a time holds neither.
    parts = text.split(",") if "," in text else text.split(":")
    if len(parts) != 2:
        raise ArgumentError(f"--window {text!r}: expected two times t0,t1 (s), e.g. 600,3600 or 10min,1h "
                            f"(or t0:t1, as thermorph sweep --window)")
    t0, t1 = parse_time(parts[0]), parse_time(parts[1])
    slack = 1e-9 * max(1.0, abs(t_last))
    if t0 < t_first - slack or t1 > t_last + slack:
        raise ArgumentError(f"--window {t0:g},{t1:g} s lies outside the run, which covers "
                            f"{t_first:g} to {t_last:g} s")
    if len(res.time) > 1 and t1 <= t0:
        raise ArgumentError(f"--window {t0:g},{t1:g} s: the end must come after the start")
    return max(t0, t_first), min(t1, t_last)


@dataclass
class Threshold:
    """A user threshold on one temperature series."""
    key: str
    description: str
    above: bool
    value: float           # [degC]
    time: np.ndarray       # [s]
    series: np.ndarray     # [degC]


def temperature_keys(res: Results) -> list[str]:
    """Every valid threshold key for this file."""
    keys = [k for k, (path, _) in BODY_KEYS.items() if res.has(path)]
    return keys + [f"{n}.{stat}" for n in res.segment_names() for stat in SEGMENT_STATS]


def temperature_series(res: Results, key: str) -> tuple[np.ndarray, str]:
    """The temperature series [degC] ([nt]) and a description for a threshold key."""
    if key in BODY_KEYS and res.has(BODY_KEYS[key][0]):
        return np.asarray(res.read(BODY_KEYS[key][0]).values, dtype=float), BODY_KEYS[key][1]
    name, _, stat = key.rpartition(".")
    if name in res.segment_names() and stat in SEGMENT_STATS:
        seg = res.segments([name])[0]
        values = seg.mean_tissue_temperature() if stat == "mean" else seg.extreme_tissue_temperature(stat)
        return values, f"{name}: {SEGMENT_STATS[stat]}"
    keys = temperature_keys(res)
    raise ArgumentError(f"unknown temperature {key!r}; valid keys: {', '.join(keys)}")


def parse_threshold(res: Results, text: str, above: bool) -> Threshold:
    """`KEY=TEMP` into a Threshold (ArgumentError names the problem)."""
    flag = "--above" if above else "--below"
    key, sep, value = text.partition("=")
    if not sep or not key.strip():
        raise ArgumentError(f"{flag} {text!r}: expected KEY=TEMP, e.g. core=39.5 or ears.min=10")
    series, description = temperature_series(res, key.strip())
    try:
        temp = parse_temperature(value)
    except ArgumentError as err:
        raise ArgumentError(f"{flag} {text!r}: {err}") from None
    return Threshold(key.strip(), description, above, temp, res.time, series)


# ---- thresholds ---------------------------------------------------------------------------
def _clip(time, values, t0: float, t1: float):
    """Samples on [t0, t1], with values linearly interpolated at the window ends."""
    inside = (time > t0) & (time < t1)
    grid = np.concatenate(([t0], time[inside], [t1])) if t1 > t0 else np.array([t0])
    return grid, np.interp(grid, time, values)


def time_beyond(time, values, threshold: float, above: bool, t0: float, t1: float) -> float:
    """Time in [t0, t1] with the series above (or below) the threshold [s], linear between outputs."""
    grid, y = _clip(np.asarray(time, float), np.asarray(values, float), t0, t1)
    d = (y - threshold) if above else (threshold - y)   # > 0 where the condition holds
    total = 0.0
    for a, b, da, db in zip(grid[:-1], grid[1:], d[:-1], d[1:]):
        if not (np.isfinite(da) and np.isfinite(db)):
            continue
        if da > 0 and db > 0:
            total += b - a
        elif da > 0 or db > 0:          # one crossing: the linear piece changes sign once
            total += (b - a) * max(da, db) / abs(db - da)
    return float(total)


def first_reach(time, values, threshold: float, above: bool, t0: float, t1: float) -> float | None:
    """First time in [t0, t1] at which the series reaches the threshold from the start [s]; None if never.

    Returns t0 when the series is already at or beyond the threshold at t0.
    """
    grid, y = _clip(np.asarray(time, float), np.asarray(values, float), t0, t1)
    d = (y - threshold) if above else (threshold - y)   # >= 0 once reached
    if np.isfinite(d[0]) and d[0] >= 0:
        return float(grid[0])
    for a, b, da, db in zip(grid[:-1], grid[1:], d[:-1], d[1:]):
        if np.isfinite(da) and np.isfinite(db) and db >= 0 > da:
            return float(a + (b - a) * (-da) / (db - da))
    return None


# ---- water and substrate contact -------------------------------------------------------------
def _pieces(knots, values, t0: float, t1: float) -> list[tuple[float, float, float]]:
    """A piecewise-constant line (the value at each knot holds up to the next knot) cut to [t0, t1]: (start, end,
    value) pieces of positive length, neighbours of equal value merged."""
    out = []
    for a, b, v in zip(knots[:-1].tolist(), knots[1:].tolist(), values[:-1].tolist()):
        a, b = max(a, t0), min(b, t1)
        if b <= a:
            continue
        if out and out[-1][1] == a and out[-1][2] == v:
            out[-1] = (out[-1][0], b, v)
        else:
            out.append((a, b, v))
    return out


def _exact_at(res: Results, t: float) -> bool:
    """Whether the cumulative energies at time t are stored exactly: an output, or a step of the timeline in
    /steps (files from 2026-12-05)."""
    return t in set(np.asarray(res.time, float).tolist()) or step_index(res.step_times(), t) is not None


def _span_heat(res: Results, seg, channel: str, spans) -> tuple[float | None, str]:
    """Heat gained by all copies of `seg` by `channel` over the spans [J] and how: the solver's cumulative energy at
    each span end — the stored value at an output, the exact value at a step of the timeline from /steps
    (`cumulative, exact at steps`), else interpolated between the outputs and steps around it as the budget
    (budget.cumulative_at: `cumulative`; files without /steps: across a step between outputs this mixes both sides
    of it) — or the trapezoid on the stored flow; None when the file stores neither."""
    flow = seg.heat_flow(channel)
    energy = seg.cumulative_heat(channel)
    if flow is None:
        return None, ""
    if energy is not None:
        steps, at_steps = res.step_times(), seg.step_cumulative_heat(channel)
        found = [cumulative_at(res.time, energy, flow, t, steps, at_steps) for span in spans for t in span]
        total = sum(b.value - a.value for a, b in zip(found[::2], found[1::2]))
        used = any(e.piece.how == "step" for e in found)
        return seg.count * total, "cumulative, exact at steps" if used else "cumulative"
    total = sum(float(time_average(res.time, flow, a, b)) * (b - a) for a, b in spans)
    return seg.count * total, "trapezoid"


def exposure_rows(res: Results, t0: float, t1: float, segments=None) -> list[dict]:
    """Per segment that is in water or touches the substrate at some time of the run: within [t0, t1] the time in
    water, the time in contact, the contact-time integral of the contact fraction and its contact-time-weighted
    mean, and the heat lost (all copies, positive: lost by the body) to the water (convection while in water: in
    water only convection acts) and to the substrate (the substrate channel while in contact).

    The series are /segments/NAME/in_water and contact_fraction: each output stores the value of the interval that
    follows it (the value after a step on an output), which holds up to the timeline's next change (Results.
    water_line, contact_line: the stored case's steps between outputs when it reproduces every output, else the
    next output). The heat at a change between outputs is the solver's own value there (/steps), interpolated
    only in files without it."""
    rows = []
    for seg in res.segments(segments):
        water = res.water_line(seg.name)
        contact = res.contact_line(seg.name)
        ever_wet = water is not None and bool(np.any(water[1] > 0.5))
        ever_contact = bool(np.any(np.asarray(contact[1]) > 0.0))
        if not (ever_wet or ever_contact):
            continue
        row = {"segment": seg.name, "label": seg.label, "copies": seg.count,
               "window start [s]": t0, "window end [s]": t1}
        wet_spans = [(a, b) for a, b, v in _pieces(*water, t0, t1) if v > 0.5] if water is not None else []
        touch = [(a, b, v) for a, b, v in _pieces(*contact, t0, t1) if v > 0.0]
        row["time in water [s]"] = sum(b - a for a, b in wet_spans) if water is not None else None
        row["time in contact [s]"] = sum(b - a for a, b, _ in touch)
        row["contact fraction x time [s]"] = sum(v * (b - a) for a, b, v in touch)
        row["mean contact fraction in contact [1]"] = (row["contact fraction x time [s]"] / row["time in contact [s]"]
                                                       if row["time in contact [s]"] > 0 else None)
        heat, how = _span_heat(res, seg, "convection", wet_spans)
        row["heat lost to water [J]"] = None if heat is None or water is None else -heat
        row["water heat method"] = how
        heat, how = _span_heat(res, seg, "substrate", [(a, b) for a, b, _ in touch])
        row["heat lost to substrate [J]"] = None if heat is None else -heat
        row["substrate heat method"] = how
        # Span ends inside the window where the heat is interpolated: neither an output nor a stored step.
        row["span ends between outputs"] = sorted({t for a, b in wet_spans + [(a, b) for a, b, _ in touch]
                                                   for t in (a, b) if t0 < t < t1 and not _exact_at(res, t)})
        rows.append(row)
    return rows


def exposure_lines(rows: list[dict], t0: float, t1: float) -> list[str]:
    """The water and contact section as text lines."""
    if not rows:
        return []
    lines = ["", "Water and substrate contact (/segments/NAME/in_water and contact_fraction: each output's value holds "
                 "until the",
             "  timeline's next change; heat of all copies by the solver's cumulative energies at the outputs and at "
             "the",
             "  timeline's steps (/steps), positive: lost by the body)"]
    length = t1 - t0
    for r in rows:
        lines.append(f"  {r['label']}")
        wet = r["time in water [s]"]
        if wet is None:
            lines.append("    in water: not stored in this file (written before 2026-12-05)")
        else:
            text = f"    in water: {fmt_time(wet)}"
            if length > 0:
                text += f", {100 * wet / length:.3g} % of the window"
            if wet > 0 and r["heat lost to water [J]"] is not None:
                text += f"; heat lost to the water (convection while in it): {r['heat lost to water [J]'] / 1e3:.4g} kJ"
            lines.append(text)
        touch = r["time in contact [s]"]
        text = f"    in contact with the substrate: {fmt_time(touch)}"
        if touch > 0:
            text += (f"; contact-time-weighted mean contact fraction {r['mean contact fraction in contact [1]']:.4g} "
                     f"({fmt_time(r['contact fraction x time [s]'])} of full contact)")
            if r["heat lost to substrate [J]"] is not None:
                text += f"; heat lost to the substrate: {r['heat lost to substrate [J]'] / 1e3:.4g} kJ"
        lines.append(text)
        ends = r["span ends between outputs"]
        if ends:
            lines.append("    NOTE: " + ", ".join(fmt_time(t) for t in ends) + " (a change of water or contact) "
                         "lies between outputs: the times are the timeline's own, the heat there is interpolated "
                         "across the step (the file stores no exact heat there: no /steps, written before "
                         "2026-12-05); rerunning with this version, or an output at each change, makes it exact.")
    return lines


# ---- output -------------------------------------------------------------------------------
def _fmt(value: float, scale: float = 0.0) -> str:
    """A number for the tables, 4 significant digits; "0" below 1e-9 of `scale` (rounding noise)."""
    return "0" if value == 0 or abs(value) < 1e-9 * scale else f"{value:.4g}"


def fmt_time(t: float | None) -> str:
    """A duration [s] with minutes or hours beside it."""
    if t is None:
        return "never (not reached)"
    if abs(t) >= 7200:
        return f"{t:.6g} s ({t / 3600:.4g} h)"
    if abs(t) >= 120:
        return f"{t:.6g} s ({t / 60:.4g} min)"
    return f"{t:.6g} s"


def exact_rows(b: WindowBudget) -> bool:
    """True when the whole body and every segment row come from the solver's cumulative energies."""
    return b.body.method == "cumulative" and all(r.method == "cumulative" for r in b.segments)


def balance_residual(b: WindowBudget) -> float:
    """Largest |sum of the channels − storage| of a row [W]: each row's energy conservation over the window."""
    if "storage" not in b.channels:
        return float("nan")
    return max(abs(sum(r.means.get(c, 0.0) for c in b.channels if c != "storage") - r.means.get("storage", 0.0))
               for r in b.rows())


def budget_lines(b: WindowBudget, mass: float | None) -> list[str]:
    """The budget as text table lines."""
    width = max([len(r.label) for r in b.rows()] + [len("sum of rows − whole body"), 14]) + 2
    scale = max(abs(v) for r in b.rows() for v in r.means.values())
    fmt = lambda v: _fmt(v, scale)  # noqa: E731
    head = "[W]".ljust(width) + "".join(f"{c:>12}" for c in b.channels)
    lines = [head]
    for row in b.rows():
        lines.append(row.label.ljust(width) + "".join(f"{fmt(row.means.get(c, 0.0)):>12}" for c in b.channels))
    if mass:
        lines.append("whole body [W/kg]".ljust(width)
                     + "".join(f"{fmt(b.body.means.get(c, 0.0) / mass):>12}" for c in b.channels))
    if not exact_rows(b):  # exact rows and a pool defined as their difference: zero by construction, not shown
        parts = b.parts_sum()
        lines.append("sum of rows − whole body".ljust(width)
                     + "".join(f"{fmt(parts[c] - b.body.means.get(c, 0.0)):>12}" for c in b.channels))
    if b.t1 > b.t0:
        lines.append("whole body [kJ]".ljust(width)
                     + "".join(f"{fmt(b.body.means.get(c, 0.0) * (b.t1 - b.t0) / 1e3):>12}" for c in b.channels))
    return lines


def _exact_interval(res: Results, t: float) -> str:
    """A run.output_interval that makes t an output time (outputs at multiples of it from 0): the current interval
    shortened to t / ceil(t / interval)."""
    time = np.asarray(res.time, float)
    interval = float(time[1] - time[0])
    n = max(1, int(np.ceil(t / interval - 1e-9)))
    return f"{t / n:.6g} s"


def step_notes(res: Results, t0: float, t1: float) -> list[str]:
    """Notes for window ends where the cumulative energies are not stored and a step of the timeline is near: the
    flows jump there, so no interpolant may run across it.

    Files with /steps (2026-12-05 on): the energies are exact at the steps and interpolated on the piece between
    the nearest outputs and steps (budget.locate); a piece bounded by a step gets a note with its interpolant, the
    error it leaves and how large the flows' correction there was (Interpolated.spread). Files without /steps: the
    cubic between the outputs runs across the step and mixes both sides of it (a window starting at a 5-min event
    with 2-min outputs gave a swim window 83 J of radiation, which water has none of, in a new-user trial). An
    output exactly at the step is not enough for an end before it: that output holds the flows after the step."""
    time = res.time
    steps = res.step_times()
    notes = []
    for label, t in (("start", t0), ("end", t1)):
        i = int(np.searchsorted(time, t, side="right")) - 1
        if i < 0 or i + 1 >= len(time) or time[i] == t:
            continue  # at an output (or outside): exact
        lo, hi = float(time[i]), float(time[i + 1])
        if steps is None:
            for at, name in res.timeline_steps():
                if lo < at <= hi:
                    notes.append(f"NOTE: the window {label} {fmt_time(t)} lies between the outputs at {fmt_time(lo)} "
                                 f"and {fmt_time(hi)}, across the step at {fmt_time(at)} ({name}): the values there "
                                 f"are interpolated across the step and mix both sides of it (this file has no /steps: "
                                 f"written before 2026-12-05). Put the window {label} on an output time, or rerun with "
                                 f"run.output_interval = {_exact_interval(res, at)} (makes {fmt_time(at)} an output "
                                 f"time), or rerun with this version (/steps).")
            continue
        piece = locate(time, t, steps)
        if piece.how not in ("quadratic", "linear"):
            continue
        outputs = set(np.asarray(time, float).tolist())
        where = lambda x: f"the {'output' if x in outputs else 'step'} at {fmt_time(x)}"  # noqa: E731
        head = (f"NOTE: the window {label} {fmt_time(t)} lies between {where(piece.a)} and {where(piece.b)} of the "
                f"timeline: the cumulative energies there are interpolated ")
        fix = (f"For exact values put the window {label} on an output or a step (/steps/step_time), or rerun with "
               f"run.output_interval = {_exact_interval(res, t)} (makes {fmt_time(t)} an output time).")
        if piece.how == "linear":
            notes.append(head + "along a straight line between the exact energies at both (no output between them, "
                         "and /steps stores no flows), off by up to (t−a)(b−t)·max|E''|/2, which the file cannot "
                         "estimate. " + fix)
            continue
        worst = None   # (share of the window's change, spread [J], channel)
        for c in res.body_channels():
            energy, flow, at_steps = res.cumulative_heat(c), res.body_heat_flow(c), res.step_cumulative_heat(c)
            if energy is None or flow is None or at_steps is None:
                continue
            found = cumulative_at(time, energy, flow, t, steps, at_steps)
            change = abs(cumulative_at(time, energy, flow, t1, steps, at_steps).value
                         - cumulative_at(time, energy, flow, t0, steps, at_steps).value)
            if change > 0 and (worst is None or found.spread / change > worst[0]):
                worst = (found.spread / change, found.spread, c)
        size = ("" if worst is None else
                f" The output's flow bends them by up to {worst[1]:.3g} J off that line ({worst[2]}: "
                f"{100 * worst[0]:.2g} % of the whole body's {worst[2]} over the window), an upper estimate of the "
                f"error left while the flows are resolved at that spacing.")
        notes.append(head + "by the quadratic through the exact energies at both and the output's flow, off by up to "
                     "(t−o)²·|s−t|·max|E'''|/6 (o the output, s the step)." + size + " " + fix)
    return notes


def threshold_rows(thresholds, t0: float, t1: float) -> list[dict]:
    """Per threshold: time beyond it, share of the window, first time reached, range in the window."""
    rows = []
    for th in thresholds:
        beyond = time_beyond(th.time, th.series, th.value, th.above, t0, t1)
        reached = first_reach(th.time, th.series, th.value, th.above, t0, t1)
        _, y = _clip(th.time, th.series, t0, t1)
        rows.append({
            "key": th.key, "quantity": th.description, "condition": "above" if th.above else "below",
            "threshold [degC]": th.value, "time beyond [s]": beyond,
            "share of window [1]": beyond / (t1 - t0) if t1 > t0 else float(beyond > 0),
            "first reached at [s]": reached,
            "first reached after window start [s]": None if reached is None else reached - t0,
            "minimum in window [degC]": float(np.nanmin(y)), "maximum in window [degC]": float(np.nanmax(y)),
        })
    return rows


def write_csv(path: Path, budgets: list[WindowBudget], mass: float | None, rows: list[dict],
              exposure: list[dict] = ()) -> list[Path]:
    """Budgets (one block of rows per window) to `path`, thresholds to PATH.thresholds.csv and water and contact
    (exposure_rows) to PATH.exposure.csv beside it; return the paths written."""
    path.parent.mkdir(parents=True, exist_ok=True)
    written = [path]
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["row", "units", "window start [s]", "window end [s]", "method"] + budgets[0].channels)
        for b in budgets:
            for r in b.rows():
                w.writerow([r.label, "W", repr(b.t0), repr(b.t1), r.method]
                           + [repr(r.means.get(c, 0.0)) for c in b.channels])
            if mass:
                w.writerow(["whole body per kg", "W/kg", repr(b.t0), repr(b.t1), b.body.method]
                           + [repr(b.body.means.get(c, 0.0) / mass) for c in b.channels])
    if rows:
        side = path.with_name(f"{path.stem}.thresholds.csv")
        with open(side, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh, lineterminator="\n")
            w.writerow(list(rows[0].keys()))
            for r in rows:
                w.writerow(["" if v is None else (repr(v) if isinstance(v, float) else v) for v in r.values()])
        written.append(side)
    if exposure:
        side = path.with_name(f"{path.stem}.exposure.csv")
        with open(side, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh, lineterminator="\n")
            keys = [k for k in exposure[0] if k != "span ends between outputs"]
            w.writerow(keys)
            for r in exposure:
                w.writerow(["" if r[k] is None else (repr(r[k]) if isinstance(r[k], float) else r[k]) for k in keys])
        written.append(side)
    return written


def report(res: Results, window=None, above=(), below=(), segments=None, csv_path=None, out=sys.stdout) -> int:
    """Print the report for an open result; raise ArgumentError on bad arguments. Returns 0.

    `window`: None (the whole run), one "t0,t1" text or a list of them: one budget and threshold section per
    window, in the order given (a CSV then holds every window's rows, told apart by their start and end columns).
    """
    windows = [window] if window is None or isinstance(window, str) else list(window) or [None]
    spans = [parse_window(res, w) for w in windows]  # every window checked before anything is printed
    thresholds = [parse_threshold(res, a, True) for a in above] + [parse_threshold(res, b, False) for b in below]
    budgets = [window_budget(res, t0, t1, segments) for t0, t1 in spans]
    mass = res.body_mass
    p = lambda *a: print(*a, file=out)  # noqa: E731
    p(f"thermorph report: {res.path}")
    title = res.attr("title") or res.case.get("title")
    if title:
        p(f"case: {title}")
    if not res.complete:
        p(f"INCOMPLETE RUN: the results stop at t = {res.time[-1]:g} s ({res.attr('failure', 'solver failure')})")
    if mass:
        p(f"body mass: {mass:.4g} kg")
    warnings = res.warnings
    if warnings:
        p("")
        p(f"Warnings stored with the run ({len(warnings)}; /provenance/warnings):")
        for w in warnings:
            p("\n".join(textwrap.wrap(w, 110, initial_indent="  - ", subsequent_indent="    ")))
    all_rows = []
    for (t0, t1), b in zip(spans, budgets):
        rows = _report_window(res, b, t0, t1, thresholds, mass, p, segments)
        all_rows += [{**r, "window start [s]": t0, "window end [s]": t1} for r in rows]
    if csv_path:
        exposure = [r for t0, t1 in spans for r in exposure_rows(res, t0, t1, segments)]
        for path in write_csv(Path(csv_path), budgets, mass, all_rows, exposure):
            p(f"wrote {path}")
    p("")
    p(f"Caution: {CAUTION} {THRESHOLDS}")
    return 0


def _report_window(res: Results, b: WindowBudget, t0: float, t1: float, thresholds, mass, p,
                   segments=None) -> list[dict]:
    """One window's budget and thresholds, printed; returns its threshold rows."""
    p("")
    if t1 > t0:
        p(f"window: {fmt_time(t0)} to {fmt_time(t1)}, {fmt_time(t1 - t0)} long; "
          f"{int(np.sum((res.time >= t0) & (res.time <= t1)))} outputs inside")
    else:
        p(f"time: {fmt_time(t0)} (a single output; values at that time, no averaging)")
    for note in step_notes(res, t0, t1):
        p(note)
    p("Heat budget: " + ("mean heat flow over the window" if t1 > t0 else "heat flow at that time")
      + " by channel [W], positive into the body")
    for line in budget_lines(b, mass):
        p(line)
    if exact_rows(b):
        p("Segment rows: all copies of the segment (×N); exact, from /segments/NAME/cumulative_heat.")
    else:
        p("Segment rows: all copies of the segment (×N); trapezoidal rule on the flows at the output times,")
        p("  linearly interpolated at window ends between outputs (no cumulative energies in this file).")
    if b.body.method == "cumulative":
        p("Whole body: exact, from /body/cumulative_heat (energy difference / window length; storage = the")
        p("  channel energies minus the change of /body/energy_balance_error).")
    else:
        p("Whole body: trapezoidal rule on /body/heat_flow (no cumulative energies for this window).")
    if b.pool is not None:
        p("Blood pool: whole-body flows minus the sum over all segments"
          + (" (exact)." if exact_rows(b) else " (trapezoidal rule)."))
    if b.others is not None:
        p(f"{b.others.label}: the segments not named in --segments, summed.")
    if exact_rows(b):
        residual = balance_residual(b)
        if np.isfinite(residual):
            p(f"Energy conservation: the largest |sum of channels − storage| of a row is {residual:.3g} W.")
    elif b.body.method == "cumulative":
        p("'sum of rows − whole body' is the error of the trapezoidal rule at this output interval.")
    else:
        p("'sum of rows − whole body' is not zero where the segment flows in this file do not add up to the "
          "whole body.")

    for line in exposure_lines(exposure_rows(res, t0, t1, segments), t0, t1):
        p(line)

    rows = threshold_rows(thresholds, t0, t1)
    if rows:
        p("")
        p("Thresholds (temperatures linearly interpolated between outputs)")
        for r in rows:
            sign = ">" if r["condition"] == "above" else "<"
            reached = r["first reached at [s]"]
            p(f"  {r['key']} ({r['quantity']}) {sign} {r['threshold [degC]']:g} °C")
            if t1 <= t0:
                holds = r["first reached at [s]"] is not None
                p(f"    at that time: {r['maximum in window [degC]']:.4g} °C, "
                  f"{'' if holds else 'not '}{r['condition']} the threshold")
                continue
            beyond = f"    time {r['condition']}: {fmt_time(r['time beyond [s]'])}"
            if t1 > t0:
                beyond += f", {100 * r['share of window [1]']:.3g} % of the window"
            p(beyond)
            if reached is None:
                p("    first reached: never in the window")
            elif reached == t0:
                p(f"    first reached: already at the window start, {fmt_time(t0)}")
            else:
                after = "" if t0 == 0 else f", {fmt_time(reached - t0)} after the window start"
                p(f"    first reached: at {fmt_time(reached)}{after}")
            p(f"    range in the window: {r['minimum in window [degC]']:.4g} to "
              f"{r['maximum in window [degC]']:.4g} °C")
    return rows


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(
        description="Heat budget over a window, time above/below temperature thresholds and time to reach them.",
        epilog="KEY: core, blood, skin, or SEGMENT.mean|min|max (tissue, coat excluded). Caution: " + CAUTION)
    ap.add_argument("result", help="results file (HDF5) written by thermorph")
    ap.add_argument("--window", action="append", metavar="T0,T1",
                    help="t0,t1 in s (or with units: 10min,1h); default the whole run; repeat for several windows "
                         "(one section each)")
    ap.add_argument("--above", action="extend", nargs="+", default=[], metavar="KEY=TEMP",
                    help="time above TEMP (degC, or e.g. 312K) of temperature KEY")
    ap.add_argument("--below", action="extend", nargs="+", default=[], metavar="KEY=TEMP",
                    help="time below TEMP of temperature KEY")
    ap.add_argument("--segments", help="comma-separated segments for the budget rows (the rest summed in one row)")
    ap.add_argument("--csv", help="write the budget to FILE and the thresholds to FILE.thresholds.csv")
    args = ap.parse_args(argv)
    segments = [s.strip() for s in args.segments.split(",") if s.strip()] if args.segments else None
    try:
        with Results(args.result) as res:
            return report(res, args.window, args.above, args.below, segments, args.csv)
    except (ArgumentError, ResultsError) as err:
        print(f"report: error: {err}", file=sys.stderr)
        return 2


if __name__ == "__main__":
    sys.exit(main())
