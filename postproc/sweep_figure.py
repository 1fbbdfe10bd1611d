#!/usr/bin/python3
"""Figures from a thermorph sweep table (PNG at 150 dpi and PDF).

    sweep_figure.py SWEEP.h5 --metric NAME [--metric NAME ...] [--x PARAM] [--lines PARAM]
                    [--heatmap] [--fix PARAM=VALUE ...] [--logx] [--logy] [--out DIR]

One parameter: the metric against it. Two: the metric against --x (default: the first swept parameter) with
one line per value of the other (--lines), or with --heatmap a colour map over both. More than two: fix the
others with --fix PARAM=VALUE (a value as in the table, e.g. --fix environment.temperature=20). Failed runs
leave gaps. Every axis names its quantity and unit. Writes DIR/STEM_METRIC.png and .pdf (STEM_METRIC_map for a
heat map; DIR: beside the table) and prints their paths. Exit code 0, or 2 for a bad file or option.

Needs numpy, h5py and matplotlib (Debian: /usr/bin/python3).
"""

from __future__ import annotations

import argparse
import re
import sys
from pathlib import Path

import h5py
import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

PNG_DPI = 150
# Okabe & Ito (2008) colour-blind-safe palette, in order of contrast on white; maps in viridis.
LINE_CYCLE = ["#0072B2", "#D55E00", "#009E73", "#E69F00", "#CC79A7", "#56B4E9", "#000000", "#F0E442"]
MARKERS = ["o", "s", "^", "D", "v", "P", "X", "*"]
plt.rcParams.update({
    "font.size": 9, "axes.titlesize": 9, "axes.labelsize": 9, "legend.fontsize": 8,
    "axes.grid": True, "grid.alpha": 0.3, "grid.linewidth": 0.5, "pdf.fonttype": 42,
})


class SweepError(Exception):
    """A bad file or option: reported on stderr with exit code 2."""


def text(value) -> str:
    return value.decode() if isinstance(value, bytes) else str(value)


def pretty_unit(unit: str) -> str:
    """Units for axis labels: degC as °C, m2 as m², 1 as no unit."""
    unit = unit.replace("degC", "°C")
    unit = re.sub(r"(?<=[a-zA-Z])2\b", "²", unit)
    unit = re.sub(r"(?<=[a-zA-Z])3\b", "³", unit)
    return "" if unit in ("", "1") else unit


def label(name: str, unit: str) -> str:
    u = pretty_unit(unit)
    return f"{name} [{u}]" if u else name


class Sweep:
    """The parameters (in sweep order) and metrics of a sweep table."""

    def __init__(self, path: Path):
        try:
            f = h5py.File(path, "r")
        except OSError as e:
            raise SweepError(f"{path}: cannot open ({e})") from e
        with f:
            if text(f.attrs.get("kind", "")) != "thermorph sweep":
                raise SweepError(f"{path}: not a thermorph sweep table (no attribute kind = 'thermorph sweep')")
            self.title = text(f.attrs.get("title", path.stem))
            self.complete = int(f.attrs.get("complete", 1)) == 1
            self.names = [text(n) for n in f.attrs["parameters"]]
            self.params, self.units = {}, {}
            for n in self.names:
                ds = f["parameters"][n]
                self.units[n] = text(ds.attrs.get("units", ""))
                data = ds[()]
                self.params[n] = np.array([text(v) for v in data]) if data.dtype.kind in "OSU" else data.astype(float)
            self.metrics = {n: (ds[()].astype(float), text(ds.attrs.get("units", "")))
                            for n, ds in f["metrics"].items() if n != "run"}  # run: the netCDF coordinate

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


def line_figure(sweep, metric, x, lines, mask, logx, logy):
    values, unit = sweep.metrics[metric]
    fig, ax = plt.subplots(figsize=(5.0, 3.4), constrained_layout=True)
    groups = [(None, mask)] if lines is None else [(v, mask & (sweep.params[lines] == v)) for v in sweep.values(lines)]
    for i, (value, m) in enumerate(groups):
        xs, ys = sweep.params[x][m], values[m]
        order = np.argsort(xs, kind="stable") if sweep.numeric(x) else np.arange(len(xs))
        name = None if lines is None else f"{lines} = {value:g} {pretty_unit(sweep.units[lines])}".rstrip() \
            if sweep.numeric(lines) else f"{lines} = {value}"
        ax.plot(xs[order], ys[order], color=LINE_CYCLE[i % len(LINE_CYCLE)], marker=MARKERS[i % len(MARKERS)],
                markersize=3.5, linewidth=1.2, label=name)
    ax.set_xlabel(label(x, sweep.units[x]))
    ax.set_ylabel(label(metric, unit))
    if logx:
        ax.set_xscale("log")
    if logy:
        ax.set_yscale("log")
    if lines is not None:
        ax.legend(frameon=False)
    return fig, ax


def edges(centres: np.ndarray, log: bool) -> np.ndarray:
    """Cell edges halfway between sorted centres (geometric halfway on a log axis)."""
    c = np.log(centres) if log else centres
    if len(c) == 1:
        e = np.array([c[0] - 0.5, c[0] + 0.5])
    else:
        mid = (c[1:] + c[:-1]) / 2
        e = np.concatenate([[c[0] - (mid[0] - c[0])], mid, [c[-1] + (c[-1] - mid[-1])]])
    return np.exp(e) if log else e


def heatmap_figure(sweep, metric, x, y, mask, logx, logy):
    values, unit = sweep.metrics[metric]
    for p in (x, y):
        if not sweep.numeric(p):
            raise SweepError(f"--heatmap needs numeric parameters; {p} holds words (use lines instead)")
    xs, ys = np.sort(sweep.values(x)), np.sort(sweep.values(y))
    grid = np.full((len(ys), len(xs)), np.nan)
    for k in np.flatnonzero(mask):
        grid[np.searchsorted(ys, sweep.params[y][k]), np.searchsorted(xs, sweep.params[x][k])] = values[k]
    fig, ax = plt.subplots(figsize=(5.2, 3.6), constrained_layout=True)
    ax.grid(False)
    mesh = ax.pcolormesh(edges(xs, logx), edges(ys, logy), np.ma.masked_invalid(grid), cmap="viridis",
                         shading="flat")
    fig.colorbar(mesh, ax=ax, label=label(metric, unit))
    ax.set_xlabel(label(x, sweep.units[x]))
    ax.set_ylabel(label(y, sweep.units[y]))
    if logx:
        ax.set_xscale("log")
    if logy:
        ax.set_yscale("log")
    return fig, ax


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("table", type=Path, help="sweep table (HDF5) written by thermorph sweep")
    parser.add_argument("--metric", action="append", required=True, help="metric to plot (repeatable)")
    parser.add_argument("--x", help="parameter on the horizontal axis (default: the first swept one)")
    parser.add_argument("--lines", help="parameter with one line per value (default: the other one of two)")
    parser.add_argument("--heatmap", action="store_true", help="colour map over two parameters")
    parser.add_argument("--fix", action="append", default=[], help="PARAM=VALUE for every further parameter")
    parser.add_argument("--logx", action="store_true")
    parser.add_argument("--logy", action="store_true")
    parser.add_argument("--out", type=Path, help="output folder (default: beside the table)")
    args = parser.parse_args(argv)
    try:
        sweep = Sweep(args.table)
        for metric in args.metric:
            if metric not in sweep.metrics:
                raise SweepError(f"--metric {metric}: not in the table (metrics: {', '.join(sorted(sweep.metrics))})")
        for p in (args.x, args.lines):
            if p is not None and p not in sweep.params:
                raise SweepError(f"{p}: not a swept parameter (parameters: {', '.join(sweep.names)})")
        fixed = {f.partition("=")[0] for f in args.fix}
        free = [n for n in sweep.names if n not in fixed]
        x = args.x or next((n for n in free if sweep.numeric(n)), free[0] if free else None)
        if x is None:
            raise SweepError("every parameter is fixed: leave one for the horizontal axis")
        others = [n for n in free if n != x]
        second = args.lines or (others[0] if len(others) == 1 else None)
        if args.heatmap and second is None:
            raise SweepError("--heatmap needs a second free parameter (--lines names it when there are several)")
        mask = select(sweep, args.fix, [x] + ([second] if second else []))
        out = args.out or args.table.parent
        out.mkdir(parents=True, exist_ok=True)
        for metric in args.metric:
            if args.heatmap:
                fig, ax = heatmap_figure(sweep, metric, x, second, mask, args.logx, args.logy)
            else:
                fig, ax = line_figure(sweep, metric, x, second, mask, args.logx, args.logy)
            title = sweep.title if sweep.complete else "INCOMPLETE SWEEP: " + sweep.title
            if args.fix:
                title += "\n" + ", ".join(args.fix)
            ax.set_title(title)
            kind = "_map" if args.heatmap else ""
            stem = re.sub(r"[^A-Za-z0-9._-]+", "_", f"{args.table.stem}_{metric}{kind}")
            for suffix in (".png", ".pdf"):
                path = out / (stem + suffix)
                fig.savefig(path, dpi=PNG_DPI)
                print(path)
            plt.close(fig)
    except SweepError as e:
        print(f"error: {e}", file=sys.stderr)
        return 2
    return 0


if __name__ == "__main__":
    sys.exit(main())
