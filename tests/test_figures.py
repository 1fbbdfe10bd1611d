#!/usr/bin/python3
"""Test of the publication figures and the installable package postproc/ (thermorph_post).

    /usr/bin/python3 tests/test_figures.py [PYTHON] [THERMORPH]

- Every figure type (temperatures, budget, maps, forcing, overlay, sweep lines, sweep heat map) is built at
  both style presets (single and double column) from synthetic files, and every visible text's drawn
  bounding box (fig.canvas.get_renderer(), Text.get_window_extent) lies inside the figure: no clipped text.
- The caution footer (thermorph_post.CAUTION) is on every figure by default and gone with caution=False /
  --no-caution; the figure width is the preset's (85 mm, 175 mm).
- No global Matplotlib state: importing and drawing leaves matplotlib.rcParams as they were, pyplot unused.
- Fixed colours: a segment has the same colour in every panel and whatever the selection; channels too.
- Time ticks at multiples of 6 h on a 24 h run (0, 6, 12, 18, 24; common practice, no source).
- Sweep figures: log axis for a log: range, body-mass axis and column for a size series (mass = m0 f³:
  volume scales with the cube of a length factor, exact geometry), heat map limited to the swept range.
- The long ("tidy") CSV export equals the HDF5 datasets bit for bit (read with h5py, not with postproc).
- `pip install --target DIR --no-deps --no-build-isolation --no-index ./postproc` works offline and the
  installed entry points (thermorph-figures, thermorph-export, thermorph-report, thermorph-sweep-figure,
  thermorph-fit-figure)
  run from DIR with the checkout out of reach.
- With THERMORPH: the overlay's footer names the case keys in which the runs differ and their common events are
  shaded; the README sweep draws the
  bill length along x (the parameter with most values) with ticks at the swept values, and its heat map shows
  every run's dot; the diving example's budget over time keeps metabolism readable beside the dives' spikes (a
  symmetric-log axis, said in the figure), every stored flow inside the axis; the substrate contact stored per segment equals the case's event table and the substrate is
  drawn only while some segment touches (a dive between outputs), a water line equal to it stays visible, an old
  file without the series still draws; a step of the surroundings between two outputs is drawn as a vertical jump at the step's time
  and a ramp whose ends fall between outputs from its own start to its own end (the quadruped with a step 15 -> -5
  degC at 5 min and a ramp from 21 to 29 min, 2-min outputs; forcing and temperatures), and forcings are drawn only
  where they act (the quadruped swimming from 10 to 20 min, all in water and with its head above water); a map's
  radial profile equal to an earlier one (a steady start and the output on the first step) is dashed over it, and
  the budget's flows over time are not joined across a step (the output on it holds the flows after it).
- Maps: the colour bar against the last map (also with the profile's legend outside), ending with the profile panel;
  a segment of one axial cell and (with THERMORPH) a sphere get a map of the stored temperature over time and radius.
- With THERMORPH: the forelimb's layer names along the top of the profiles do not overlap at either preset (fat and skin).
- Default map times: first, middle, last output without labelled events; with them the last output inside the first
  labelled span replaces the middle (the contact study's dive, the sample's "cold air"), and the footer says so.
Exits 1 on any failure.
"""

import csv
import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

import h5py
import numpy as np

ROOT = Path(__file__).resolve().parent.parent
POSTPROC = ROOT / "postproc"
PYTHON = sys.argv[1] if len(sys.argv) > 1 else sys.executable
EXE = sys.argv[2] if len(sys.argv) > 2 else None   # thermorph, for the run with a step of the surroundings
RC_BEFORE = None
FAILURES = []


def check(condition: bool, what: str):
    """Record a failed check (and print it) without stopping the run."""
    if not condition:
        FAILURES.append(what)
        print(f"FAIL: {what}")


def all_text(fig) -> str:
    """Every visible text of a figure, whitespace-normalised (wrapped lines joined)."""
    import matplotlib.text
    return " ".join(" ".join(t.get_text() for t in fig.findobj(matplotlib.text.Text) if t.get_visible()).split())


def write_sweep(path: Path):
    """A small synthetic sweep table in thermorph's layout: a size series (log range) x two temperatures."""
    factors = np.array([0.5, 0.5 * 4 ** (1 / 3), 0.5 * 4 ** (2 / 3), 2.0])
    temps = np.array([10.0, 30.0])
    f_col, t_col = np.repeat(factors, 2), np.tile(temps, 4)      # grid order: factor outer, temperature inner
    with h5py.File(path, "w") as f:
        f.attrs["kind"] = "thermorph sweep"
        f.attrs["title"] = "Synthetic size sweep (invented values)"
        f.attrs["complete"] = 1
        f.attrs["case"] = 'title = "x"\n[body]\nmass = "3 kg"\n'
        f.attrs["parameters"] = ["scale.body", "environment.temperature"]
        p = f.create_group("parameters")
        d = p.create_dataset("scale.body", data=f_col)
        d.attrs.update(units="1", spec="log:0.5:2:4")
        d = p.create_dataset("environment.temperature", data=t_col)
        d.attrs.update(units="degC", spec="10degC,30degC")
        m = f.create_group("metrics")
        d = m.create_dataset("body.heat_flow.convection", data=-(t_col - 38.0) * f_col ** 2)
        d.attrs.update(units="W", definition="convection heat flow into the whole body, mean over the window")
        d = m.create_dataset("body.core_temperature.final", data=37.0 + 0.01 * t_col * f_col)
        d.attrs.update(units="degC", definition="final of the core temperature over the window")
        r = f.create_group("runs")
        r.create_dataset("overrides", data=[f"body.mass={3.0 * x ** 3!r}" for x in f_col],
                         dtype=h5py.string_dtype())
    return f_col, t_col


def check_figures(tmp: Path):
    import matplotlib
    global RC_BEFORE
    RC_BEFORE = dict(matplotlib.rcParams)
    from thermorph_post import CAUTION, figures, style, sweep
    from thermorph_post.results import Results

    full, steady, day = tmp / "full.h5", tmp / "steady.h5", tmp / "day.h5"
    from thermorph_post import sample
    sample.main([str(full)])
    sample.main([str(steady), "--steady"])
    sample.main([str(day), "--hours", "24"])
    sweep_path = tmp / "sweep.h5"
    f_col, _ = write_sweep(sweep_path)
    sw = sweep.Sweep(sweep_path)

    def builders(style_name, caution):
        with Results(full) as res:
            yield "temperatures", figures.temperatures_figure(res, style=style_name, caution=caution)
            yield "budget", figures.budget_figure(res, style=style_name, caution=caution)
            for name, fig in figures.maps_figures(res, style=style_name, caution=caution).items():
                yield f"maps_{name}", fig
            yield "forcing", figures.forcing_figure(res, style=style_name, caution=caution)
        with Results(steady) as res:
            yield "steady budget", figures.budget_figure(res, style=style_name, caution=caution)
        yield "overlay", figures.overlay_figure([full, day, steady], ["A", "B", "C"], style=style_name,
                                                 caution=caution)
        mask = np.ones(len(f_col), bool)
        yield "sweep lines", sweep.line_figure(sw, "body.heat_flow.convection", "scale.body",
                                               "environment.temperature", mask, style=style_name, caution=caution)
        yield "sweep mass", sweep.line_figure(sw, "body.core_temperature.final", "body.mass",
                                              "environment.temperature", mask, style=style_name, caution=caution)
        yield "sweep map", sweep.heatmap_figure(sw, "body.heat_flow.convection", "environment.temperature",
                                                "scale.body", mask, style=style_name, caution=caution)

    kinds = set()
    for style_name in ("single", "double"):
        width_mm = style.STYLES[style_name]["width_mm"]
        for caution in (True, False) if style_name == "single" else (True,):
            for kind, fig in builders(style_name, caution):
                kinds.add(kind)
                check(fig is not None, f"{kind} ({style_name}): no figure")
                if fig is None:
                    continue
                what = f"{kind} ({style_name}, caution={caution})"
                bad = style.text_outside(fig)
                check(not bad, f"{what}: text outside the figure: {bad}")
                check(abs(fig.get_figwidth() * 25.4 - width_mm) < 0.01, f"{what}: width {fig.get_figwidth() * 25.4} mm")
                text = all_text(fig)
                check((CAUTION in text) == caution, f"{what}: caution footer {'missing' if caution else 'present'}")
                check(("veterinary" in text) == caution, f"{what}: caution words with caution={caution}")
                # Multi-panel figures carry panel letters a, b, ... in bold (mathtext) at the left of each title.
                titled = [ax for ax in fig.axes if getattr(ax, "thermorph_title", None) and ax.thermorph_title[0]]
                if len(titled) > 1:
                    got = [ax.thermorph_title[0] for ax in titled]
                    check(got == list("abcdefgh"[:len(got)]), f"{what}: panel letters {got}")
    check(kinds >= {"temperatures", "budget", "maps_left_ear", "forcing", "overlay", "sweep lines", "sweep map"},
          f"figure types drawn: {sorted(kinds)}")

    # The CLI writes the footer by default and leaves it out with --no-caution (SVG keeps text as text).
    for extra, expected in (((), True), (("--no-caution",), False)):
        out = tmp / f"cli{len(extra)}"
        code = figures.main([str(full), "--out", str(out), "--only", "temperatures,forcing", "--formats", "svg",
                             "--style", "single", *extra])
        check(code == 0, f"figures.main {extra}: exit {code}")
        for stem in ("temperatures", "forcing"):
            import xml.etree.ElementTree as ET
            svg = " ".join(" ".join(ET.parse(out / f"{stem}.svg").getroot().itertext()).split())
            check((CAUTION in svg) == expected, f"{stem}.svg {extra}: caution expected {expected}")
    code = sweep.main([str(sweep_path), "--metric", "body.heat_flow.convection", "--out", str(tmp / "sw"),
                       "--formats", "svg,png", "--dpi", "120"])
    check(code == 0, f"sweep main exit {code}")
    stem = tmp / "sw" / "sweep_body.heat_flow.convection"
    for ext in (".svg", ".png", ".data.csv"):
        check(Path(str(stem) + ext).is_file(), f"sweep figure {ext} missing")

    # Fixed colours: the tail has one colour in both segment panels, also when drawn alone.
    with Results(full) as res:
        def colours(fig, panel):
            ax = next(a for a in fig.axes if a.get_label() == panel)
            return {ln.get_label(): matplotlib.colors.to_hex(ln.get_color()) for ln in ax.get_lines()
                    if not ln.get_label().startswith("_")}
        fig_all = figures.temperatures_figure(res)
        fig_tail = figures.temperatures_figure(res, segments=["tail"])
        a = colours(fig_all, "segment mean tissue temperatures")
        b = colours(fig_all, "segment mean surface temperatures")
        c = colours(fig_tail, "segment mean tissue temperatures")
        check(a["tail"] == b["tail"] == c["tail"], f"tail colours differ: {a['tail']}, {b['tail']}, {c['tail']}")
        check(len({a[n] for n in ("trunk", "left_ear", "tail")}) == 3, f"segment colours not distinct: {a}")
        body = colours(fig_all, "body temperatures")
        check(not set(body.values()) & set(a.values()), f"body and segment colours shared: {body} {a}")
        budget = figures.budget_figure(res)
        bars = next(ax for ax in budget.axes if ax.get_label() == "segment budget")
        lines = colours(budget, "whole-body heat flows")
        for cont in bars.containers:
            name = cont.get_label()
            if name in lines and cont.patches:
                check(matplotlib.colors.to_hex(cont.patches[0].get_facecolor()) == lines[name],
                      f"channel {name}: bar and line colours differ")

    # A 24 h run: ticks at 0, 6, 12, 18, 24 h.
    with Results(day) as res:
        fig = figures.temperatures_figure(res)
        ax = fig.axes[-1]
        fig.canvas.draw()
        ticks = [t for t in ax.get_xticks() if ax.get_xlim()[0] - 1e-9 <= t <= ax.get_xlim()[1] + 1e-9]
        check(list(ticks) == [0, 6, 12, 18, 24], f"24 h ticks {ticks}")
        check(ax.get_xlabel() == "Time (h)", f"24 h axis label {ax.get_xlabel()!r}")

    # Sweep: log axis from the log: spec, body mass m0 f^3 on the top axis and in the data.
    fig = sweep.line_figure(sw, "body.heat_flow.convection", "scale.body", "environment.temperature",
                            np.ones(len(f_col), bool))
    ax = fig.axes[0]
    check(ax.get_xscale() == "log", f"log range drawn on a {ax.get_xscale()} axis")
    check(ax.get_xlabel().startswith("Body size factor"), f"readable x label {ax.get_xlabel()!r}")
    check(" ".join(ax.get_ylabel().split()) == "Convection heat flow, whole body (W; positive into the body)",
          f"readable y label {ax.get_ylabel()!r}")
    mass_rows = {round(r[2], 12): r[4] for r in style.source_data_rows(fig) if r[1] == "body mass"}
    for fx in np.unique(f_col):
        check(abs(mass_rows.get(round(fx, 12), np.nan) - 3.0 * fx ** 3) < 1e-12, f"body mass at f = {fx}")
    leg = ax.get_legend()
    check(leg is not None and leg.get_bbox_to_anchor().x0 >= ax.bbox.x1 - 1, "sweep legend not outside the axes")
    fig = sweep.heatmap_figure(sw, "body.heat_flow.convection", "environment.temperature", "scale.body",
                               np.ones(len(f_col), bool))
    ax = fig.axes[0]
    check(tuple(ax.get_xlim()) == (10.0, 30.0), f"heat map x range {ax.get_xlim()} beyond the swept 10..30")
    check(np.allclose(ax.get_ylim(), (0.5, 2.0), rtol=1e-12), f"heat map y range {ax.get_ylim()} beyond 0.5..2")

    # Failed runs (no metric values) are named under the figure, not silently left out (the synthetic sweep with
    # its two smallest size factors at 10 degC marked failed, their metrics NaN).
    failed_path = tmp / "sweep_failed.h5"
    write_sweep(failed_path)
    with h5py.File(failed_path, "r+") as f:
        status = np.array(["ok"] * len(f_col), dtype=object)
        status[[0, 2]] = "failed"
        f["runs"].create_dataset("status", data=status, dtype=h5py.string_dtype())
        for name in f["metrics"]:
            values = f["metrics"][name][()]
            values[[0, 2]] = np.nan
            f["metrics"][name][...] = values
    sw_failed = sweep.Sweep(failed_path)
    for kind, fig in (("line", sweep.line_figure(sw_failed, "body.heat_flow.convection", "scale.body", None,
                                                 np.ones(len(f_col), bool))),
                      ("map", sweep.heatmap_figure(sw_failed, "body.heat_flow.convection", "environment.temperature",
                                                   "scale.body", np.ones(len(f_col), bool)))):
        footer = " ".join(t.get_text() for t in fig.texts)
        check("2 of 8 runs failed, not drawn:" in footer, f"sweep {kind}: failed runs not named: {footer!r}")
        check("0.5 (failed)" in footer and "0.7937 (failed)" in footer,
              f"sweep {kind}: the failed runs' size factors (0.5, 0.7937) missing: {footer!r}")
    fig = sweep.line_figure(sw, "body.heat_flow.convection", "scale.body", None, np.ones(len(f_col), bool))
    check("not drawn" not in " ".join(t.get_text() for t in fig.texts), "a sweep without failures names none")

    # No global state: rcParams as before, pyplot never imported.
    after = dict(matplotlib.rcParams)
    changed = [k for k in RC_BEFORE if str(RC_BEFORE[k]) != str(after.get(k))]
    check(not changed, f"global rcParams changed: {changed[:8]}")
    check("matplotlib.pyplot" not in sys.modules, "pyplot imported by thermorph_post")
    return full


def check_tidy(full: Path, tmp: Path):
    """The long CSV against the HDF5 file read with h5py: every value of every time series, bit for bit."""
    from thermorph_post import export
    out = tmp / "tidy.csv"
    check(export.main([str(full), "--tidy", str(out)]) == 0, "export --tidy failed")
    with open(out, newline="") as fh:
        rows = list(csv.reader(fh))
    check(rows[0] == ["time", "segment", "quantity", "value", "unit"], f"tidy header {rows[0]}")
    table = {}
    for t, seg, q, v, u in rows[1:]:
        table[(seg, q, float(t))] = (float(v), u)
    with h5py.File(full, "r") as f:
        time = f["time"][()]
        temp = f["segments/left_ear/temperature"][()]
        units = f["segments/left_ear/temperature"].attrs["units"]
        for k in (0, 37, len(time) - 1):
            got = table.get(("left_ear", "temperature[z=3,r=5]", time[k]))
            check(got is not None and got[0] == temp[k, 3, 5] and got[1] == units,
                  f"tidy temperature[z=3,r=5] at {time[k]}: {got} vs {temp[k, 3, 5]!r}")
        conv = f["body/heat_flow/convection"][()]
        same = all(table[("body", "heat_flow.convection", time[k])][0] == conv[k] for k in range(len(time)))
        check(same, "tidy body convection differs from the HDF5 values")
        surf = f["segments/tail/surface_temperature"][()]
        check(table[("tail", "surface_temperature[z=2]", time[5])][0] == surf[5, 2], "tidy tail surface")
        check(table[("environment", "temperature", time[70])][0] == f["environment/temperature"][70], "tidy env")
        # One row per time and cell of every time series: count them from the file.
        n = 0

        def count(name, obj):
            nonlocal n
            parts = name.split("/")
            static = parts[0] == "events" or parts[-1] == "time" or (
                len(parts) == 3 and parts[0] == "segments" and parts[2] in ("radius", "axial", "layer", "volume"))
            if isinstance(obj, h5py.Dataset) and not static and obj.shape and obj.shape[0] == len(time):
                n += obj.size
        f.visititems(count)
        check(len(rows) - 1 == n, f"tidy rows {len(rows) - 1}, expected {n}")


def check_install(tmp: Path, full: Path, sweep_path: Path):
    """pip install into a target directory, offline, then run the entry points from there."""
    src = tmp / "src"
    shutil.copytree(POSTPROC, src, ignore=shutil.ignore_patterns("__pycache__", "build", "*.egg-info"))
    target = tmp / "site"
    proc = subprocess.run([PYTHON, "-m", "pip", "install", "--quiet", "--no-deps", "--no-build-isolation",
                           "--no-index", "--disable-pip-version-check", "--target", str(target), str(src)],
                          capture_output=True, text=True)
    check(proc.returncode == 0, f"pip install --target failed:\n{proc.stdout}\n{proc.stderr}")
    if proc.returncode != 0:
        return
    env = dict(os.environ, PYTHONPATH=str(target))
    away = tmp / "elsewhere"
    away.mkdir()
    proc = subprocess.run([PYTHON, "-c", "import thermorph_post, thermorph_post.figures, thermorph_post.scripts.report"
                           " as r; print(thermorph_post.__file__); print(r.__file__)"],
                          capture_output=True, text=True, env=env, cwd=away)
    check(proc.returncode == 0 and all(line.startswith(str(target)) for line in proc.stdout.split()),
          f"installed import: {proc.stdout} {proc.stderr}")
    scripts = {"thermorph-figures": [str(full), "--out", str(tmp / "inst"), "--only", "budget", "--formats", "png"],
               "thermorph-export": [str(full), "--tidy", str(tmp / "inst" / "t.csv")],
               "thermorph-report": [str(full), "--window", "1h,2h"],
               "thermorph-sweep-figure": [str(sweep_path), "--metric", "body.heat_flow.convection", "--out",
                                          str(tmp / "inst"), "--formats", "png"],
               "thermorph-fit-figure": ["--help"]}   # on a fit: tests/test_install.sh
    for name, args in scripts.items():
        exe = target / "bin" / name
        check(exe.is_file(), f"entry point {exe} not installed")
        if exe.is_file():
            proc = subprocess.run([PYTHON, str(exe), *args], capture_output=True, text=True, env=env, cwd=away)
            check(proc.returncode == 0, f"{name}: exit {proc.returncode}\n{proc.stderr[-800:]}")
    check((tmp / "inst" / "budget.png").is_file() and (tmp / "inst" / "t.csv").is_file(), "installed outputs")


def _drawn_at(x, y, t):
    """Value of a drawn polyline (x ascending, a repeated x a vertical jump) at t, away from its jumps; NaN where
    the line is not drawn (a NaN end) or t lies outside it."""
    for k in range(len(x) - 1):
        if x[k] <= t <= x[k + 1] and x[k + 1] > x[k]:
            return y[k] + (y[k + 1] - y[k]) * (t - x[k]) / (x[k + 1] - x[k])
    return np.nan


def check_steps(tmp: Path, exe: str):
    """A step of the surroundings between two outputs is drawn as a vertical jump at the step's time, a ramp from its
    own start to its own end. The quadruped with a step 15 -> -5 degC at 5 min and a ramp -5 -> -15 degC from 21 to
    29 min, 2-min outputs: the step and both ends of the ramp fall between outputs (4|6, 20|22, 28|30 min). The
    reference is the timeline the case sets (--set below; README: steps at their times, ramps linear): the drawn
    line must equal it at every 10 s away from the step (an earlier version drew the ramp's corners at the outputs
    around them, 0.625 K off at 21 and 29 min). Read from the plotted numbers (.data.csv) of the forcing figure and
    of the temperatures figure's surface panel. Common practice, no source."""
    from thermorph_post import figures
    h5 = tmp / "step.h5"
    events = ('events=[{ at = "5 min", environment = { temperature = "-5 degC" } }, '
              '{ at = "21 min", ramp = "8 min", environment = { temperature = "-15 degC" } }]')
    proc = subprocess.run([exe, "run", str(ROOT / "cases" / "quadruped.toml"), "--set", events,
                           "--set", 'run.output_interval="2 min"', "-o", str(h5)], capture_output=True, text=True)
    check(proc.returncode == 0, f"quadruped with a step: exit {proc.returncode}\n{proc.stderr[-800:]}")
    if proc.returncode != 0:
        return

    def exact(t):   # the case's timeline [degC] at t [s]
        if t < 300.0:
            return 15.0
        if t < 1260.0:
            return -5.0
        return -5.0 - 10.0 * min(t - 1260.0, 480.0) / 480.0

    out = tmp / "steps"
    code = figures.main([str(h5), "--out", str(out), "--only", "temperatures,forcing", "--formats", "png"])
    check(code == 0, f"figures on the stepped run: exit {code}")
    for stem, panel in (("forcing", "forcing: temperatures of the surroundings"),
                        ("temperatures", "segment mean surface temperatures")):
        with open(out / f"{stem}.data.csv", newline="") as fh:
            rows = [r for r in csv.DictReader(fh) if r["panel"] == panel and r["series"].split(" (")[0] == "air"]
        what = f"{stem}: air"
        check(bool(rows) and all(r["x_label"] == "Time (min)" for r in rows), f"{what}: no rows or not in minutes")
        if not rows:
            continue
        x = np.array([60.0 * float(r["x"]) for r in rows])   # s
        y = np.array([float(r["y"]) for r in rows])          # degC
        check(bool(np.all(np.diff(x) >= 0.0)), f"{what}: times not in order")
        at = np.flatnonzero(x == 300.0)
        check(len(at) == 2 and list(y[at]) == [15.0, -5.0], f"{what}: no jump 15 -> -5 degC at 300 s: {y[at]}")
        check(not np.any((y > -5.0) & (y < 15.0)), f"{what}: values between the two sides of the step")
        probe = [t for t in np.arange(0.0, 3600.0 + 1.0, 10.0) if t != 300.0]
        worst = max(abs(_drawn_at(x, y, t) - exact(t)) for t in probe)
        check(worst < 1e-9, f"{what}: drawn line off the case's timeline by {worst:.3g} K (ramp corners at 21 and "
                            f"29 min: {_drawn_at(x, y, 1260.0):.6g}, {_drawn_at(x, y, 1740.0):.6g} degC)")


def check_immersion(tmp: Path, exe: str):
    """Forcings drawn only where they act. The quadruped swims from 10 to 20 min (medium water, 10 degC, 0.2 m/s;
    back to air at 15 degC after), 1-min outputs. Every segment in water: radiation, sun and evaporation act in air
    only and the air's temperature and wind touch nothing (README, "The medium and immersion"), so the air, wind,
    radiant, sky and humidity lines have no point strictly inside the swim, the water and current lines no point
    outside it, the swim is shaded with a legend entry, and the footer says on what each acts. With the head held
    above water (segments.1.surface.immersion = never) the air lines go on through the swim (they act on the head)
    and the footer says so. Common practice, no source."""
    from thermorph_post import figures
    from thermorph_post.results import Results
    swim = ('events=[{ at = "10 min", environment = { medium = "water", temperature = "10 degC", speed = "0.2 m/s" } },'
            ' { at = "20 min", environment = { medium = "air", temperature = "15 degC", speed = "0 m/s" } }]')
    for variant, extra in (("all in water", []), ("head above water", ["--set", 'segments.1.surface.immersion="never"'])):
        h5 = tmp / f"swim{len(extra)}.h5"
        proc = subprocess.run([exe, "run", str(ROOT / "cases" / "quadruped.toml"), "--set", swim,
                               "--set", 'run.output_interval="1 min"', *extra, "-o", str(h5)],
                              capture_output=True, text=True)
        check(proc.returncode == 0, f"swimming quadruped ({variant}): exit {proc.returncode}\n{proc.stderr[-800:]}")
        if proc.returncode != 0:
            continue
        with Results(h5) as res:
            fig = figures.forcing_figure(res)
            temps = figures.temperatures_figure(res)
        lines = {ln.get_label(): ln for ax in fig.axes for ln in ax.get_lines() if not ln.get_label().startswith("_")}
        footer = " ".join(fig.thermorph_footer.get_text().split())

        def times(name):   # [s] of the drawn points of the first line whose label starts with `name`
            ln = next((v for k, v in lines.items() if k.split(" (")[0] == name or name in k), None)
            if ln is None:
                return None
            x, y = np.asarray(ln.get_xdata(), float) * 60.0, np.asarray(ln.get_ydata(), float)
            return x[np.isfinite(y)]

        for name in ("air", "radiant surroundings", "wind", "relative humidity"):
            x = times(name)
            if variant == "all in water":
                check(x is not None and not np.any((x > 600.0) & (x < 1200.0)),
                      f"{variant}: {name} drawn while every segment is in water: {x[(x > 600) & (x < 1200)] if x is not None else 'no line'}")
                check(x is not None and np.any(x < 600.0) and np.any(x > 1200.0), f"{variant}: {name} not drawn in air")
            elif name != "wind":   # wind: 0 m/s in air and the air above the swim still: its panel is left out
                check(x is not None and np.any((x > 600.0) & (x < 1200.0)),
                      f"{variant}: {name} not drawn during the swim though it acts on the head")
        for name in ("water", "water current"):
            x = times(name)
            check(x is not None and x.size and x.min() >= 600.0 and x.max() <= 1200.0,
                  f"{variant}: {name} drawn outside the swim: {x}")
        spans = [p for ax in fig.axes for p in ax.patches if p.get_label().startswith("every segment in water")]
        if variant == "all in water":
            check(len(spans) == 1, f"{variant}: no legend entry for the shaded swim")
            check("every segment while the medium is air; none (not drawn) while the medium is water" in footer,
                  f"{variant}: footer does not say the air acts on nothing in water: {footer!r}")
            check("none (not drawn) while the medium is air; every segment while the medium is water" in footer,
                  f"{variant}: footer does not say where the water acts: {footer!r}")
        else:
            check(not spans, f"{variant}: swim shaded as every segment in water though the head is in air")
            check("every segment while the medium is air; head while the medium is water" in footer,
                  f"{variant}: footer does not name the head for the air during the swim: {footer!r}")
            check("trunk, forelegs ×2, hindlegs ×2, tail, ears ×2 while the medium is water" in footer,
                  f"{variant}: footer does not name the segments in the water: {footer!r}")
        ax_s = next(ax for ax in temps.axes if ax.get_label() == "segment mean surface temperatures")
        air = next((ln for ln in ax_s.get_lines() if ln.get_label() == "air"), None)
        x = np.asarray(air.get_xdata(), float)[np.isfinite(np.asarray(air.get_ydata(), float))] * 60.0 \
            if air is not None else np.array([])
        inside = bool(np.any((x > 600.0) & (x < 1200.0)))
        check(x.size and inside == (variant != "all in water"),
              f"{variant}: temperatures figure's air line {'drawn' if inside else 'not drawn'} during the swim")


def check_equal_profiles(tmp: Path, exe: str):
    """A radial profile equal to one drawn already must stay visible: from a steady start the temperatures at an
    output on the first step of the surroundings are the steady ones (the step acts after it), so the profiles at
    0 and at the step coincide; the later one is dashed over a wider earlier one and says so in the legend, a
    different one is neither. Common practice, no source."""
    from thermorph_post import figures
    from thermorph_post.results import Results
    h5 = tmp / "steady_step.h5"
    proc = subprocess.run([exe, "run", str(ROOT / "cases" / "limb_cooling.toml"), "-q", "--set", "run.initial=steady",
                           "--set", 'run.duration="20 min"', "--set", 'run.output_interval="2 min"', "--set",
                           'events=[{ at = "10 min", environment = { temperature = "15 degC" } }]', "-o", str(h5)],
                          capture_output=True, text=True)
    check(proc.returncode == 0, f"steady start and step: exit {proc.returncode}\n{proc.stderr[-800:]}")
    if proc.returncode != 0:
        return
    with Results(h5) as res:
        name = res.segment_names()[0]
        fig = figures.maps_figures(res, segments=[name], times=[0.0, 600.0, 1200.0])[name]
    ax = next(a for a in fig.axes if a.get_label() == "radial profiles at mid-length")
    lines = {ln.get_label().split(" (")[0]: ln for ln in ax.get_lines()}
    first, step, last = lines.get("t = 0 min"), lines.get("t = 10 min"), lines.get("t = 20 min")
    check(None not in (first, step, last), f"steady start and step: profile lines {sorted(lines)}")
    if None in (first, step, last):
        return
    check(np.allclose(first.get_ydata(), step.get_ydata(), rtol=0.0, atol=1e-6)
          and not np.allclose(first.get_ydata(), last.get_ydata(), rtol=0.0, atol=1e-3),
          "steady start and step: the test's premise (equal profiles at 0 and 10 min, a different one at 20) fails")
    check(step.get_linestyle() not in ("-", "solid") and first.get_linewidth() > step.get_linewidth()
          and "equal to t = 0 min" in step.get_label(),
          f"steady start and step: the 10-min profile hides the 0-min one (style {step.get_linestyle()!r}, widths "
          f"{first.get_linewidth()} / {step.get_linewidth()}, label {step.get_label()!r})")
    check(last.get_linestyle() in ("-", "solid") and "equal" not in last.get_label(),
          f"steady start and step: the 20-min profile marked equal: {last.get_label()!r}")

    # The budget over time: the flows jump at the step (10 min) and the output there holds those after it; no
    # line may join the 8-min output to the 10-min one (a ramp beginning before the event).
    with Results(h5) as res:
        fig = figures.budget_figure(res)
    ax = next(a for a in fig.axes if a.get_label() == "whole-body heat flows")
    for ln in ax.get_lines():
        if ln.get_label().startswith("_"):
            continue
        x = np.asarray(ln.get_xdata(), float)
        y = np.asarray(ln.get_ydata(), float)
        joined = [k for k in range(len(x) - 1) if np.isfinite(y[k]) and np.isfinite(y[k + 1])
                  and x[k] < 10.0 <= x[k + 1]]
        check(not joined, f"steady start and step: budget line {ln.get_label()!r} joins {x[joined[0]]:g} and "
                          f"{x[joined[0] + 1]:g} min across the step at 10 min" if joined else "")
        check(8.0 in x and 10.0 in x, f"steady start and step: budget line {ln.get_label()!r} lost outputs: {x}")
    footer = " ".join(fig.thermorph_footer.get_text().split())
    check("lines broken at the timeline's step" in footer, f"steady start and step: budget footer {footer!r}")


def check_contact_events(tmp: Path, exe: str):
    """A segment that touches the substrate only after an event (`[[events]] surface = { NAME = { contact_fraction
    = F } }`, README "Timelines") is a target of the substrate forcing; without the event nothing touches it.
    Common practice, no source."""
    from thermorph_post.results import Results
    lie = ('events=[{ at = "10 min", surface = { trunk = { contact_fraction = 0.2 } }, '
           'environment = { substrate_temperature = "2 degC" } }]')
    for variant, extra in (("lying down at 10 min", ["--set", lie]), ("standing", [])):
        h5 = tmp / f"lie{len(extra)}.h5"
        proc = subprocess.run([exe, "run", str(ROOT / "cases" / "quadruped.toml"), *extra, "-q",
                               "--set", 'environment.substrate_conductance="50 W/(m2 K)"',
                               "--set", 'run.duration="20 min"', "-o", str(h5)], capture_output=True, text=True)
        check(proc.returncode == 0, f"quadruped {variant}: exit {proc.returncode}\n{proc.stderr[-800:]}")
        if proc.returncode != 0:
            continue
        with Results(h5) as res:
            targets = res.forcing_targets("substrate", "air")
        expected = ["trunk"] if extra else []
        check(targets == expected, f"quadruped {variant}: substrate acts on {targets}, expected {expected}")


def check_wetting_events(tmp: Path, exe: str):
    """A segment wet only after an event (`[[events]] surface = { NAME = { wetted_fraction = W } }`, README
    "Timelines") is a target of the humidity forcing, and its /segments/NAME/wetted_fraction series holds the step;
    without the event only the breathing segment is. Common practice, no source."""
    from thermorph_post.results import Results
    lick = 'events=[{ at = "10 min", surface = { trunk = { wetted_fraction = 0.2 } } }]'
    for variant, extra in (("licked at 10 min", ["--set", lick]), ("dry", [])):
        h5 = tmp / f"lick{len(extra)}.h5"
        proc = subprocess.run([exe, "run", str(ROOT / "cases" / "quadruped.toml"), *extra, "-q",
                               "--set", 'run.duration="20 min"', "-o", str(h5)], capture_output=True, text=True)
        check(proc.returncode == 0, f"quadruped {variant}: exit {proc.returncode}\n{proc.stderr[-800:]}")
        if proc.returncode != 0:
            continue
        with Results(h5) as res:
            targets = [t for t in res.forcing_targets("humidity", "air") if "breathing" not in t]
        check(targets == (["trunk"] if extra else []), f"quadruped {variant}: humidity acts on {targets}")
        with h5py.File(h5, "r") as f:
            stored = "/segments/trunk/wetted_fraction" in f
            if extra and stored:
                t, w = f["/time"][:], f["/segments/trunk/wetted_fraction"][:]
                check(np.array_equal(w, np.where(t < 600.0, 0.0, 0.2)), f"quadruped {variant}: wetted_fraction {w}")
        check(stored == bool(extra), f"quadruped {variant}: /segments/trunk/wetted_fraction stored: {stored}")


#: The contact study's timeline (the events of check_contact_series), independent of thermorph: the legs stand on
#: the substrate (contact 0.1) and leave it for a dive from 10.5 to 20 min (between outputs: 1-min outputs), stand
#: again in air, and wade (still standing) in water at the substrate's temperature from 30 to 40 min.
CONTACT_DIVE, CONTACT_BACK, WADE_START, WADE_END = 630.0, 1200.0, 1800.0, 2400.0


def _contact_expected(name: str, t: float) -> float:
    """Contact fraction of segment `name` at output t [s] from the case's own event table (the value after a step
    at an output time; README, "Timelines": steps)."""
    if name not in ("forelegs", "hindlegs"):
        return 0.0
    return 0.0 if CONTACT_DIVE <= t < CONTACT_BACK else 0.1


def check_contact_series(tmp: Path, exe: str):
    """Substrate contact stored as a time series (/segments/NAME/contact_fraction, in_water) and drawn only while some
    segment touches: the quadruped's legs on a 10 degC substrate, a dive from 10.5 to 20 min (every contact 0 by
    `surface = { all = ... }`), standing again, then wading in 10 degC water from 30 to 40 min still standing. The
    stored series equal the event table above at every output (h5py, not the package); the forcing figure's substrate
    line has no point strictly inside the dive and is drawn before and after it up to the dive's own times; while
    wading the water line (equal to the substrate's) is not hidden under it; a file without the series (written
    before 2026-12-05: the datasets deleted) is read with the static value and still draws. Common practice, no
    source."""
    import h5py
    from thermorph_post import figures
    from thermorph_post.results import Results
    legs = "{ forelegs = { contact_fraction = 0.1 }, hindlegs = { contact_fraction = 0.1 } }"
    events = (f'events=[{{ at = {CONTACT_DIVE}, label = "dive", span = {CONTACT_BACK - CONTACT_DIVE}, '
              'environment = { medium = "water", temperature = "10 degC", speed = "0.2 m/s" }, surface = { all = { contact_fraction = 0 } } },'
              f' {{ at = {CONTACT_BACK}, environment = {{ medium = "air", temperature = "15 degC", speed = "0 m/s" }}, surface = {legs} }},'
              f' {{ at = {WADE_START}, environment = {{ medium = "water", temperature = "10 degC", speed = "0.2 m/s" }} }},'
              f' {{ at = {WADE_END}, environment = {{ medium = "air", temperature = "15 degC", speed = "0 m/s" }} }}]')
    h5 = tmp / "contact_series.h5"
    proc = subprocess.run([exe, "run", str(ROOT / "cases" / "quadruped.toml"), "-q", "--set", events,
                           "--set", "segments.forelegs.surface.contact_fraction=0.1",
                           "--set", "segments.hindlegs.surface.contact_fraction=0.1",
                           "--set", 'environment.substrate_conductance="50 W/(m2 K)"',
                           "--set", 'environment.substrate_temperature="10 degC"',
                           "--set", 'run.output_interval="1 min"', "-o", str(h5)], capture_output=True, text=True)
    check(proc.returncode == 0, f"contact study: exit {proc.returncode}\n{proc.stderr[-800:]}")
    if proc.returncode != 0:
        return
    with h5py.File(h5, "r") as f:
        t = f["time"][()]
        for name in ("trunk", "forelegs", "hindlegs", "tail"):
            path = f"segments/{name}/contact_fraction"
            check(path in f, f"contact study: {path} not stored")
            if path not in f:
                continue
            expected = np.array([_contact_expected(name, x) for x in t])
            stored = f[path][()]
            check(np.array_equal(stored, expected), f"contact study: {path} != the event table at "
                                                    f"{t[stored != expected]} s")
            wet = np.array([1.0 if CONTACT_DIVE <= x < CONTACT_BACK or WADE_START <= x < WADE_END else 0.0 for x in t])
            path = f"segments/{name}/in_water"
            check(path in f and np.array_equal(f[path][()], wet), f"contact study: {path} != the event table")

    try:   # the netCDF view (README, "Results (HDF5)"): the series on the segment's own time coordinate
        import xarray as xr
        with xr.open_dataset(h5, group="/segments/forelegs", engine="h5netcdf") as ds:
            check(ds["contact_fraction"].dims == ("time",) and float(ds["contact_fraction"].sel(time=900.0)) == 0.0
                  and float(ds["contact_fraction"].sel(time=1200.0)) == 0.1, "contact study: xarray view of contact")
    except ImportError:
        print("test_figures: xarray not installed: the netCDF view of the contact series not checked")

    # Map titles name what the segment was in at each moment: in water or air, its contact, the dive (labelled
    # event) under way, per the event table (the value after a step at an output, as stored).
    times = [300.0, 900.0, 1200.0, 2100.0, 3000.0]
    with Results(h5) as res:
        maps = figures.maps_figures(res, segments=["forelegs"], times=times)
    titles = {ax.get_label(): ax.thermorph_title[1] for ax in maps["forelegs"].axes if ax.get_label().startswith("map at")}
    for t in times:
        wet = CONTACT_DIVE <= t < CONTACT_BACK or WADE_START <= t < WADE_END
        f = _contact_expected("forelegs", t)
        want = ["in water" if wet else "in air", f"contact {100 * f:.3g} %" if f else "no contact"]
        want += ["dive"] if CONTACT_DIVE <= t < CONTACT_BACK else []
        title = " ".join(titles.get(f"map at t = {t:.10g} s", "").split())
        check(title.endswith(": " + ", ".join(want)), f"contact study: map title at {t:g} s {title!r}, expected {want}")
    footer = " ".join(maps["forelegs"].thermorph_footer.get_text().split())
    check("20 min: an output on a step" in footer, f"contact study: maps footer does not flag the step: {footer!r}")
    # Without --times the maps show the tissue inside the first labelled span (the dive, 10.5 to 20 min): the first
    # output, the last output before the dive ends (the event table's, not thermorph's), the last output; the
    # footer says so. The first and last outputs are in air.
    with Results(h5) as res:
        out = np.asarray(res.time, float)
        maps = figures.maps_figures(res, segments=["forelegs"])
    inside = out[(out > CONTACT_DIVE) & (out < CONTACT_BACK)].max()
    titles = {ax.get_label(): " ".join(ax.thermorph_title[1].split()) for ax in maps["forelegs"].axes
              if ax.get_label().startswith("map at")}
    want = [f"map at t = {x:.10g} s" for x in (out[0], inside, out[-1])]
    check(sorted(titles) == sorted(want), f"contact study: default map times {sorted(titles)}, expected {want}")
    check(titles.get(want[1], "").endswith(": in water, no contact, dive"),
          f"contact study: default middle map not in the dive: {titles.get(want[1])!r}")
    footer = " ".join(maps["forelegs"].thermorph_footer.get_text().split())
    check("Map times (default)" in footer and "(dive, " in footer,
          f"contact study: maps footer does not say the default times: {footer!r}")

    def substrate_and_water(path):
        with Results(path) as res:
            fig = figures.forcing_figure(res)
        lines = {ln.get_label().split(" (")[0]: ln for ax in fig.axes for ln in ax.get_lines()}
        return fig, lines.get("substrate"), lines.get("water")

    fig, sub, water = substrate_and_water(h5)
    check(sub is not None and water is not None, "contact study: no substrate or water line")
    if sub is None or water is None:
        return
    x = np.asarray(sub.get_xdata(), float) * 60.0
    y = np.asarray(sub.get_ydata(), float)
    drawn = x[np.isfinite(y)]
    check(not np.any((drawn > CONTACT_DIVE) & (drawn < CONTACT_BACK)),
          f"contact study: substrate drawn during the dive at {drawn[(drawn > CONTACT_DIVE) & (drawn < CONTACT_BACK)]} s")
    check(CONTACT_DIVE in drawn and CONTACT_BACK in drawn and drawn.min() == 0.0 and drawn.max() == 3600.0,
          f"contact study: substrate not drawn up to the dive's start and from its end: {drawn}")
    # While wading the two lines coincide (10 degC): both must show, the upper one dashed over a wider lower one,
    # or one line labelled with both names.
    xw = np.asarray(water.get_xdata(), float) * 60.0
    wading = np.isfinite(np.asarray(water.get_ydata(), float)) & (xw > WADE_START) & (xw < WADE_END)
    check(bool(np.any(wading)), "contact study: water not drawn while wading")
    if water is not sub:
        upper, lower = (sub, water) if sub.get_zorder() >= water.get_zorder() else (water, sub)
        dashed = upper.get_linestyle() not in ("-", "solid")
        check(dashed and lower.get_linewidth() > upper.get_linewidth() and "water" in sub.get_label(),
              f"contact study: the water line hides under the substrate's while wading (upper {upper.get_label()!r} "
              f"style {upper.get_linestyle()!r} lw {upper.get_linewidth()}, lower lw {lower.get_linewidth()})")
    check("Model estimates for research" in all_text(fig), "contact study: forcing figure without the caution")

    # A file written before the series: the datasets removed, the static contact (0.1) read and still drawn.
    old = tmp / "contact_old.h5"
    shutil.copy(h5, old)
    with h5py.File(old, "r+") as f:
        for name in f["segments"]:
            for key in ("contact_fraction", "in_water"):
                if key in f[f"segments/{name}"]:
                    del f[f"segments/{name}/{key}"]
    with Results(old) as res:
        legs = res.segments(["forelegs"])[0].contact_fraction()
        check(legs.path == "" and np.all(legs.values == 0.1), f"old file: forelegs contact {legs.values[:3]}...")
    with Results(old) as res:
        maps = figures.maps_figures(res, segments=["forelegs"], times=[900.0])
    footer = " ".join(maps["forelegs"].thermorph_footer.get_text().split())
    check("stores no in_water" in footer and "in water" not in maps["forelegs"].axes[0].thermorph_title[1],
          f"old file: map does not say it cannot name the medium: {footer!r}")
    fig, sub, _ = substrate_and_water(old)
    check(sub is not None and np.any(np.isfinite(np.asarray(sub.get_ydata(), float))),
          "old file without contact series: no substrate line")


#: Bouts of a forager (invented, as the lead's trial 3): labelled events of a single time (no `span`), each ended by
#: the timeline's next change: "bout 1" in water from 5 to 9 min (an unlabelled event returns to air), "bout 2" from
#: 13 min to the end of the 20-min run (nothing ends it).
BOUT_1, BOUT_1_END, BOUT_2 = 300.0, 540.0, 780.0


def check_bout_titles(tmp: Path, exe: str):
    """Map titles name a labelled event without a span while it lasts (up to the timeline's next change, as the
    default map times' footer names it: "bout 1, 5 min to 9 min"), per the event table above, independent of the
    package; before, only events with a span were named. Common practice, no source."""
    from thermorph_post import figures
    from thermorph_post.results import Results
    events = (f'events=[{{ at = {BOUT_1}, label = "bout 1", environment = {{ medium = "water", temperature = "6 degC", '
              'speed = "0.5 m/s" } },'
              f' {{ at = {BOUT_1_END}, environment = {{ medium = "air", temperature = "2 degC", speed = "3 m/s" }} }},'
              f' {{ at = {BOUT_2}, label = "bout 2", environment = {{ medium = "water", temperature = "6 degC", '
              'speed = "0.5 m/s" } }]')
    h5 = tmp / "bouts.h5"
    proc = subprocess.run([exe, "run", str(ROOT / "cases" / "limb_cooling.toml"), "-q", "--set", events,
                           "--set", 'run.duration="20 min"', "--set", 'run.output_interval="1 min"', "-o", str(h5)],
                          capture_output=True, text=True)
    check(proc.returncode == 0, f"bouts: exit {proc.returncode}\n{proc.stderr[-800:]}")
    if proc.returncode != 0:
        return
    times = [240.0, 300.0, 480.0, 540.0, 780.0, 1200.0]
    with Results(h5) as res:
        maps = figures.maps_figures(res, segments=["forelimb"], times=times)
        _, note = figures.default_map_times(res)
    titles = {ax.get_label(): " ".join(ax.thermorph_title[1].split()) for ax in maps["forelimb"].axes
              if ax.get_label().startswith("map at")}
    for t in times:
        bout = "bout 1" if BOUT_1 <= t < BOUT_1_END else "bout 2" if t >= BOUT_2 else None
        want = "in water, " + bout if bout else "in air"
        title = titles.get(f"map at t = {t:.10g} s", "")
        check(title.endswith(": " + want), f"bouts: map title at {t:g} s {title!r}, expected it to end {want!r}")
    check("(bout 1, 5 min to 9 min: 8 min)" in note, f"bouts: the default map times' note {note!r}")


def check_budget_spikes(tmp: Path, exe: str):
    """The diving example's budget, panel b (whole-body flows over time): each dive's first seconds cool the body at
    about 320 W/kg (convection in 4 degC sea water on a skin warmed in air) while metabolism is about 2 W/kg, so on a
    linear axis metabolism was a line at zero (0.6 % of the axis height). Every channel must stay readable without
    hiding the spikes: metabolism's drawn distance from zero at least 10 % of the axis height (common practice, no
    source: a line closer than that to the zero line reads as zero), every stored flow (h5py, per kg of the stored
    mass) inside the axis limits, and the figure says what it does (panel title and footer). A smooth run (the
    synthetic sample) keeps a linear axis."""
    import h5py
    from thermorph_post import figures, sample
    from thermorph_post.results import Results
    h5 = tmp / "seal.h5"
    proc = subprocess.run([exe, "run", str(ROOT / "cases" / "diving_seal.toml"), "-q", "-o", str(h5)],
                          capture_output=True, text=True)
    check(proc.returncode == 0, f"diving seal: exit {proc.returncode}\n{proc.stderr[-800:]}")
    if proc.returncode != 0:
        return
    with h5py.File(h5, "r") as f:
        case_mass = f["body"].attrs["mass"]
        flows = {k: f[f"body/heat_flow/{k}"][()] for k in f["body/heat_flow"] if k != "time"}
    with Results(h5) as res:
        mass = res.body_mass or float(case_mass)
        fig = figures.budget_figure(res)
    ax = next(a for a in fig.axes if a.get_label() == "whole-body heat flows")
    lo, hi = ax.get_ylim()
    height = abs(ax.transData.transform((0, hi))[1] - ax.transData.transform((0, lo))[1])
    zero = ax.transData.transform((0, 0.0))[1]
    metabolism = np.median(flows["metabolism"]) / mass
    lift = abs(ax.transData.transform((0, metabolism))[1] - zero) / height
    check(lift >= 0.10, f"diving seal budget: metabolism ({metabolism:.3g} W/kg) drawn {100 * lift:.2g} % of the axis "
                        f"height from zero (unreadable beside the spikes)")
    for name, v in flows.items():
        if np.max(np.abs(v)) > 1e-9:
            check(lo <= v.min() / mass and v.max() / mass <= hi,
                  f"diving seal budget: {name} ({v.min() / mass:.4g} to {v.max() / mass:.4g} W/kg) outside the axis "
                  f"{lo:.4g} to {hi:.4g}")
    footer = " ".join(fig.thermorph_footer.get_text().split())
    check("symmetric-log" in ax.thermorph_title[1] and "symmetric-log" in footer and "Model estimates" in footer,
          f"diving seal budget: the figure does not say the axis is symmetric-log: {footer!r}")
    smooth = tmp / "smooth_sample.h5"
    sample.main([str(smooth)])
    with Results(smooth) as res:
        fig = figures.budget_figure(res)
    ax = next(a for a in fig.axes if a.get_label() == "whole-body heat flows")
    check(ax.get_yscale() == "linear", f"smooth sample: budget panel b on a {ax.get_yscale()} axis")


def check_overlay_and_sweep(tmp: Path, exe: str):
    """The overlay and sweep figures as a new user meets them (README). Overlay: two quadruped runs that differ only
    by --set environment.temperature (5 and 15 degC): the footer names that key with each run's value in degC (the
    values given on the command line; before, it named only the files, and the figure did not say how the runs
    differ), and the event both share (a windy spell) is shaded in each panel. Sweep (README, "Parameter sweeps": shunts 0,1 x bill lengths 6 cm:24 cm:4): by default the bill length
    (4 values) is along x and the shunt setting (2 values) makes the lines (before, the first parameter, the shunt,
    was x: four lines from closed to open), ticks at the swept lengths 6, 12, 18, 24 cm (the --vary range; before at
    7.5, 10, ...). Common practice, no source."""
    from thermorph_post import figures, sweep
    runs = []
    front = 'events=[{ at = "4 min", label = "front", span = "3 min", environment = { speed = "3 m/s" } }]'
    for temp in (5, 15):
        h5 = tmp / f"quad_{temp}.h5"
        proc = subprocess.run([exe, "run", str(ROOT / "cases" / "quadruped.toml"), "-q", "--set",
                               f'environment.temperature="{temp} degC"', "--set", 'run.duration="10 min"',
                               "--set", front, "-o", str(h5)], capture_output=True, text=True)
        check(proc.returncode == 0, f"overlay run at {temp} degC: exit {proc.returncode}\n{proc.stderr[-800:]}")
        runs.append(h5)
    if all(h.is_file() for h in runs):
        fig = figures.overlay_figure(runs, labels=["cold", "mild"])
        footer = " ".join(fig.thermorph_footer.get_text().split())
        check("environment.temperature: cold 5 °C, mild 15 °C" in footer and "Model estimates" in footer,
              f"overlay: the footer does not say how the runs differ: {footer!r}")
        # The event both runs share (a windy spell from 4 to 7 min) is shaded in every panel, as in one run's figures.
        shaded = [getattr(ax, "thermorph_events", []) for ax in fig.axes if ax.get_label().startswith("overlay:")]
        check(bool(shaded) and all(ev == [(240.0, 420.0, "front")] for ev in shaded),
              f"overlay: the runs' common event not shaded in every panel: {shaded}")
        same = figures.overlay_figure([runs[0], runs[0]], labels=["a", "b"])
        check("resolved cases are identical" in " ".join(same.thermorph_footer.get_text().split()),
              "overlay: two identical runs not said to be identical")
    table = tmp / "bill_sizes.h5"
    proc = subprocess.run([exe, "sweep", str(ROOT / "cases" / "large_bill.toml"), "--steady", "--vary",
                           "segments.bill.vasomotor.shunt=0,1", "--vary", "segments.bill.length=6 cm:24 cm:4",
                           "--set", "circulation.fixed_arterial_temperature=40 degC",
                           "--set", "control.vasomotor.enabled=off", "--metric", "segments.bill.heat_flow",
                           "-o", str(table)], capture_output=True, text=True)
    check(proc.returncode == 0, f"README sweep: exit {proc.returncode}\n{proc.stderr[-800:]}")
    if proc.returncode != 0:
        return
    out = tmp / "readme_sweep"
    code = sweep.main([str(table), "--metric", "segments.bill.heat_flow.convection", "--out", str(out),
                       "--formats", "png"])
    check(code == 0, f"README sweep figure: exit {code}")
    with open(out / "bill_sizes_segments.bill.heat_flow.convection.data.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    series = sorted({r["series"] for r in rows})
    xs = sorted({float(r["x"]) for r in rows})
    check(series == ["0", "1"] and xs == [6.0, 12.0, 18.0, 24.0] and "length" in rows[0]["x_label"],
          f"README sweep: x {rows[0]['x_label'] if rows else None} {xs}, lines {series}; expected the bill length "
          "along x and one line per shunt setting")
    sw = sweep.Sweep(table)
    fig = sweep.line_figure(sw, "segments.bill.heat_flow.convection", "segments.bill.length",
                            "segments.bill.vasomotor.shunt", np.ones(8, bool))
    ticks = list(fig.axes[0].get_xticks())
    check(ticks == [6.0, 12.0, 18.0, 24.0], f"README sweep: x ticks {ticks}, expected the swept lengths")
    ylabel = " ".join(fig.axes[0].get_ylabel().split())
    check(ylabel == "bill: convection heat flow (W; positive into the body)",   # README, "Results": flows into the body
          f"README sweep: y label {ylabel!r} does not give the sign of the (negative) heat flows")
    from thermorph_post.style import text_outside
    for preset in ("single", "double"):   # the longer labels still fit (no text leaves the figure)
        for kind, made in (("lines", sweep.line_figure(sw, "segments.bill.heat_flow.convection", "segments.bill.length",
                                                       "segments.bill.vasomotor.shunt", np.ones(8, bool), style=preset)),
                           ("map", sweep.heatmap_figure(sw, "segments.bill.heat_flow.convection", "segments.bill.length",
                                                        "segments.bill.vasomotor.shunt", np.ones(8, bool), style=preset))):
            outside = text_outside(made)
            check(not outside, f"README sweep {kind} at {preset}: text outside the figure: {outside}")
    legend = fig.axes[0].get_legend()
    title = " ".join(legend.get_title().get_text().split()) if legend else ""
    check("shunts open (0 closed, 1 fully open)" in title,   # cases/REFERENCE.md: open fraction of the shunts
          f"README sweep: legend title {title!r} does not say what 0 and 1 are")
    # Its heat map (--heatmap): the 8 runs are marked where a reader sees them. Every run of the two shunt settings
    # lies on the frame (the map ends at the first and last value), where the clipped 2-pt dots were invisible.
    fig = sweep.heatmap_figure(sw, "segments.bill.heat_flow.convection", "segments.bill.length",
                               "segments.bill.vasomotor.shunt", np.ones(8, bool))
    ax = fig.axes[0]
    runs = [ln for ln in ax.get_lines() if ln.get_label() == "_runs"]
    marked = runs[0] if runs else None
    check(marked is not None and np.asarray(marked.get_xdata()).size == 8 and not marked.get_clip_on()
          and marked.get_markersize() >= 3.0 and marked.get_zorder() > 2,
          "README sweep heat map: the runs' dots clipped at the frame or too small to see")
    check(list(ax.get_xticks()) == [6.0, 12.0, 18.0, 24.0] and list(ax.get_yticks()) == [0.0, 1.0],
          f"README sweep heat map: ticks {list(ax.get_xticks())}, {list(ax.get_yticks())}; expected the swept values")


def check_default_map_times(tmp: Path):
    """Default map times: first, middle and last output without labelled events (a file without /events), and
    no note; with the sample's labelled span ("cold air", 1 h to 2 h) the last output inside it replaces the middle.
    Common practice, no source: the default should show the tissue during the case's labelled episode."""
    from thermorph_post import figures, sample
    from thermorph_post.results import Results
    plain, labelled = tmp / "default_times_minimal.h5", tmp / "default_times_full.h5"
    sample.main([str(plain), "--minimal"])
    sample.main([str(labelled)])
    with Results(plain) as res:
        t = np.asarray(res.time, float)
        times, note = figures.default_map_times(res)
    check(times == [t[0], 0.5 * (t[0] + t[-1]), t[-1]] and note == "",
          f"default map times without events: {times}, note {note!r}")
    with Results(labelled) as res:
        t = np.asarray(res.time, float)
        times, note = figures.default_map_times(res)
    inside = t[(t > 3600.0) & (t < 7200.0)].max()
    check(times == [t[0], inside, t[-1]] and "cold air" in note,
          f"default map times with the labelled span 1 h to 2 h: {times}, note {note!r}")
    # A labelled span that reaches the last output (a trial roost's "sun reaches the roost" from 0.5 h to the end
    # gave maps at 3.967 h and 4 h, the same picture twice): first, middle and last, as the docstring says.
    import shutil
    import h5py
    to_end = tmp / "default_times_to_end.h5"
    shutil.copy(labelled, to_end)
    with h5py.File(to_end, "r+") as f:
        labels = [x.decode() if isinstance(x, bytes) else str(x) for x in f["events/label"][()]]
        ends = f["events/end"]
        values = ends[()]
        values[labels.index("cold air")] = f["time"][-1]
        ends[...] = values
    with Results(to_end) as res:
        t = np.asarray(res.time, float)
        times, note = figures.default_map_times(res)
    check(times == [t[0], 0.5 * (t[0] + t[-1]), t[-1]] and note == "",
          f"default map times with a labelled span to the end: {times}, note {note!r}")


def check_map_layout(tmp: Path):
    """The maps' colour bar sits against the last map at both presets, also when the profile's legend stands outside
    the axes: no farther from it than the maps are from each other (tick labels overhang their panels: 0.15 to 0.3
    in) and under 0.4 in (a colour bar made with fig.colorbar(ax=maps) was pushed beyond the legend's margin: 0.81 in
    from the maps of a single-column figure 3.35 in wide, 1.03 in at double width); the bar ends where the profile
    panel ends.
    And a segment of one axial cell (the sample's trunk, axial_cells = 1) gets a map over time and radius whose cells
    are the stored temperatures at every output (read with h5py). Common practice, no source."""
    from thermorph_post import figures, sample
    from thermorph_post.results import Results
    path = tmp / "map_layout.h5"
    sample.main([str(path)])
    with h5py.File(path, "r") as f:
        stored = np.asarray(f["segments/trunk/temperature"][()], float)[:, 0, :]   # [nt, nr], degC
        time, radius = np.asarray(f["time"][()], float), np.asarray(f["segments/trunk/radius"][()], float)
    for style_name in ("single", "double"):
        with Results(path) as res:
            made = figures.maps_figures(res, style=style_name)
        check(set(made) == {"left_ear", "tail", "trunk"}, f"maps ({style_name}): drawn for {sorted(made)}")
        for name, fig in made.items():
            fig.canvas.draw()
            dpi = fig.dpi
            bars = [ax for ax in fig.axes if ax.get_label() == "<colorbar>"]
            maps = [ax for ax in fig.axes if ax.get_label().startswith("map ")]
            profile = [ax for ax in fig.axes if ax.get_label().startswith("radial profiles")]
            check(len(bars) == 1 and maps and len(profile) == 1 and profile[0].get_legend() is not None,
                  f"maps_{name} ({style_name}): {len(bars)} colour bars, {len(maps)} maps, {len(profile)} profile "
                  "panels with a legend")
            if len(bars) != 1 or not maps or len(profile) != 1:
                continue
            boxes = sorted((ax.get_window_extent() for ax in maps), key=lambda b: b.x0)
            bar, right = bars[0].get_window_extent(), boxes[-1].x1
            gap = (bar.x0 - right) / dpi
            between = max([(b.x0 - a.x1) / dpi for a, b in zip(boxes, boxes[1:])],
                          default=float("inf"))   # a single map: the 0.4 in bound alone
            check(0.0 <= gap < 0.4 and gap <= between + 0.02,
                  f"maps_{name} ({style_name}): colour bar {gap:.3f} in from the maps (0 to 0.4 in, and no farther "
                  f"than the maps from each other, {between:.3f} in)")
            edge = (bar.x1 - profile[0].get_window_extent().x1) / dpi
            check(abs(edge) < 0.02, f"maps_{name} ({style_name}): colour bar ends {edge:.3f} in from the profile's end")
        fig = made.get("trunk")
        if fig is None:
            continue
        # The trunk's map over time: a cell per output and radial cell, at the output's time, equal to the file.
        ax = next(a for a in fig.axes if a.get_label() == "map over time")
        cells = next(c for c in ax.collections if getattr(c, "thermorph_cells", None)).thermorph_cells
        got = np.array([v for _, _, v in cells]).reshape(stored.shape)
        x = np.array([x for x, _, _ in cells]).reshape(stored.shape)[:, 0] * ax.thermorph_time_scale[0]
        y = np.array([y for _, y, _ in cells]).reshape(stored.shape)[0] / 100.0   # cm
        check(np.array_equal(got, stored) and np.allclose(x, time, rtol=1e-14, atol=0.0)
              and np.allclose(y, radius, rtol=1e-14, atol=0.0),
              f"maps_trunk ({style_name}): the map over time is not the stored temperature at every output")


def check_sphere_map(tmp: Path, exe: str):
    """A sphere (the tucked bird's head) has no axial coordinate: its map is temperature against time and distance
    from the centre, each cell the stored temperature (read with h5py), and the footer says why (a sphere got no
    map before). Common practice, no source."""
    from thermorph_post import figures
    from thermorph_post.results import Results
    h5 = tmp / "sphere.h5"
    proc = subprocess.run([exe, "run", str(ROOT / "cases" / "tucked_bird.toml"), "-q", "--set",
                           'run.duration="20 min"', "--set", 'run.output_interval="2 min"', "--set", "events=[]",
                           "-o", str(h5)],
                          capture_output=True, text=True)
    check(proc.returncode == 0, f"sphere map: exit {proc.returncode}\n{proc.stderr[-800:]}")
    if proc.returncode != 0:
        return
    with h5py.File(h5, "r") as f:
        shape = f["segments/head"].attrs.get("shape")
        stored = np.asarray(f["segments/head/temperature"][()], float)
        units = f["segments/head/temperature"].attrs.get("units")
    check(shape in ("sphere", b"sphere") and stored.shape[1] == 1, f"sphere map: premise: head {shape!r}, "
                                                                   f"{stored.shape}")
    stored_c = stored[:, 0, :] - (273.15 if units in ("K", b"K") else 0.0)
    with Results(h5) as res:
        fig = figures.maps_figures(res, segments=["head"]).get("head")
    check(fig is not None, "sphere map: no map for the head (a sphere)")
    if fig is None:
        return
    ax = next((a for a in fig.axes if a.get_label() == "map over time"), None)
    check(ax is not None and ax.get_ylabel().startswith("Distance from centre"), "sphere map: no map over time")
    if ax is None:
        return
    cells = next(c for c in ax.collections if getattr(c, "thermorph_cells", None)).thermorph_cells
    got = np.array([v for _, _, v in cells]).reshape(stored_c.shape)
    check(np.allclose(got, stored_c, rtol=0.0, atol=1e-9), "sphere map: cells differ from the stored temperature: "
                                                           f"{np.max(np.abs(got - stored_c))} K")
    footer = " ".join(fig.thermorph_footer.get_text().split())
    check("head is a sphere" in footer, f"sphere map: the footer does not say why: {footer!r}")


def check_layer_names(tmp: Path, exe: str):
    """The layer names along the top of the radial profiles do not run into each other at either preset: the
    forelimb's fat (1 mm) and skin (1.5 mm) beside 9 mm of muscle were drawn as one word ("fatskin"); now a name that
    would overlap its neighbour stands one line up (a trailing newline: its drawn box is two equal lines, the name in
    the upper one). Drawn extents (Text.get_window_extent). Common practice, no source."""
    from thermorph_post import figures
    from thermorph_post.results import Results
    h5 = tmp / "layer_names.h5"
    proc = subprocess.run([exe, "run", str(ROOT / "cases" / "limb_cooling.toml"), "-q", "--set",
                           'run.duration="10 min"', "-o", str(h5)], capture_output=True, text=True)
    check(proc.returncode == 0, f"layer names: exit {proc.returncode}\n{proc.stderr[-800:]}")
    if proc.returncode != 0:
        return
    for style_name in ("single", "double"):
        with Results(h5) as res:
            fig = figures.maps_figures(res, segments=["forelimb"], style=style_name)["forelimb"]
        fig.canvas.draw()
        renderer = fig.canvas.get_renderer()
        profile = next(a for a in fig.axes if a.get_label().startswith("radial profiles"))
        top = [c for c in profile.get_children() if type(c).__name__ == "SecondaryAxis"]
        labels = [t for t in top[0].get_xticklabels() if t.get_visible() and t.get_text().strip()] if top else []
        boxes = []
        for t in labels:
            box = t.get_window_extent(renderer)
            lines = t.get_text().count("\n") + 1
            y0 = box.y1 - box.height / lines   # the name's line: the top one
            boxes.append((t.get_text().strip(), box.x0, box.x1, y0, box.y1))
        names = [b[0] for b in boxes]
        check(names == ["bone", "muscle", "fat", "skin", "fur"], f"layer names ({style_name}): {names}")
        clashes = [f"{a[0]} / {b[0]}" for i, a in enumerate(boxes) for b in boxes[i + 1:]
                   if a[1] < b[2] and b[1] < a[2] and a[3] < b[4] and b[3] < a[4]]
        check(not clashes, f"layer names ({style_name}) overlap: {clashes}")


def check_cli_times():
    """figures.py --window and --times take times with units like report.py (1 min = 60 s, 1 h = 3600 s: SI
    Brochure 2019, Table 8), and a window also as t0:t1 (sweep's form); a bad time names the option."""
    import argparse
    from thermorph_post.figures import _floats
    check(_floats("10min,1h", "--window") == [600.0, 3600.0], "--window 10min,1h")
    check(_floats("600:3600", "--window") == [600.0, 3600.0], "--window 600:3600")
    check(_floats("0,600,1.5h", "--times") == [0.0, 600.0, 5400.0], "--times 0,600,1.5h")
    try:
        _floats("soon,1h", "--window")
        check(False, "--window soon,1h accepted")
    except argparse.ArgumentTypeError as err:
        check("--window" in str(err) and "soon" in str(err), f"--window soon,1h: {err}")


def check_fit_figure(tmp: Path):
    """fit_figure.py on a fit of three parameters with long key paths, one fitted on a log scale (an asymmetric
    interval) and two warnings (a synthetic /fit group): every text lies inside the figure (the one-line title ran
    off both sides, the series' name off the top), each parameter's stored 95 % interval is shown as stored (not
    value +- SE), and the fit's warnings are printed. Common practice, no source."""
    import importlib
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import matplotlib.text  # noqa: F401
    sys.path.insert(0, str(POSTPROC))
    fit_figure = importlib.import_module("fit_figure")
    path = tmp / "fitfig.h5"
    names = ["tissues.fur.conductivity", "events.0.metabolism.activity", "environment.substrate_conductance"]
    with h5py.File(path, "w") as f:
        g = f.create_group("fit")
        g.attrs["warnings"] = "first warning about a correlation\nsecond warning: a value at its bound"
        g["series_names"] = np.array([b"segments.tail.surface_temperature@0.5"])
        p = g.create_group("parameters")
        p["name"] = np.array([n.encode() for n in names])
        p["units"] = np.array([b"W/(m K)", b"1", b"W/(m2 K)"])
        p["value"] = np.array([0.052, 2.5, 87.2])
        p["standard_error"] = np.array([0.0017, 0.038, 175.6])
        p["lower_95"] = np.array([0.0487, 2.43, 1.605])
        p["upper_95"] = np.array([0.0554, 2.58, 4734.0])
        s = g.create_group("series/segments.tail.surface_temperature@0.5")
        s.attrs["units"] = "degC"
        s.attrs["rmse"] = 0.4
        t = np.linspace(0, 14400, 50)
        s["model_time"], s["model"] = t, 20 - 0.001 * t
        s["time"], s["observed"], s["residual"] = t[::5], 20 - 0.001 * t[::5], 0 * t[::5]
        f["time"] = t
        ev = f.create_group("events")  # the fitted run's labelled span, 1 h to 2.5 h
        ev["start"], ev["end"], ev["label"] = np.array([3600.0]), np.array([9000.0]), np.array([b"out"])
    figures, spans = [], []
    original = fit_figure.save

    def keep(fig, out, name):
        fig.canvas.draw()
        renderer = fig.canvas.get_renderer()
        width, height = fig.bbox.width, fig.bbox.height
        texts = list(fig.texts) + ([fig._suptitle] if fig._suptitle else [])
        for ax in fig.axes:  # titles, axis labels, legends (tick labels of ticks outside the view are never drawn)
            texts += [ax.title, ax._left_title, ax._right_title, ax.xaxis.label, ax.yaxis.label]
            texts += ax.get_legend().get_texts() if ax.get_legend() else []
        for artist in texts:
            if not artist.get_visible() or not artist.get_text().strip():
                continue
            box = artist.get_window_extent(renderer)
            check(box.x0 >= -1 and box.x1 <= width + 1 and box.y0 >= -1 and box.y1 <= height + 1,
                  f"fit figure: text outside the figure: {artist.get_text()[:60]!r} at {box}")
        figures.append("\n".join(a.get_text() for a in fig.findobj(matplotlib.text.Text)))
        spans.extend(getattr(ax, "thermorph_events", []) for ax in fig.axes)
        return original(fig, out, name)

    fit_figure.save = keep
    try:
        with h5py.File(path) as f:
            fit_figure.fit_figures(f, tmp, "fitfig")
    finally:
        fit_figure.save = original
    plt.close("all")
    check(len(figures) == 1, "fit figure: one figure per series")
    every = figures[0] if figures else ""
    check("1.605 .. 4734" in every, "fit figure: the log-scale parameter's stored interval 1.605 .. 4734 is not shown")
    check("second warning: a value at its bound" in every, "fit figure: the fit's warnings are not shown")
    check(spans == [[(3600.0, 9000.0, "out")]] * 2, f"fit figure: the stored event span not shaded on both panels: {spans}")


def main() -> int:
    with tempfile.TemporaryDirectory(prefix="thermorph_figures_") as name:
        tmp = Path(name)
        sys.path.insert(0, str(POSTPROC))   # the checkout's package (the installed one is checked below)
        check_cli_times()
        full = check_figures(tmp)
        check_default_map_times(tmp)
        check_map_layout(tmp)
        if EXE:
            check_sphere_map(tmp, EXE)
            check_layer_names(tmp, EXE)
            check_steps(tmp, EXE)
            check_immersion(tmp, EXE)
            check_contact_events(tmp, EXE)
            check_wetting_events(tmp, EXE)
            check_equal_profiles(tmp, EXE)
            check_contact_series(tmp, EXE)
            check_bout_titles(tmp, EXE)
            check_budget_spikes(tmp, EXE)
            check_overlay_and_sweep(tmp, EXE)
        else:
            print("test_figures: no thermorph executable given (second argument): step drawing not checked")
        check_tidy(full, tmp)
        check_install(tmp, full, tmp / "sweep.h5")
        check_fit_figure(tmp)   # last: it imports pyplot (fit_figure.py), which check_figures requires unimported
    if FAILURES:
        print(f"test_figures: {len(FAILURES)} check(s) failed")
        return 1
    print("test_figures: all checks passed")
    return 0


if __name__ == "__main__":
    sys.exit(main())
