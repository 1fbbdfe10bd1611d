"""Shared look of the thermorph figures: palette, channel styles, units, event shading, saving and source data.

Every figure is saved as PDF and SVG (vector, text kept as text) and PNG, and
its plotted numbers are written beside it as NAME.data.csv (source data: one
row per plotted point, read from the drawn artists themselves).
"""

from __future__ import annotations

import csv
import sys
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.patheffects as patheffects  # noqa: E402
import matplotlib.pyplot as plt  # noqa: E402
import matplotlib.transforms as mtransforms  # noqa: E402
import numpy as np  # noqa: E402
from matplotlib.collections import PathCollection, QuadMesh  # noqa: E402

from thermorph_results import ZERO_CELSIUS_IN_KELVIN, Results, is_default_event_label  # noqa: E402

FORMATS = ("pdf", "svg", "png")
PNG_DPI = 150
CAUTION = "Model estimates for research; not veterinary or medical advice."

# Okabe & Ito (2008), "Color Universal Design" palette: distinguishable with the
# common forms of colour-vision deficiency. Sequential maps use viridis (also
# designed to stay readable for colour-blind viewers and in greyscale).
OKABE_ITO = {
    "black": "#000000", "orange": "#E69F00", "sky_blue": "#56B4E9", "bluish_green": "#009E73",
    "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "reddish_purple": "#CC79A7",
}
# Line colours in order of contrast on white; yellow left out of line plots (too faint on white).
LINE_CYCLE = [OKABE_ITO[k] for k in ("blue", "vermillion", "bluish_green", "orange",
                                     "reddish_purple", "sky_blue", "black")]
LINE_STYLES = ["-", "--", "-.", ":"]
MARKER_CYCLE = ["o", "s", "^", "D", "v", "P", "X", "*"]
MAP_COLOURS = "viridis"

# Heat-flow channels: colour, bar hatch and line style. Eight colours serve eleven channels, so the
# two that share a colour with a related channel differ by hatch and dashes (shivering beside
# metabolism, respiration beside evaporation); conduction between segments is grey.
CHANNEL_STYLE = {
    "metabolism": (OKABE_ITO["vermillion"], "", "-"),
    "shivering": (OKABE_ITO["vermillion"], "xxx", "--"),
    "blood": (OKABE_ITO["reddish_purple"], "", "-"),
    "conduction": ("#999999", "", "-"),
    "convection": (OKABE_ITO["sky_blue"], "", "-"),
    "radiation": (OKABE_ITO["blue"], "", "-"),
    "solar": (OKABE_ITO["yellow"], "", "-"),
    "evaporation": (OKABE_ITO["bluish_green"], "", "-"),
    "respiration": (OKABE_ITO["bluish_green"], "///", "--"),
    "substrate": (OKABE_ITO["black"], "", "-"),
    "storage": ("#7F7F7F", "////", "--"),
}
OTHER_CHANNEL_COLOURS = [OKABE_ITO["orange"], "#666666", OKABE_ITO["sky_blue"]]

plt.rcParams.update({
    "font.size": 9, "axes.titlesize": 9, "axes.labelsize": 9, "legend.fontsize": 8,
    "xtick.labelsize": 8, "ytick.labelsize": 8, "figure.titlesize": 11,
    "axes.grid": True, "grid.alpha": 0.3, "grid.linewidth": 0.5,
    "svg.fonttype": "none",   # keep text as text in SVG (editable, searchable)
    "pdf.fonttype": 42,       # embed TrueType fonts in PDF (editable)
    "hatch.linewidth": 0.6,
    "axes.prop_cycle": matplotlib.cycler(color=LINE_CYCLE),
})


def channel_style(channel: str, k: int = 0) -> tuple[str, str, str]:
    """(colour, hatch, line style) of a heat-flow channel; unknown channels get spare colours by index k."""
    return CHANNEL_STYLE.get(channel, (OTHER_CHANNEL_COLOURS[k % len(OTHER_CHANNEL_COLOURS)], "..", ":"))


def outline(colour: str) -> list:
    """Path effects giving a pale line (the palette's yellow) a thin dark edge so it reads on white."""
    if colour != OKABE_ITO["yellow"]:
        return []
    return [patheffects.Stroke(linewidth=2.6, foreground="0.45"), patheffects.Normal()]


def line_style(i: int) -> dict:
    """Colour and dash pattern of the i-th line: the seven colours, then again with dashes."""
    return {"color": LINE_CYCLE[i % len(LINE_CYCLE)], "ls": LINE_STYLES[(i // len(LINE_CYCLE)) % len(LINE_STYLES)]}


# ---- units and scales ---------------------------------------------------------------------
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
        print(f"figures: {res.path}: body mass unknown; body heat flows in W", file=sys.stderr)
    return 1.0, "W", "Heat flow"


def format_time(t: float, scale: tuple[float, str]) -> str:
    """A time [s] written in the axis unit, e.g. '1.5 h'."""
    return f"{t / scale[0]:.4g} {scale[1]}"


def negligible(values, scale: float) -> bool:
    """Whether every value is zero to rounding (below 1e-9 of `scale`)."""
    values = np.asarray(values, dtype=float)
    return bool(np.all(np.abs(values[np.isfinite(values)]) <= 1e-9 * scale))


# ---- decoration ---------------------------------------------------------------------------
def title_prefix(res: Results) -> str:
    """'INCOMPLETE RUN — ' when the root attribute `complete` is 0, else ''."""
    return "" if res.complete else "INCOMPLETE RUN — "


def case_title(res: Results) -> str:
    """Title from the root attribute `title` or the stored case, else the results file name."""
    title = res.attr("title") or res.case.get("title")
    return str(title) if title else res.path.name


#: Unlabelled instants (steps, weather-file rows) beyond this many are not drawn: they would hatch the plot.
MAX_UNLABELLED_MARKS = 12
LABEL_ROWS = (0.98, 0.91, 0.84)


def shade_events(ax, res: Results, scale, label: bool = True):
    """Shade /events intervals grey, mark instants with dotted lines, and label them without overlap.

    Labels thermorph made up ("event at 3600 s") are not written; unlabelled
    instants are drawn only when there are at most MAX_UNLABELLED_MARKS of them.
    Labels go on up to three rows at the top of the axes; one that finds no
    room is left out (its shading stays). Call after the x limits are set.
    Drawn events are kept in ax.thermorph_events for the source data.
    """
    trans = mtransforms.blended_transform_factory(ax.transData, ax.transAxes)
    events = res.events()
    unlabelled_marks = [ev for ev in events if ev[1] <= ev[0] and is_default_event_label(ev[2])]
    drawn, to_label = [], []
    for start, end, text in events:
        s, e = start / scale[0], end / scale[0]
        named = bool(text) and not is_default_event_label(text)
        if e > s:
            ax.axvspan(s, e, color="0.6", alpha=0.18, lw=0, zorder=0)
        elif named or len(unlabelled_marks) <= MAX_UNLABELLED_MARKS:
            ax.axvline(s, color="0.45", ls=":", lw=0.9, zorder=0)
        else:
            continue
        drawn.append((start, end, text))
        if label and named:
            to_label.append((0.5 * (s + e), text))
    ax.thermorph_events = drawn
    if not to_label:
        return
    x0, x1 = ax.get_xlim()
    fig = ax.figure
    width_pt = ax.get_position().width * fig.get_figwidth() * 72.0
    per_pt = (x1 - x0) / max(width_pt, 1.0)
    right_edge = [-np.inf] * len(LABEL_ROWS)
    rows_used = 0
    for x, text in sorted(to_label):
        half = 0.5 * (0.55 * 7.0 * len(text) + 4.0) * per_pt   # 7 pt text, about 0.55 em per character
        lo, hi = max(x - half, x0), min(x + half, x1)
        for row, y in enumerate(LABEL_ROWS):
            if lo > right_edge[row]:
                ax.text(0.5 * (lo + hi), y, text, transform=trans, ha="center", va="top", fontsize=7,
                        color="0.3", clip_on=True)
                right_edge[row] = hi
                rows_used = max(rows_used, row + 1)
                break
    # Headroom: raise the top of the y axis so the label rows sit above the data.
    y0, y1 = ax.get_ylim()
    band = 1.0 - LABEL_ROWS[rows_used - 1] + 0.06
    ax.set_ylim(y0, y0 + (y1 - y0) / (1.0 - band))


def set_time_axis(ax, res: Results, scale):
    """Label the time axis and fit it to the run."""
    ax.set_xlabel(f"Time ({scale[1]})")
    if res.duration > 0:
        ax.set_xlim(res.time[0] / scale[0], res.time[-1] / scale[0])
    else:  # a single output time: centre it
        ax.set_xlim(res.time[0] / scale[0] - 1.0, res.time[0] / scale[0] + 1.0)


def line_kwargs(nt: int, filled: bool = True) -> dict:
    """Markers when there are too few output times for a line (a steady solve); open ones if not filled."""
    if nt >= 2:
        return {}
    return {"marker": "o", "ms": 6} if filled else {"marker": "s", "ms": 6, "markerfacecolor": "white"}


# ---- saving -------------------------------------------------------------------------------
def source_data_rows(fig) -> list[list]:
    """Every plotted number of a figure, read from its artists, as rows
    [panel, series, x, y, value, x label, y label, value label].

    Panels are the axes' labels (set by the figure functions; unlabelled axes
    such as colour bars are skipped). Lines give (x, y); bars give (category,
    height) with their container's label; scatter markers (x, y); colour maps
    (cell-centre x, y, value); shaded events (start in x, end in value).
    """
    rows = []
    for ax in fig.axes:
        panel = ax.get_label()
        if not panel or panel.startswith("<"):
            continue
        scale = getattr(ax, "thermorph_time_scale", None)
        # A time axis keeps its unit in the data even where a shared axis hides the label.
        xl = ax.get_xlabel() or (f"Time ({scale[1]})" if scale else "")
        yl = ax.get_ylabel() or getattr(ax, "thermorph_ylabel", "")
        cats = getattr(ax, "thermorph_categories", None)

        def category(x):
            if cats is None:
                return x
            return cats[int(np.argmin(np.abs(np.arange(len(cats)) - x)))]

        for line in ax.get_lines():
            name = line.get_label()
            if name.startswith("_"):
                continue
            for x, y in zip(np.atleast_1d(line.get_xdata()), np.atleast_1d(line.get_ydata())):
                rows.append([panel, name, float(x), float(y), "", xl, yl, ""])
        for container in ax.containers:
            name = container.get_label()
            if not name or name.startswith("_"):
                continue
            for patch in container.patches:
                x = patch.get_x() + 0.5 * patch.get_width()
                rows.append([panel, name, category(x), float(patch.get_height()), "", xl, yl, ""])
        for coll in ax.collections:
            name = coll.get_label()
            if isinstance(coll, PathCollection) and name and not name.startswith("_"):
                for x, y in coll.get_offsets():
                    rows.append([panel, name, category(x), float(y), "", xl, yl, ""])
            elif isinstance(coll, QuadMesh):
                corners = coll.get_coordinates()                    # [ny+1, nx+1, 2]
                centres = 0.25 * (corners[:-1, :-1] + corners[1:, :-1] + corners[:-1, 1:] + corners[1:, 1:])
                values = np.asarray(coll.get_array()).reshape(centres.shape[:2])
                vlabel = getattr(coll, "thermorph_value_label", "")
                for (j, i), v in np.ndenumerate(values):
                    rows.append([panel, name if not name.startswith("_") else "map",
                                 float(centres[j, i, 0]), float(centres[j, i, 1]), float(v), xl, yl, vlabel])
        for start, end, text in getattr(ax, "thermorph_events", []):
            unit = f" ({scale[1]})" if scale else ""
            rows.append([panel, f"event: {text}", start / (scale[0] if scale else 1.0), "",
                         end / (scale[0] if scale else 1.0), xl, "", f"event end{unit}"])
    return rows


def write_source_data(fig, path: Path):
    """Write source_data_rows(fig) to `path` (numbers at full precision)."""
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["panel", "series", "x", "y", "value", "x_label", "y_label", "value_label"])
        for row in source_data_rows(fig):
            w.writerow([repr(v) if isinstance(v, float) else v for v in row])


def save(fig, out_dir: Path, stem: str, res: Results, formats=FORMATS) -> list[Path]:
    """Write fig in each format (PDF, SVG, PNG at 150 dpi) and its source data NAME.data.csv; return the paths.

    The layout is computed once, for the first format, and then frozen, so all
    formats show the same layout.
    """
    out_dir.mkdir(parents=True, exist_ok=True)
    title = f"{case_title(res)}: {stem}"
    source = f"{res.path.name} ({res.attr('tool_version', 'unknown version')})"
    metadata = {
        "pdf": {"Title": title, "Subject": source, "Creator": "thermorph postproc/figures.py"},
        "svg": {"Title": title, "Description": source, "Creator": "thermorph postproc/figures.py"},
        "png": {"Title": title, "Source": source, "Software": "thermorph postproc/figures.py"},
    }
    paths = []
    for k, ext in enumerate(formats):
        path = out_dir / f"{stem}.{ext}"
        fig.savefig(path, dpi=PNG_DPI if ext == "png" else None, metadata=metadata[ext])
        if k == 0:
            fig.set_layout_engine("none")
        paths.append(path)
    data = out_dir / f"{stem}.data.csv"
    write_source_data(fig, data)
    paths.append(data)
    plt.close(fig)
    return paths
