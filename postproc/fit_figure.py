#!/usr/bin/python3
"""Figures of `thermorph fit`, `thermorph sensitivity` and `thermorph uncertainty` results (standalone).

    fit_figure.py FIT.h5 [--out DIR]          observed vs model, with a residual panel, per series (/fit)
    fit_figure.py SENS.h5 [--out DIR]         Sobol' indices with bootstrap intervals, or Morris mu*/sigma
    fit_figure.py UNC.h5 [--out DIR]          median and 5-95 % bands of every time series (/uncertainty)

Each figure is written as PNG and PDF. Model estimates for research; not veterinary or medical advice.
"""

from __future__ import annotations

import argparse
import re
import sys
import textwrap
from pathlib import Path

import h5py
import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from thermorph_post import CAUTION  # noqa: E402  (the text of models/caution.hpp)
from thermorph_post.results import Results  # noqa: E402
from thermorph_post.style import shade_events  # noqa: E402
# Okabe & Ito (2008) colour-blind-safe colours.
BLUE, VERMILLION, GREEN, ORANGE, GREY = "#0072B2", "#D55E00", "#009E73", "#E69F00", "#777777"


def text(value) -> str:
    return value.decode() if isinstance(value, bytes) else str(value)


def save(fig, out: Path, name: str) -> list[Path]:
    fig.text(0.99, 0.005, CAUTION, ha="right", va="bottom", fontsize=6, color=GREY)
    paths = []
    for ext in ("png", "pdf"):
        path = out / f"{name}.{ext}"
        fig.savefig(path, dpi=150)
        paths.append(path)
    plt.close(fig)
    return paths


def hours(seconds: np.ndarray) -> np.ndarray:
    return np.asarray(seconds) / 3600.0


def fit_figures(f: h5py.File, out: Path, stem: str) -> list[Path]:
    g = f["fit"]
    names = [text(n) for n in g["series_names"][:]]
    paths = []
    params = [text(n) for n in g["parameters/name"][:]]
    units = [text(u) for u in g["parameters/units"][:]]
    values = g["parameters/value"][:]
    nan = np.full(len(values), np.nan)
    se = g["parameters/standard_error"][:] if "standard_error" in g["parameters"] else nan
    lower = g["parameters/lower_95"][:] if "lower_95" in g["parameters"] else values - 1.96 * se
    upper = g["parameters/upper_95"][:] if "upper_95" in g["parameters"] else values + 1.96 * se
    # One line per parameter with its 95 % interval as the fit reports it (asymmetric for a log-scale parameter,
    # where "value ± SE" would mislead); all on one line, a fit of three parameters ran off both sides of the figure.
    lines = [f"{p} = {v:.4g} {'' if u == '1' else u}  (SE {e:.2g}; 95 %: {lo:.4g} .. {hi:.4g})"
             for p, v, e, u, lo, hi in zip(params, values, se, units, lower, upper)]
    warnings = [w for w in text(g.attrs.get("warnings", "")).split("\n") if w.strip()]
    for k, name in enumerate(names):
        s = g["series"][name]
        unit = text(s.attrs.get("units", ""))
        head = 0.12 * len(lines) + 0.12
        foot = 0.3 + 0.13 * sum(len(textwrap.wrap(w, 150)) for w in warnings[:3])
        fig, (top, bottom) = plt.subplots(2, 1, figsize=(7, 4.6 + head + foot), sharex=True,
                                          gridspec_kw={"height_ratios": [3, 1]})
        if "model" in s:
            top.plot(hours(s["model_time"][:]), s["model"][:], color=BLUE, lw=1.5, label="fitted model")
        top.plot(hours(s["time"][:]), s["observed"][:], "o", ms=3, color=VERMILLION, label="observed")
        # The series' full name above the panel; the axis label only its last part (a long name ran off the top).
        top.set_title(name, fontsize=8, loc="left")
        top.set_ylabel(f"{re.sub(r'^(segments[.][^.]+[.]|body[.])', '', name)} [{unit}]")
        top.legend(loc="best", fontsize=8)
        fig.suptitle("\n".join(lines), fontsize=7, x=0.01, ha="left", y=0.995, va="top")
        if warnings:
            shown = [textwrap.fill(f"fit warning: {w}", 150) for w in warnings[:3]]
            if len(warnings) > 3:
                shown.append(f"... and {len(warnings) - 3} more warnings (/fit attribute warnings)")
            fig.text(0.01, 0.03, "\n".join(shown), fontsize=5.5, color=VERMILLION, ha="left", va="bottom")
        if "residual" in s:
            bottom.axhline(0.0, color=GREY, lw=0.8)
            bottom.plot(hours(s["time"][:]), s["residual"][:], "o", ms=2.5, color=GREEN)
            rmse = s.attrs.get("rmse", np.nan)
            bottom.set_ylabel(f"model − obs.\n[{unit}]")
            bottom.set_title(f"RMSE {rmse:.3g} {unit}", fontsize=7, loc="right")
        bottom.set_xlabel("time [h]")
        # The fitted run's labelled events (a dive, an exposure) shaded as in figures.py, when the file has them.
        if "events" in f and "time" in f:
            res = Results(f.filename)
            top.set_xlim(top.get_xlim())
            shade_events(top, res, (3600.0, "h"))
            shade_events(bottom, res, (3600.0, "h"), label=False)
        height = fig.get_figheight()
        fig.tight_layout(rect=(0, foot / height, 1, 1))  # makes room for the suptitle itself
        paths += save(fig, out, f"{stem}_fit_{k}")
    return paths


def sensitivity_figures(f: h5py.File, out: Path, stem: str) -> list[Path]:
    g = f["sensitivity"]
    method = text(g.attrs.get("method", ""))
    params = [text(n) for n in g["parameters"][:]]
    metrics = [text(n) for n in g["metrics"][:]]
    paths = []
    x = np.arange(len(params))
    for m, metric in enumerate(metrics):
        fig, ax = plt.subplots(figsize=(7, 4))
        if method == "sobol":
            for offset, key, colour, lab in ((-0.18, "first", BLUE, "first order S"),
                                             (0.18, "total", VERMILLION, "total S_T")):
                v = g[key][m]
                lo, hi = g[f"{key}_low"][m], g[f"{key}_high"][m]
                ax.bar(x + offset, v, width=0.36, color=colour, label=lab,
                       yerr=[v - lo, hi - v], capsize=3)
            ax.set_ylabel("Sobol' index")
            ax.axhline(0, color=GREY, lw=0.8)
        elif method == "morris":
            ax.bar(x - 0.18, g["mu_star"][m], width=0.36, color=BLUE, label="μ*")
            ax.bar(x + 0.18, g["sigma"][m], width=0.36, color=ORANGE, label="σ")
            ax.set_ylabel(f"elementary effect [{text(g['units'][m])} per range]")
        else:  # local
            ax.bar(x, g["normalised"][m], color=BLUE, label="∂ln y / ∂ln p")
            ax.axhline(0, color=GREY, lw=0.8)
            ax.set_ylabel("normalised sensitivity")
        ax.set_xticks(x, [p.replace(".", ".\u200b") for p in params], rotation=20, ha="right", fontsize=7)
        ax.set_title(f"{method}: {metric}", fontsize=8)
        ax.legend(fontsize=8)
        fig.tight_layout()
        paths += save(fig, out, f"{stem}_{method}_{m}")
    return paths


def uncertainty_figures(f: h5py.File, out: Path, stem: str) -> list[Path]:
    g = f["uncertainty"]
    paths = []
    if "series" not in g:
        return paths
    t = hours(g["time"][:])
    for k, name in enumerate(g["series"]):
        s = g["series"][name]
        unit = text(s.attrs.get("units", ""))
        fig, ax = plt.subplots(figsize=(7, 4))
        ax.fill_between(t, s["q05"][:], s["q95"][:], color=BLUE, alpha=0.25, lw=0, label="5–95 %")
        ax.fill_between(t, s["q25"][:], s["q75"][:], color=BLUE, alpha=0.35, lw=0, label="25–75 %")
        ax.plot(t, s["q50"][:], color=BLUE, lw=1.5, label="median")
        if "base" in s:
            ax.plot(t, s["base"][:], color=VERMILLION, lw=1, ls="--", label="base case")
        ax.set_xlabel("time [h]")
        ax.set_ylabel(f"{name} [{unit}]")
        runs = int(g.attrs.get("runs_ok", 0))
        ax.set_title(f"{runs} runs, {text(g.attrs.get('design', ''))}", fontsize=8)
        ax.legend(fontsize=8)
        fig.tight_layout()
        paths += save(fig, out, f"{stem}_bands_{k}")
    return paths


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("file", type=Path)
    parser.add_argument("--out", type=Path, default=Path("."))
    args = parser.parse_args(argv)
    args.out.mkdir(parents=True, exist_ok=True)
    stem = args.file.stem
    try:
        f = h5py.File(args.file, "r")
    except OSError as e:
        print(f"error: {args.file}: {e}", file=sys.stderr)
        return 2
    with f:
        paths = []
        if "fit" in f:
            paths += fit_figures(f, args.out, stem)
        if "sensitivity" in f:
            paths += sensitivity_figures(f, args.out, stem)
        if "uncertainty" in f:
            paths += uncertainty_figures(f, args.out, stem)
        if not paths:
            print(f"error: {args.file}: no /fit, /sensitivity or /uncertainty group", file=sys.stderr)
            return 2
    for p in paths:
        print(p)
    print(f"Caution: {CAUTION}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
