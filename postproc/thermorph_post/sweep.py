"""Figures from a thermorph sweep table (PDF, SVG, PNG and the plotted numbers as CSV).

    thermorph-sweep-figure SWEEP.h5 --metric NAME [--metric NAME ...] [--x PARAM] [--lines PARAM]
                           [--heatmap] [--fix PARAM=VALUE ...] [--logx|--linx] [--logy] [--out DIR]
                           [--formats pdf,svg,png] [--style single|double] [--dpi N] [--no-caution]

One parameter: the metric against it. Two: the metric against --x (default: the numeric swept parameter
with the most values) with one line per value of the other (--lines), or with --heatmap a colour map over both. More
than two: fix the others with --fix PARAM=VALUE (a value as in the table, e.g. --fix environment.temperature=20).
Failed runs leave gaps. Axes are labelled with readable names and units (PARAMETER_NAMES, metric names built
from the key), log-spaced parameters (a `log:` range) get a log axis, legends sit outside the data. A size
series (--scale body=...) gets the body mass as a second axis and column when the table allows it
(body_mass). Writes DIR/STEM_METRIC.{pdf,svg,png,data.csv} (STEM_METRIC_map for a heat map; DIR: beside
the table) and prints their paths. Exit code 0, or 2 for a bad file or option. Builders returning
Matplotlib figures: line_figure, heatmap_figure.
"""

from __future__ import annotations

import argparse
import re
import sys
import tomllib
from pathlib import Path

import h5py
import numpy as np

from thermorph_post.style import (DEFAULT_STYLE, FORMATS, LINE_CYCLE, MAP_COLOURS, MARKER_CYCLE, PNG_DPI, STYLES,
                                  add_footer, finish, legend_outside, new_figure, panel_title, rc, save, style_of,
                                  suptitle)

#: Readable names of common case keys (the rest are built from the key path by readable_key).
PARAMETER_NAMES = {
    "environment.temperature": "Temperature of the surroundings",
    "environment.speed": "Wind or current speed",
    "environment.relative_humidity": "Relative humidity",
    "environment.radiant_temperature": "Radiant temperature",
    "environment.sky_temperature": "Sky temperature",
    "environment.solar_irradiance": "Solar irradiance",
    "environment.substrate_temperature": "Substrate temperature",
    "environment.water_temperature": "Water temperature",
    "environment.air_temperature": "Air temperature",
    "environment.water_speed": "Water current speed",
    "environment.air_speed": "Wind speed",
    "environment.convection": "Convection coefficient",
    "body.mass": "Body mass",
    "body.activity": "Activity (metabolic multiplier)",
    "body.basal_metabolic_rate": "Basal metabolic rate",
    "body.cardiac_output": "Cardiac output",
    "body.blood_volume": "Blood volume",
    "run.initial_temperature": "Initial temperature",
    "run.duration": "Simulated time",
}
#: Readable names of segment keys whose path words do not say what the number is (cases/REFERENCE.md): the
#: README's sweep of shunts "0,1" drew a legend "bill: vasomotor shunt" with entries 0 and 1.
SEGMENT_KEY_NAMES = {
    "vasomotor.shunt": "shunts open (0 closed, 1 fully open)",
    "vasomotor.skin_perfusion": "skin perfusion (× resting)",
    "vasomotor.superficial_return": "share of venous return in superficial veins",
    "surface.contact_fraction": "share of surface on the substrate",
    "surface.wetted_fraction": "wet share of exposed surface",
}
#: Readable names of the metric quantities thermorph's sweep writes.
METRIC_QUANTITIES = {
    "core_temperature": "core temperature", "blood_temperature": "blood temperature",
    "mean_skin_temperature": "mean skin temperature", "mean_temperature": "mean tissue temperature",
}
#: Unit symbols for axis labels (the table stores UDUNITS-style strings).
UNIT_SYMBOLS = {"degC": "°C", "m s-1": "m/s", "m/s": "m/s", "W m-2": "W/m²", "W/m2": "W/m²", "m2": "m²", "m3": "m³",
                "W/(m2 K)": "W/(m² K)", "m3/s": "m³/s", "1": "", "": ""}


class SweepError(Exception):
    """A bad file or option: reported on stderr with exit code 2."""


def text(value) -> str:
    return value.decode() if isinstance(value, bytes) else str(value)


def pretty_unit(unit: str) -> str:
    """Units for axis labels: degC as °C, m2 as m², 1 as no unit."""
    if unit in UNIT_SYMBOLS:
        return UNIT_SYMBOLS[unit]
    unit = unit.replace("degC", "°C")
    unit = re.sub(r"(?<=[a-zA-Z])2\b", "²", unit)
    return re.sub(r"(?<=[a-zA-Z])3\b", "³", unit)


def metric_label(metric: str, unit: str) -> str:
    """Axis label of a metric: its readable name and unit, and for a heat flow the sign convention ("W; positive
    into the body"), since a loss reads as a negative number (the bill that sheds heat: -0.4 to -2.3 W)."""
    u = pretty_unit(unit)
    if re.search(r"(^|\.)heat_flow\.", metric) and not metric.endswith(".storage"):
        return f"{readable_metric(metric)} ({u + '; ' if u else ''}positive into the body)"
    return label(readable_metric(metric), unit)


#: An axis label (a metric's, a parameter's) longer than this breaks before its last parenthesis, so that it fits
#: the height of a single-column panel or colour bar ("... heat flow" / "(W; positive into the body)").
LONG_LABEL = 36


def _broken(text: str) -> str:
    cut = text.rfind(" (")
    return text[:cut] + "\n" + text[cut + 1:] if len(text) > LONG_LABEL and cut > 0 else text


def label(name: str, unit: str) -> str:
    """Axis label 'Name (unit)' (just the name without a unit)."""
    u = pretty_unit(unit)
    return f"{name} ({u})" if u else name


def _words(path: str) -> str:
    """'layers.0.thickness' -> 'layer 0 thickness'; underscores to spaces."""
    path = re.sub(r"layers\.(\d+)\.", r"layer \1 ", path)
    return path.replace(".", " ").replace("_", " ")


def readable_key(key: str) -> str:
    """Readable name of a swept key: the PARAMETER_NAMES entry, a size factor, or words from the path."""
    if key in PARAMETER_NAMES:
        return PARAMETER_NAMES[key]
    if key == "scale.body":
        return "Body size factor (lengths ×f)"
    if key.startswith("scale."):
        return f"{key[6:]}: size factor (lengths ×f)"
    parts = key.split(".")
    if parts[0] == "segments" and len(parts) >= 3:
        rest = ".".join(parts[2:])
        return f"{parts[1]}: {SEGMENT_KEY_NAMES.get(rest, _words(rest))}"
    if parts[0] == "environment":
        return f"Surroundings: {_words('.'.join(parts[1:]))}"
    words = _words(key)
    return words[:1].upper() + words[1:]


def readable_metric(name: str) -> str:
    """Readable name of a metric column, e.g. 'body.core_temperature.final' -> 'Core temperature, final'."""
    if name.startswith("time_to."):
        cond = name[len("time_to."):]
        m = re.match(r"(.+?)([<>])(.+)", cond)
        if m:
            return f"Time until {readable_metric(m.group(1) + '.').rstrip(', ').lower()} {m.group(2)} " \
                   f"{pretty_unit(m.group(3).replace('degC', ' degC')).strip()}"
        return f"Time until {cond}"
    parts = name.split(".")
    if parts[0] == "segments" and len(parts) >= 3:
        owner, rest = parts[1], parts[2:]
    elif parts[0] == "body":
        owner, rest = "whole body", parts[1:]
    else:
        return _words(name)
    if rest and rest[0] == "heat_flow" and len(rest) == 2:
        what = "rate of heat storage" if rest[1] == "storage" else f"{_words(rest[1])} heat flow"
        return f"{owner}: {what}" if owner != "whole body" else f"{what[:1].upper()}{what[1:]}, whole body"
    quantity = METRIC_QUANTITIES.get(rest[0], _words(rest[0])) if rest else ""
    stat = rest[1] if len(rest) > 1 else ""
    head = f"{owner}: {quantity}" if owner != "whole body" else quantity[:1].upper() + quantity[1:]
    return f"{head}, {stat}" if stat else head


class Sweep:
    """The parameters (in sweep order), metrics (values, units, definitions) and attributes of a sweep table."""

    def __init__(self, path: Path):
        self.path = Path(path)
        try:
            f = h5py.File(path, "r")
        except OSError as e:
            raise SweepError(f"{path}: cannot open ({e})") from e
        with f:
            if text(f.attrs.get("kind", "")) != "thermorph sweep":
                raise SweepError(f"{path}: not a thermorph sweep table (no attribute kind = 'thermorph sweep')")
            self.title = text(f.attrs.get("title", self.path.stem))
            self.complete = int(f.attrs.get("complete", 1)) == 1
            self.window = text(f.attrs.get("window", ""))
            self.case_text = text(f.attrs.get("case", ""))
            self.names = [text(n) for n in f.attrs["parameters"]]
            self.params, self.units, self.specs = {}, {}, {}
            for n in self.names:
                ds = f["parameters"][n]
                self.units[n] = text(ds.attrs.get("units", ""))
                self.specs[n] = text(ds.attrs.get("spec", ""))
                data = ds[()]
                self.params[n] = np.array([text(v) for v in data]) if data.dtype.kind in "OSU" else data.astype(float)
            # run: the netCDF coordinate of the table, not a metric
            self.metrics = {n: (ds[()].astype(float), text(ds.attrs.get("units", "")))
                            for n, ds in f["metrics"].items() if n != "run"}
            self.definitions = {n: text(ds.attrs.get("definition", "")) for n, ds in f["metrics"].items()
                                if n != "run"}
            runs = f.get("runs")
            self.overrides = ([text(v) for v in runs["overrides"][()]] if runs is not None and "overrides" in runs
                              else [])
            n = len(next(iter(self.params.values()))) if self.params else 0
            # Per run: "ok", "failed" or "not run" (an interrupted sweep); figures say which runs they cannot draw.
            self.status = (np.array([text(v) for v in runs["status"][()]]) if runs is not None and "status" in runs
                           else np.full(n, "ok"))
        self.mass_note = ""
        self.body_mass = self._body_mass()

    def numeric(self, name: str) -> bool:
        return self.params[name].dtype.kind == "f"

    def values(self, name: str) -> np.ndarray:
        """Distinct values in first-appearance order (sweep order)."""
        seen, out = set(), []
        for v in self.params[name]:
            if v not in seen:
                seen.add(v)
                out.append(v)
        return np.array(out)

    def log_spaced(self, name: str) -> bool:
        """Whether the parameter was given as a log range (spec `log:START:END:COUNT`)."""
        return self.specs.get(name, "").strip().startswith("log:")

    def _body_mass(self) -> np.ndarray | None:
        """Body mass of each run [kg] for a size series (scale.body), else None (reason in mass_note).

        From the run's `body.mass=` override when the table lists one (thermorph writes it when the case
        gives [body] mass), else the case's mass times the cube of the body factor. Without [body] mass in
        the case thermorph uses the tissue mass of the segments, which the table does not store.
        """
        if "scale.body" not in self.params:
            return None
        found = []
        for o in self.overrides:
            m = re.search(r"(?:^|;\s*)body\.mass=([-+0-9.eE]+)\s*(kg)?\s*(?:;|$)", o)
            found.append(float(m.group(1)) if m else np.nan)
        if found and np.all(np.isfinite(found)):
            return np.array(found)
        try:
            case = tomllib.loads(self.case_text) if self.case_text else {}
        except tomllib.TOMLDecodeError:
            case = {}
        mass = case.get("body", {}).get("mass") if isinstance(case.get("body"), dict) else None
        from thermorph_post.results import parse_mass
        kg = parse_mass(mass) if mass is not None else None
        if kg:
            return kg * self.params["scale.body"] ** 3
        self.mass_note = ("No body-mass column: the case gives no [body] mass (thermorph then uses the tissue mass "
                          "of the segments, which the sweep table does not store).")
        return None


def select(sweep: Sweep, fixes: list[str], free: list[str]) -> np.ndarray:
    """Mask of the runs matching every --fix; every other parameter must be free or fixed."""
    mask = np.ones(len(sweep.params[sweep.names[0]]), dtype=bool)
    fixed = set()
    for fix in fixes:
        key, sep, value = fix.partition("=")
        if not sep or key not in sweep.params:
            raise SweepError(f"--fix {fix}: expected PARAM=VALUE with PARAM one of {', '.join(sweep.names)}")
        column = sweep.params[key]
        if sweep.numeric(key):
            try:
                v = float(value)
            except ValueError:
                raise SweepError(f"--fix {fix}: {key} is a number in {sweep.units[key]}") from None
            hit = np.isclose(column, v, rtol=1e-9, atol=0.0)
        else:
            hit = column == value
        if not hit.any():
            raise SweepError(f"--fix {fix}: no run has this value (values: "
                             f"{', '.join(str(x) for x in sweep.values(key))})")
        mask &= hit
        fixed.add(key)
    rest = [n for n in sweep.names if n not in fixed and n not in free]
    if rest:
        hints = "; ".join(f"{n}: {', '.join(str(x) for x in sweep.values(n))}" for n in rest)
        raise SweepError(f"fix the other swept parameters with --fix PARAM=VALUE ({hints})")
    return mask


def _value_text(sweep: Sweep, name: str, value) -> str:
    if not sweep.numeric(name):
        return str(value)
    u = pretty_unit(sweep.units[name])
    return f"{value:.4g} {u}".strip() if u not in ("°C",) else f"{value:.4g} °C"


def _log_ticks(axis, values):
    """Ticks of a log axis at the swept values (up to eight), written plainly (0.5, 1.26, 2), no minor labels."""
    from matplotlib.ticker import FixedLocator, FuncFormatter, NullFormatter
    values = np.unique(np.asarray(values, float)[np.isfinite(values)])
    if 0 < len(values) <= 8:
        axis.set_major_locator(FixedLocator(values))
    axis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:.3g}"))
    axis.set_minor_formatter(NullFormatter())


def _notes(sweep: Sweep, metric: str, fixes) -> list[str]:
    notes = []
    if sweep.definitions.get(metric):
        notes.append(f"{metric}: {sweep.definitions[metric]}.")
    if fixes:
        notes.append("Fixed: " + ", ".join(fixes) + ".")
    if sweep.mass_note:
        notes.append(sweep.mass_note)
    return notes


def _missing_note(sweep: Sweep, x: str, mask, y: str | None = None) -> str:
    """A note naming the selected runs that failed or did not run (they have no metric values, so a line figure
    would silently start or end elsewhere: found in a new-user trial, a tail-size series whose two smallest tails
    had no steady state), or "" when every selected run is ok."""
    bad = [k for k in np.flatnonzero(mask) if sweep.status[k] != "ok"]
    if not bad:
        return ""
    def where(k):
        return ", ".join(_value_text(sweep, p, sweep.params[p][k]) for p in ([x] if y is None else [x, y])
                         if p in sweep.params)
    kinds = sorted({sweep.status[k] for k in bad})
    shown = "; ".join(f"{where(k)} ({sweep.status[k]})" for k in bad[:8]) + ("; ..." if len(bad) > 8 else "")
    return (f"{len(bad)} of {int(np.count_nonzero(mask))} runs {' or '.join(kinds)}, not drawn: {shown} "
            "(their errors: /runs/error in the sweep file).")


#: A linear parameter axis with at most this many swept values has its ticks at those values.
MAX_VALUE_TICKS = 8


def _value_ticks(axis, values):
    """Ticks of a linear parameter axis at the swept values when there are 2 to MAX_VALUE_TICKS of them (not at 7.5,
    10, 12.5 between lengths of 6, 12, 18, 24 cm)."""
    values = np.asarray(values, float)
    swept = np.unique(values[np.isfinite(values)])
    if 1 < len(swept) <= MAX_VALUE_TICKS:
        axis.set_ticks(swept, [f"{v:g}" for v in swept])


def default_x(sweep: Sweep, free: list[str]) -> str | None:
    """The parameter on the horizontal axis when --x is not given: the numeric free parameter with the most distinct
    values (ties: the first in sweep order), so that a line joins many points and the few values of the other make
    the lines (the README's bill lengths 6 to 24 cm drawn along x, shunts closed and open as two lines, not four
    lines from closed to open); a free non-numeric one when none is numeric; None when every parameter is fixed."""
    numeric = [n for n in free if sweep.numeric(n)]
    if not numeric:
        return free[0] if free else None
    return max(numeric, key=lambda n: (len(np.unique(sweep.values(n))), -numeric.index(n)))


def _title(sweep: Sweep) -> str:
    return sweep.title if sweep.complete else "INCOMPLETE SWEEP: " + sweep.title


def line_figure(sweep: Sweep, metric: str, x: str, lines: str | None, mask, logx: bool | None = None,
                logy: bool = False, style: str = DEFAULT_STYLE, caution: bool = True, fixes=()):
    """The metric against parameter x, one line per value of `lines` (or one line). logx None: automatic
    (a log axis for a log range). Returns a matplotlib Figure."""
    style_of(style)
    values, unit = sweep.metrics[metric]
    derived = x == "body.mass" and "body.mass" not in sweep.params
    logx = sweep.log_spaced("scale.body" if derived else x) if logx is None else logx
    xs_all = sweep.body_mass if x == "body.mass" and "body.mass" not in sweep.params else sweep.params[x]
    xname, xunit = (readable_key("body.mass"), "kg") if x == "body.mass" and "body.mass" not in sweep.params \
        else (readable_key(x), sweep.units[x])
    with rc(style):
        fig = new_figure(style, 2.6 if style == "single" else 3.4)
        ax = fig.subplots()
        ax.set_label(f"sweep: {metric}")
        groups = [(None, mask)] if lines is None else [(v, mask & (sweep.params[lines] == v))
                                                        for v in sweep.values(lines)]
        for i, (value, m) in enumerate(groups):
            xs, ys = xs_all[m], values[m]
            order = np.argsort(xs, kind="stable") if x == "body.mass" or sweep.numeric(x) else np.arange(len(xs))
            name = metric if lines is None else _value_text(sweep, lines, value)
            if lines == "scale.body" and sweep.body_mass is not None:   # size series: the body mass too
                name += f" ({sweep.body_mass[np.flatnonzero(m)[0]]:.3g} kg)" if m.any() else ""
            ax.plot(xs[order], ys[order], color=LINE_CYCLE[i % len(LINE_CYCLE)], marker=MARKER_CYCLE[i % len(MARKER_CYCLE)],
                    markersize=3.5, linewidth=1.2, label=name)
        ax.set_xlabel(label(xname, xunit))
        ax.set_ylabel(_broken(metric_label(metric, unit)))
        if logx:
            ax.set_xscale("log")
            _log_ticks(ax.xaxis, xs_all[mask])
        elif x != "body.mass" and sweep.numeric(x):
            _value_ticks(ax.xaxis, xs_all[mask])
        if logy:
            ax.set_yscale("log")
        if lines is not None:
            legend_outside(ax, title=label(readable_key(lines), ""))
        mass = sweep.body_mass
        if x == "scale.body" and mass is not None:
            f0 = sweep.params["scale.body"]
            k = float(np.nanmedian(mass / f0 ** 3))        # mass at factor 1 [kg]
            top = ax.secondary_xaxis("top", functions=(lambda f: k * np.abs(f) ** 3,
                                                       lambda mkg: np.cbrt(np.abs(mkg) / k)))
            top.set_xlabel("Body mass (kg)")
            if logx:
                _log_ticks(top.xaxis, [])
            ax.thermorph_extra_rows = [[ax.get_label(), "body mass", float(f), "", float(mv), ax.get_xlabel(), "",
                                        "Body mass (kg)"] for f, mv in sorted(set(zip(f0[mask], mass[mask])))]
        panel_title(ax, None, _title(sweep))
        notes = _notes(sweep, metric, fixes)
        missing = _missing_note(sweep, x, mask)
        if missing:
            notes.insert(0, missing)
        if not np.any(np.isfinite(values[mask])):
            notes.insert(0, "No values to draw: the metric is empty (NaN) in every selected run (never reached, "
                            "or the run failed).")
        add_footer(fig, notes, caution)
        finish(fig)
    return fig


def edges(centres: np.ndarray, log: bool) -> np.ndarray:
    """Cell edges for sorted centres: halfway between neighbours (geometric halfway on a log axis), and the
    outer edges at the first and last value, so the map covers exactly the swept range (no padding)."""
    c = np.log(centres) if log else np.asarray(centres, float)
    if len(c) == 1:
        e = np.array([c[0] - 0.5, c[0] + 0.5]) if not log else np.array([c[0] - 0.1, c[0] + 0.1])
    else:
        e = np.concatenate([[c[0]], (c[1:] + c[:-1]) / 2, [c[-1]]])
    return np.exp(e) if log else e


def heatmap_figure(sweep: Sweep, metric: str, x: str, y: str, mask, logx: bool | None = None,
                   logy: bool | None = None, style: str = DEFAULT_STYLE, caution: bool = True, fixes=()):
    """The metric as a colour map over parameters x and y (cells centred on the swept values, clipped to
    the swept range). Returns a matplotlib Figure."""
    style_of(style)
    values, unit = sweep.metrics[metric]
    for p in (x, y):
        if not sweep.numeric(p):
            raise SweepError(f"--heatmap needs numeric parameters; {p} holds words (use lines instead)")
    logx = sweep.log_spaced(x) if logx is None else logx
    logy = sweep.log_spaced(y) if logy is None else logy
    xs, ys = np.sort(sweep.values(x)), np.sort(sweep.values(y))
    grid = np.full((len(ys), len(xs)), np.nan)
    for k in np.flatnonzero(mask):
        grid[np.searchsorted(ys, sweep.params[y][k]), np.searchsorted(xs, sweep.params[x][k])] = values[k]
    with rc(style):
        fig = new_figure(style, 2.8 if style == "single" else 3.6)
        ax = fig.subplots()
        ax.set_label(f"sweep map: {metric}")
        ax.grid(False)
        mesh = ax.pcolormesh(edges(xs, logx), edges(ys, logy), np.ma.masked_invalid(grid), cmap=MAP_COLOURS,
                             shading="flat")
        mesh.set_label(metric)
        mesh.thermorph_value_label = metric_label(metric, unit)
        mesh.thermorph_cells = [(xs[i], ys[j], grid[j, i]) for j in range(len(ys)) for i in range(len(xs))]
        # The runs: white dots with a dark rim, not clipped (with the outer cells cut at the first and last value,
        # every run of a two-value parameter lies on the frame, where clipped dots of 2 pt vanished).
        ax.plot(*(g.ravel() for g in np.meshgrid(xs, ys)), ls="none", marker="o", ms=3.5, mfc="white", mec="0.15", mew=0.6,
                clip_on=False, zorder=5, label="_runs")
        cbar = fig.colorbar(mesh, ax=ax, pad=0.02)
        cbar.set_label(_broken(metric_label(metric, unit)))
        ax.set_xlabel(label(readable_key(x), sweep.units[x]))
        ax.set_ylabel(_broken(label(readable_key(y), sweep.units[y])))
        if logx:
            ax.set_xscale("log")
            _log_ticks(ax.xaxis, xs)
        else:
            _value_ticks(ax.xaxis, xs)
        if logy:
            ax.set_yscale("log")
            _log_ticks(ax.yaxis, ys)
        else:
            _value_ticks(ax.yaxis, ys)
        ax.set_xlim(edges(xs, logx)[0], edges(xs, logx)[-1])
        ax.set_ylim(edges(ys, logy)[0], edges(ys, logy)[-1])
        panel_title(ax, None, _title(sweep) + "; dots: runs")
        notes = _notes(sweep, metric, fixes)
        missing = _missing_note(sweep, x, mask, y)
        if missing:
            notes.insert(0, missing)
        add_footer(fig, notes, caution)
        finish(fig)
    return fig


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(prog="thermorph-sweep-figure", description=__doc__.split("\n\n")[0])
    parser.add_argument("table", type=Path, help="sweep table (HDF5) written by thermorph sweep")
    parser.add_argument("--metric", action="append", required=True, help="metric to plot (repeatable)")
    parser.add_argument("--x", help="parameter on the horizontal axis (default: the numeric swept one with the most "
                                     "values, the first of those); "
                                    "body.mass for a size series when the table allows it")
    parser.add_argument("--lines", help="parameter with one line per value (default: the other one of two)")
    parser.add_argument("--heatmap", action="store_true", help="colour map over two parameters")
    parser.add_argument("--fix", action="append", default=[], help="PARAM=VALUE for every further parameter")
    parser.add_argument("--logx", action="store_true", help="log horizontal axis (default: for a log: range)")
    parser.add_argument("--linx", action="store_true", help="linear horizontal axis even for a log: range")
    parser.add_argument("--logy", action="store_true", help="log vertical axis")
    parser.add_argument("--out", type=Path, help="output folder (default: beside the table)")
    parser.add_argument("--formats", default=",".join(FORMATS), help="comma-separated subset of pdf,svg,png")
    parser.add_argument("--style", choices=tuple(STYLES), default=DEFAULT_STYLE,
                        help="size preset: single (85 mm) or double (175 mm) journal column")
    parser.add_argument("--dpi", type=float, default=PNG_DPI, help=f"PNG resolution (default {PNG_DPI})")
    parser.add_argument("--no-caution", action="store_true", help="leave out the caution footer")
    args = parser.parse_args(argv)
    formats = tuple(f.strip().lower() for f in args.formats.split(",") if f.strip())
    if not formats or any(f not in FORMATS for f in formats):
        parser.error(f"--formats: choose from {', '.join(FORMATS)}, got {args.formats!r}")
    if args.logx and args.linx:
        parser.error("--logx and --linx exclude each other")
    try:
        sweep = Sweep(args.table)
        for metric in args.metric:
            if metric not in sweep.metrics:
                raise SweepError(f"--metric {metric}: not in the table (metrics: {', '.join(sorted(sweep.metrics))})")
        derived_mass = args.x == "body.mass" and "body.mass" not in sweep.params
        if derived_mass and sweep.body_mass is None:
            raise SweepError("--x body.mass: " + (sweep.mass_note or "not a size series (no --scale body)"))
        for p in (None if derived_mass else args.x, args.lines):
            if p is not None and p not in sweep.params:
                raise SweepError(f"{p}: not a swept parameter (parameters: {', '.join(sweep.names)})")
        fixed = {f.partition("=")[0] for f in args.fix}
        free = [n for n in sweep.names if n not in fixed]
        x = args.x or default_x(sweep, [n for n in free if n != args.lines])
        if x is None:
            raise SweepError("every parameter is fixed: leave one for the horizontal axis")
        x_param = "scale.body" if derived_mass else x
        others = [n for n in free if n != x_param]
        second = args.lines or (others[0] if len(others) == 1 else None)
        if args.heatmap and (second is None or derived_mass):
            raise SweepError("--heatmap needs a second free parameter (--lines names it when there are several) "
                             "and a swept --x")
        mask = select(sweep, args.fix, [x_param] + ([second] if second else []))
        out = args.out or args.table.parent
        logx = True if args.logx else (False if args.linx else None)
        for metric in args.metric:
            common = dict(style=args.style, caution=not args.no_caution, fixes=args.fix)
            if args.heatmap:
                fig = heatmap_figure(sweep, metric, x, second, mask, logx, args.logy or None, **common)
            else:
                fig = line_figure(sweep, metric, x, second, mask, logx, args.logy, **common)
            kind = "_map" if args.heatmap else ""
            stem = re.sub(r"[^A-Za-z0-9._-]+", "_", f"{args.table.stem}_{metric}{kind}")
            for path in save(fig, out, stem, None, formats, args.dpi, title=f"{sweep.title}: {metric}",
                             source=args.table.name):
                print(path)
    except (SweepError, ValueError) as e:
        print(f"error: {e}", file=sys.stderr)
        return 2
    return 0


if __name__ == "__main__":
    sys.exit(main())
