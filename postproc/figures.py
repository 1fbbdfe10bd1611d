#!/usr/bin/python3
"""Publication figures from a thermorph results file (PDF, SVG and 150 dpi PNG).

    figures.py RESULT.h5 [--out DIR] [--only temperatures,budget,maps]
               [--units physiology|si] [--segments a,b] [--window t0,t1] [--times t1,t2,...]

Each figure is also a function taking a Results object (or a path) and an
output directory, returning the list of files written: temperatures(),
budget(), maps(). See postproc/README.md for what each figure shows.
"""

from __future__ import annotations

import argparse
import contextlib
import sys
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import matplotlib.transforms as mtransforms  # noqa: E402
import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from thermorph_results import (ZERO_CELSIUS_IN_KELVIN, Results, ResultsError,  # noqa: E402
                               faces_from_centres, ordered_channels, time_average)

FIGURES = ("temperatures", "budget", "maps")
UNIT_SYSTEMS = ("physiology", "si")
CAUTION = "Model estimates for research; not veterinary or medical advice."
PNG_DPI = 150

# Okabe & Ito (2008), "Color Universal Design" palette: distinguishable with the
# common forms of colour-vision deficiency. Sequential maps use viridis (also
# designed to stay readable for colour-blind viewers and in greyscale).
OKABE_ITO = {
    "black": "#000000", "orange": "#E69F00", "sky_blue": "#56B4E9", "bluish_green": "#009E73",
    "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "reddish_purple": "#CC79A7",
}
# Line colours in order of contrast on white (yellow last).
LINE_CYCLE = [OKABE_ITO[k] for k in ("blue", "vermillion", "bluish_green", "orange",
                                     "reddish_purple", "sky_blue", "black", "yellow")]
MARKER_CYCLE = ["o", "s", "^", "D", "v", "P", "X", "*"]
CHANNEL_COLOUR = {
    "metabolism": OKABE_ITO["vermillion"], "blood": OKABE_ITO["reddish_purple"],
    "convection": OKABE_ITO["sky_blue"], "radiation": OKABE_ITO["blue"],
    "solar": OKABE_ITO["yellow"], "evaporation": OKABE_ITO["bluish_green"],
    "respiration": OKABE_ITO["orange"], "substrate": OKABE_ITO["black"],
    "storage": "#7F7F7F",
}
MAP_COLOURS = "viridis"

plt.rcParams.update({
    "font.size": 9, "axes.titlesize": 9, "axes.labelsize": 9, "legend.fontsize": 8,
    "xtick.labelsize": 8, "ytick.labelsize": 8, "figure.titlesize": 11,
    "axes.grid": True, "grid.alpha": 0.3, "grid.linewidth": 0.5,
    "svg.fonttype": "none",   # keep text as text in SVG (editable, searchable)
    "pdf.fonttype": 42,       # embed TrueType fonts in PDF (editable)
    "axes.prop_cycle": matplotlib.cycler(color=LINE_CYCLE),
})


# ---- units and scales -----------------------------------------------------------------
def time_scale(duration: float) -> tuple[float, str]:
    """Divisor and unit name for the time axis: minutes up to 2 h, hours beyond [s per unit]."""
    return (60.0, "min") if duration <= 7200.0 else (3600.0, "h")


def temperature_in(values, units: str):
    """Temperatures [degC] converted to the figure's unit system: degC, or K for "si"."""
    values = np.asarray(values, dtype=float)
    return values + ZERO_CELSIUS_IN_KELVIN if units == "si" else values


def temperature_label(units: str) -> str:
    """Axis unit for temperatures."""
    return "K" if units == "si" else "°C"


def length_scale(extent: float, units: str) -> tuple[float, str]:
    """Multiplier and unit for a length axis spanning `extent` [m]: mm, cm or m (always m for "si")."""
    if units == "si":
        return 1.0, "m"
    if extent < 0.02:
        return 1e3, "mm"
    if extent < 2.0:
        return 1e2, "cm"
    return 1.0, "m"


def body_flow_scale(res: Results, units: str) -> tuple[float, str, str]:
    """Divisor, unit and quantity name for whole-body heat flows: W/kg of body mass in "physiology" if known."""
    mass = res.body_mass
    if units == "physiology" and mass and mass > 0:
        return mass, "W/kg", "Heat flow per body mass"
    if units == "physiology":
        print(f"figures: {res.path}: no [body] mass in the stored case; body heat flows in W",
              file=sys.stderr)
    return 1.0, "W", "Heat flow"


def format_time(t: float, scale: tuple[float, str]) -> str:
    """A time [s] written in the axis unit, e.g. '1.5 h'."""
    return f"{t / scale[0]:.4g} {scale[1]}"


# ---- shared decoration ----------------------------------------------------------------
def title_prefix(res: Results) -> str:
    """'INCOMPLETE RUN — ' when the root attribute `complete` is 0, else ''."""
    return "" if res.complete else "INCOMPLETE RUN — "


def case_title(res: Results) -> str:
    """Title from the root attribute `title` or the stored case, else the results file name."""
    title = res.attr("title") or res.case.get("title")
    return str(title) if title else res.path.name


def shade_events(ax, res: Results, scale, label: bool = True):
    """Shade /events intervals (a dotted line for zero-length ones), labels at the top of the axes."""
    trans = mtransforms.blended_transform_factory(ax.transData, ax.transAxes)
    for start, end, text in res.events():
        s, e = start / scale[0], end / scale[0]
        if e > s:
            ax.axvspan(s, e, color="0.6", alpha=0.18, lw=0, zorder=0)
            x, ha = 0.5 * (s + e), "center"
        else:
            ax.axvline(s, color="0.45", ls=":", lw=1.0, zorder=0)
            x, ha = s, "left"
        if label and text:
            ax.text(x, 0.98, f" {text}", transform=trans, ha=ha, va="top", fontsize=7,
                    color="0.3", clip_on=True)


def set_time_axis(ax, res: Results, scale):
    """Label the time axis and fit it to the run."""
    ax.set_xlabel(f"Time ({scale[1]})")
    if res.duration > 0:
        ax.set_xlim(res.time[0] / scale[0], res.time[-1] / scale[0])
    else:  # a single output time: centre it
        ax.set_xlim(res.time[0] / scale[0] - 1.0, res.time[0] / scale[0] + 1.0)


def save(fig, out_dir: Path, stem: str, res: Results) -> list[Path]:
    """Write fig as PDF, SVG and PNG (150 dpi) in out_dir; return the paths."""
    out_dir.mkdir(parents=True, exist_ok=True)
    title = f"{case_title(res)}: {stem}"
    source = f"{res.path.name} ({res.attr('tool_version', 'unknown version')})"
    metadata = {
        "pdf": {"Title": title, "Subject": source, "Creator": "thermorph postproc/figures.py"},
        "svg": {"Title": title, "Description": source, "Creator": "thermorph postproc/figures.py"},
        "png": {"Title": title, "Source": source, "Software": "thermorph postproc/figures.py"},
    }
    paths = []
    for ext in ("pdf", "svg", "png"):
        path = out_dir / f"{stem}.{ext}"
        fig.savefig(path, dpi=PNG_DPI if ext == "png" else None, metadata=metadata[ext])
        paths.append(path)
    plt.close(fig)
    return paths


@contextlib.contextmanager
def _opened(results):
    """Yield a Results for a Results object or a path (closing only what it opened)."""
    if isinstance(results, Results):
        yield results
    else:
        with Results(results) as res:
            yield res


def _line_kwargs(nt: int, filled: bool = True) -> dict:
    """Markers when there are too few output times for a line (a steady solve); open ones if not filled."""
    if nt >= 2:
        return {}
    return {"marker": "o", "ms": 6} if filled else {"marker": "s", "ms": 6, "markerfacecolor": "white"}


# ---- figure: temperatures ---------------------------------------------------------------
def temperatures(results, out_dir, units: str = "physiology", segments=None) -> list[Path]:
    """Body (core, blood, mean skin) and per-segment mean tissue and surface temperatures vs time."""
    with _opened(results) as res:
        scale = time_scale(res.duration)
        t = res.time / scale[0]
        tu = temperature_label(units)
        body = [(lab, res.optional(f"/body/{key}")) for key, lab in
                (("core_temperature", "core"), ("blood_temperature", "blood"),
                 ("mean_skin_temperature", "mean skin"))]
        body = [(lab, s) for lab, s in body if s is not None]
        segs = res.segments(segments)
        nrows = (1 if body else 0) + (1 if segs else 0)
        if nrows == 0:
            print(f"figures: {res.path}: no body or segment temperatures; temperatures figure skipped",
                  file=sys.stderr)
            return []
        fig, axes = plt.subplots(nrows, 1, figsize=(7.5, 3.0 * nrows + 0.6), sharex=True,
                                 squeeze=False, layout="constrained")
        axes = list(axes[:, 0])
        kw = _line_kwargs(len(t))
        if body:
            ax = axes.pop(0)
            colours = {"core": OKABE_ITO["vermillion"], "blood": OKABE_ITO["reddish_purple"],
                       "mean skin": OKABE_ITO["blue"]}
            for lab, s in body:
                ax.plot(t, temperature_in(s.values, units), color=colours[lab], lw=1.5, label=lab, **kw)
            ax.set_ylabel(f"Body temperature ({tu})")
            ax.set_title("Whole body")
            ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
            shade_events(ax, res, scale)
            set_time_axis(ax, res, scale)
        if segs:
            ax = axes.pop(0)
            for i, seg in enumerate(segs):
                colour = LINE_CYCLE[i % len(LINE_CYCLE)]
                ax.plot(t, temperature_in(seg.mean_tissue_temperature(), units), color=colour, lw=1.5,
                        ls="-", label=f"{seg.name}: tissue", **kw)
                ax.plot(t, temperature_in(seg.mean_surface_temperature(), units), color=colour, lw=1.2,
                        ls="--", label=f"{seg.name}: surface", **_line_kwargs(len(t), filled=False))
            ax.set_ylabel(f"Segment temperature ({tu})")
            ax.set_title("Segments: mean tissue (solid, coat excluded) and mean surface (dashed)")
            ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
            shade_events(ax, res, scale, label=not body)
            set_time_axis(ax, res, scale)
        fig.suptitle(f"{title_prefix(res)}{case_title(res)}: temperatures")
        return save(fig, Path(out_dir), "temperatures", res)


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


def budget(results, out_dir, units: str = "physiology", segments=None, window=None) -> list[Path]:
    """Per-segment mean heat flow by channel over a window (stacked bars) and body heat flows vs time."""
    with _opened(results) as res:
        t0, t1 = _parse_window(res, window)
        scale = time_scale(res.duration)
        segs = res.segments(segments)
        channels = ordered_channels({c for s in segs for c in s.heat_flow_channels()} - {"storage"})
        fig, (ax_bar, ax_time) = plt.subplots(2, 1, figsize=(7.5, 7.6), layout="constrained",
                                              height_ratios=[1.1, 1.0])
        fig.get_layout_engine().set(rect=(0.0, 0.03, 1.0, 0.97))  # room for the caution footer

        # Panel 1: stacked bars (gains up, losses down), storage as a separate hatched bar.
        x = np.arange(len(segs))
        pos_base, neg_base = np.zeros(len(segs)), np.zeros(len(segs))
        net = np.zeros(len(segs))
        for c in channels:
            mean = np.array([time_average(res.time, s.read(f"heat_flow/{c}").values, t0, t1)
                             if c in s.heat_flow_channels() else 0.0 for s in segs])
            base = np.where(mean >= 0, pos_base, neg_base)
            ax_bar.bar(x - 0.12, mean, 0.5, bottom=base, color=CHANNEL_COLOUR.get(c, "0.5"),
                       edgecolor="white", lw=0.5, label=c)
            pos_base += np.clip(mean, 0, None)
            neg_base += np.clip(mean, None, 0)
            net += mean
        ax_bar.scatter(x - 0.12, net, marker="D", s=22, facecolor="white", edgecolor="black", zorder=3,
                       label="sum of channels")
        storage = np.array([time_average(res.time, s.read("heat_flow/storage").values, t0, t1)
                            if "storage" in s.heat_flow_channels() else np.nan for s in segs])
        if np.any(np.isfinite(storage)):
            ax_bar.bar(x + 0.3, np.nan_to_num(storage), 0.18, color="white", edgecolor=CHANNEL_COLOUR["storage"],
                       hatch="////", lw=0.8, label="storage (rate of heat stored)")
        ax_bar.axhline(0.0, color="black", lw=0.8)
        ax_bar.set_xlim(-0.75, len(segs) - 0.25)  # keep bars slim when there are few segments
        # Storage is often small beside the channels: its value goes under each segment name.
        ax_bar.set_xticks(x, [s.name + ("\nstorage " + f"{st:+.3g}".replace("-", "\u2212") + " W"
                                       if np.isfinite(st) else "") for s, st in zip(segs, storage)])
        ax_bar.set_ylabel("Mean heat flow (W)")
        ax_bar.set_xlabel("Segment")
        ax_bar.grid(axis="x", visible=False)
        span = (f", time-averaged {format_time(t0, scale)} to {format_time(t1, scale)}" if t1 > t0
                else f" at t = {format_time(t0, scale)}")
        ax_bar.set_title(f"Segment heat budget{span} (positive = into the body)")
        handles, labels = ax_bar.get_legend_handles_labels()
        order = sorted(range(len(labels)), key=lambda j: labels[j] == "sum of channels")
        ax_bar.legend([handles[j] for j in order], [labels[j] for j in order],
                      loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)

        # Panel 2: body heat flows by channel over time.
        div, flow_unit, quantity = body_flow_scale(res, units)
        t = res.time / scale[0]
        body_channels = res.body_channels()
        if len(t) > 1:
            for c in body_channels:
                values = res.read(f"/body/heat_flow/{c}").values / div
                if c == "storage":
                    ax_time.plot(t, values, color="black", ls="--", lw=1.3, label="storage")
                else:
                    ax_time.plot(t, values, color=CHANNEL_COLOUR.get(c), lw=1.4, label=c)
            if t1 > t0 and (t0 > res.time[0] or t1 < res.time[-1]):
                ax_time.axvline(t0 / scale[0], color="0.3", lw=0.8, ls="-.")
                ax_time.axvline(t1 / scale[0], color="0.3", lw=0.8, ls="-.", label="averaging window")
            shade_events(ax_time, res, scale)
            set_time_axis(ax_time, res, scale)
            ax_time.set_title("Whole body heat flows by channel over time (positive = into the body)")
            ax_time.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
        else:  # a single output time (steady solve): one bar per channel
            values = [float(res.read(f"/body/heat_flow/{c}").values[0]) / div for c in body_channels]
            ax_time.bar(range(len(values)), values, 0.6, edgecolor="black", lw=0.5,
                        color=[CHANNEL_COLOUR.get(c, "0.5") if c != "storage" else "white" for c in body_channels],
                        hatch=["////" if c == "storage" else "" for c in body_channels])
            ax_time.set_xticks(range(len(values)), body_channels, rotation=30, ha="right")
            ax_time.set_xlabel("Channel")
            ax_time.grid(axis="x", visible=False)
            ax_time.set_title(f"Whole body heat flows by channel at t = {format_time(res.time[0], scale)} "
                              "(positive = into the body)")
        ax_time.axhline(0.0, color="black", lw=0.6)
        ax_time.set_ylabel(f"{quantity} ({flow_unit})")

        fig.suptitle(f"{title_prefix(res)}{case_title(res)}: heat budget")
        fig.text(0.01, 0.005, CAUTION, ha="left", va="bottom", fontsize=7, color="0.35")
        err = res.optional("/body/energy_balance_error")
        if err is not None and err.values.size:
            fig.text(0.99, 0.005, f"max |energy balance error| = {np.max(np.abs(err.values)):.3g} {err.units}",
                     ha="right", va="bottom", fontsize=7, color="0.35")
        return save(fig, Path(out_dir), "budget", res)


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


def maps(results, out_dir, units: str = "physiology", segments=None, times=None) -> list[Path]:
    """Axial × radial temperature maps of each segment with nz > 1, and radial profiles at mid-length."""
    written = []
    with _opened(results) as res:
        scale = time_scale(res.duration)
        indices = _time_indices(res, times)
        for seg in res.segments(segments):
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

            n = len(indices)
            mosaic = [[f"map{k}" for k in range(n)], ["profile"] * n]
            fig, axd = plt.subplot_mosaic(mosaic, figsize=(max(7.5, 2.6 * n + 1.2), 6.4),
                                          layout="constrained", height_ratios=[1.0, 1.0])
            vmin, vmax = float(np.nanmin(temp)), float(np.nanmax(temp))
            map_axes = [axd[f"map{k}"] for k in range(n)]
            for k, (ax, i) in enumerate(zip(map_axes, indices)):
                ax.grid(False)
                mesh = ax.pcolormesh(z_faces * zs, r_faces * rs, temp[k].T, shading="flat",
                                     cmap=MAP_COLOURS, vmin=vmin, vmax=vmax, rasterized=True)
                for r_b, _ in bounds[:-1]:
                    ax.axhline(r_b * rs, color="white", lw=0.8, ls="--")
                ax.set_title(f"t = {format_time(res.time[i], scale)}")
                ax.set_xlabel(f"Axial position ({zu})")
                if k == 0:
                    ax.set_ylabel(f"Radial position ({ru})")
                else:
                    ax.sharey(map_axes[0])
                    ax.tick_params(labelleft=False)
            cbar = fig.colorbar(mesh, ax=map_axes, shrink=0.95, pad=0.02)
            cbar.set_label(f"Temperature ({tu})")

            # Radial profiles at mid-length, interpolated between the two nearest axial cells.
            ax = axd["profile"]
            z_mid = 0.5 * (z_faces[0] + z_faces[-1])
            for k, i in enumerate(indices):
                prof = np.array([np.interp(z_mid, seg.axial, temp[k, :, j]) for j in range(temp.shape[2])])
                ax.plot(seg.radius * rs, prof, color=LINE_CYCLE[k % len(LINE_CYCLE)],
                        marker=MARKER_CYCLE[k % len(MARKER_CYCLE)], ms=4, lw=1.3,
                        label=f"t = {format_time(res.time[i], scale)}")
            trans = mtransforms.blended_transform_factory(ax.transData, ax.transAxes)
            inner = 0.0
            for r_b, name in bounds:
                if r_b != bounds[-1][0]:
                    ax.axvline(r_b * rs, color="0.4", lw=0.8, ls=":")
                ax.text(0.5 * (inner + r_b) * rs, 0.03, name, transform=trans, ha="center", va="bottom",
                        fontsize=7, color="0.25", rotation=90 if (r_b - inner) < 0.08 * r_faces[-1] else 0)
                inner = r_b
            ax.set_xlim(0.0, r_faces[-1] * rs)
            ax.set_xlabel(f"Radial position from {'mid-plane' if seg.shape == 'plate' else 'axis'} ({ru})")
            ax.set_ylabel(f"Temperature ({tu})")
            ax.set_title(f"Radial profile at mid-length ({z_mid * zs:.3g} {zu} from the proximal end); "
                         "dotted: layer boundaries")
            ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
            fig.suptitle(f"{title_prefix(res)}{case_title(res)}: {seg.name} temperature map")
            written += save(fig, Path(out_dir), f"maps_{seg.name}", res)
        if not written:
            print(f"figures: {res.path}: no segment with more than one axial cell; no maps drawn",
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
    ap = argparse.ArgumentParser(description="Figures (PDF, SVG, 150 dpi PNG) from a thermorph results file.")
    ap.add_argument("result", help="results file (HDF5) written by thermorph")
    ap.add_argument("--out", default=None, help="output directory (default: RESULT_figures beside the file)")
    ap.add_argument("--only", default=None,
                    help=f"comma-separated subset of: {', '.join(FIGURES)} (default: all)")
    ap.add_argument("--units", choices=UNIT_SYSTEMS, default="physiology",
                    help="physiology: °C, segment heat flows in W, body heat flows in W/kg of body mass; "
                         "si: K and W throughout (default: physiology)")
    ap.add_argument("--segments", default=None, help="comma-separated segment names (default: all)")
    ap.add_argument("--window", type=lambda s: _floats(s, "--window"), default=None,
                    help="budget averaging window t0,t1 in s (default: whole run)")
    ap.add_argument("--times", type=lambda s: _floats(s, "--times"), default=None,
                    help="map times in s, comma-separated (default: first, middle, last output)")
    args = ap.parse_args(argv)

    only = FIGURES if args.only is None else tuple(n.strip() for n in args.only.split(",") if n.strip())
    bad = [n for n in only if n not in FIGURES]
    if bad:
        ap.error(f"--only: unknown figure {', '.join(bad)}; choose from {', '.join(FIGURES)}")
    if args.window is not None and len(args.window) != 2:
        ap.error("--window: expected two times t0,t1 in s")
    segments = [s.strip() for s in args.segments.split(",")] if args.segments else None
    out = Path(args.out) if args.out else Path(args.result).with_name(Path(args.result).stem + "_figures")

    written = []
    try:
        with Results(args.result) as res:
            if not res.complete:
                print(f"figures: {res.path}: run marked incomplete (complete = 0)", file=sys.stderr)
            if "temperatures" in only:
                written += temperatures(res, out, args.units, segments)
            if "budget" in only:
                written += budget(res, out, args.units, segments, args.window)
            if "maps" in only:
                written += maps(res, out, args.units, segments, args.times)
    except (ResultsError, ValueError) as err:
        print(f"figures: error: {err}", file=sys.stderr)
        return 2
    for path in written:
        print(path)
    return 0


if __name__ == "__main__":
    sys.exit(main())
