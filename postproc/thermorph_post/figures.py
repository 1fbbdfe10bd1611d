"""Publication figures from a thermorph results file (PDF, SVG, PNG, and the plotted numbers as CSV).

    thermorph-figures RESULT.h5 [RESULT2.h5 ...] [--out DIR] [--only temperatures,budget,maps,forcing]
                      [--units physiology|si] [--segments a,b | --top N] [--window t0,t1] [--times t1,t2,...]
                      [--formats pdf,svg,png] [--style single|double] [--dpi N] [--no-caution]
                      [--overlay KEY,KEY] [--labels A,B,...]

(also `python3 postproc/figures.py ...` from a checkout). Several result files
give the overlay figure of those runs.

From Python each figure has a builder returning a matplotlib.figure.Figure
(temperatures_figure, budget_figure, maps_figures, forcing_figure,
overlay_figure) and a writer taking an output directory and returning the
files written (temperatures, budget, maps, forcing, overlay). No global
Matplotlib state is set. See postproc/README.md for what each figure shows.
"""

from __future__ import annotations

import argparse
import contextlib
import re
import sys
from pathlib import Path

import numpy as np
from matplotlib.ticker import MaxNLocator, NullLocator

from thermorph_post.budget import rank_segments, window_budget
from thermorph_post.results import (ZERO_CELSIUS_IN_KELVIN, Results, ResultsError, faces_from_centres,
                                    is_default_event_label, parse_time)
from thermorph_post.style import (ALL_IN_WATER_SHADE, BODY_STYLE, DEFAULT_STYLE, ENVIRONMENT_STYLE, FORMATS, LINE_CYCLE, MAP_COLOURS,
                                  MARKER_CYCLE, PNG_DPI, STYLES, add_footer, body_flow_scale, case_title,
                                  channel_styles, finish, format_time, legend_outside, length_scale, letters,
                                  line_kwargs, line_style, negligible, new_figure, outline, panel_title, rc, save,
                                  segment_style, set_time_axis, shade_events, style_of, suptitle, temperature_in,
                                  temperature_label, time_scale, title_prefix)

FIGURES = ("temperatures", "budget", "maps", "forcing")
UNIT_SYSTEMS = ("physiology", "si")
#: Segments drawn by default: those losing most heat to the surroundings (--segments or --top to change).
DEFAULT_TOP = 6
#: Panel height of the stacked time-series figures [in] per preset.
PANEL_HEIGHT = {"single": 1.45, "double": 1.75}


@contextlib.contextmanager
def _opened(results):
    """Yield a Results for a Results object or a path (closing only what it opened)."""
    if isinstance(results, Results):
        yield results
    else:
        with Results(results) as res:
            yield res


def select_segments(res: Results, names, top: int, t0: float, t1: float):
    """The named segments (in the order given), else the `top` losing most heat to the surroundings over
    [t0, t1] [s], largest loss first. Returns (segments, how many were left out)."""
    if names is not None:
        return res.segments(names), 0
    ranked = rank_segments(res, res.segments(), t0, t1)
    return ranked[:max(top, 1)], max(len(ranked) - max(top, 1), 0)


def _selection_note(shown: int, left_out: int) -> str:
    """Footer note when segments were left out by the default selection."""
    if not left_out:
        return ""
    return (f"Segments: the {shown} of {shown + left_out} losing most heat to the surroundings "
            f"(--segments for others).")


def _panel_height(style: str) -> float:
    return PANEL_HEIGHT[style] if style in PANEL_HEIGHT else PANEL_HEIGHT[DEFAULT_STYLE]


# ---- figure: temperatures ---------------------------------------------------------------
def temperatures_figure(res: Results, units: str = "physiology", segments=None, top: int = DEFAULT_TOP,
                        style: str = DEFAULT_STYLE, caution: bool = True):
    """Figure of body (core, blood, mean skin) temperatures and per-segment mean tissue and mean surface
    temperatures with the surrounding temperature; None when the file has neither."""
    style_of(style)
    scale = time_scale(res.duration)
    t = res.time / scale[0]
    tu = temperature_label(units)
    body = [(lab, res.optional(f"/body/{key}")) for key, lab in
            (("core_temperature", "core"), ("blood_temperature", "blood"), ("mean_skin_temperature", "mean skin"))]
    body = [(lab, s) for lab, s in body if s is not None]
    segs, left_out = select_segments(res, segments, top, res.time[0], res.time[-1])
    nrows = (1 if body else 0) + (2 if segs else 0)
    if nrows == 0:
        print(f"figures: {res.path}: no body or segment temperatures; temperatures figure skipped", file=sys.stderr)
        return None
    with rc(style):
        fig = new_figure(style, _panel_height(style) * nrows + 0.9)
        axes = list(fig.subplots(nrows, 1, sharex=True, squeeze=False)[:, 0])
        kw = line_kwargs(len(t))
        letter = letters()
        labelled = False
        if body:
            ax = axes.pop(0)
            ax.set_label("body temperatures")
            for lab, s in body:
                colour, ls = BODY_STYLE[lab]
                ax.plot(t, temperature_in(s.values, units), color=colour, ls=ls, label=lab, **kw)
            ax.set_ylabel(f"Temperature ({tu})")
            panel_title(ax, next(letter), "Whole body")
            legend_outside(ax)
            set_time_axis(ax, res, scale)
            shade_events(ax, res, scale)
            labelled = True
        if segs:
            ax_t, ax_s = axes
            ax_t.set_label("segment mean tissue temperatures")
            ax_s.set_label("segment mean surface temperatures")
            for seg in segs:
                st = segment_style(res, seg.name)
                ax_t.plot(t, temperature_in(seg.mean_tissue_temperature(), units), label=seg.name, **st, **kw)
                ax_s.plot(t, temperature_in(seg.mean_surface_temperature(), units), label=seg.name, **st, **kw)
            # The air and the water where they act (surroundings_lines: steps and ramps at their own times).
            surroundings = [ln for ln in surroundings_lines(res, keys=("air", "water")) if ln["units"] == "degC"
                            and ln["key"] in ("air", "water", "temperature", "water_temperature")]
            for ln in surroundings:
                if np.any(np.isfinite(ln["v"])):
                    colour, ls = ENVIRONMENT_STYLE[ln["key"]]
                    label = "surroundings" if ln["key"] == "temperature" else ln["label"]
                    ax_s.plot(ln["t"] / scale[0], temperature_in(ln["v"], units), color=colour, ls=ls, lw=1.2,
                              label=label, **kw)
            ax_t.set_ylabel(f"Tissue ({tu})")
            panel_title(ax_t, next(letter), "Segments: mean tissue temperature (coat excluded)")
            ax_s.set_ylabel(f"Surface ({tu})")
            panel_title(ax_s, next(letter), "Segments: mean surface temperature; the surroundings")
            legend_outside(ax_t, title="segment")
            handles, labels = ax_s.get_legend_handles_labels()
            extra = [(h, lab) for h, lab in zip(handles, labels) if lab not in {s.name for s in segs}]
            if extra:
                legend_outside(ax_s, handles=[h for h, _ in extra], labels=[lab for _, lab in extra])
            for k, ax in enumerate((ax_t, ax_s)):
                set_time_axis(ax, res, scale)
                shade_events(ax, res, scale, label=not labelled and k == 0)
        for ax in fig.axes[:-1]:
            ax.set_xlabel("")
        fig.axes[-1].set_xlabel(f"Time ({scale[1]})")
        suptitle(fig, f"{title_prefix(res)}{case_title(res)}: temperatures")
        notes = [n for n in [_selection_note(len(segs), left_out)] if n]
        if segs:
            mixed = [ln for ln in surroundings if ln["targets"] is not None and any(
                _segments_text(res, names) != "every segment" for names in ln["targets"].values())]
            notes += acting_notes(res, mixed)
        add_footer(fig, notes, caution, res)
        finish(fig)
    return fig


def temperatures(results, out_dir, units: str = "physiology", segments=None, top: int = DEFAULT_TOP,
                 formats=FORMATS, style: str = DEFAULT_STYLE, dpi: float = PNG_DPI, caution: bool = True) -> list[Path]:
    """Write the temperatures figure (temperatures.*) to out_dir; return the files written."""
    with _opened(results) as res:
        fig = temperatures_figure(res, units, segments, top, style, caution)
        return [] if fig is None else save(fig, out_dir, "temperatures", res, formats, dpi)


# ---- figure: budget ---------------------------------------------------------------------
def _parse_window(res: Results, window) -> tuple[float, float]:
    """Averaging window [s] clipped to the run; default the whole run."""
    t_first, t_last = float(res.time[0]), float(res.time[-1])
    if window is None:
        return t_first, t_last
    t0, t1 = float(window[0]), float(window[1])
    if t1 < t0:
        raise ValueError(f"--window {t0:g},{t1:g}: end before start")
    if t1 < t_first or t0 > t_last:
        raise ValueError(f"--window {t0:g},{t1:g} s lies outside the run ({t_first:g} to {t_last:g} s)")
    if t0 < t_first or t1 > t_last:
        print(f"figures: --window clipped to the run: {max(t0, t_first):g} to {min(t1, t_last):g} s",
              file=sys.stderr)
    return max(t0, t_first), min(t1, t_last)


#: Axis of the whole-body flows over time (budget panel b): auto, linear or symlog.
FLOW_AXES = ("auto", "linear", "symlog")
#: With flow_axis="auto", a symmetric-log axis when the largest flow exceeds this many times the typical size (the
#: median over time of the largest channel): brief spikes (a dive's first seconds) would squeeze the rest into a
#: line at zero. Common practice, no source.
SYMLOG_RATIO = 20.0
#: Height of the linear part of that axis, in decades of its logarithmic parts.
SYMLOG_LINSCALE = 2.0


def _nice_down(x: float) -> float:
    """The largest of 1, 2, 5 × 10^k at or below x > 0."""
    k = np.floor(np.log10(x))
    return float(next(m * 10.0 ** k for m in (10.0, 5.0, 2.0, 1.0) if m * 10.0 ** k <= x * (1 + 1e-12)))


def flow_axis_scale(flows: list, flow_axis: str = "auto"):
    """Linear threshold of a symmetric-log axis for the flows over time ([nt] arrays, drawn units), or None for a
    linear axis: flow_axis "symlog", or "auto" when the largest |flow| exceeds SYMLOG_RATIO times the typical size
    (median over time of the largest |flow| of any channel); the threshold is that typical size rounded down to 1, 2,
    5 × 10^k, so the smaller flows are drawn linearly and the spikes logarithmically beyond. Returns (threshold, peak,
    typical)."""
    if flow_axis not in FLOW_AXES:
        raise ValueError(f"--flow-axis {flow_axis}: choose from {', '.join(FLOW_AXES)}")
    if not flows or flow_axis == "linear":
        return None
    largest = np.max(np.abs(np.vstack(flows)), axis=0)
    peak, typical = float(np.nanmax(largest)), float(np.nanmedian(largest))
    if not (peak > 0.0) or (flow_axis == "auto" and peak <= SYMLOG_RATIO * typical):
        return None
    typical = typical if typical > 0.0 else peak / 100.0   # forced symlog on flows mostly zero
    return _nice_down(typical), peak, typical


def budget_figure(res: Results, units: str = "physiology", segments=None, window=None, top: int = DEFAULT_TOP,
                  style: str = DEFAULT_STYLE, caution: bool = True, flow_axis: str = "auto"):
    """Figure: mean heat flow by channel over a window for segments, the rest and the blood pool (stacked
    bars), and whole-body heat flows over time."""
    style_of(style)
    t0, t1 = _parse_window(res, window)
    scale = time_scale(res.duration)
    segs, left_out = select_segments(res, segments, top, t0, t1)
    b = window_budget(res, t0, t1, [s.name for s in segs])
    rows = b.segments + [r for r in (b.others, b.pool) if r is not None]
    size = max([abs(v) for r in rows for v in r.means.values()] + [1e-300])
    channels = [c for c in b.channels if c != "storage" and not negligible([r.means[c] for r in rows], size)]
    zero = [c for c in b.channels if c != "storage" and c not in channels]
    styles = channel_styles(set(b.channels) | set(res.body_channels()))
    lw = style_of(style)["line"]
    div, flow_unit, quantity = body_flow_scale(res, units)
    t = res.time / scale[0]
    flows = {c: res.body_heat_flow(c) for c in res.body_channels()}
    fsize = max([float(np.nanmax(np.abs(v))) for v in flows.values() if v.size] + [1e-300])
    body_channels = [c for c, v in flows.items() if not negligible(v, fsize)]
    internal = [c for c in flows if c not in body_channels and c not in zero and c != "storage"]
    symlog = flow_axis_scale([flows[c] / div for c in body_channels], flow_axis) if len(t) > 1 else None
    with rc(style):
        # A symmetric-log panel b gets more height: its linear part and the decades of the spikes.
        fig = new_figure(style, (2.4 if symlog else 2) * _panel_height(style) + 1.6)
        ax_bar, ax_time = fig.subplots(2, 1, height_ratios=[1.15, 1.4 if symlog else 1.0])
        ax_bar.set_label("segment budget")
        ax_time.set_label("whole-body heat flows")

        # Panel a: stacked bars (gains up, losses down), storage as a separate hatched bar.
        x = np.arange(len(rows))
        pos_base, neg_base, net = np.zeros(len(rows)), np.zeros(len(rows)), np.zeros(len(rows))
        for c in channels:
            mean = np.array([r.means[c] for r in rows])
            colour, hatch, _ = styles[c]
            ax_bar.bar(x - 0.12, mean, 0.5, bottom=np.where(mean >= 0, pos_base, neg_base), color=colour,
                       hatch=hatch, edgecolor="white", lw=0.5, label=c)
            pos_base += np.clip(mean, 0, None)
            neg_base += np.clip(mean, None, 0)
            net += mean
        ax_bar.scatter(x - 0.12, net, marker="D", s=16, facecolor="white", edgecolor="black", zorder=3,
                       label="sum of channels")
        storage = np.array([r.means.get("storage", np.nan) for r in rows])
        if np.any(np.isfinite(storage)):
            ax_bar.bar(x + 0.3, np.nan_to_num(storage), 0.18, color="white", edgecolor=styles["storage"][0],
                       hatch=styles["storage"][1], lw=0.8, label="storage (rate of heat stored)")
        ax_bar.axhline(0.0, color="black", lw=0.8)
        widen = 0.5 if len(rows) == 1 else 0.0  # keep a lone bar slim and centred
        ax_bar.set_xlim(-0.75 - widen, len(rows) - 0.25 + widen)
        lo = min(0.0, float(np.min(neg_base)), float(np.nanmin(np.append(storage, 0.0))), float(np.min(net)))
        hi = max(0.0, float(np.max(pos_base)), float(np.nanmax(np.append(storage, 0.0))), float(np.max(net)))
        pad = 0.06 * (hi - lo) if hi > lo else 1.0
        ax_bar.set_ylim(lo - pad, hi + pad)
        ax_bar.thermorph_categories = [r.label for r in rows]
        narrow = style == "single"
        long_names = len(rows) > (3 if narrow else 5) or max(len(r.label) for r in rows) > (8 if narrow else 12)
        ax_bar.set_xticks(x, [r.label for r in rows], rotation=30 if long_names else 0,
                          ha="right" if long_names else "center", rotation_mode="anchor")
        ax_bar.set_ylabel("Mean heat flow (W)")
        ax_bar.grid(axis="x", visible=False)
        span = (f"mean {format_time(t0, scale)} to {format_time(t1, scale)}" if t1 > t0
                else f"at t = {format_time(t0, scale)}")
        panel_title(ax_bar, "a", f"Heat budget by segment, all copies (×N), {span}; positive = into the body")
        handles, labels = ax_bar.get_legend_handles_labels()
        order = sorted(range(len(labels)), key=lambda j: labels[j] == "sum of channels")
        legend_outside(ax_bar, handles=[handles[j] for j in order],
                       labels=[labels[j].replace("storage (rate of heat stored)", "storage\n(rate of heat stored)")
                               for j in order])

        # Panel b: body heat flows by channel over time (channels zero throughout left out).
        breaks = []
        if len(t) > 1:
            # Heat flows jump at the timeline's steps (events without a ramp), and an output on a step stores the
            # flows after it: a line joined across the step would draw a ramp that begins before the event (a
            # 2-min output before feet lifted at 60 min). The lines break there instead (NaN between the outputs
            # that bracket a step, the step at or before the later one).
            breaks = sorted({int(np.searchsorted(res.time, at, side="left")) for at, _ in res.timeline_steps()
                             if res.time[0] < at <= res.time[-1]})
            t_drawn = np.insert(t, breaks, np.nan)
            for c in body_channels:
                colour, _, ls = styles[c]
                ax_time.plot(t_drawn, np.insert(flows[c] / div, breaks, np.nan), color=colour, ls=ls, lw=lw, label=c,
                             path_effects=outline(colour))
            if symlog is not None:
                ax_time.set_yscale("symlog", linthresh=symlog[0], linscale=SYMLOG_LINSCALE)
                for edge in (-symlog[0], symlog[0]):
                    ax_time.axhline(edge, color="0.45", lw=0.6, ls=":", zorder=1)
                # Ticks at 0, the linear threshold and the decades beyond it, as plain numbers (the default puts
                # 10^0 beside 0 inside the linear part, where the labels collide).
                lo, hi = ax_time.get_ylim()
                ticks = [0.0] + [sign * v for sign in (-1.0, 1.0) for v in
                                 [symlog[0]] + [10.0 ** k for k in range(int(np.floor(np.log10(symlog[0]))) + 1, 12)
                                                if 10.0 ** k >= 4.0 * symlog[0]]
                                 if lo <= sign * v <= hi]
                ax_time.set_yticks(sorted(ticks), [f"{v:g}" for v in sorted(ticks)])
                ax_time.yaxis.set_minor_locator(NullLocator())
            if t1 > t0 and (t0 > res.time[0] or t1 < res.time[-1]):
                for edge in (t0, t1):
                    ax_time.axvline(edge / scale[0], color="0.3", lw=0.8, ls="-.")
            set_time_axis(ax_time, res, scale)
            shade_events(ax_time, res, scale)
            panel_title(ax_time, "b", "Whole body heat flows by channel (positive = into the body)"
                        + ("; dash-dot lines: averaging window" if t1 > t0 and (t0 > res.time[0] or t1 < res.time[-1])
                           else "")
                        + (f"; symmetric-log axis: linear between the dotted lines (±{symlog[0]:g} {flow_unit}), "
                           "logarithmic beyond" if symlog is not None else ""))
            legend_outside(ax_time)
        else:  # a single output time (steady solve): one bar per channel
            values = [float(flows[c][0]) / div for c in body_channels]
            ax_time.bar(range(len(values)), values, 0.6, edgecolor="black", lw=0.5, label="whole body",
                        color=[styles[c][0] if c != "storage" else "white" for c in body_channels],
                        hatch=[styles[c][1] for c in body_channels])
            ax_time.thermorph_categories = body_channels
            ax_time.set_xticks(range(len(values)), body_channels, rotation=30, ha="right", rotation_mode="anchor")
            ax_time.set_xlabel("Channel")
            ax_time.grid(axis="x", visible=False)
            panel_title(ax_time, "b", f"Whole body heat flows by channel at t = {format_time(res.time[0], scale)} "
                                      "(positive = into the body)")
        ax_time.axhline(0.0, color="black", lw=0.6)
        ax_time.set_ylabel(f"{quantity} ({flow_unit})")

        suptitle(fig, f"{title_prefix(res)}{case_title(res)}: heat budget")
        notes = [n for n in [_selection_note(len(segs), left_out)] if n]
        if breaks:
            steps = [f"{label} at {format_time(at, scale)}" for at, label in res.timeline_steps()
                     if res.time[0] < at <= res.time[-1]]
            notes.append("Heat flows over time: lines broken at the timeline's "
                         + (f"step ({steps[0]})" if len(steps) == 1 else f"{len(steps)} steps (first: {steps[0]})")
                         + ", where flows jump; an output on a step holds the flows after it.")
        if zero:
            notes.append(f"Not drawn, zero throughout: {', '.join(zero)}.")
        if internal:
            notes.append(f"Whole body: {', '.join(internal)} zero throughout (transfers inside the body), not drawn.")
        if symlog is not None:
            peak_c = max(body_channels, key=lambda c: float(np.nanmax(np.abs(flows[c]))))
            k = int(np.nanargmax(np.abs(flows[peak_c])))
            notes.append(f"Panel b on a symmetric-log axis (linear within ±{symlog[0]:g} {flow_unit}, logarithmic "
                         f"beyond) so that every channel stays readable beside the largest flow, "
                         f"{flows[peak_c][k] / div:.3g} {flow_unit} ({peak_c} at {format_time(res.time[k], scale)}), "
                         f"{symlog[1] / symlog[2]:.0f}× the typical size (median over time of the largest channel, "
                         f"{symlog[2]:.3g} {flow_unit}); --flow-axis linear for a linear axis.")
        err = res.optional("/body/energy_balance_error")
        if err is not None and err.values.size:
            notes.append(f"Largest |energy balance error| = {np.max(np.abs(err.values)):.3g} {err.units}.")
        add_footer(fig, notes, caution, res)
        finish(fig)
    return fig


def budget(results, out_dir, units: str = "physiology", segments=None, window=None, top: int = DEFAULT_TOP,
           formats=FORMATS, style: str = DEFAULT_STYLE, dpi: float = PNG_DPI, caution: bool = True,
           flow_axis: str = "auto") -> list[Path]:
    """Write the budget figure (budget.*) to out_dir; return the files written."""
    with _opened(results) as res:
        fig = budget_figure(res, units, segments, window, top, style, caution, flow_axis)
        return save(fig, out_dir, "budget", res, formats, dpi)


# ---- figure: maps -----------------------------------------------------------------------
def labelled_spans(res: Results) -> list[tuple[float, float, str]]:
    """The labelled events (/events; not thermorph's "event at N s") as (start, end, label) [s], sorted: an event
    with a `span` covers it; one of a single time (no span: a foraging bout that a later event ends) holds up to the
    timeline's next change (Results.timeline_changes), or with none to the end of the run (end = inf)."""
    changes = sorted(at for at, _ in res.timeline_changes())
    spans = []
    for start, end, label in res.events():
        if not label or is_default_event_label(label):
            continue
        if not end > start:
            later = [at for at in changes if at > start]
            end = min(later) if later else float("inf")
        spans.append((start, end, label))
    return spans


def default_map_times(res: Results) -> tuple[list[float], str]:
    """The maps' default times [s] and the footer's note on them. Without labelled events: the first, middle and
    last output (note ""). With labelled events (a dive, a foraging bout): the first output, the last output inside
    the first labelled span (from its start to its end, or for an event without a span to the next change of the
    timeline), and the last output, so the tissue is seen in that span and not only before and after it (the
    middle output of a run with short bouts in water falls in air). An output on the span's start or end is left
    out (the temperatures there are those before the step, the title's medium the one after it). When no output
    lies inside the span, or the span reaches the last output, first, middle and last."""
    t = np.asarray(res.time, float)
    plain = [float(t[0]), 0.5 * float(t[0] + t[-1]), float(t[-1])]
    if len(t) < 3:
        return plain, ""
    labelled = [(a, b, lab) for a, b, lab in labelled_spans(res) if a >= t[0]]
    if not labelled:
        return plain, ""
    start, end, label = labelled[0]
    end = float(t[-1]) if np.isinf(end) else end
    inside = np.nonzero((t > start) & (t < end))[0]
    if len(inside) == 0 or end >= float(t[-1]):   # a span to the end would repeat the last output's map
        return plain, ""
    pick = float(t[inside[-1]])
    scale = time_scale(res.duration)
    note = (f"Map times (default): the first output, the last output inside the first labelled span of the timeline "
            f"({label}, {format_time(start, scale)} to {format_time(end, scale)}: {format_time(pick, scale)}) and the "
            "last output; --times (times=) chooses others.")
    return [float(t[0]), pick, float(t[-1])], note


def _time_indices(res: Results, times) -> list[int]:
    """Output indices nearest the requested times [s]; default default_map_times."""
    requested = times is not None
    if not requested:
        times, _ = default_map_times(res)
    indices = []
    for t in times:
        i = int(np.argmin(np.abs(res.time - float(t))))
        if requested and res.time[i] != float(t):
            print(f"figures: --times {float(t):g} s: nearest output time {res.time[i]:g} s used", file=sys.stderr)
        if i not in indices:
            indices.append(i)
    return indices


def layer_boundaries(seg) -> list[tuple[float, str]]:
    """Outer face of each layer [m] with the layer's name, from the radial faces."""
    faces = faces_from_centres(seg.radius)
    layer, names = seg.layer, seg.layer_names
    bounds = []
    for i in range(len(layer)):
        if i == len(layer) - 1 or layer[i + 1] != layer[i]:
            name = names[layer[i]] if layer[i] < len(names) else f"layer {layer[i]}"
            bounds.append((float(faces[i + 1]), name))
    return bounds


def _cone_note(seg, units: str) -> str:
    """Footer note for a cone: its cells are drawn at the radii of its mid-length cross-section (the stored `radius`,
    grid.cpp), while the real radius tapers along it; '' for other shapes or a case without both radii."""
    entry = seg.case_entry or {}
    r0, r1 = entry.get("radius_proximal"), entry.get("radius_distal")
    if seg.shape != "cone" or not all(isinstance(r, (int, float)) and not isinstance(r, bool) for r in (r0, r1)):
        return ""
    rs, ru = length_scale(max(r0, r1), units)
    return (f"{seg.name} is a cone: drawn at the radii of its mid-length cross-section (outer radius "
            f"{0.5 * (r0 + r1) * rs:.3g} {ru}); its real radius tapers from {r0 * rs:.3g} {ru} at the proximal end "
            f"to {r1 * rs:.3g} {ru} at the distal end, the layers in proportion.")


def moment_text(res: Results, seg, i: int) -> str:
    """What segment `seg` was in at output i, from the stored series: "in water" or "in air" (/segments/NAME/in_water),
    its substrate contact when it has any during the run ("contact 10 %", "no contact";
    /segments/NAME/contact_fraction), and the labelled events under way ("dive 2"; labelled_spans: one without a
    span, such as "bout 1", up to the timeline's next change, as the default map times' footer names it). The values at an output
    on a step are those after it (as stored). "" for a file without these series (before 2026-12-05)."""
    wet = seg.in_water()
    if wet is None or i >= len(wet):
        return ""
    parts = ["in water" if wet[i] else "in air"]
    contact = seg.contact_fraction()
    if contact.path and np.any(contact.values > 0.0):
        f = float(contact.values[i])
        parts.append(f"contact {100.0 * f:.3g} %" if f > 0.0 else "no contact")
    t = float(res.time[i])
    parts += [label for start, end, label in labelled_spans(res) if start <= t < end]
    return ", ".join(parts)


#: Width of the maps' colour bar [in]; it is a column of the maps' grid of its own, beside the last map.
COLOUR_BAR_WIDTH_IN = 0.12


def _map_grid(fig, n: int, style: str):
    """The maps' panels: n map axes in a row with the colour bar as a last, narrow column of the same grid (so the
    bar sits against the last map whatever the profile's legend needs), and the profile panel below spanning every
    column (its legend and the bar's labels share the right margin). Returns (map axes, colour bar axes, profile
    axes). A colour bar made with fig.colorbar(ax=maps) was placed beyond the right margin that the profile's outer
    legend opens, 0.6 to 1 in away from the maps."""
    share = 0.8 * fig.get_figwidth() / n   # about the width of one map [in]
    mosaic = [[f"map{k}" for k in range(n)] + ["cbar"], ["profile"] * (n + 1)]
    axd = fig.subplot_mosaic(mosaic, height_ratios=[1.0, 1.0], width_ratios=[1.0] * n + [COLOUR_BAR_WIDTH_IN / share])
    axd["cbar"].set_label("<colorbar>")   # as fig.colorbar labels its own axes: no source data of its own
    return [axd[f"map{k}"] for k in range(n)], axd["cbar"], axd["profile"]


def _profiles_panel(ax, res: Results, seg, temp, indices, scale, rs, ru, r_outer, bounds, radial_name, tu, small,
                    labels=None):
    """Radial temperature profiles temp[k] (one per output indices[k]) against the cell centres, with the layer
    boundaries dotted and the layer names along the top. A profile equal to one drawn already (a steady start and
    the output on the first step) would hide it: the earlier line widened beneath, this one dashed on top and its
    label says so. `labels` replaces "t = ..." in the legend."""
    profiles = []
    for k, i in enumerate(indices):
        prof = temp[k]
        name = f"t = {format_time(res.time[i], scale)}"
        label = labels[k] if labels else name
        twin = next(((line, lab) for p, line, lab in profiles if np.allclose(p, prof, rtol=0.0, atol=1e-6)), None)
        extra = {}
        if twin is not None:
            twin[0].set_linewidth(3.0)
            extra = dict(ls=(0, (3, 2)), zorder=3)
            label += f" (dashed: equal to {twin[1]} within 1e-6 K)"
        line, = ax.plot(seg.radius * rs, prof, color=LINE_CYCLE[k % len(LINE_CYCLE)],
                        marker=MARKER_CYCLE[k % len(MARKER_CYCLE)], ms=3, label=label, **extra)
        profiles.append((prof, line, name))
    for r_b, _ in bounds[:-1]:
        ax.axvline(r_b * rs, color="0.4", lw=0.8, ls=":")
    ax.set_xlim(0.0, r_outer * rs)
    # Layer names on a second axis along the top, at the middle of each layer.
    top_axis = ax.secondary_xaxis("top")
    inner, ticks, names = 0.0, [], []
    for r_b, name in bounds:
        ticks.append(0.5 * (inner + r_b) * rs)
        names.append(name)
        inner = r_b
    top_axis.set_xticks(ticks, _staggered(ax, ticks, names, small, r_outer * rs), fontsize=small, color="0.25")
    top_axis.tick_params(length=0)
    ax.set_xlabel(f"{radial_name} ({ru})")
    ax.set_ylabel(f"Temperature ({tu})")
    legend_outside(ax)


def _staggered(ax, ticks, names, size: float, x_max: float) -> list[str]:
    """Layer names for the ticks along the top: a name that would run into the one before it on the base row goes
    one line up (a trailing newline: the labels stand on their baseline) when that row has room, so thin layers (fat
    and skin of a few mm beside cm of muscle) keep both names readable ("fatskin" before). Widths estimated at 0.6 em
    per character on 0.8 of the panel's width before layout (the legend beside it takes the rest: 155 of 187 pt in a
    single column; common practice, no source)."""
    width_pt = max(0.8 * ax.get_position().width * ax.figure.get_figwidth() * 72.0, 1.0)
    ends = [-np.inf, -np.inf]   # right end [pt] of the last name on the base row and on the raised row
    out = []
    for x, name in zip(ticks, names):
        centre, half, gap = x / x_max * width_pt, 0.3 * size * len(name), 0.5 * size
        row = 0 if centre - half >= ends[0] + gap or centre - half < ends[1] + gap else 1
        ends[row] = centre + half
        out.append(name + "\n" if row else name)
    return out


def maps_figures(res: Results, units: str = "physiology", segments=None, times=None, top: int = DEFAULT_TOP,
                 style: str = DEFAULT_STYLE, caution: bool = True) -> dict:
    """Temperature maps and radial profiles: {segment name: Figure} for each chosen segment with more than one
    radial cell. A segment with several axial cells gets axial × radial maps at the chosen times and profiles at
    mid-length; one with a single axial cell (every sphere, which has no axial coordinate, and a segment with
    axial_cells = 1) one map of temperature against time and radial position over the run, the chosen times marked,
    and the profiles at those times."""
    style_of(style)
    figs = {}
    scale = time_scale(res.duration)
    indices = _time_indices(res, times)
    segs, _ = select_segments(res, segments, top, res.time[0], res.time[-1])
    small = style_of(style)["small"]
    lumped = []
    for seg in segs:
        temp_all = seg.read("temperature").values
        if temp_all.shape[2] < 2:   # a single radial cell: nothing to map
            lumped.append(seg.name)
            continue
        along = temp_all.shape[1] > 1
        temp = temperature_in(temp_all[indices], units)  # [n, nz, nr]
        r_faces = faces_from_centres(seg.radius)
        rs, ru = length_scale(r_faces[-1], units)
        bounds = layer_boundaries(seg)
        tu = temperature_label(units)
        radial_name = "Distance from mid-plane" if seg.shape == "plate" else (
            "Distance from centre" if seg.shape == "sphere" else "Radial position")
        n = len(indices)
        notes = []
        with rc(style):
            fig = new_figure(style, 2 * _panel_height(style) + 1.5)
            map_axes, cax, ax_prof = _map_grid(fig, n if along else 1, style)
            if along:
                z_faces = faces_from_centres(seg.axial)
                zs, zu = length_scale(z_faces[-1], units)
                vmin, vmax = float(np.nanmin(temp)), float(np.nanmax(temp))
                for k, (ax, i) in enumerate(zip(map_axes, indices)):
                    ax.grid(False)
                    ax.set_label(f"map at t = {res.time[i]:.10g} s")
                    mesh = ax.pcolormesh(z_faces * zs, r_faces * rs, temp[k].T, shading="flat",
                                         cmap=MAP_COLOURS, vmin=vmin, vmax=vmax, rasterized=True)
                    mesh.set_label("temperature")
                    mesh.thermorph_value_label = f"Temperature ({tu})"
                    for r_b, _ in bounds[:-1]:
                        ax.axhline(r_b * rs, color="white", lw=0.8, ls="--")
                    moment = moment_text(res, seg, i)
                    panel_title(ax, "a" if k == 0 else None, f"t = {format_time(res.time[i], scale)}"
                                + (f": {moment}" if moment else ""))
                    ax.set_xlabel(f"Axial ({zu})" if n > 2 and style == "single" else f"Axial position ({zu})")
                    ax.xaxis.set_major_locator(MaxNLocator(3 if style == "single" else 4))
                    ax.thermorph_ylabel = f"{radial_name} ({ru})"   # for the source data of unlabelled panels
                    if k == 0:
                        ax.set_ylabel(f"{radial_name} ({ru})")
                    else:
                        ax.sharey(map_axes[0])
                        ax.tick_params(labelleft=False)
                # Radial profiles at mid-length, interpolated between the two nearest axial cells.
                z_mid = 0.5 * (z_faces[0] + z_faces[-1])
                profiles = [np.array([np.interp(z_mid, seg.axial, temp[k, :, j]) for j in range(temp.shape[2])])
                            for k in range(n)]
                ax_prof.set_label("radial profiles at mid-length")
                _profiles_panel(ax_prof, res, seg, profiles, indices, scale, rs, ru, r_faces[-1], bounds, radial_name,
                                tu, small)
                panel_title(ax_prof, "b", f"Radial profile at mid-length ({z_mid * zs:.3g} {zu}); dotted: layer "
                                          "boundaries")
            else:
                # One axial cell: temperature against time and radial position over the whole run, each output a
                # column from midway to its neighbours (the first and last end at the run's ends).
                ax = map_axes[0]
                ax.grid(False)
                ax.set_label("map over time")
                t = np.asarray(res.time, float)
                full = temperature_in(temp_all[:, 0, :], units)   # [nt, nr]
                vmin, vmax = float(np.nanmin(full)), float(np.nanmax(full))
                if len(t) > 1:
                    t_faces = np.concatenate([[t[0]], 0.5 * (t[1:] + t[:-1]), [t[-1]]]) / scale[0]
                else:   # a steady result: one column over the axis set_time_axis centres on it
                    t_faces = np.array([t[0] / scale[0] - 1.0, t[0] / scale[0] + 1.0])
                mesh = ax.pcolormesh(t_faces, r_faces * rs, full.T, shading="flat", cmap=MAP_COLOURS, vmin=vmin,
                                     vmax=vmax, rasterized=True)
                mesh.set_label("temperature")
                mesh.thermorph_value_label = f"Temperature ({tu})"
                # Source data at the outputs themselves (the cells span half the interval to each neighbour).
                mesh.thermorph_cells = [(t[i] / scale[0], seg.radius[j] * rs, full[i, j])
                                        for i in range(len(t)) for j in range(len(seg.radius))]
                for r_b, _ in bounds[:-1]:
                    ax.axhline(r_b * rs, color="white", lw=0.8, ls="--")
                for k, i in enumerate(indices):   # the profiles' times, in their colours
                    ax.axvline(t[i] / scale[0], color=LINE_CYCLE[k % len(LINE_CYCLE)], lw=1.2, ls=(0, (4, 2)),
                               label=f"_profile time {k}")
                set_time_axis(ax, res, scale)
                ax.set_ylabel(f"{radial_name} ({ru})")
                panel_title(ax, "a", f"Temperature against time and {radial_name.lower()}; dashed: the times of b")
                labels = []
                for i in indices:
                    moment = moment_text(res, seg, i)
                    labels.append(f"t = {format_time(res.time[i], scale)}" + (f": {moment}" if moment else ""))
                ax_prof.set_label("radial profiles")
                _profiles_panel(ax_prof, res, seg, [temp[k, 0] for k in range(n)], indices, scale, rs, ru,
                                r_faces[-1], bounds, radial_name, tu, small, labels)
                panel_title(ax_prof, "b", "Radial profiles at the marked times; dotted: layer boundaries")
                notes.append(f"{seg.name} is {'a sphere' if seg.shape == 'sphere' else 'a segment of one axial cell'}"
                             f": no map along its length; a shows its temperature against time (each output a column) "
                             f"and {radial_name.lower()}, b the radial profiles at the times marked in a.")
            cbar = fig.colorbar(mesh, cax=cax)
            cbar.set_label(f"Temperature ({tu})")
            cbar.ax.tick_params(labelsize=small)
            count = f" (one of {seg.count})" if seg.count > 1 else ""
            suptitle(fig, f"{title_prefix(res)}{case_title(res)}: {seg.name}{count} temperature map")
            unstated = "" if seg.in_water() is not None else (
                "This file stores no in_water or contact_fraction series (written before 2026-12-05): the map titles "
                "do not say whether the segment was in water or in contact.")
            on_step = [format_time(res.time[i], scale) for i in indices
                       if any(at == float(res.time[i]) for at, _ in res.timeline_steps())] if not unstated else []
            if on_step:
                unstated = (f"{', '.join(on_step)}: an output on a step of the timeline; the temperatures are those "
                            "reached when the step occurs, the medium, contact and events in the title those after it.")
            chosen = default_map_times(res)[1] if times is None else ""
            add_footer(fig, [n for n in [_cone_note(seg, units), *notes, chosen, unstated] if n], caution, res)
            finish(fig)
        figs[seg.name] = fig
    if lumped:
        print(f"figures: {res.path}: {', '.join(lumped)}: a single radial cell, no temperature map drawn",
              file=sys.stderr)
    return figs


def maps(results, out_dir, units: str = "physiology", segments=None, times=None, top: int = DEFAULT_TOP,
         formats=FORMATS, style: str = DEFAULT_STYLE, dpi: float = PNG_DPI, caution: bool = True) -> list[Path]:
    """Write one maps_SEGMENT.* figure per chosen segment with more than one radial cell (maps_figures); return the
    files written."""
    written = []
    with _opened(results) as res:
        for name, fig in maps_figures(res, units, segments, times, top, style, caution).items():
            written += save(fig, out_dir, f"maps_{name}", res, formats, dpi)
    return written


# ---- figure: forcing (the surroundings) --------------------------------------------------
#: Readable names of the /environment series (thermorph's results layout), for files without a readable case.
ENVIRONMENT_NAMES = {
    "temperature": "air or water", "air_temperature": "air", "water_temperature": "water",
    "radiant_temperature": "radiant surroundings", "sky_temperature": "sky", "substrate_temperature": "substrate",
    "speed": "wind or current", "air_speed": "wind", "water_speed": "water current",
    "solar_irradiance": "solar irradiance", "relative_humidity": "relative humidity",
}
#: The surroundings as drawn, in order: key -> (label, units, kind of forcing (Results.forcing_targets), the stored
#: /environment series by the medium's fluid). The medium's `temperature` and `speed` are the air's while the
#: medium is air and the water's while it is water; `air_*` and `water_*` describe the other fluid.
SURROUNDINGS = {
    "air": ("air", "degC", "air", {"air": "temperature", "water": "air_temperature"}),
    "water": ("water", "degC", "water", {"water": "temperature", "air": "water_temperature"}),
    "radiant_temperature": ("radiant surroundings", "degC", "radiant", None),
    "sky_temperature": ("sky", "degC", "sky", None),
    "substrate_temperature": ("substrate", "degC", "substrate", None),
    "wind": ("wind", "m s-1", "wind", {"air": "speed", "water": "air_speed"}),
    "water current": ("water current", "m s-1", "current", {"water": "speed", "air": "water_speed"}),
    "solar_irradiance": ("solar irradiance", "W m-2", "sun", None),
    "relative_humidity": ("relative humidity", "1", "humidity", None),
}
#: Kinds of forcing that act in air only (radiation, sun, evaporation, breathing).
AIR_KINDS = ("air", "wind", "radiant", "sky", "sun", "humidity")


def surroundings_lines(res: Results, keys=None) -> list[dict]:
    """The surroundings as drawn, one dict per line: key, label, units, kind, t [s], v (in the series' units, NaN
    where the forcing acts on no segment) and targets ({medium fluid: segments it acts on}, Results.forcing_targets;
    None when the file has no readable case, and then each stored series is drawn as stored, everywhere).
    Times are Results.timeline_knots (steps and ramps at their own times, Results.environment_line). `keys`:
    a subset of SURROUNDINGS (default all, and any unknown stored series after them)."""
    env = res.environment()
    fluids = res.medium_fluids()
    knots, before = res.timeline_knots()
    if not fluids:
        lines = []
        for name in env:
            t, v = res.environment_line(name)
            lines.append(dict(key=name, label=ENVIRONMENT_NAMES.get(name, name), units=env[name].units, kind=None,
                              t=t, v=v, targets=None))
        return lines
    medium = np.array([res.medium_fluid(t, b) for t, b in zip(knots.tolist(), before.tolist())])
    drawn, used = [], set()
    for key, (label, units, kind, sources) in SURROUNDINGS.items():
        sources = sources or {"air": key, "water": key}
        used.update(sources.values())
        if (keys is not None and key not in keys) or not any(sources.get(f) in env for f in fluids):
            continue   # not stored, or only for a medium the run never has (the water of a run in air)
        targets = {f: res.forcing_targets(kind, f) for f in fluids}
        v = np.full(knots.size, np.nan)
        for f in fluids:
            name = sources.get(f)
            if name in env and env[name].units == units and targets[f]:
                t_line, v_line = res.environment_line(name)
                if t_line.shape == knots.shape:
                    v[medium == f] = v_line[medium == f]
        if kind == "substrate":   # only while some segment touches it (the stored contact fractions)
            v[~in_contact(res, knots)] = np.nan
        drawn.append(dict(key=key, label=label, units=units, kind=kind, t=knots, v=v, targets=targets))
    if keys is None:   # stored series this module does not know: drawn as stored
        for name in env:
            if name not in used:
                t, v = res.environment_line(name)
                drawn.append(dict(key=name, label=name, units=env[name].units, kind=None, t=t, v=v, targets=None))
    return drawn


def in_contact(res: Results, knots) -> np.ndarray:
    """Whether some segment touches the substrate at each of `knots` (Results.timeline_knots) ([n] bool), from the
    segments' stored contact fractions (Results.contact_line)."""
    touching = np.zeros(len(knots), bool)
    for name in res.segment_names():
        t, f = res.contact_line(name)
        if t.shape == np.shape(knots):
            touching |= f > 0.0
    return touching


def _segments_text(res: Results, names: list[str]) -> str:
    """'every segment' for the whole body, else the names."""
    every = [n if res.segment_count(n) == 1 else f"{n} ×{res.segment_count(n)}" for n in res.segment_names()]
    return "every segment" if names and names == every else ", ".join(names)


def acting_notes(res: Results, lines: list[dict]) -> list[str]:
    """Footer notes saying on which segments each drawn line acts (lines with equal targets together), and which
    stored forcings act on no segment at all and are not drawn."""
    fluids = res.medium_fluids()
    groups: dict[str, list[str]] = {}
    idle = []
    for ln in lines:
        if ln["targets"] is None:
            continue
        names = ln.get("names", [ln["label"]])
        if not np.any(np.isfinite(ln["v"])):
            idle += names
            continue
        texts = {f: _segments_text(res, ln["targets"][f]) for f in fluids}
        if len(set(texts.values())) == 1:
            where = " (in water)" if ln["kind"] in ("water", "current") else " (in air)" if ln["kind"] in AIR_KINDS[:5] \
                else ""
            desc = texts[fluids[0]] + (where if texts[fluids[0]] != "every segment" else "")
        else:
            desc = "; ".join(f"{texts[f] or 'none (not drawn)'} while the medium is {f}" for f in fluids)
        if ln["kind"] == "substrate":
            desc += " while in contact (contact_fraction above 0)"
        groups.setdefault(desc, []).extend(names)
    notes = [f"Acts on — {', '.join(names)}: {desc}." for desc, names in groups.items()]
    if idle:
        notes.append(f"Not drawn, acting on no segment: {', '.join(idle)}.")
    return notes


def all_in_water(res: Results) -> list[tuple[float, float]]:
    """Intervals [s] during which every segment is in water (no segment in air), from the stored case."""
    knots, before = res.timeline_knots()
    spans, start = [], None
    for t, b in zip(knots.tolist(), before.tolist()):
        medium = res.medium_fluid(t, b)
        wet = medium is not None and not res.forcing_targets("air", medium)
        if wet and start is None:
            start = t
        elif not wet and start is not None:
            spans.append((start, t))
            start = None
    if start is not None:
        spans.append((start, float(knots[-1])))
    return [(a, b) for a, b in spans if b > a]


#: Panels of the forcing figure by the series' units: (title, axis label, factor to the axis unit).
FORCING_PANELS = {
    "degC": ("Temperatures of the surroundings", "Temperature", 1.0),
    "m s-1": ("Wind and water current", "Speed (m/s)", 1.0),
    "W m-2": ("Sun", "Solar irradiance (W/m²)", 1.0),
    "1": ("Humidity of the air", "Relative humidity (%)", 100.0),
}


#: Units of the forcing panels as written in legends and notes.
FORCING_UNIT_TEXT = {"m s-1": "m/s", "W m-2": "W/m²", "1": "%"}


def forcing_figure(res: Results, units: str = "physiology", style: str = DEFAULT_STYLE, caution: bool = True):
    """Figure of the surroundings over time from /environment: temperatures, speeds, sun and humidity, one
    panel per quantity, each line drawn only while it acts on some segment (surroundings_lines); intervals when
    every segment is in water shaded; the footer says on which segments each acts. None without /environment."""
    style_of(style)
    if not res.environment():
        print(f"figures: {res.path}: no /environment group; forcing figure skipped", file=sys.stderr)
        return None
    lines = surroundings_lines(res)
    groups: dict[str, list[dict]] = {}
    for ln in lines:
        if np.any(np.isfinite(ln["v"])):
            groups.setdefault(ln["units"], []).append(ln)
    zero = []   # panels whose every line is zero throughout (no sun all run): named in the footer, not drawn
    for unit in [u for u in groups if u != "degC"]:
        if all(np.all(ln["v"][np.isfinite(ln["v"])] == 0.0) for ln in groups[unit]):
            zero += [f"{ln['label']} 0 {FORCING_UNIT_TEXT.get(unit, unit)}" for ln in groups.pop(unit)]
    if not groups:
        print(f"figures: {res.path}: no forcing acts on any segment; forcing figure skipped", file=sys.stderr)
        return None
    order = [u for u in FORCING_PANELS if u in groups] + sorted(u for u in groups if u not in FORCING_PANELS)
    wet = all_in_water(res)
    scale = time_scale(res.duration)
    kw = line_kwargs(len(res.time))
    with rc(style):
        fig = new_figure(style, 0.8 * _panel_height(style) * len(order) + 1.0)
        axes = fig.subplots(len(order), 1, sharex=True, squeeze=False)[:, 0]
        letter = letters()
        for ax, unit in zip(axes, order):
            title, ylabel, factor = FORCING_PANELS.get(unit, (f"Surroundings ({unit})", unit, 1.0))
            if unit == "degC":
                ylabel = f"Temperature ({temperature_label(units)})"
            ax.set_label(f"forcing: {title.lower()}")
            drawn = []   # [values, line, names]: a series equal to one drawn already joins its label
            for k, ln in enumerate(groups[unit]):
                values = temperature_in(ln["v"], units) if unit == "degC" else factor * np.asarray(ln["v"], float)
                twin = next((d for d in drawn if d[0].shape == values.shape
                             and np.array_equal(d[0], values, equal_nan=True)), None)
                if twin is not None:
                    twin[1].set_label(twin[1].get_label().split(" (same: ")[0])
                    twin[2].append(ln)
                    twin[1].set_label(f"{twin[1].get_label()} (same: {', '.join(x['label'] for x in twin[2][1:])})")
                    continue
                colour, ls = ENVIRONMENT_STYLE.get(ln["key"], (LINE_CYCLE[k % len(LINE_CYCLE)], "-"))
                shown = values[np.isfinite(values)]
                label = ln["label"]
                if shown.size and np.all(shown == shown[0]):   # constant where drawn: its value in the legend (a
                    axis_unit = temperature_label(units) if unit == "degC" else FORCING_UNIT_TEXT.get(unit, unit)
                    label += f" ({shown[0]:.3g} {axis_unit})"   # 0.05 m/s current beside a 4 m/s wind reads as 0)
                # A line that runs on one drawn already where both are drawn (the substrate at the water's
                # temperature while wading) would hide it: the earlier one widened beneath, this one dashed on top.
                under = [d for d in drawn if d[0].shape == values.shape and np.any(
                    np.isfinite(d[0]) & np.isfinite(values) & np.isclose(d[0], values, rtol=1e-9, atol=1e-9))]
                dashes = {}
                if under:
                    for d in under:
                        d[1].set_linewidth(2.6)
                    dashes = dict(ls=(0, (3, 2)), zorder=3)
                    label += f" (dashed over {', '.join(d[2][0]['label'] for d in under)} where equal)"
                line, = ax.plot(ln["t"] / scale[0], values, color=colour, lw=1.2, label=label,
                                **({"ls": ls} | dashes), **kw)
                drawn.append([values, line, [ln]])
            for _, _, same in drawn:
                same[0]["names"] = [x["label"] for x in same]
                for x in same[1:]:
                    x["names"] = []
            ax.set_ylabel(ylabel)
            if unit == "1":
                ax.set_ylim(0.0, 100.0)
            elif unit in ("m s-1", "W m-2"):   # speeds and irradiance are not negative: axis from zero
                top = max([float(np.nanmax(ln["v"])) for ln in groups[unit]] + [0.0])
                ax.set_ylim(0.0, 1.15 * top if top > 0 else 1.0)
            if wet and any(ln["kind"] in AIR_KINDS for ln in groups[unit]):
                first = not any(getattr(a, "thermorph_wet", False) for a in axes)   # in the first such legend only
                for k, (a, b) in enumerate(wet):
                    ax.axvspan(a / scale[0], b / scale[0], **ALL_IN_WATER_SHADE,
                               label="every segment in water: forcings of the air act on none, not drawn"
                               if k == 0 and first else "_every segment in water")
                ax.thermorph_wet = True
            panel_title(ax, next(letter), title)
            legend_outside(ax)
            set_time_axis(ax, res, scale, label=False)
            shade_events(ax, res, scale, label=ax is axes[0])
        axes[-1].set_xlabel(f"Time ({scale[1]})")
        suptitle(fig, f"{title_prefix(res)}{case_title(res)}: surroundings (forcing)")
        add_footer(fig, acting_notes(res, lines) + ([f"Not drawn, zero throughout: {', '.join(zero)}."] if zero
                                                    else []), caution, res)
        finish(fig)
    return fig


def forcing(results, out_dir, units: str = "physiology", formats=FORMATS, style: str = DEFAULT_STYLE,
            dpi: float = PNG_DPI, caution: bool = True) -> list[Path]:
    """Write the forcing figure (forcing.*) when the file has /environment; return the files written."""
    with _opened(results) as res:
        fig = forcing_figure(res, units, style, caution)
        return [] if fig is None else save(fig, out_dir, "forcing", res, formats, dpi)


# ---- figure: overlay of several runs -----------------------------------------------------
#: Quantities the overlay can draw: key -> (HDF5 path, panel title).
OVERLAY_BODY = {"core": ("/body/core_temperature", "Core temperature"),
                "blood": ("/body/blood_temperature", "Blood temperature"),
                "skin": ("/body/mean_skin_temperature", "Mean skin temperature")}
DEFAULT_OVERLAY = ("core", "skin")


def _overlay_series(res: Results, key: str):
    """(values [degC] or None, title) of an overlay key: core, blood, skin, or SEGMENT.mean|surface."""
    if key in OVERLAY_BODY:
        path, title = OVERLAY_BODY[key]
        s = res.optional(path)
        return (None if s is None else s.values), title
    seg_name, _, stat = key.rpartition(".")
    if not seg_name or stat not in ("mean", "surface"):
        raise ValueError(f"--overlay {key}: expected core, blood, skin, SEGMENT.mean or SEGMENT.surface")
    if seg_name not in res.segment_names():
        return None, f"{seg_name}: mean {'tissue' if stat == 'mean' else 'surface'} temperature"
    seg = res.segments([seg_name])[0]
    values = seg.mean_tissue_temperature() if stat == "mean" else seg.mean_surface_temperature()
    return values, f"{seg_name}: mean {'tissue' if stat == 'mean' else 'surface'} temperature"


def flat_case(case: dict, prefix: str = "") -> dict:
    """A resolved case as {key path: value}: tables by key, arrays of tables by their `name` (segments) or index
    (events), so that two runs' cases compare key by key."""
    flat = {}
    for key, value in case.items():
        path = f"{prefix}{key}"
        if isinstance(value, dict):
            flat.update(flat_case(value, path + "."))
        elif isinstance(value, list) and value and all(isinstance(v, dict) for v in value):
            named = all(isinstance(v.get("name"), str) for v in value)
            for k, v in enumerate(value):
                flat.update(flat_case(v, f"{path}.{v['name'] if named else k}."))
        else:
            flat[path] = value
    return flat


#: Resolved-case keys drawn in °C in the overlay's list of differences (the resolved case holds kelvin).
_KELVIN_KEYS = re.compile(r"(temperature|set_point)$")


def _case_value_text(key: str, value) -> str:
    if value is None:
        return "not set"
    if isinstance(value, float) and _KELVIN_KEYS.search(key):
        return f"{value - ZERO_CELSIUS_IN_KELVIN:.6g} °C"
    if isinstance(value, float):
        return f"{value:.6g}"
    return str(value)


def case_differences(runs, labels, limit: int = 8) -> str:
    """Footer note naming the keys in which the runs' resolved cases differ, with each run's value (what the overlay
    compares: a new user otherwise sees only file names); "" when they agree or a case is missing."""
    cases = [flat_case(r.case) for r in runs]
    if len(runs) < 2 or not all(cases):
        return ""
    keys = sorted({k for c in cases for k in c} - {"title"})
    differ = [k for k in keys if len({repr(c.get(k)) for c in cases}) > 1]
    if not differ:
        return "The runs' resolved cases are identical."
    if len(differ) > limit:   # different cases, not variants of one: the keys would fill the figure
        return (f"The runs' resolved cases differ in {len(differ)} keys (e.g. {', '.join(differ[:4])}): "
                "`thermorph check --resolved` lists each.")
    shown = [f"{k}: " + ", ".join(f"{lab} {_case_value_text(k, c.get(k))}" for c, lab in zip(cases, labels))
             for k in differ]
    return f"The runs differ in (resolved cases, SI units, temperatures in °C): {'; '.join(shown)}."


def overlay_figure(results, labels=None, keys=DEFAULT_OVERLAY, units: str = "physiology",
                   style: str = DEFAULT_STYLE, caution: bool = True):
    """Several runs on the same axes: one panel per key (core, blood, skin, SEGMENT.mean, SEGMENT.surface),
    one colour per run (in the order given). `results`: paths or Results objects."""
    style_of(style)
    with contextlib.ExitStack() as stack:
        runs = [stack.enter_context(_opened(r)) for r in results]
        if not runs:
            raise ValueError("overlay: no result files given")
        labels = list(labels) if labels else [r.path.stem for r in runs]
        if len(labels) != len(runs):
            raise ValueError(f"--labels: {len(labels)} labels for {len(runs)} result files")
        duration = max(r.time[-1] for r in runs) - min(r.time[0] for r in runs)
        scale = time_scale(duration)
        panels = []
        for key in keys:
            data = [_overlay_series(r, key) for r in runs]
            if all(v is None for v, _ in data):
                print(f"figures: overlay: no run stores {key}; panel left out", file=sys.stderr)
                continue
            panels.append((key, data))
        if not panels:
            raise ValueError(f"overlay: none of {', '.join(keys)} is stored in these runs")
        tu = temperature_label(units)
        with rc(style):
            fig = new_figure(style, _panel_height(style) * len(panels) + 0.9)
            axes = fig.subplots(len(panels), 1, sharex=True, squeeze=False)[:, 0]
            letter = letters()
            for ax, (key, data) in zip(axes, panels):
                ax.set_label(f"overlay: {key}")
                for k, (run, label, (values, _)) in enumerate(zip(runs, labels, data)):
                    if values is None:
                        continue
                    ax.plot(run.time / scale[0], temperature_in(values, units), label=label,
                            **line_style(k), **line_kwargs(len(run.time)))
                ax.set_ylabel(f"Temperature ({tu})")
                panel_title(ax, next(letter), data[0][1])
                ax.xaxis.set_major_locator(MaxNLocator(nbins=6, steps=[1, 2, 3, 6, 10]))
                ax.thermorph_time_scale = scale
                legend_outside(ax, title="run")
            t_lo = min(r.time[0] for r in runs) / scale[0]
            t_hi = max(r.time[-1] for r in runs) / scale[0]
            if t_hi > t_lo:
                axes[-1].set_xlim(t_lo, t_hi)
            # Events (dives, a cold front) shaded when every run has the same ones; otherwise said in the footer.
            events = [r.events() for r in runs]
            common = all(e == events[0] for e in events) and bool(events[0])
            if common:
                for ax in axes:
                    shade_events(ax, runs[0], scale, label=ax is axes[0])
            axes[-1].set_xlabel(f"Time ({scale[1]})")
            incomplete = [lab for r, lab in zip(runs, labels) if not r.complete]
            suptitle(fig, ("INCOMPLETE RUN — " if incomplete else "") + f"Overlay of {len(runs)} runs")
            titles = {case_title(r) for r in runs}
            notes = ["Runs: " + "; ".join(f"{lab} = {r.path.name}" + (f" ({case_title(r)})" if len(titles) > 1 else "")
                                          for r, lab in zip(runs, labels))
                     + (f". Case: {titles.pop()}." if len(titles) == 1 else ".")]
            if any(events) and not common:
                notes.append("The runs' labelled events (/events) differ: none shaded.")
            differences = case_differences(runs, labels)
            if differences:
                notes.append(differences)
            if incomplete:
                notes.append(f"Incomplete (complete = 0): {', '.join(incomplete)}.")
            add_footer(fig, notes, caution)
            finish(fig)
        return fig


def overlay(results, out_dir, labels=None, keys=DEFAULT_OVERLAY, units: str = "physiology", formats=FORMATS,
            style: str = DEFAULT_STYLE, dpi: float = PNG_DPI, caution: bool = True) -> list[Path]:
    """Write the overlay figure (overlay.*) of several runs; return the files written."""
    fig = overlay_figure(results, labels, keys, units, style, caution)
    names = ", ".join(str(Path(getattr(r, "path", r)).name) for r in results)
    return save(fig, out_dir, "overlay", None, formats, dpi, title="thermorph runs overlaid", source=names)


# ---- command line -----------------------------------------------------------------------
def _floats(text: str, what: str) -> list[float]:
    """Comma-separated times [s], each a number in s or with a unit ('0,10min,1h'); a window may also be written
    t0:t1 (as thermorph sweep --window)."""
    parts = text.split(",") if "," in text or what != "--window" else text.split(":")
    try:
        return [parse_time(v) for v in parts if v.strip()]
    except ValueError as err:
        raise argparse.ArgumentTypeError(f"{what}: {err}") from err


def _names(text: str | None):
    return [s.strip() for s in text.split(",") if s.strip()] if text else None


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(prog="thermorph-figures",
                                 description="Figures (PDF, SVG, PNG) and their plotted numbers (CSV) from thermorph "
                                             "results files; several files give an overlay of the runs.")
    ap.add_argument("result", nargs="+", help="results file(s) (HDF5) written by thermorph")
    ap.add_argument("--out", default=None, help="output directory (default: RESULT_figures beside the first file)")
    ap.add_argument("--only", default=None,
                    help=f"comma-separated subset of: {', '.join(FIGURES)} (default: all)")
    ap.add_argument("--units", choices=UNIT_SYSTEMS, default="physiology",
                    help="physiology: °C, segment heat flows in W, body heat flows in W/kg of body mass; "
                         "si: K and W throughout (default: physiology)")
    ap.add_argument("--segments", default=None,
                    help="comma-separated segment names, in the order to draw them (default: see --top)")
    ap.add_argument("--top", type=int, default=DEFAULT_TOP,
                    help=f"without --segments, draw the N segments losing most heat to the surroundings "
                         f"(default {DEFAULT_TOP}); in the budget the rest are summed in one bar")
    ap.add_argument("--window", type=lambda s: _floats(s, "--window"), default=None,
                    help="budget averaging window t0,t1 (s, or with a unit: 10min,1h; or t0:t1) (default: whole run)")
    ap.add_argument("--times", type=lambda s: _floats(s, "--times"), default=None,
                    help="map times, comma-separated, in s or with a unit (default: first, middle, last output; "
                         "with labelled events the last output inside the first labelled span replaces the middle)")
    ap.add_argument("--flow-axis", choices=FLOW_AXES, default="auto",
                    help="budget panel b (whole-body flows over time): symlog draws brief large spikes beside the small "
                         f"terms; auto does so when the largest flow is over {SYMLOG_RATIO:g}x the typical size "
                         "(default auto)")
    ap.add_argument("--formats", default=",".join(FORMATS),
                    help=f"comma-separated subset of {', '.join(FORMATS)} (default: all three)")
    ap.add_argument("--style", choices=tuple(STYLES), default=DEFAULT_STYLE,
                    help="size preset: single (85 mm wide, 7 pt) or double (175 mm wide, 8 pt) journal column "
                         f"(default {DEFAULT_STYLE})")
    ap.add_argument("--dpi", type=float, default=PNG_DPI, help=f"PNG resolution (default {PNG_DPI})")
    ap.add_argument("--no-caution", action="store_true",
                    help="leave out the caution footer (for a journal that prints it elsewhere)")
    ap.add_argument("--overlay", default=None,
                    help="with several files: comma-separated quantities, from core, blood, skin, SEGMENT.mean, "
                         f"SEGMENT.surface (default {','.join(DEFAULT_OVERLAY)})")
    ap.add_argument("--labels", default=None, help="with several files: comma-separated run labels (default: file names)")
    args = ap.parse_args(argv)

    only = FIGURES if args.only is None else tuple(n.strip() for n in args.only.split(",") if n.strip())
    bad = [n for n in only if n not in FIGURES]
    if bad:
        ap.error(f"--only: unknown figure {', '.join(bad)}; choose from {', '.join(FIGURES)}")
    formats = tuple(f.strip().lower() for f in args.formats.split(",") if f.strip())
    if not formats or any(f not in FORMATS for f in formats):
        ap.error(f"--formats: choose from {', '.join(FORMATS)}, got {args.formats!r}")
    if args.window is not None and len(args.window) != 2:
        ap.error("--window: expected two times t0,t1 in s")
    if args.top < 1:
        ap.error("--top: expected a whole number of segments, 1 or more")
    if not (10.0 <= args.dpi <= 2400.0):
        ap.error(f"--dpi {args.dpi:g}: expected 10 to 2400")
    segments = _names(args.segments)
    first = Path(args.result[0])
    out = Path(args.out) if args.out else first.with_name(first.stem + ("_overlay" if len(args.result) > 1
                                                                       else "_figures"))
    common = dict(formats=formats, style=args.style, dpi=args.dpi, caution=not args.no_caution)
    written = []
    try:
        if len(args.result) > 1:
            keys = _names(args.overlay) or list(DEFAULT_OVERLAY)
            written += overlay(args.result, out, _names(args.labels), keys, args.units, **common)
        else:
            with Results(first) as res:
                if not res.complete:
                    print(f"figures: {res.path}: run marked incomplete (complete = 0)", file=sys.stderr)
                if "temperatures" in only:
                    written += temperatures(res, out, args.units, segments, args.top, **common)
                if "budget" in only:
                    written += budget(res, out, args.units, segments, args.window, args.top, **common,
                                      flow_axis=args.flow_axis)
                if "maps" in only:
                    written += maps(res, out, args.units, segments, args.times, args.top, **common)
                if "forcing" in only:
                    written += forcing(res, out, args.units, **common)
    except (ResultsError, ValueError) as err:
        print(f"figures: error: {err}", file=sys.stderr)
        return 2
    for path in written:
        print(path)
    return 0


if __name__ == "__main__":
    sys.exit(main())
