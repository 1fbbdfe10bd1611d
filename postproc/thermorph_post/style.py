"""Shared look of the thermorph figures: presets, palette, fixed colours, time axis, caution footer, saving.

No global Matplotlib state is touched: each figure is built as a plain
matplotlib.figure.Figure (no pyplot) inside `rc(style)`, a context with the
preset's fonts, and saved inside it again. Every figure is saved as PDF and SVG
(vector, text kept as text) and PNG, and its plotted numbers are written beside
it as NAME.data.csv (source data: one row per plotted point, read from the
drawn artists themselves).
"""

from __future__ import annotations

import contextlib
import csv
import sys
import textwrap
from pathlib import Path

import matplotlib
import matplotlib.patheffects as patheffects
import matplotlib.axis
import matplotlib.text
import matplotlib.transforms as mtransforms
import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.collections import PathCollection, QuadMesh
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter, MaxNLocator

from thermorph_post import CAUTION
from thermorph_post.results import ZERO_CELSIUS_IN_KELVIN, Results, is_default_event_label

FORMATS = ("pdf", "svg", "png")
#: Default PNG resolution [dots per inch]; --dpi changes it.
PNG_DPI = 300
MM_PER_INCH = 25.4

#: Size presets: figure width (single journal column about 85 mm, two columns about 175 mm) and font
#: sizes [pt]; common journal figure guidelines (common practice, no source).
STYLES = {
    "single": {"width_mm": 85.0, "font": 7.0, "small": 6.0, "title": 7.0, "suptitle": 8.0, "footer": 5.0,
               "line": 1.1, "legend_cols": 1},
    "double": {"width_mm": 175.0, "font": 8.0, "small": 7.0, "title": 8.0, "suptitle": 9.5, "footer": 6.0,
               "line": 1.4, "legend_cols": 1},
}
DEFAULT_STYLE = "double"

# Okabe & Ito (2008), "Color Universal Design" palette: distinguishable with the
# common forms of colour-vision deficiency. Sequential maps use viridis (also
# designed to stay readable for colour-blind viewers and in greyscale).
OKABE_ITO = {
    "black": "#000000", "orange": "#E69F00", "sky_blue": "#56B4E9", "bluish_green": "#009E73",
    "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "reddish_purple": "#CC79A7",
}
#: Colours of segments (and of runs in an overlay), in order of contrast on white. Black and greys are
#: kept for whole-body quantities and the surroundings, yellow is too faint for lines.
LINE_CYCLE = [OKABE_ITO[k] for k in ("blue", "vermillion", "bluish_green", "orange", "reddish_purple", "sky_blue")]
LINE_STYLES = ["-", "--", "-.", ":"]
MARKER_CYCLE = ["o", "s", "^", "D", "v", "P", "X", "*"]
MAP_COLOURS = "viridis"

#: Whole-body temperatures: black and grey, never a segment colour.
BODY_STYLE = {"core": ("#000000", "-"), "blood": ("#000000", (0, (5, 1.5, 1, 1.5))), "mean skin": ("#6E6E6E", "-")}
#: Surroundings (/environment): grey and dotted, never a segment colour.
ENVIRONMENT_STYLE = {
    "temperature": ("#4D4D4D", (0, (1, 1.5))), "air_temperature": ("#4D4D4D", (0, (1, 1.5))),
    "water_temperature": ("#4D4D4D", (0, (4, 1.5, 1, 1.5, 1, 1.5))),
    "radiant_temperature": ("#A0A0A0", "-"), "sky_temperature": ("#A0A0A0", (0, (4, 1.5))),
    "substrate_temperature": ("#8B5A2B", "-"),
    "speed": ("#4D4D4D", "-"), "air_speed": ("#4D4D4D", "-"), "water_speed": ("#4D4D4D", "--"),
    "solar_irradiance": ("#B8860B", "-"), "relative_humidity": ("#4D4D4D", "-"),
    # As drawn (figures.SURROUNDINGS): the air and the water whichever is the medium, wind and current.
    "air": ("#4D4D4D", (0, (1, 1.5))), "water": ("#4D4D4D", (0, (4, 1.5, 1, 1.5, 1, 1.5))),
    "wind": ("#4D4D4D", "-"), "water current": ("#4D4D4D", "--"),
}
#: Shading of the intervals when every segment is in water (forcings of the air act on nothing there).
ALL_IN_WATER_SHADE = {"color": "#56B4E9", "alpha": 0.16, "lw": 0, "zorder": 0}

# Heat-flow channels: colour, bar hatch and line style, the same in every panel and figure. Eight colours
# serve twelve channels, so the three that share a colour with a related channel differ by hatch and dashes
# (shivering beside metabolism, respiration beside evaporation, tucking beside conduction); conduction between
# segments is light grey, tucking (a tucked segment's conduction into its host) light grey and dotted, storage
# dark grey and hatched.
CHANNEL_STYLE = {
    "metabolism": (OKABE_ITO["vermillion"], "", "-"),
    "shivering": (OKABE_ITO["vermillion"], "xxx", "--"),
    "blood": (OKABE_ITO["reddish_purple"], "", "-"),
    "conduction": ("#AAAAAA", "", "-"),
    "tucking": ("#AAAAAA", "...", ":"),
    "convection": (OKABE_ITO["sky_blue"], "", "-"),
    "radiation": (OKABE_ITO["blue"], "", "-"),
    "solar": (OKABE_ITO["yellow"], "", "-"),
    "evaporation": (OKABE_ITO["bluish_green"], "", "-"),
    "respiration": (OKABE_ITO["bluish_green"], "///", "--"),
    "substrate": (OKABE_ITO["black"], "", "-"),
    "storage": ("#555555", "////", "--"),
}
OTHER_CHANNEL_COLOURS = [OKABE_ITO["orange"], "#666666", "#8B4513"]


def style_of(style: str) -> dict:
    """The preset called `style` ('single' or 'double'); ValueError names the choices."""
    if style not in STYLES:
        raise ValueError(f"--style {style}: choose from {', '.join(STYLES)}")
    return STYLES[style]


def rc_params(style: str = DEFAULT_STYLE) -> dict:
    """Matplotlib settings of a preset (used only inside rc(); nothing is set globally)."""
    s = style_of(style)
    return {
        "font.size": s["font"], "axes.titlesize": s["title"], "axes.labelsize": s["font"],
        "legend.fontsize": s["small"], "legend.title_fontsize": s["small"],
        "xtick.labelsize": s["small"], "ytick.labelsize": s["small"], "figure.titlesize": s["suptitle"],
        "axes.grid": True, "grid.alpha": 0.3, "grid.linewidth": 0.5, "axes.linewidth": 0.6,
        "xtick.major.width": 0.6, "ytick.major.width": 0.6, "lines.linewidth": s["line"],
        "svg.fonttype": "none",   # keep text as text in SVG (editable, searchable)
        "pdf.fonttype": 42,       # embed TrueType fonts in PDF (editable)
        "hatch.linewidth": 0.6,
        "axes.prop_cycle": matplotlib.cycler(color=LINE_CYCLE),
        "figure.constrained_layout.h_pad": 0.03, "figure.constrained_layout.w_pad": 0.03,
    }


@contextlib.contextmanager
def rc(style: str = DEFAULT_STYLE):
    """Context with the preset's Matplotlib settings (matplotlib.rc_context; restored on exit)."""
    with matplotlib.rc_context(rc_params(style)):
        yield


def new_figure(style: str, height_in: float, width_in: float | None = None) -> Figure:
    """A Figure (no pyplot) of the preset's width, with an Agg canvas and constrained layout.

    Call inside rc(style). The preset is kept on the figure for save() and the footer.
    """
    width = width_in if width_in is not None else style_of(style)["width_mm"] / MM_PER_INCH
    fig = Figure(figsize=(width, height_in), layout="constrained")
    FigureCanvasAgg(fig)
    fig.thermorph_style = style
    return fig


def width_in(style: str) -> float:
    """Figure width of a preset [in]."""
    return style_of(style)["width_mm"] / MM_PER_INCH


def channel_style(channel: str, k: int = 0) -> tuple[str, str, str]:
    """(colour, hatch, line style) of a heat-flow channel; unknown channels get spare colours by index k
    (callers pass the channel's index among the unknown names, so it is the same in every panel)."""
    return CHANNEL_STYLE.get(channel, (OTHER_CHANNEL_COLOURS[k % len(OTHER_CHANNEL_COLOURS)], "..", ":"))


def channel_styles(channels) -> dict[str, tuple[str, str, str]]:
    """Style of each channel, unknown ones numbered in alphabetical order (stable across panels)."""
    unknown = sorted(c for c in channels if c not in CHANNEL_STYLE)
    return {c: channel_style(c, unknown.index(c) if c in unknown else 0) for c in channels}


def outline(colour: str) -> list:
    """Path effects giving a pale line (the palette's yellow) a thin dark edge so it reads on white."""
    if colour != OKABE_ITO["yellow"]:
        return []
    return [patheffects.Stroke(linewidth=2.6, foreground="0.45"), patheffects.Normal()]


def line_style(i: int) -> dict:
    """Colour and dash pattern of the i-th segment or run: the six colours, then again with dashes."""
    return {"color": LINE_CYCLE[i % len(LINE_CYCLE)], "ls": LINE_STYLES[(i // len(LINE_CYCLE)) % len(LINE_STYLES)]}


def segment_style(res: Results, name: str) -> dict:
    """Colour and dashes of a segment, fixed by its place in the case (the same in every figure)."""
    names = res.segment_names()
    return line_style(names.index(name) if name in names else len(names))


# ---- units and scales ---------------------------------------------------------------------
def time_scale(duration: float) -> tuple[float, str]:
    """Divisor and unit name for the time axis: minutes up to 2 h, hours up to 4 days, days beyond [s per unit]."""
    if duration <= 7200.0:
        return (60.0, "min")
    if duration <= 4 * 86400.0:
        return (3600.0, "h")
    return (86400.0, "d")


#: Tick steps per time unit: minutes at 1, 2, 5, 10, 15, 30, 60; hours at 1, 2, 3, 6, 12, 24; days 1, 2, 5, 10.
TIME_TICK_STEPS = {"min": [1, 1.5, 2, 3, 5, 6, 10], "h": [1, 2, 3, 6, 10], "d": [1, 2, 5, 10]}


def time_locator(unit: str) -> MaxNLocator:
    """Tick positions at sensible multiples of the time unit (0/6/12/18/24 h, 0/15/30/45/60 min)."""
    return MaxNLocator(nbins=6, steps=TIME_TICK_STEPS.get(unit, [1, 2, 5, 10]), integer=unit != "d")


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


def _chars_per_line(width_pt: float, fontsize: float) -> int:
    """Characters of running text that fit `width_pt` at `fontsize` (about 0.55 em each, common practice)."""
    return max(12, int(width_pt / (0.55 * fontsize)))


def _title_text(letter: str | None, text: str, chars: int) -> str:
    lines = textwrap.wrap(text, max(chars, 12)) or [""]
    return (f"$\\bf{{{letter}}}$  " if letter else "") + "\n".join(lines)


def panel_title(ax, letter: str | None, text: str, fig=None):
    """Left-aligned panel title with a bold panel letter ('a', 'b', ...), wrapped to the panel's width
    (estimated here, fitted to the laid-out panel by finish())."""
    fig = fig or ax.figure
    s = style_of(getattr(fig, "thermorph_style", DEFAULT_STYLE))
    width_pt = ax.get_position().width * fig.get_figwidth() * 72.0 * 0.85
    ax.set_title(_title_text(letter, text, _chars_per_line(width_pt, s["title"]) - (3 if letter else 0)),
                 loc="left", fontsize=s["title"])
    ax.thermorph_title = (letter, text)


def finish(fig):
    """Last step of every figure builder: tick sizes fixed on the axes (so ticks made later, outside rc(),
    look the same) and panel titles re-wrapped to the width of their laid-out panel."""
    s = style_of(getattr(fig, "thermorph_style", DEFAULT_STYLE))
    for ax in fig.axes:
        ax.tick_params(labelsize=s["small"], width=0.6)
    titled = [ax for ax in fig.axes if getattr(ax, "thermorph_title", None)]
    labels = [t for ax in fig.axes for t in ax.texts if getattr(t, "thermorph_event_label", False)]
    if not titled and not labels:
        return fig
    for _ in range(1):   # lay out, then fit the titles to the panels (savefig lays out again)
        fig.canvas.draw()
        renderer = fig.canvas.get_renderer()
        for label in labels:   # event labels placed before the layout: move them back inside their panel
            ext, box = label.get_window_extent(renderer), label.axes.bbox
            if ext.width > box.width:
                label.set_visible(False)
                continue
            shift = max(box.x0 + 1.0 - ext.x0, 0.0) - max(ext.x1 - (box.x1 - 1.0), 0.0)
            if shift:
                x_disp = label.axes.transData.transform((label.get_position()[0], 0.0))[0] + shift
                label.set_x(label.axes.transData.inverted().transform((x_disp, 0.0))[0])
        for ax in titled:
            letter, text = ax.thermorph_title
            title = ax._left_title   # the loc="left" title of set_title
            room = ax.get_window_extent(renderer).width
            chars = max(len(text), 12)
            while True:
                title.set_text(_title_text(letter, text, chars))
                if title.get_window_extent(renderer).width <= room or chars <= 12:
                    break
                chars = int(chars * 0.92)
    return fig


def letters():
    """Panel letters a, b, c, ..."""
    return iter("abcdefghijklmnopqrstuvwxyz")


def suptitle(fig, text: str):
    """Figure title wrapped to the figure's width."""
    s = style_of(getattr(fig, "thermorph_style", DEFAULT_STYLE))
    fig.suptitle("\n".join(textwrap.wrap(text, _chars_per_line(fig.get_figwidth() * 72.0 * 0.96, s["suptitle"]))),
                 fontsize=s["suptitle"])


def legend_outside(ax, **kw):
    """Legend to the right of the axes, outside the data (constrained layout makes room for it)."""
    kw.setdefault("frameon", False)
    if kw.get("title") and len(kw["title"]) > 20:   # a long title would widen the legend: wrap it
        kw["title"] = "\n".join(textwrap.wrap(kw["title"], 20))
    kw.setdefault("handlelength", 1.8)
    # Long entries would widen the legend and squeeze the panel: wrap them (narrower in a single column).
    width = 18 if getattr(ax.figure, "thermorph_style", DEFAULT_STYLE) == "single" else 30
    if "labels" not in kw:
        handles, labels = ax.get_legend_handles_labels()
        kw.setdefault("handles", handles)
        kw["labels"] = labels
    kw["labels"] = ["\n".join(textwrap.wrap(lab, width)) if len(lab) > width else lab for lab in kw["labels"]]
    return ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0, **kw)


def warnings_note(res) -> str:
    """One footer line saying how many warnings the run stored and the first of them ("" without warnings):
    a figure read without the run's terminal output still says that the run warned (hot tissue, grid, ...)."""
    warnings = res.warnings
    if not warnings:
        return ""
    first = warnings[0] if len(warnings[0]) <= 160 else warnings[0][:157].rstrip() + "..."
    more = f"{len(warnings)} warnings" if len(warnings) > 1 else "a warning"
    return f"The run stored {more} (report.py lists them; /provenance/warnings); the first: {first}"


def add_footer(fig, lines=(), caution: bool = True, res=None):
    """Small grey footer under the figure: notes (one per entry), the run's warnings (a count and the first, when
    `res` is given and stored any), then the caution unless caution=False.

    The text is wrapped to the figure's width and the constrained layout is
    told to keep clear of it, so it never overlaps the panels. Kept in
    fig.thermorph_footer (None when there is no footer).
    """
    s = style_of(getattr(fig, "thermorph_style", DEFAULT_STYLE))
    size = s["footer"]
    note = warnings_note(res) if res is not None else ""
    entries = list(lines) + ([note] if note else []) + ([CAUTION] if caution else [])
    fig.thermorph_footer = None
    if not entries:
        return None
    chars = _chars_per_line(fig.get_figwidth() * 72.0 - 8.0, size)
    wrapped = [w for e in entries for w in textwrap.wrap(e, chars)]
    text = fig.text(0.01, 0.004, "\n".join(wrapped), ha="left", va="bottom", fontsize=size, color="0.35",
                    linespacing=1.15)
    text.set_in_layout(False)
    height_in = (len(wrapped) * 1.15 * size + 4.0) / 72.0
    fig.get_layout_engine().set(rect=(0.0, height_in / fig.get_figheight(), 1.0,
                                      1.0 - height_in / fig.get_figheight()))
    fig.thermorph_footer = text
    return text


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
    rows_used = 0
    fontsize = style_of(getattr(ax.figure, "thermorph_style", DEFAULT_STYLE))["small"]
    x0, x1 = ax.get_xlim()
    fig = ax.figure
    width_pt = ax.get_position().width * fig.get_figwidth() * 72.0
    per_pt = (x1 - x0) / max(width_pt, 1.0)
    right_edge = [-np.inf] * len(LABEL_ROWS)
    for x, text in sorted(to_label):
        half = 0.5 * (0.6 * fontsize * len(text) + 4.0) * per_pt   # about 0.55 em per character, and a margin
        if 2.0 * half > x1 - x0:
            continue   # wider than the panel: left out (its shading stays)
        centre = min(max(x, x0 + half), x1 - half)                 # shifted inwards, never cut at an edge
        lo, hi = centre - half, centre + half
        for row, y in enumerate(LABEL_ROWS):
            if lo > right_edge[row]:
                label = ax.text(centre, y, text, transform=trans, ha="center", va="top", fontsize=fontsize,
                                color="0.3", clip_on=True)
                label.thermorph_event_label = True
                right_edge[row] = hi
                rows_used = max(rows_used, row + 1)
                break
    if not rows_used:
        return
    # Headroom: raise the top of the y axis so the label rows sit above the data: the rows' offset from the top and
    # a line of text measured on the panel's height before layout (2 lines: the layout shrinks the panel; 0.06
    # of the panel at least). A fixed 0.06 let the labels of a single-column panel cover a line at the top.
    y0, y1 = ax.get_ylim()
    height_pt = max(ax.get_position().height * fig.get_figheight() * 72.0, 1.0)
    band = min(1.0 - LABEL_ROWS[rows_used - 1] + max(0.06, 2.0 * fontsize / height_pt), 0.5)
    ax.set_ylim(y0, y0 + (y1 - y0) / (1.0 - band))


def set_time_axis(ax, res: Results, scale, label: bool = True):
    """Label the time axis, fit it to the run and put ticks at sensible multiples (time_locator)."""
    if label:
        ax.set_xlabel(f"Time ({scale[1]})")
    if res.duration > 0:
        ax.set_xlim(res.time[0] / scale[0], res.time[-1] / scale[0])
    else:  # a single output time: centre it
        ax.set_xlim(res.time[0] / scale[0] - 1.0, res.time[0] / scale[0] + 1.0)
    ax.xaxis.set_major_locator(time_locator(scale[1]))
    ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:.10g}"))
    ax.thermorph_time_scale = scale


def line_kwargs(nt: int, filled: bool = True) -> dict:
    """Markers when there are too few output times for a line (a steady solve); open ones if not filled."""
    if nt >= 2:
        return {}
    return {"marker": "o", "ms": 5} if filled else {"marker": "s", "ms": 5, "markerfacecolor": "white"}


# ---- checks -------------------------------------------------------------------------------
def text_outside(fig, tolerance_px: float = 0.5) -> list[str]:
    """Visible texts whose drawn extent leaves the figure, or leaves the panel that clips them (clipped
    text), as 'text: bbox' strings.

    Draws the figure with its own renderer (fig.canvas.get_renderer()) and
    compares every visible Text's window extent with the figure's bounding box.
    """
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    box = fig.bbox
    # Tick labels of ticks outside the view limits exist but are not drawn: leave them out.
    tick_labels, drawn = set(), set()
    for axis in fig.findobj(matplotlib.axis.Axis):
        for tick in axis.get_major_ticks() + axis.get_minor_ticks():
            tick_labels.update((id(tick.label1), id(tick.label2)))
        for tick in axis._update_ticks():
            drawn.update((id(tick.label1), id(tick.label2)))
    bad = []
    for text in fig.findobj(matplotlib.text.Text):
        if not text.get_visible() or not text.get_text().strip():
            continue
        if id(text) in tick_labels and id(text) not in drawn:
            continue
        ext = text.get_window_extent(renderer)
        if text.get_clip_on() and text.axes is not None and id(text) not in tick_labels:
            # Clipped to its axes (event labels): it must lie wholly inside them, or be wholly outside (hidden).
            ab = text.axes.bbox
            inside = (ext.x0 >= ab.x0 - tolerance_px and ext.x1 <= ab.x1 + tolerance_px
                      and ext.y0 >= ab.y0 - tolerance_px and ext.y1 <= ab.y1 + tolerance_px)
            if not inside and ab.overlaps(ext):
                bad.append(f"{text.get_text()[:60]!r}: {ext.bounds} cut by its panel {ab.bounds}")
            continue
        if (ext.x0 < box.x0 - tolerance_px or ext.y0 < box.y0 - tolerance_px or ext.x1 > box.x1 + tolerance_px
                or ext.y1 > box.y1 + tolerance_px):
            bad.append(f"{text.get_text()[:60]!r}: {ext.bounds} outside {box.bounds}")
    return bad


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
        xl = ax.get_xlabel() or (f"Time ({scale[1]})" if scale else getattr(ax, "thermorph_xlabel", ""))
        yl = ax.get_ylabel() or getattr(ax, "thermorph_ylabel", "")
        xl, yl = " ".join(xl.split()), " ".join(yl.split())   # a label broken to fit its panel: one line in the CSV
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
                rows.append([panel, name, x if isinstance(x, str) else float(x), float(y), "", xl, yl, ""])
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
                values = getattr(coll, "thermorph_cells", None)
                vlabel = getattr(coll, "thermorph_value_label", "")
                if values is None:
                    corners = coll.get_coordinates()                    # [ny+1, nx+1, 2]
                    centres = 0.25 * (corners[:-1, :-1] + corners[1:, :-1] + corners[:-1, 1:] + corners[1:, 1:])
                    grid = np.asarray(coll.get_array()).reshape(centres.shape[:2])
                    values = [(centres[j, i, 0], centres[j, i, 1], v) for (j, i), v in np.ndenumerate(grid)]
                for x, y, v in values:
                    rows.append([panel, name if not name.startswith("_") else "map",
                                 float(x), float(y), float(v), xl, yl, vlabel])
        rows += [list(r) for r in getattr(ax, "thermorph_extra_rows", [])]   # e.g. a derived body-mass column
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


def save(fig, out_dir, stem: str, res: Results | None = None, formats=FORMATS, dpi: float = PNG_DPI,
         title: str | None = None, source: str | None = None) -> list[Path]:
    """Write fig in each format (PDF, SVG, PNG at `dpi`) and its source data NAME.data.csv; return the paths.

    Saved inside the figure's preset (rc()), so fonts stay as built. The layout
    is computed once, for the first format, and then frozen, so all formats
    show the same layout.
    """
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    if res is not None:
        title = title or f"{case_title(res)}: {stem}"
        source = source or f"{res.path.name} ({res.attr('tool_version', 'unknown version')})"
    title, source = title or stem, source or ""
    creator = "thermorph postproc (thermorph_post)"
    metadata = {
        "pdf": {"Title": title, "Subject": source, "Creator": creator},
        "svg": {"Title": title, "Description": source, "Creator": creator},
        "png": {"Title": title, "Source": source, "Software": creator},
    }
    paths = []
    with rc(getattr(fig, "thermorph_style", DEFAULT_STYLE)):
        for k, ext in enumerate(formats):
            path = out_dir / f"{stem}.{ext}"
            fig.savefig(path, dpi=dpi if ext == "png" else None, metadata=metadata[ext])
            if k == 0:
                fig.set_layout_engine("none")
            paths.append(path)
    data = out_dir / f"{stem}.data.csv"
    write_source_data(fig, data)
    paths.append(data)
    if "matplotlib.pyplot" in sys.modules:   # a figure made with pyplot elsewhere: let it go
        sys.modules["matplotlib.pyplot"].close(fig)
    return paths


__all__ = [n for n in list(globals()) if not n.startswith("_") and n not in (
    "annotations", "contextlib", "csv", "sys", "textwrap", "matplotlib", "patheffects", "mtransforms", "np")]
