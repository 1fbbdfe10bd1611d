#!/usr/bin/env python3
"""Numbers quoted in the docs, regenerated from thermorph runs (and checked by the test `docs_current`).

    /usr/bin/python3 docs/regenerate.py              check: exit 1 and show what drifted
    /usr/bin/python3 docs/regenerate.py --write      rewrite the generated parts in place
    /usr/bin/python3 docs/regenerate.py --refine [N]  rerun every named run with N x its cells (default 4,
                                                      `--set run.grid_refinement=N`); exit 1 when a quoted number
                                                      moves by more than --tolerance (default 1 %)

Options: --exe PATH (default build/thermorph), --skip RUN (with --refine: leave that named run out, e.g. one that is
already refined), FILE... (default README.md, postproc/README.md and cases/*.md).

A generated part of a Markdown file sits between two HTML comments (invisible when rendered):

    <!-- gen-run NAME: run cases/x.toml --set KEY=VALUE -->   a named run (run | steady | sweep | fit + arguments)
    <!-- gen-run NAME: catch [TAG] -->                           the Catch2 tests of TAG (build/tests/thermorph_tests)
    <!-- gen-run NAME: script tests/x.py ARGS -->                a test script: PYTHON tests/x.py PYTHON EXE ARGS
    <!-- gen:NAME FMT EXPR -->36.72<!-- /gen -->                 one number: EXPR on run NAME, formatted by FMT
    <!-- gen:budget NAME -->                                      a block: the heat budget printed by run NAME
    ...
    <!-- /gen -->

EXPR is a Python expression over `r`, the run's results (see `Result` below: r.core, r.flow("convection",
"bill"), r.exchange("bill"), r.at(values, "2 h"), r.control("panting"), ...; for a sweep, r.rows, r.pick(METRIC, length=12) and r.pick_exchange(SEGMENT, ...)),
with numpy as `np`; run("OTHER") gives another named run's results. A fit run (`fit CASE --data FILE --free ...`) is
the fitted run plus r.value(KEY), r.se(KEY), r.lower(KEY), r.upper(KEY), r.correlation(KEY1, KEY2), r.rmse(SERIES)
and r.fit_attrs (aic, bic, residual_variance, runs, ...). A `catch [TAG]` run is the tests' printed lines
(r.stdout) with r.coverage_study() for the coverage study of tests/test_fit.cpp; a `check CASE` run is the printed
description of `thermorph check` (r.stdout, r.number_after(TEXT): the first number after TEXT; r.number_after(TEXT,
FROM): the first after TEXT that follows FROM; a run's r.warning_number(TEXT, FROM) does the same over its stored
warnings, /provenance/warnings); a `script` run is a test script's printed lines (r.stdout,
r.number_after; tests/test_report.py --only 5,6,8 for postproc/README.md's report numbers), which must pass. FMT is a format specification (`.2f`, `.3g`, `d`) or `s` for a string.
Run names are shared by every scanned file, so a note can use a run defined in another.

Check: the text between the markers must match what the runs give now. Numbers may differ by one unit in their
last printed digit (a last-ulp difference of the maths library between machines) or by 1e-6 in absolute terms
(round-off-level residuals); anything else is drift.
"""
import argparse
import copy
import csv
import difflib
import re
import shlex
import subprocess
import sys
import tempfile
import tomllib
from pathlib import Path

import h5py
import numpy as np

ROOT = Path(__file__).resolve().parent.parent
RUN_RE = re.compile(r"<!-- gen-run (\w+): (.*?) -->")
GEN_RE = re.compile(r"(<!-- gen:(.*?) -->)(.*?)(<!-- /gen -->)", re.S)
NUMBER_RE = re.compile(r"[-+−]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")
TIME_UNITS = {"s": 1.0, "min": 60.0, "h": 3600.0}


def seconds(t):
    """A time as seconds: a number, or text like "90 min" or "2 h"."""
    if isinstance(t, str):
        value, unit = t.split()
        return float(value) * TIME_UNITS[unit]
    return float(t)


class Result:
    """A results file (run, steady) or a sweep table, with helpers for expressions."""

    def __init__(self, kind, path, stdout, medium=0.0):
        self.kind, self.stdout, self.medium = kind, stdout, medium
        if kind == "catch":
            return
        if kind == "fit":
            with h5py.File(path, "r") as f:
                g = f["fit"]
                names = [n.decode() if isinstance(n, bytes) else str(n) for n in g["parameters/name"][...]]
                self._fit = {k: dict(zip(names, g["parameters"][k][...])) for k in
                             ("value", "standard_error", "lower_95", "upper_95", "start")}
                self._names = names
                self._correlation = g["correlation"][...]
                self._rmse = {k: float(np.sqrt(np.mean(v["residual"][...] ** 2))) for k, v in g["series"].items()}
                self.fit_attrs = {k: (v.decode() if isinstance(v, bytes) else v) for k, v in g.attrs.items()}
                self._grid, self.grid_check_attrs = {}, {}
                if "grid_check" in g and "shift" in g["grid_check"]:
                    c = g["grid_check"]
                    self._grid = {k: dict(zip(names, c[k][...])) for k in
                                  ("shift", "shift_se", "bias", "bias_se", "bias_relative")}
                    self.grid_check_attrs = {k: (v.decode() if isinstance(v, bytes) else v) for k, v in c.attrs.items()}
        if kind == "sweep":
            with open(path.with_suffix(".csv"), newline="") as fh:
                self.rows = [{k.split(" [")[0]: _number(v) for k, v in row.items()} for row in csv.DictReader(fh)]
            return
        with h5py.File(path, "r") as f:
            self.t = f["time"][...]
            self.core = f["body/core_temperature"][...]
            self.blood = f["body/blood_temperature"][...]
            self.skin = f["body/mean_skin_temperature"][...]
            self._body = {k: v[...] for k, v in f["body/heat_flow"].items()}
            self._seg, self._surface, self._mean, self._layer, self._h = {}, {}, {}, {}, {}
            self._cumulative = {k: v[...] for k, v in f["body/cumulative_heat"].items() if k != "time"}
            for name, g in f["segments"].items():
                layers = [n.decode() if isinstance(n, bytes) else str(n) for n in g["layer"].attrs["layer_names"]]
                index, temperature, volume = g["layer"][...], g["temperature"][...], g["volume"][...]
                for i, layer in enumerate(layers):
                    v = volume * (index == i)[None, :]
                    self._layer[(name, layer)] = (temperature * v).sum(axis=(1, 2)) / v.sum()
                if "convection_coefficient" in g:
                    self._h[name] = g["convection_coefficient"][...]
                self._seg[name] = {k: v[...] for k, v in g["heat_flow"].items()}
                self._surface[name] = g["surface_temperature"][...].mean(axis=1)
                vol = g["volume"][...]
                self._mean[name] = (g["temperature"][...] * vol).sum(axis=(1, 2)) / vol.sum()
                if "arterial_temperature" in g:
                    self._seg[name]["_arterial"] = g["arterial_temperature"][...]
                    self._seg[name]["_venous"] = g["venous_temperature"][...]
            self._control = {k: v[...] for k, v in f["control"].items()} if "control" in f else {}
            # The run's warnings (/provenance/warnings), one per line: r.warning_number(TEXT, START)
            self.warnings = "\n".join(w.decode() if isinstance(w, bytes) else str(w)
                                      for w in f["provenance/warnings"][...]) if "provenance/warnings" in f else ""

    def excess(self):
        """The same results with every temperature [degC] replaced by its excess over the medium at t = 0 [K]: the
        scale on which a temperature's grid error is judged (a drop of 1.4 K is not 1 % of 35 degC)."""
        out = copy.copy(self)
        if self.kind == "catch":
            return out
        m = self.medium
        if self.kind == "sweep":
            out.rows = [{k: (v - m if "temperature" in k and not k.startswith("time_to") and isinstance(v, float)
                             else v) for k, v in row.items()} for row in self.rows]
            return out
        out.core, out.blood, out.skin = self.core - m, self.blood - m, self.skin - m
        out._surface = {k: v - m for k, v in self._surface.items()}
        out._mean = {k: v - m for k, v in self._mean.items()}
        out._seg = {k: {c: (v - m if c.startswith("_") else v) for c, v in d.items()} for k, d in self._seg.items()}
        return out

    # --- runs and steady states ---
    def flow(self, channel, segment=None):
        """Heat flow of a channel [W], whole body (counts included) or one copy of a segment."""
        return (self._body if segment is None else self._seg[segment])[channel]

    def exchange(self, segment=None):
        """Exchange with the surroundings [W]: convection + radiation + solar + evaporation + substrate."""
        src = self._body if segment is None else self._seg[segment]
        return sum(src[c] for c in ("convection", "radiation", "solar", "evaporation", "substrate") if c in src)

    def surface(self, segment):
        """Mean surface temperature of a segment's axial cells [degC]."""
        return self._surface[segment]

    def mean(self, segment):
        """Volume-mean tissue temperature of a segment [degC] (coat included when the file stores it)."""
        return self._mean[segment]

    def layer_mean(self, segment, layer):
        """Volume-mean temperature of one tissue layer of a segment [degC], e.g. layer_mean("trunk", "blubber")."""
        return self._layer[(segment, layer)]

    def h(self, segment):
        """Area-weighted mean convection coefficient of a segment's faces [W/(m2 K)]."""
        return self._h[segment]

    def cumulative(self, channel):
        """Energy exchanged by a channel since t = 0, whole body [J]."""
        return self._cumulative[channel]

    def between(self, values, start, end):
        """The outputs of a series with start < t <= end (seconds or text like "7 min")."""
        return np.asarray(values)[(self.t > seconds(start)) & (self.t <= seconds(end))]

    def arterial(self, segment):
        return self._seg[segment]["_arterial"]

    def venous(self, segment):
        return self._seg[segment]["_venous"]

    def control(self, name):
        return self._control[name]

    def at(self, values, time):
        """Linear interpolation of a time series at a time (seconds or text like "2 h")."""
        return float(np.interp(seconds(time), self.t, values))

    def first(self, values, above=None, below=None):
        """First time [s] a series is above (or below) a value, linear between outputs; NaN: never."""
        v = np.asarray(values, dtype=float)
        hit = v > above if above is not None else v < below
        if not hit.any():
            return float("nan")
        i = int(np.argmax(hit))
        if i == 0:
            return float(self.t[0])
        level = above if above is not None else below
        return float(self.t[i - 1] + (level - v[i - 1]) / (v[i] - v[i - 1]) * (self.t[i] - self.t[i - 1]))

    def budget(self):
        """The heat budget table printed by `run` / `steady` (from its heading to the energy-balance line)."""
        lines = self.stdout.splitlines()
        start = next(i for i, line in enumerate(lines) if line.startswith("Heat budget"))
        end = next((i for i, line in enumerate(lines) if line.startswith("Energy balance")), len(lines) - 1)
        return "\n".join(lines[start:end + 1])

    # --- fits ---
    def value(self, key):
        """Fitted value of a free parameter (its --free key) in the parameter's unit."""
        return float(self._fit["value"][key])

    def se(self, key):
        return float(self._fit["standard_error"][key])

    def lower(self, key):
        return float(self._fit["lower_95"][key])

    def upper(self, key):
        return float(self._fit["upper_95"][key])

    def correlation(self, a, b):
        return float(self._correlation[self._names.index(a), self._names.index(b)])

    def grid_check(self, key, what="bias"):
        """The fit's grid check (/fit/grid_check) for one parameter: what = shift, shift_se, bias, bias_se,
        bias_relative; grid_check_attrs holds refinement, nodes, wall_seconds, ..."""
        return float(self._grid[what][key])

    def rmse(self, series):
        """Root mean square of the raw residuals (model - observed) of one observed series."""
        return self._rmse[series]

    # --- printed text (catch, check) ---
    def number_after(self, text, start=None):
        """The first number printed after `text` in the run's output (a `check` run's description, a test's line);
        with `start`, the first such `text` after the first `start` (a line's label: "t = 50 s,")."""
        offset = 0
        if start is not None:
            offset = self.stdout.find(start)
            if offset < 0:
                raise SystemExit(f"regenerate: {start!r} not found in the printed output")
        m = re.compile(re.escape(text) + r"\s*([-+]?[\d.]+(?:e[-+]?\d+)?)").search(self.stdout, offset)
        if not m:
            raise SystemExit(f"regenerate: {text!r} not found in the printed output")
        return float(m.group(1))

    def warning_number(self, text, start=None):
        """number_after over the run's stored warnings (/provenance/warnings) instead of its printed output."""
        printed, self.stdout = self.stdout, self.warnings
        try:
            return self.number_after(text, start)
        finally:
            self.stdout = printed

    # --- Catch2 output ---
    def coverage_study(self):
        """The coverage study's printed lines: {"draws", "ratio": [per parameter], "coverage": [...], "worst_z"}."""
        out = {"ratio": [], "coverage": [], "draws": None, "worst_z": None}
        for line in self.stdout.splitlines():
            m = re.match(r"parameter (\d+): mean SE / observed SD = ([\d.]+), coverage of 95 % intervals ([\d.]+) "
                         r"\((\d+) draws\)", line)
            if m:
                out["ratio"].append(float(m.group(2)))
                out["coverage"].append(float(m.group(3)))
                out["draws"] = int(m.group(4))
            m = re.match(r"largest \|estimate - truth\| / SE over the first 10 draws: ([\d.]+)", line)
            if m:
                out["worst_z"] = float(m.group(1))
        if out["draws"] is None:
            raise SystemExit("regenerate: no coverage-study lines in the tests' output")
        return out

    # --- sweeps ---
    def _row(self, where):
        """The one sweep row whose parameters match `where` (a key matches a parameter ending in .KEY)."""
        def match(row, key, value):
            names = [k for k in row if k == key or k.endswith("." + key)]
            return any(row[k] == value for k in names)
        rows = [row for row in self.rows if all(match(row, k, v) for k, v in where.items())]
        if len(rows) != 1:
            raise SystemExit(f"regenerate: {len(rows)} sweep rows match {where}")
        return rows[0]

    def pick(self, metric, **where):
        """A sweep metric of the row matching `where`, e.g. pick("body.core_temperature.final", length=12)."""
        return self._row(where)[metric]

    def pick_exchange(self, segment, **where):
        """Sum of a segment's exchange channels (convection, radiation, solar, evaporation, substrate) [W]."""
        row = self._row(where)
        return sum(row.get(f"segments.{segment}.heat_flow.{c}", 0.0)
                   for c in ("convection", "radiation", "solar", "evaporation", "substrate"))


def _number(text):
    try:
        return float(text)
    except ValueError:
        return text


def medium_temperature(case_arg, args):
    """The medium's temperature at t = 0 [degC]: environment.temperature of the case or of a --set."""
    text = tomllib.loads((ROOT / case_arg).read_text()).get("environment", {}).get("temperature", "20 degC")
    for a in args:
        if a.startswith("environment.temperature="):
            text = a.split("=", 1)[1].strip('"')
    if isinstance(text, (int, float)):
        return float(text) - 273.15
    value, unit = text.split()
    return float(value) - (273.15 if unit == "K" else 0.0)


class Runner:
    def __init__(self, exe, runs, refine=1):
        self.exe, self.runs, self.refine = exe, runs, refine
        self.cache = {}
        # removed when the runner is collected or at exit, also after a SystemExit (583 directories of
        # earlier runs had piled up in /tmp before)
        self._tmpdir = tempfile.TemporaryDirectory(prefix="thermorph-docs-")
        self.tmp = Path(self._tmpdir.name)

    def get(self, name):
        if name in self.cache:
            return self.cache[name]
        if name not in self.runs:
            raise SystemExit(f"regenerate: no run named {name!r} (define it with <!-- gen-run {name}: run CASE -->)")
        args = shlex.split(self.runs[name])
        kind, case = args[0], args[1]
        if kind == "check":  # `thermorph check CASE [--set ...]`: its printed description (r.stdout, r.number_after)
            proc = subprocess.run([str(self.exe), "check", str(ROOT / case)] + args[2:], capture_output=True, text=True,
                                  cwd=self.tmp)
            if proc.returncode != 0:
                raise SystemExit(f"regenerate: run {name} failed ({proc.returncode}): check {case}\n{proc.stderr}")
            self.cache[name] = Result("catch", None, proc.stdout)
            return self.cache[name]
        if kind == "script":  # a test script (PYTHON SCRIPT PYTHON EXE ARGS): its printed lines; it must pass
            proc = subprocess.run([sys.executable, str(ROOT / case), sys.executable, str(self.exe)] + args[2:],
                                  capture_output=True, text=True, cwd=self.tmp)
            if proc.returncode != 0:
                raise SystemExit(f"regenerate: run {name} failed ({proc.returncode}): {case} {' '.join(args[2:])}\n"
                                 f"{proc.stdout[-2000:]}{proc.stderr[-2000:]}")
            self.cache[name] = Result("catch", None, proc.stdout)
            return self.cache[name]
        if kind == "catch":
            tests = self.exe.parent / "tests" / "thermorph_tests"
            proc = subprocess.run([str(tests)] + args[1:], capture_output=True, text=True, cwd=self.tmp)
            if proc.returncode != 0:
                raise SystemExit(f"regenerate: run {name} failed ({proc.returncode}): {tests} {' '.join(args[1:])}\n"
                                 f"{proc.stdout[-2000:]}")
            self.cache[name] = Result(kind, None, proc.stdout)
            return self.cache[name]
        medium = medium_temperature(case, args)
        if self.refine > 1:
            # A run that already refines its grid (`--set run.grid_refinement=4`) is refined further (16x), not
            # compared with itself.
            given = 1
            for i, a in enumerate(args):
                m = re.fullmatch(r"run\.grid_refinement=(\d+)", a)
                if m and i > 0 and args[i - 1] == "--set":
                    given = int(m.group(1))
            args = args + ["--set", f"run.grid_refinement={given * self.refine}"]
            if kind == "fit":  # the fit's own grid check would refine the refined grid again
                args = args + ["--grid-check", "0"]
        out = self.tmp / f"{name}.h5"
        # The case, and any data file given by a path in the repository (fit --data cases/x.csv), from ROOT.
        cmd = [str(self.exe)] + [str(ROOT / a) if i == 1 or (i > 1 and a.startswith("cases/") and (ROOT / a).is_file())
                                 else a for i, a in enumerate(args)] + ["-o", str(out), "-q"]
        proc = subprocess.run(cmd, capture_output=True, text=True, cwd=self.tmp)
        if proc.returncode != 0:
            raise SystemExit(f"regenerate: run {name} failed ({proc.returncode}): {' '.join(cmd)}\n{proc.stderr}")
        self.cache[name] = Result(kind, out, proc.stdout, medium)
        return self.cache[name]


def namespace(runner, run):
    """Names an expression sees: r (the marker's run), run("OTHER") (any other named run), np and a few builtins."""
    return {"np": np, "r": runner.get(run), "run": runner.get, "abs": abs, "min": min, "max": max, "sum": sum}


def value_of(spec, runner, excess=False):
    """The unformatted value of a one-number marker (None for blocks); excess: temperatures as excess over the
    medium (Result.excess)."""
    words = spec.split(None, 2)
    if words[0] == "budget" or len(words) < 3 or words[1] == "s":
        return None
    if not excess:
        return eval(words[2], namespace(runner, words[0]))
    get = lambda n: runner.get(n).excess()  # noqa: E731
    return eval(words[2], {**namespace(runner, words[0]), "r": get(words[0]), "run": get})


def render(spec, runner):
    """The text a marker's spec stands for."""
    words = spec.split(None, 2)
    if words[0] == "budget":
        return "\n```\n" + runner.get(words[1]).budget() + "\n```\n"
    if len(words) < 3:
        raise SystemExit(f"regenerate: bad marker <!-- gen:{spec} --> (want: RUN FMT EXPR, or budget RUN)")
    run, fmt, expr = words
    r = runner.get(run)
    value = eval(expr, namespace(runner, run))  # noqa: S307 (our own docs)
    if fmt == "s":
        return str(value)
    return format(value, fmt)


def last_digit_unit(text):
    """One unit of the last printed digit of a number's text (1 for integers)."""
    mantissa, _, exponent = text.lower().replace("−", "-").partition("e")
    decimals = len(mantissa.split(".")[1]) if "." in mantissa else 0
    return 10.0 ** (-decimals + (int(exponent) if exponent else 0))


def same(old, new):
    """Equal text apart from numbers within one unit of the last digit or 1e-6 absolute, and whitespace runs."""
    # Whitespace runs compare equal (a table column's padding follows a number's width, e.g. round-off signs).
    split_old = [re.sub(r"\s+", " ", x) for x in NUMBER_RE.split(old)]
    split_new = [re.sub(r"\s+", " ", x) for x in NUMBER_RE.split(new)]
    nums_old, nums_new = NUMBER_RE.findall(old), NUMBER_RE.findall(new)
    if split_old != split_new or len(nums_old) != len(nums_new):
        return False
    for a, b in zip(nums_old, nums_new):
        x, y = float(a.replace("−", "-")), float(b.replace("−", "-"))
        if abs(x - y) > max(1.0001 * last_digit_unit(a), 1e-6):
            return False
    return True


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("files", nargs="*")
    ap.add_argument("--write", action="store_true", help="rewrite the generated parts")
    ap.add_argument("--refine", type=int, nargs="?", const=4, default=1, metavar="N",
                    help="rerun with N x every cell count (default 4); check quoted numbers against it")
    ap.add_argument("--tolerance", type=float, default=0.01, help="--refine: largest relative change (default 0.01)")
    ap.add_argument("--skip", action="append", default=[], metavar="RUN",
                    help="--refine: do not refine this named run (repeatable), e.g. a run that is already refined "
                         "(cases/diving_seal.md seal_rest4: 4x of a 4x grid is beyond this machine); listed as skipped")
    ap.add_argument("--exe", default=str(ROOT / "build" / "thermorph"))
    a = ap.parse_args()
    files = [Path(f) for f in a.files] or [ROOT / "README.md", ROOT / "postproc" / "README.md"] + sorted(
        (ROOT / "cases").glob("*.md"))
    texts = {f: f.read_text() for f in files}
    runs = {}
    for f in sorted((ROOT / "cases").glob("*.md")) + [ROOT / "README.md", ROOT / "postproc" / "README.md"] + files:
        for name, command in RUN_RE.findall(f.read_text()):
            runs[name] = command
    runner = Runner(Path(a.exe).resolve(), runs)
    refined = Runner(Path(a.exe).resolve(), runs, refine=a.refine) if a.refine > 1 else None
    drift = 0
    unconverged, checked = [], 0
    failed_refined = set()
    for f, text in texts.items():
        def substitute(m):
            nonlocal drift
            new = render(m.group(2), runner)
            coarse = value_of(m.group(2), runner, excess=True) if refined is not None else None
            if isinstance(coarse, (int, float)) and np.isfinite(coarse):
                nonlocal checked
                checked += 1
                run_name = m.group(2).split(None, 1)[0]
                fine = None
                if run_name in a.skip:
                    checked -= 1
                    print(f"skip          {f.name}: {m.group(2)} (run {run_name} not refined: --skip)")
                elif run_name not in failed_refined:
                    try:
                        fine = value_of(m.group(2), refined, excess=True)
                    except SystemExit as e:  # a refined run that fails (a fit not converging) is reported, not fatal
                        failed_refined.add(run_name)
                        print(f"FAIL {a.refine}x run {run_name}: {str(e).splitlines()[0]}")
                if run_name in a.skip:
                    pass
                elif fine is None:
                    unconverged.append(f"{f.name}: {m.group(2)} (its {a.refine}x run failed)")
                else:
                    rel = abs(fine - coarse) / max(abs(fine), 1e-12)
                    flag = "ok " if rel <= a.tolerance else "OFF"
                    print(f"{flag} {100 * rel:6.2f} %  {f.name}: {m.group(2)}: {value_of(m.group(2), runner):.6g} "
                          f"({a.refine}x: {value_of(m.group(2), refined):.6g})")
                    if rel > a.tolerance:
                        unconverged.append(f"{f.name}: {m.group(2)}")
            if not same(m.group(3), new):
                drift += 1
                rel = f.relative_to(ROOT) if f.is_relative_to(ROOT) else f
                print(f"DRIFT {rel}: <!-- gen:{m.group(2)} -->")
                for line in difflib.unified_diff(m.group(3).splitlines(), new.splitlines(), "in the file", "now",
                                                 lineterm="", n=0):
                    print("    " + line)
            return m.group(1) + new + m.group(4)
        out = GEN_RE.sub(substitute, text)
        if a.write and out != text:
            f.write_text(out)
            print(f"rewrote {f}")
    if refined is not None:
        print(f"{checked} quoted numbers checked against {a.refine}x cells (temperatures as excess over the medium "
              f"at t = 0): {len(unconverged)} move by more than {100 * a.tolerance:g} %")
        return 1 if unconverged else 0
    if drift and not a.write:
        print(f"{drift} generated part(s) drifted: run /usr/bin/python3 docs/regenerate.py --write and review the diff")
        return 1
    print(f"docs: {sum(len(GEN_RE.findall(t)) for t in texts.values())} generated parts "
          + ("rewritten" if a.write else "current"))
    return 0


if __name__ == "__main__":
    sys.exit(main())
