#!/usr/bin/python3
"""Publication figures from a thermorph results file (PDF, SVG, 150 dpi PNG, and the plotted numbers as CSV).

    figures.py RESULT.h5 [--out DIR] [--only temperatures,budget,maps] [--units physiology|si]
               [--segments a,b | --top N] [--window t0,t1] [--times t1,t2,...] [--formats pdf,svg,png]

Each figure is also a function taking a Results object (or a path) and an
output directory, returning the list of files written: temperatures(),
budget(), maps(). See postproc/README.md for what each figure shows.
"""

from __future__ import annotations

import argparse
import contextlib
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from figure_style import (CAUTION, FORMATS, LINE_CYCLE, MAP_COLOURS, MARKER_CYCLE, OKABE_ITO,  # noqa: E402
                          body_flow_scale, case_title, channel_style, format_time, length_scale, line_kwargs,
                          line_style, negligible, outline, plt, save, set_time_axis, shade_events, temperature_in,
                          temperature_label, time_scale, title_prefix)
import numpy as np  # noqa: E402
from matplotlib.ticker import MaxNLocator  # noqa: E402
from budget import rank_segments, window_budget  # noqa: E402
from thermorph_results import Results, ResultsError, faces_from_centres  # noqa: E402

FIGURES = ("temperatures", "budget", "maps")
UNIT_SYSTEMS = ("physiology", "si")
#: Segments drawn by default: those losing most heat to the surroundings (--segments or --top to change).
DEFAULT_TOP = 6


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
    """Title note when segments were left out by the default selection."""
    if not left_out:
        return ""
    return f"; the {shown} of {shown + left_out} losing most heat to the surroundings (--segments for others)"


# ---- figure: temperatures ---------------------------------------------------------------
def temperatures(results, out_dir, units: str = "physiology", segments=None, top: int = DEFAULT_TOP,
                 formats=FORMATS) -> list[Path]:
    """Body (core, blood, mean skin) temperatures, and per-segment mean tissue and mean surface temperatures."""
    with _opened(results) as res:
        scale = time_scale(res.duration)
        t = res.time / scale[0]
        tu = temperature_label(units)
        body = [(lab, res.optional(f"/body/{key}")) for key, lab in
                (("core_temperature", "core"), ("blood_temperature", "blood"),
                 ("mean_skin_temperature", "mean skin"))]
        body = [(lab, s) for lab, s in body if s is not None]
        segs, left_out = select_segments(res, segments, top, res.time[0], res.time[-1])
        nrows = (1 if body else 0) + (2 if segs else 0)
        if nrows == 0:
            print(f"figures: {res.path}: no body or segment temperatures; temperatures figure skipped",
                  file=sys.stderr)
            return []
        fig, axes = plt.subplots(nrows, 1, figsize=(7.5, 2.35 * nrows + 0.7), sharex=True,
                                 squeeze=False, layout="constrained")
        axes = list(axes[:, 0])
        kw = line_kwargs(len(t))
        labelled = False
        if body:
            ax = axes.pop(0)
            ax.set_label("body temperatures")
            colours = {"core": OKABE_ITO["vermillion"], "blood": OKABE_ITO["reddish_purple"],
                       "mean skin": OKABE_ITO["blue"]}
            for lab, s in body:
                ax.plot(t, temperature_in(s.values, units), color=colours[lab], lw=1.5, label=lab, **kw)
            ax.set_ylabel(f"Temperature ({tu})")
            ax.set_title("Whole body")
            ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
            set_time_axis(ax, res, scale)
            shade_events(ax, res, scale)
            ax.thermorph_time_scale = scale
            labelled = True
        if segs:
            ax_t, ax_s = axes
            ax_t.set_label("segment mean tissue temperatures")
            ax_s.set_label("segment mean surface temperatures")
            for i, seg in enumerate(segs):
                style = line_style(i)
                ax_t.plot(t, temperature_in(seg.mean_tissue_temperature(), units), lw=1.5, label=seg.name,
                          **style, **kw)
                ax_s.plot(t, temperature_in(seg.mean_surface_temperature(), units), lw=1.5, label=seg.name,
                          **style, **kw)
            env = res.environment()
            for key, lab, colour in (("temperature", "medium (surroundings)", "0.35"),
                                     ("water_temperature", "water", OKABE_ITO["sky_blue"])):
                if key in env and env[key].units == "degC":
                    ax_s.plot(t, temperature_in(env[key].values, units), color=colour, ls=(0, (1, 1.5)), lw=1.4,
                              label=lab, **kw)
            ax_t.set_ylabel(f"Mean tissue temperature ({tu})")
            ax_t.set_title("Segments: mean tissue temperature (volume-weighted, coat excluded)"
                           + _selection_note(len(segs), left_out))
            ax_s.set_ylabel(f"Mean surface temperature ({tu})")
            ax_s.set_title("Segments: mean surface temperature (outer surface: of the coat where there is one)")
            ax_t.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False, title="segment")
            handles, labels = ax_s.get_legend_handles_labels()
            extra = [(h, lab) for h, lab in zip(handles, labels) if lab not in {s.name for s in segs}]
            if extra:
                ax_s.legend(*zip(*extra), loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
            for k, ax in enumerate((ax_t, ax_s)):
                set_time_axis(ax, res, scale)
                shade_events(ax, res, scale, label=not labelled and k == 0)
                ax.thermorph_time_scale = scale
        for ax in fig.axes[:-1]:
            ax.set_xlabel("")
        fig.suptitle(f"{title_prefix(res)}{case_title(res)}: temperatures")
        return save(fig, Path(out_dir), "temperatures", res, formats)


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


def budget(results, out_dir, units: str = "physiology", segments=None, window=None, top: int = DEFAULT_TOP,
           formats=FORMATS) -> list[Path]:
    """Mean heat flow by channel over a window for segments, the rest and the blood pool (stacked bars), and
    whole-body heat flows over time."""
    with _opened(results) as res:
        t0, t1 = _parse_window(res, window)
        scale = time_scale(res.duration)
        segs, left_out = select_segments(res, segments, top, t0, t1)
        b = window_budget(res, t0, t1, [s.name for s in segs])
        rows = b.segments + [r for r in (b.others, b.pool) if r is not None]
        size = max([abs(v) for r in rows for v in r.means.values()] + [1e-300])
        channels = [c for c in b.channels if c != "storage" and not negligible([r.means[c] for r in rows], size)]
        zero = [c for c in b.channels if c != "storage" and c not in channels]
        fig, (ax_bar, ax_time) = plt.subplots(2, 1, figsize=(7.5, 7.6), layout="constrained",
                                              height_ratios=[1.1, 1.0])
        fig.get_layout_engine().set(rect=(0.0, 0.045, 1.0, 0.955))  # room for the two footer lines
        ax_bar.set_label("segment budget")
        ax_time.set_label("whole-body heat flows")

        # Panel 1: stacked bars (gains up, losses down), storage as a separate hatched bar.
        x = np.arange(len(rows))
        pos_base, neg_base, net = np.zeros(len(rows)), np.zeros(len(rows)), np.zeros(len(rows))
        for k, c in enumerate(channels):
            mean = np.array([r.means[c] for r in rows])
            colour, hatch, _ = channel_style(c, k)
            ax_bar.bar(x - 0.12, mean, 0.5, bottom=np.where(mean >= 0, pos_base, neg_base), color=colour,
                       hatch=hatch, edgecolor="white", lw=0.5, label=c)
            pos_base += np.clip(mean, 0, None)
            neg_base += np.clip(mean, None, 0)
            net += mean
        ax_bar.scatter(x - 0.12, net, marker="D", s=22, facecolor="white", edgecolor="black", zorder=3,
                       label="sum of channels")
        storage = np.array([r.means.get("storage", np.nan) for r in rows])
        if np.any(np.isfinite(storage)):
            ax_bar.bar(x + 0.3, np.nan_to_num(storage), 0.18, color="white", edgecolor="#7F7F7F",
                       hatch="////", lw=0.8, label="storage (rate of heat stored)")
        ax_bar.axhline(0.0, color="black", lw=0.8)
        widen = 0.5 if len(rows) == 1 else 0.0  # keep a lone bar slim and centred
        ax_bar.set_xlim(-0.75 - widen, len(rows) - 0.25 + widen)
        lo = min(0.0, float(np.min(neg_base)), float(np.nanmin(np.append(storage, 0.0))), float(np.min(net)))
        hi = max(0.0, float(np.max(pos_base)), float(np.nanmax(np.append(storage, 0.0))), float(np.max(net)))
        pad = 0.06 * (hi - lo) if hi > lo else 1.0
        ax_bar.set_ylim(lo - pad, hi + pad)
        ax_bar.thermorph_categories = [r.label for r in rows]
        long_names = len(rows) > 5 or max(len(r.label) for r in rows) > 12
        ax_bar.set_xticks(x, [r.label for r in rows], rotation=25 if long_names else 0,
                          ha="right" if long_names else "center", rotation_mode="anchor")
        ax_bar.set_ylabel("Mean heat flow (W)")
        ax_bar.grid(axis="x", visible=False)
        span = (f"mean {format_time(t0, scale)} to {format_time(t1, scale)}" if t1 > t0
                else f"at t = {format_time(t0, scale)}")
        ax_bar.set_title(f"Heat budget by segment, all copies (×N), {span}; positive = into the body"
                         + ("\n" + _selection_note(len(segs), left_out).lstrip("; ") if left_out else ""))
        handles, labels = ax_bar.get_legend_handles_labels()
        order = sorted(range(len(labels)), key=lambda j: labels[j] == "sum of channels")
        ax_bar.legend([handles[j] for j in order], [labels[j] for j in order],
                      loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)

        # Panel 2: body heat flows by channel over time (channels zero throughout left out).
        div, flow_unit, quantity = body_flow_scale(res, units)
        t = res.time / scale[0]
        flows = {c: res.body_heat_flow(c) for c in res.body_channels()}
        size = max([float(np.nanmax(np.abs(v))) for v in flows.values() if v.size] + [1e-300])
        body_channels = [c for c, v in flows.items() if not negligible(v, size)]
        internal = [c for c in flows if c not in body_channels and c not in zero and c != "storage"]
        if len(t) > 1:
            for k, c in enumerate(body_channels):
                colour, _, ls = channel_style(c, k)
                if c == "storage":
                    colour = "black"
                ax_time.plot(t, flows[c] / div, color=colour, ls=ls, lw=1.4, label=c,
                             path_effects=outline(colour))
            if t1 > t0 and (t0 > res.time[0] or t1 < res.time[-1]):
                for edge in (t0, t1):
                    ax_time.axvline(edge / scale[0], color="0.3", lw=0.8, ls="-.")
                ax_time.plot([], [], color="0.3", lw=0.8, ls="-.", label="_averaging window")
            set_time_axis(ax_time, res, scale)
            shade_events(ax_time, res, scale)
            ax_time.thermorph_time_scale = scale
            ax_time.set_title("Whole body heat flows by channel (positive = into the body)")
            ax_time.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
        else:  # a single output time (steady solve): one bar per channel
            values = [float(flows[c][0]) / div for c in body_channels]
            styles = [channel_style(c, k) for k, c in enumerate(body_channels)]
            ax_time.bar(range(len(values)), values, 0.6, edgecolor="black", lw=0.5, label="whole body",
                        color=[st[0] if c != "storage" else "white" for c, st in zip(body_channels, styles)],
                        hatch=[st[1] for st in styles])
            ax_time.thermorph_categories = body_channels
            ax_time.set_xticks(range(len(values)), body_channels, rotation=30, ha="right")
            ax_time.set_xlabel("Channel")
            ax_time.grid(axis="x", visible=False)
            ax_time.set_title(f"Whole body heat flows by channel at t = {format_time(res.time[0], scale)} "
                              "(positive = into the body)")
        ax_time.axhline(0.0, color="black", lw=0.6)
        ax_time.set_ylabel(f"{quantity} ({flow_unit})")

        fig.suptitle(f"{title_prefix(res)}{case_title(res)}: heat budget")
        notes = ([f"Not drawn, zero throughout: {', '.join(zero)}."] if zero else []) + (
            [f"Whole body: {', '.join(internal)} zero throughout (transfers inside the body), not drawn."]
            if internal else [])
        if notes:
            fig.text(0.01, 0.024, "  ".join(notes), ha="left", va="bottom", fontsize=7, color="0.35")
        fig.text(0.01, 0.005, CAUTION, ha="left", va="bottom", fontsize=7, color="0.35")
        err = res.optional("/body/energy_balance_error")
        if err is not None and err.values.size:
            fig.text(0.99, 0.005, f"max |energy balance error| = {np.max(np.abs(err.values)):.3g} {err.units}",
                     ha="right", va="bottom", fontsize=7, color="0.35")
        return save(fig, Path(out_dir), "budget", res, formats)


# ---- figure: maps -----------------------------------------------------------------------
def _time_indices(res: Results, times) -> list[int]:
    """Output indices nearest the requested times [s]; default first, middle and last."""
    requested = times is not None
    if not requested:
        times = [res.time[0], 0.5 * (res.time[0] + res.time[-1]), res.time[-1]]
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


def maps(results, out_dir, units: str = "physiology", segments=None, times=None, top: int = DEFAULT_TOP,
         formats=FORMATS) -> list[Path]:
    """Axial × radial temperature maps of each chosen segment with nz > 1, and radial profiles at mid-length."""
    written = []
    with _opened(results) as res:
        scale = time_scale(res.duration)
        indices = _time_indices(res, times)
        segs, _ = select_segments(res, segments, top, res.time[0], res.time[-1])
        for seg in segs:
            temp_all = seg.read("temperature").values
            if temp_all.shape[1] < 2:
                continue
            temp = temperature_in(temp_all[indices], units)  # [n, nz, nr]
            z_faces = faces_from_centres(seg.axial)
            r_faces = faces_from_centres(seg.radius)
            zs, zu = length_scale(z_faces[-1], units)
            rs, ru = length_scale(r_faces[-1], units)
            bounds = layer_boundaries(seg)
            tu = temperature_label(units)
            radial_name = "Distance from mid-plane" if seg.shape == "plate" else "Radial position"

            n = len(indices)
            mosaic = [[f"map{k}" for k in range(n)], ["profile"] * n]
            fig, axd = plt.subplot_mosaic(mosaic, figsize=(max(7.5, 2.6 * n + 1.2), 6.4),
                                          layout="constrained", height_ratios=[1.0, 1.0])
            vmin, vmax = float(np.nanmin(temp)), float(np.nanmax(temp))
            map_axes = [axd[f"map{k}"] for k in range(n)]
            for k, (ax, i) in enumerate(zip(map_axes, indices)):
                ax.grid(False)
                ax.set_label(f"map at t = {res.time[i]:.10g} s")
                mesh = ax.pcolormesh(z_faces * zs, r_faces * rs, temp[k].T, shading="flat",
                                     cmap=MAP_COLOURS, vmin=vmin, vmax=vmax, rasterized=True)
                mesh.set_label("temperature")
                mesh.thermorph_value_label = f"Temperature ({tu})"
                for r_b, _ in bounds[:-1]:
                    ax.axhline(r_b * rs, color="white", lw=0.8, ls="--")
                ax.set_title(f"t = {format_time(res.time[i], scale)}")
                ax.set_xlabel(f"Axial position ({zu})")
                ax.xaxis.set_major_locator(MaxNLocator(4))
                ax.thermorph_ylabel = f"{radial_name} ({ru})"   # for the source data of unlabelled panels
                if k == 0:
                    ax.set_ylabel(f"{radial_name} ({ru})")
                else:
                    ax.sharey(map_axes[0])
                    ax.tick_params(labelleft=False)
            cbar = fig.colorbar(mesh, ax=map_axes, shrink=0.95, pad=0.02)
            cbar.set_label(f"Temperature ({tu})")

            # Radial profiles at mid-length, interpolated between the two nearest axial cells.
            ax = axd["profile"]
            ax.set_label("radial profiles at mid-length")
            z_mid = 0.5 * (z_faces[0] + z_faces[-1])
            for k, i in enumerate(indices):
                prof = np.array([np.interp(z_mid, seg.axial, temp[k, :, j]) for j in range(temp.shape[2])])
                ax.plot(seg.radius * rs, prof, color=LINE_CYCLE[k % len(LINE_CYCLE)],
                        marker=MARKER_CYCLE[k % len(MARKER_CYCLE)], ms=4, lw=1.3,
                        label=f"t = {format_time(res.time[i], scale)}")
            for r_b, _ in bounds[:-1]:
                ax.axvline(r_b * rs, color="0.4", lw=0.8, ls=":")
            ax.set_xlim(0.0, r_faces[-1] * rs)
            # Layer names on a second axis along the top, at the middle of each layer.
            top_axis = ax.secondary_xaxis("top")
            inner, ticks, names = 0.0, [], []
            for r_b, name in bounds:
                ticks.append(0.5 * (inner + r_b) * rs)
                names.append(name)
                inner = r_b
            top_axis.set_xticks(ticks, names, fontsize=7, color="0.25")
            top_axis.tick_params(length=0)
            ax.set_xlabel(f"{radial_name} ({ru})")
            ax.set_ylabel(f"Temperature ({tu})")
            ax.set_title(f"Radial profile at mid-length ({z_mid * zs:.3g} {zu} from the proximal end); "
                         "dotted: layer boundaries")
            ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
            count = f" (one of {seg.count})" if seg.count > 1 else ""
            fig.suptitle(f"{title_prefix(res)}{case_title(res)}: {seg.name}{count} temperature map")
            written += save(fig, Path(out_dir), f"maps_{seg.name}", res, formats)
        if not written:
            print(f"figures: {res.path}: no chosen segment has more than one axial cell; no maps drawn",
                  file=sys.stderr)
    return written


# ---- command line -----------------------------------------------------------------------
def _floats(text: str, what: str) -> list[float]:
    """Comma-separated numbers, e.g. '0,600,3600'."""
    try:
        return [float(v) for v in text.replace(" ", "").split(",") if v]
    except ValueError as err:
        raise argparse.ArgumentTypeError(f"{what}: expected comma-separated numbers in s, got {text!r}") from err


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description="Figures (PDF, SVG, 150 dpi PNG) and their plotted numbers (CSV) "
                                             "from a thermorph results file.")
    ap.add_argument("result", help="results file (HDF5) written by thermorph")
    ap.add_argument("--out", default=None, help="output directory (default: RESULT_figures beside the file)")
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
                    help="budget averaging window t0,t1 in s (default: whole run)")
    ap.add_argument("--times", type=lambda s: _floats(s, "--times"), default=None,
                    help="map times in s, comma-separated (default: first, middle, last output)")
    ap.add_argument("--formats", default=",".join(FORMATS),
                    help=f"comma-separated subset of {', '.join(FORMATS)} (default: all three)")
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
    segments = [s.strip() for s in args.segments.split(",") if s.strip()] if args.segments else None
    out = Path(args.out) if args.out else Path(args.result).with_name(Path(args.result).stem + "_figures")

    written = []
    try:
        with Results(args.result) as res:
            if not res.complete:
                print(f"figures: {res.path}: run marked incomplete (complete = 0)", file=sys.stderr)
            if "temperatures" in only:
                written += temperatures(res, out, args.units, segments, args.top, formats)
            if "budget" in only:
                written += budget(res, out, args.units, segments, args.window, args.top, formats)
            if "maps" in only:
                written += maps(res, out, args.units, segments, args.times, args.top, formats)
    except (ResultsError, ValueError) as err:
        print(f"figures: error: {err}", file=sys.stderr)
        return 2
    for path in written:
        print(path)
    return 0


if __name__ == "__main__":
    sys.exit(main())
