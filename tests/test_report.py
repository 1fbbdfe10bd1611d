#!/usr/bin/python3
"""Test of postproc/report.py: window heat budgets, threshold times and argument errors.

    /usr/bin/python3 tests/test_report.py [PYTHON [THERMORPH]] [--only 5,6,8]

(--only: those sections; docs/regenerate.py quotes the lines sections 5, 6 and 8 print in postproc/README.md.)

1. A synthetic results file whose flows and temperatures are simple functions of
   time (ramps, a quadratic, a triangle), so every number the report prints has
   a closed form worked out here by hand.
2. A real thermorph run (the quadruped with a shivering controller): report
   numbers against values computed here directly from the HDF5 arrays.
3. Bad arguments exit with code 2 and say what is wrong.
4. Repeated --window: one section per window, each as that window alone.
5. A window end between outputs that bracket a step of the timeline is noted (and is really off).
6. Time in water and in contact with the substrate, and the heat lost there, against an events table.
7. The heat lost to the water and the substrate with every change between outputs, against Newton cooling of a lumped
   sphere in closed form: exact from /steps; the old interpolation (a file without /steps) misses it.
8. Window ends between an output and a step, and between two steps, against the same closed form: within the
   remainder bound of the interpolant used, and noted where a step bounds the piece.
Exits 1 on any failure.
"""

import csv
import subprocess
import sys
import tempfile
import tomllib
from pathlib import Path

import h5py
import numpy as np

ROOT = Path(__file__).resolve().parent.parent
REPORT = ROOT / "postproc" / "report.py"
ARGS = sys.argv[1:]
ONLY = None   # --only 5,8: those sections (8 runs 7 first: it reads 7's files); docs/regenerate.py quotes their lines
if "--only" in ARGS:
    _at = ARGS.index("--only")
    ONLY = {int(x) for x in ARGS[_at + 1].split(",")}
    del ARGS[_at:_at + 2]
PYTHON = ARGS[0] if len(ARGS) > 0 else sys.executable
THERMORPH = ARGS[1] if len(ARGS) > 1 else str(ROOT / "build" / "thermorph")
CAUTION = ("Model estimates for research only; not veterinary or medical advice. Follow local regulations, "
           "animal-welfare rules and licensed veterinary or medical practice.")
FAILURES = []


def check(condition: bool, what: str):
    """Record a failed check (and print it) without stopping the run."""
    if not condition:
        FAILURES.append(what)
        print(f"FAIL: {what}")


def close(got: float, expected: float, what: str, rtol: float = 1e-12, atol: float = 1e-12):
    """Check |got − expected| <= atol + rtol |expected|."""
    ok = got is not None and abs(got - expected) <= atol + rtol * abs(expected)
    check(ok, f"{what}: got {got!r}, expected {expected!r}")


def run_report(*args, expect: int = 0) -> subprocess.CompletedProcess:
    """Run report.py; check its exit code."""
    proc = subprocess.run([PYTHON, str(REPORT), *map(str, args)], capture_output=True, text=True)
    check(proc.returncode == expect, f"report.py {' '.join(map(str, args))}: exit {proc.returncode}, "
                                     f"expected {expect}\n{proc.stdout[-2000:]}\n{proc.stderr}")
    return proc


def read_table(path: Path) -> dict:
    """CSV rows keyed by their first column, each a dict of column -> text."""
    with open(path, newline="", encoding="utf-8") as fh:
        return {row[next(iter(row))]: row for row in csv.DictReader(fh)}


def number(text: str):
    """A CSV cell as float (None when empty)."""
    return None if text in ("", None) else float(text)


def without_steps(src_path: Path, dst_path: Path):
    """A copy of a results file without /steps, as files written before 2026-12-05 are."""
    with h5py.File(src_path, "r") as src, h5py.File(dst_path, "w") as dst:
        for key, value in src.attrs.items():
            dst.attrs[key] = value
        for name in src:
            if name != "steps":
                src.copy(src[name], dst, name=name)


# ---- 1. synthetic file with closed-form answers ---------------------------------------------
# Non-uniform output times [s]; the window ends 50 s and 1000 s fall between outputs.
TIME = np.array([0.0, 100.0, 250.0, 400.0, 600.0, 900.0, 1200.0])
T0, T1 = 50.0, 1000.0
A_SOLAR = 3e-6          # body solar flow a t^2 [W], cumulative a t^3 / 3 [J]
ERR_RATE = 1e-3         # energy_balance_error = ERR_RATE t [J]

CASE = """title = "report test (invented)"
[body]
mass = "4 kg"
[[segments]]
name = "trunk"
shape = "cylinder"
coat = { material = "fur", thickness = "1 cm", cells = 1 }
[[segments]]
name = "leg"
parent = "trunk"
count = 2
shape = "cylinder"
"""


def seg_flows(t):
    """Flows of one copy of each segment [W] (invented)."""
    return {
        "trunk": {"metabolism": 10.0 + 0.002 * t, "blood": -2.0 + 0 * t, "convection": -5.0 + 0 * t,
                  "solar": A_SOLAR * t**2},
        "leg": {"metabolism": 1.0 + 0 * t, "blood": 0.75 + 0 * t, "convection": -2.0 - 0.001 * t,
                "solar": 0 * t},
    }


def write_synthetic(path: Path):
    t = TIME
    flows = seg_flows(t)
    count = {"trunk": 1, "leg": 2}
    pool_blood = 0.5 + 0 * t   # the pool receives +0.5 W from the circulation; body blood sums to zero
    with h5py.File(path, "w") as f:
        f.attrs["case"] = CASE
        f.attrs["title"] = "report test (invented)"
        f.attrs["complete"] = np.int32(1)
        f.create_dataset("time", data=t).attrs["units"] = "s"
        body = {c: sum(count[s] * flows[s][c] for s in flows) for c in ("metabolism", "blood", "convection", "solar")}
        body["blood"] = body["blood"] + pool_blood
        body["storage"] = sum(body.values())
        # Exact integrals from 0 of each body flow (all ramps or the quadratic) [J].
        cumulative = {
            "metabolism": (10.0 + 2 * 1.0) * t + 0.5 * 0.002 * t**2,
            "blood": 0 * t,
            "convection": (-5.0 - 4.0) * t - 0.5 * 0.002 * t**2,
            "solar": A_SOLAR * t**3 / 3.0,
        }
        for c, v in body.items():
            f.create_dataset(f"body/heat_flow/{c}", data=v).attrs["units"] = "W"
        for c, v in cumulative.items():
            f.create_dataset(f"body/cumulative_heat/{c}", data=v).attrs["units"] = "J"
        f.create_dataset("body/energy_balance_error", data=ERR_RATE * t).attrs["units"] = "J"
        f.create_dataset("body/core_temperature", data=37.0 + 0.002 * t).attrs["units"] = "degC"
        f.create_dataset("body/blood_temperature", data=37.0 + 0 * t).attrs["units"] = "degC"
        skin = 33.0 + 2.0 * (1.0 - np.abs(t - 600.0) / 600.0)   # 33 -> 35 at 600 s -> 33
        f.create_dataset("body/mean_skin_temperature", data=skin).attrs["units"] = "degC"
        for name in flows:
            g = f.create_group(f"segments/{name}")
            for c, v in flows[name].items():
                g.create_dataset(f"heat_flow/{c}", data=v).attrs["units"] = "W"
            g.create_dataset("heat_flow/storage", data=sum(flows[name].values())).attrs["units"] = "W"
            g.attrs["shape"] = "cylinder"
        trunk = f["segments/trunk"]
        trunk.create_dataset("radius", data=[0.005, 0.015, 0.025]).attrs["units"] = "m"
        trunk.create_dataset("axial", data=[0.1]).attrs["units"] = "m"
        lay = trunk.create_dataset("layer", data=np.array([0, 0, 1], dtype=np.int32))
        lay.attrs["units"] = "1"
        lay.attrs["layer_names"] = ["muscle", "fur"]
        trunk.create_dataset("volume", data=[[1e-6, 3e-6, 5e-6]]).attrs["units"] = "m3"
        temp = np.empty((len(t), 1, 3))
        temp[:, 0, 0] = 39.0 + 0.001 * t      # mean tissue = (1 x cell 0 + 3 x cell 1) / 4
        temp[:, 0, 1] = 35.0 + 0 * t
        temp[:, 0, 2] = 10.0                  # coat: excluded from tissue min/mean
        trunk.create_dataset("temperature", data=temp).attrs["units"] = "degC"
        trunk.create_dataset("surface_temperature", data=temp[:, :, 2]).attrs["units"] = "degC"
        leg = f["segments/leg"]
        leg.create_dataset("radius", data=[0.002, 0.006]).attrs["units"] = "m"
        leg.create_dataset("axial", data=[0.05, 0.15]).attrs["units"] = "m"
        lay = leg.create_dataset("layer", data=np.array([0, 1], dtype=np.int32))
        lay.attrs["units"] = "1"
        lay.attrs["layer_names"] = ["muscle", "skin"]
        leg.create_dataset("volume", data=[[1e-6, 1e-6], [1e-6, 1e-6]]).attrs["units"] = "m3"
        temp = np.empty((len(t), 2, 2))
        temp[:, 0, :] = 36.0
        temp[:, 1, 0] = 34.0
        temp[:, 1, 1] = 30.0 - 0.01 * t       # the coldest cell: below 25 degC from 500 s
        leg.create_dataset("temperature", data=temp).attrs["units"] = "degC"
        leg.create_dataset("surface_temperature", data=temp[:, :, 1]).attrs["units"] = "degC"


def check_synthetic(tmp: Path):
    h5 = tmp / "synthetic.h5"
    write_synthetic(h5)
    out = tmp / "syn.csv"
    proc = run_report(h5, "--window", f"{T0:g},{T1:g}", "--above", "core=38", "skin=34", "trunk.max=39.5",
                      "--below", "core=37.5", "leg.min=25", "trunk.min=30", "trunk.mean=310.15K", "--csv", out)
    check(CAUTION in proc.stdout, "caution sentence missing from the report")
    for unit in ("[W]", "[W/kg]", "°C", " s"):
        check(unit in proc.stdout, f"unit {unit!r} missing from the report text")
    rows = read_table(out)
    span = T1 - T0

    # Mean of a ramp a + b t over [T0, T1] is its value at the midpoint (exact calculus); the trapezoidal
    # rule with linear interpolation at the window ends is exact for ramps (common practice, no source).
    mid = 0.5 * (T0 + T1)
    trunk, leg = rows["trunk"], rows["leg ×2"]
    close(number(trunk["metabolism"]), 10.0 + 0.002 * mid, "trunk metabolism mean (ramp)")
    close(number(leg["convection"]), 2 * (-2.0 - 0.001 * mid), "leg ×2 convection mean (count 2)")
    close(number(leg["blood"]), 1.5, "leg ×2 blood mean")
    check(trunk["method"] == "trapezoid", f"segment method {trunk['method']}")
    # Blood pool = whole body − segments: +0.5 W of blood and the same as storage (by construction).
    pool = rows.get("blood pool")
    check(pool is not None, f"blood pool row missing: {list(rows)}")
    if pool:
        close(number(pool["blood"]), 0.5, "blood pool blood")
        close(number(pool["storage"]), 0.5, "blood pool storage")
        close(number(pool["metabolism"]), 0.0, "blood pool metabolism")
    # Whole body from cumulative energies: (E(T1) − E(T0)) / (T1 − T0) of the exact integrals.
    body = rows["whole body"]
    check(body["method"] == "cumulative", f"whole-body method {body['method']}")
    e_met = lambda t: 12.0 * t + 0.001 * t**2                          # noqa: E731
    e_conv = lambda t: -9.0 * t - 0.001 * t**2                          # noqa: E731
    e_sol = lambda t: A_SOLAR * t**3 / 3.0                              # noqa: E731
    close(number(body["metabolism"]), (e_met(T1) - e_met(T0)) / span, "body metabolism from cumulative")
    close(number(body["convection"]), (e_conv(T1) - e_conv(T0)) / span, "body convection from cumulative")
    # Cubic energy, window ends inside output intervals: cubic Hermite interpolation through E and
    # dE/dt reproduces a cubic exactly (Burden & Faires, Numerical Analysis, §3.4, from memory).
    solar = (e_sol(T1) - e_sol(T0)) / span
    close(number(body["solar"]), solar, "body solar (cubic energy) via Hermite", rtol=1e-12)
    # The trapezoid on the same quadratic flow is not exact: the trunk row (same flow) differs.
    check(abs(number(trunk["solar"]) - solar) > 1e-4 * solar, "trapezoid on a quadratic should be inexact")
    # Storage = channel energies − change of the energy balance error (its definition: gains − stored).
    gains = sum(number(body[c]) for c in ("metabolism", "blood", "convection", "solar"))
    close(number(body["storage"]), gains - ERR_RATE, "body storage from energy balance error")
    per_kg = rows["whole body per kg"]
    close(number(per_kg["metabolism"]), number(body["metabolism"]) / 4.0, "W/kg with [body] mass 4 kg")

    # Thresholds on piecewise-linear series: crossing times by hand.
    th = read_table(out.with_name("syn.thresholds.csv"))
    expect = {
        # core = 37 + 0.002 t: above 38 from 500 s; below 37.5 until 250 s.
        "core above": (1000.0 - 500.0, 500.0),
        "core below": (250.0 - 50.0, 50.0),
        # skin: triangle 33 -> 35 (600 s) -> 33: above 34 between 300 s and 900 s.
        "skin above": (600.0, 300.0),
        # leg coldest tissue cell 30 − 0.01 t: below 25 from 500 s.
        "leg.min below": (500.0, 500.0),
        # trunk tissue cells 39 + 0.001 t and 35 (coat at 10 excluded): min 35 never below 30;
        # max above 39.5 from 500 s; mean (39 + 0.001 t + 3 x 35) / 4 = 36 + 0.00025 t below 37 throughout.
        "trunk.min below": (0.0, None),
        "trunk.max above": (500.0, 500.0),
        "trunk.mean below": (T1 - T0, T0),
    }
    with open(out.with_name("syn.thresholds.csv"), newline="", encoding="utf-8") as fh:
        table = list(csv.DictReader(fh))
    got = {f"{r['key']} {r['condition']}": r for r in table}
    check(len(th) >= 1 and set(got) == set(expect), f"threshold rows {sorted(got)}")
    for key, (beyond, first) in expect.items():
        r = got.get(key)
        if r is None:
            continue
        close(number(r["time beyond [s]"]), beyond, f"{key}: time beyond", rtol=1e-12, atol=1e-9)
        if first is None:
            check(r["first reached at [s]"] == "", f"{key}: first reached {r['first reached at [s]']!r}, expected never")
        else:
            close(number(r["first reached at [s]"]), first, f"{key}: first reached", atol=1e-9)
        close(number(r["share of window [1]"]), beyond / span, f"{key}: share of window", atol=1e-12)
    mean_row = got.get("trunk.mean below")
    if mean_row:
        close(number(mean_row["threshold [degC]"]), 310.15 - 273.15, "310.15 K in degC (SI Brochure 2019, §2.3.1)")
        # Mean tissue temperature with volumes 1 and 3 (coat excluded) at T1 (exact weighting).
        close(number(mean_row["maximum in window [degC]"]), (39.0 + 0.001 * T1 + 3 * 35.0) / 4.0,
              "trunk mean tissue temperature (volume-weighted, coat excluded)")


# ---- 2. a real thermorph result -------------------------------------------------------------
def trapezoid_mean(t, y, t0, t1):
    """Trapezoidal mean on the outputs inside [t0, t1] (t0, t1 output times) [units of y]."""
    sel = (t >= t0) & (t <= t1)
    ts, ys = t[sel], y[sel]
    return float(np.sum(0.5 * (ys[1:] + ys[:-1]) * np.diff(ts)) / (t1 - t0))


def check_real(tmp: Path):
    h5 = tmp / "quadruped.h5"
    try:
        proc = subprocess.run([THERMORPH, "run", str(ROOT / "cases" / "quadruped.toml"), "-o", str(h5), "--quiet",
                               "--set", 'run.duration="30 min"', "--set", 'run.output_interval="1 min"',
                               "--set", 'control.shivering.set_point="37.5 degC"'],
                              capture_output=True, text=True)
        check(proc.returncode == 0 and h5.is_file(), f"thermorph run failed: {proc.stderr[-1500:]}")
    except OSError as err:
        check(False, f"cannot run thermorph ({THERMORPH}): {err}; pass its path as the second argument")
    if not h5.is_file():
        return
    out = tmp / "real.csv"
    t0, t1 = 300.0, 1500.0   # output times, so the whole-body row is the plain energy difference
    with h5py.File(h5, "r") as f:
        time = f["time"][()]
        core = f["body/core_temperature"][()]
        case = tomllib.loads(f.attrs["case"])
        mass = float(f["body"].attrs["mass"])
        threshold = float(np.round(0.5 * (core.min() + core.max()), 3))
    report_proc = run_report(h5, "--window", f"{t0:g},{t1:g}", "--above", f"core={threshold}",
                             "--below", "ears.min=30", "--csv", out)
    check(CAUTION in report_proc.stdout, "caution missing (real run)")
    rows = read_table(out)
    with h5py.File(h5, "r") as f:
        i0, i1 = int(np.searchsorted(time, t0)), int(np.searchsorted(time, t1))
        check(time[i0] == t0 and time[i1] == t1, "window ends are output times")
        body = rows["whole body"]
        gained = 0.0
        for c in f["body/cumulative_heat"]:
            if c == "time":  # the group's netCDF coordinate
                continue
            e = f[f"body/cumulative_heat/{c}"][()]
            expected = (e[i1] - e[i0]) / (t1 - t0)
            gained += e[i1] - e[i0]
            close(number(body[c]), expected, f"real: whole-body {c} = ΔE / Δt", rtol=1e-12, atol=1e-12)
        err = f["body/energy_balance_error"][()]
        close(number(body["storage"]), (gained - (err[i1] - err[i0])) / (t1 - t0), "real: whole-body storage",
              atol=1e-12)
        close(number(rows["whole body per kg"]["metabolism"]), number(body["metabolism"]) / mass,
              "real: W/kg with the built body's mass")
        check("shivering" in body, "real: shivering channel missing from the report")
        # Segments: the energy difference of one copy's cumulative energies (integrated by the solver with the
        # state), times the copies (count, times the parent's count: counts multiply down the tree), from the
        # stored case; and close to the trapezoid of the stored flows (a second method, 2 %).
        entries = {e["name"]: e for e in case["segments"]}

        def copies(name):
            n = 1
            while name:
                n *= int(entries[name].get("count", 1))
                name = entries[name].get("parent", "")
            return n

        parts = {c: 0.0 for c in f["body/heat_flow"] if c != "time"}  # time: the group's netCDF coordinate
        for name in f["segments"]:
            n = copies(name)
            label = name if n == 1 else f"{name} ×{n}"
            check(label in rows, f"real: row {label!r} missing")
            for c in f[f"segments/{name}/heat_flow"]:
                if c == "time":
                    continue
                e = f[f"segments/{name}/cumulative_heat/{c}"][()]
                expected = n * (e[i1] - e[i0]) / (t1 - t0)
                close(number(rows[label][c]), expected, f"real: {label} {c}", rtol=1e-12, atol=1e-13)
                trapezoid = n * trapezoid_mean(time, f[f"segments/{name}/heat_flow/{c}"][()], t0, t1)
                close(trapezoid, expected, f"real: {label} {c}, trapezoid vs cumulative", rtol=2e-2, atol=2e-3)
                check(rows[label]["method"] == "cumulative", f"real: {label} method {rows[label]['method']}")
                parts[c] += expected
        # The quadruped has a central blood pool: the pool row closes segments to the whole body.
        pool = rows.get("blood pool")
        check(pool is not None, "real: blood pool row missing")
        for c in parts:
            body_trap = trapezoid_mean(time, f[f"body/heat_flow/{c}"][()], t0, t1)
            if pool:
                close(number(pool[c]), number(body[c]) - parts[c], f"real: pool {c}", atol=1e-12)
            # Trapezoid (1 min outputs) against the integrator's own energies: close, not equal (the
            # shivering controller switches on within a few outputs, so 2 %).
            close(body_trap, number(body[c]), f"real: trapezoid vs cumulative {c}", rtol=2e-2, atol=2e-3)
    # Time above a threshold, by dense sampling of the linear interpolant (a second method):
    # the measure of {t : interp(t) > T} on 2e6 points, accurate to the sample spacing.
    dense = np.linspace(t0, t1, 2_000_001)
    above = float(np.mean(np.interp(dense, time, core) > threshold) * (t1 - t0))
    th = read_table(out.with_name("real.thresholds.csv"))
    close(number(th["core"]["time beyond [s]"]), above, "real: time above the core threshold", atol=2e-3)
    crossing = dense[np.argmax(np.interp(dense, time, core) >= threshold)]
    if np.interp(t0, time, core) < threshold and above > 0:
        close(number(th["core"]["first reached at [s]"]), crossing, "real: first time at the core threshold",
              atol=2e-3)


# ---- 3. bad arguments -----------------------------------------------------------------------
def check_errors(tmp: Path):
    h5 = tmp / "synthetic.h5"
    cases = [
        (["--above", "liver=40"], "unknown temperature 'liver'"),
        (["--above", "core=warm"], "bad temperature 'warm'"),
        (["--below", "core"], "expected KEY=TEMP"),
        (["--window", "0,2h"], "outside the run"),
        (["--window=-10,100"], "outside the run"),
        (["--window", "500,100"], "end must come after the start"),
        (["--window", "1,2,3"], "expected two times"),
        (["--window", "1:2:3"], "expected two times"),
        (["--window", "1,soon"], "bad time 'soon'"),
        (["--segments", "tial"], "no segment tial"),
    ]
    # t0:t1 (thermorph sweep's form) is the same window as t0,t1.
    same = [run_report(h5, "--window", w).stdout.split("Heat budget")[1] for w in ("50,1000", "50:1000")]
    check(same[0] == same[1], "report --window 50:1000 differs from 50,1000")
    for args, message in cases:
        proc = run_report(h5, *args, expect=2)
        check(message in proc.stderr, f"report {' '.join(args)}: message {proc.stderr.strip()!r} lacks {message!r}")
        check("valid keys" in proc.stderr or args[0] != "--above" or "liver" not in args[1],
              "unknown key message should list the valid keys")
    run_report(tmp / "missing.h5", expect=2)


# ---- 4. several windows: each section and CSV block as that window alone --------------------------
def check_windows(tmp: Path):
    """`--window` repeated: one section per window, each equal to the report of that window alone (the closed-form
    values of section 1 hold per window); before 2026-12-04 the last --window silently replaced the others."""
    h5 = tmp / "synthetic.h5"
    both = run_report(h5, "--window", f"{T0:g},{T1:g}", "--window", "0,300", "--below", "leg.min=25",
                      "--csv", tmp / "two.csv").stdout
    first = run_report(h5, "--window", f"{T0:g},{T1:g}", "--below", "leg.min=25", "--csv", tmp / "a.csv").stdout
    second = run_report(h5, "--window", "0,300", "--below", "leg.min=25", "--csv", tmp / "b.csv").stdout

    def section(text: str, n: int) -> str:
        """The n-th window's section: from its 'window:' line to the next window or the CSV/caution lines."""
        parts = text.split("\nwindow: ")
        body = parts[n + 1]
        return body.split("\nwrote ")[0].split("\n\nCaution")[0].rstrip()

    check(both.count("\nwindow: ") == 2, "two --window options give two sections")
    check(section(both, 0) == section(first, 0), "first window's section equals the report of that window alone")
    check(section(both, 1) == section(second, 0), "second window's section equals the report of that window alone")
    with open(tmp / "two.csv", encoding="utf-8") as fh, open(tmp / "a.csv", encoding="utf-8") as fa, \
            open(tmp / "b.csv", encoding="utf-8") as fb:
        a, b = fa.read().splitlines(), fb.read().splitlines()
        check(fh.read().splitlines() == a + b[1:], "the CSV holds both windows' rows, in order")
    th = (tmp / "two.thresholds.csv").read_text(encoding="utf-8").splitlines()
    check(len(th) == 3 and th[0].endswith("window start [s],window end [s]"),
          "the thresholds CSV has one row per window with its start and end")
    check(th[1].endswith(f"{T0!r},{T1!r}") and th[2].endswith("0.0,300.0"), "threshold rows name their window")


# ---- 5. a window end between two outputs that bracket a step of the timeline -------------------------
def check_step_note(tmp: Path):
    """The quadruped with a cold step at 5 min, outputs every 2 min and every 1 min: the same CVODE steps (outputs are
    dense-output interpolations, README "Results"), so the 1-min file holds the exact cumulative energy at the
    step. A window starting at the step is exact on the 1-min file and on the 2-min one (its /steps holds the
    energies at the step); without /steps it is off on the 2-min one, where the report says so; window ends on
    output times get no note."""
    files = {}
    for interval in ("1 min", "2 min"):
        h5 = tmp / f"step_{interval.split()[0]}.h5"
        proc = subprocess.run([THERMORPH, "run", str(ROOT / "cases" / "quadruped.toml"), "-o", str(h5), "--quiet",
                               "--set", 'run.duration="20 min"', "--set", f'run.output_interval="{interval}"',
                               "--set", 'events=[{ at = "5 min", environment = { temperature = "-5 degC", '
                                        'speed = "4 m/s" }, label = "cold front" }]'],
                              capture_output=True, text=True)
        check(proc.returncode == 0 and h5.is_file(), f"thermorph run ({interval}) failed: {proc.stderr[-1500:]}")
        files[interval] = h5
    if not all(h.is_file() for h in files.values()):
        return
    exact_csv, coarse_csv = tmp / "step_exact.csv", tmp / "step_coarse.csv"
    exact = run_report(files["1 min"], "--window", "5min,15min", "--csv", exact_csv).stdout
    coarse = run_report(files["2 min"], "--window", "5min,15min", "--csv", coarse_csv).stdout
    on_outputs = run_report(files["2 min"], "--window", "4min,16min").stdout
    check("NOTE" not in exact, "no note when the window starts on an output at the step")
    check("NOTE" not in on_outputs, "no note when both window ends are output times")
    check("NOTE" not in coarse, "no note when the window starts on a step between outputs (/steps holds it)")
    old, old_csv = tmp / "step_2_old.h5", tmp / "step_old.csv"
    without_steps(files["2 min"], old)
    stale = run_report(old, "--window", "5min,15min", "--csv", old_csv).stdout
    check("NOTE: the window start 300 s (5 min) lies between the outputs at 240 s (4 min) and 360 s (6 min), across "
          "the step at 300 s (5 min) (cold front)" in stale, "the 2-min file without /steps: its window start is noted")
    with h5py.File(files["1 min"], "r") as f:
        time = f["time"][()]
        e = f["body/cumulative_heat/convection"][()]
        i0, i1 = int(np.searchsorted(time, 300.0)), int(np.searchsorted(time, 900.0))
        truth = (e[i1] - e[i0]) / 600.0
    got_exact = number(read_table(exact_csv)["whole body"]["convection"])
    got_coarse = number(read_table(coarse_csv)["whole body"]["convection"])
    close(got_exact, truth, "step window on the 1-min file = exact energy difference", rtol=1e-12)
    # A window ending on the output at the step (1-min file, 4-5 min): that output holds the flows after the step.
    # The segments' rows come from their cumulative energies, so they add up to the whole body's convection, which
    # the pool does not exchange (energy conservation, common practice, no source); the trapezoid on the stored
    # flows credited the last minute with half a minute of the cold front's loss (a new-user trial: 0.17 W of sun
    # for a diving bird still in water).
    before_csv = tmp / "step_before.csv"
    run_report(files["1 min"], "--window", "4min,5min", "--csv", before_csv)
    table = read_table(before_csv)
    segments = [r for label, r in table.items() if r["method"] == "cumulative" and label not in
                ("whole body", "whole body per kg", "blood pool")]
    check(len(segments) >= 3, f"segment rows from cumulative energies: {sorted(table)}")
    conv = sum(number(r["convection"]) for r in segments)
    body_conv = number(table["whole body"]["convection"])
    close(conv, body_conv, "segments' convection before the step adds up to the whole body's", rtol=1e-9)
    with h5py.File(files["1 min"], "r") as f:
        time = f["time"][()]
        e = f["body/cumulative_heat/convection"][()]
        i0, i1 = int(np.searchsorted(time, 240.0)), int(np.searchsorted(time, 300.0))
        trap = trapezoid_mean(time, f["body/heat_flow/convection"][()], 240.0, 300.0)
        check(abs(trap - (e[i1] - e[i0]) / 60.0) > 0.05 * abs(body_conv),
              f"the trapezoid across the step is visibly off ({trap:.6g} W vs {body_conv:.6g} W): the check is not idle")
    # Runs that differ only in run.output_interval differ at the integrator's tolerance (README, "Status and known
    # limitations").
    close(got_coarse, truth, "step window on the 2-min file, from /steps, = the 1-min file's", rtol=1e-5)
    got_old = number(read_table(old_csv)["whole body"]["convection"])
    print(f"  cold front at 5 min, 2-min outputs, window from the front: without /steps the whole-body convection is "
          f"off by {100.0 * abs(got_old / truth - 1.0):.3g} % ({got_old:.6g} W against {truth:.6g} W)")
    check(abs(got_old - truth) > 1e-3 * abs(truth),
          f"the noted window is visibly off ({got_old:.6g} W vs {truth:.6g} W): the note is not idle")


# ---- 6. time in water and in contact with the substrate, and the heat lost there ---------------------------------
# The events table of the invented case below: a pair of legs dipped in water from 10 to 25 min of a 60-min run (the
# medium steps to water and back; the trunk is never immersed), and standing on the substrate with 30 % of their
# surface from 30 to 50 min. Hand computation: 15 min in water, 20 min in contact, 0.3 x 20 min = 6 contact-minutes.
DIP_WATER = [(600.0, 1500.0)]                 # in water [s]
DIP_CONTACT = [(1800.0, 3000.0, 0.3)]         # (from, to [s], contact fraction)
DIP_CASE = """title = "Wader dipping its legs (invented, values illustrative)"
[run]
duration = "60 min"
output_interval = "5 min"
[environment]
medium = "air"
temperature = "15 degC"
speed = "1 m/s"
substrate_temperature = "5 degC"
substrate_conductance = "200 W/(m2 K)"
[[segments]]
name = "trunk"
shape = "cylinder"
surface = { immersion = "never" }
length = "20 cm"
axial_cells = 2
layers = [{ tissue = "muscle", thickness = "4 cm", cells = 3 }, { tissue = "skin", thickness = "0.2 cm", cells = 1 }]
[[segments]]
name = "leg"
parent = "trunk"
count = 2
shape = "cylinder"
length = "10 cm"
axial_cells = 2
layers = [{ tissue = "muscle", thickness = "0.5 cm", cells = 2 }, { tissue = "skin", thickness = "0.1 cm", cells = 1 }]
[[events]]
at = "10 min"
environment = { medium = "water", temperature = "8 degC", speed = "0.2 m/s" }
[[events]]
at = "25 min"
environment = { medium = "air", temperature = "15 degC", speed = "1 m/s" }
[[events]]
at = "30 min"
surface = { leg = { contact_fraction = 0.3 } }
[[events]]
at = "50 min"
surface = { leg = { contact_fraction = 0 } }
"""


def overlap(spans, t0: float, t1: float) -> float:
    """Length of the spans [(a, b), ...] inside [t0, t1] [s] (hand computation from the events table)."""
    return sum(max(0.0, min(b, t1) - max(a, t0)) for a, b, *_ in spans)


def check_exposure(tmp: Path):
    """Time in water, time in contact, the contact-time-weighted contact fraction and the heat lost to the water and
    the substrate, against the events table above: with outputs on every change (5 min) and between them (4 min:
    the times are still the timeline's own; a sum of each output's value over the output intervals would give
    16 min in water, so the check can fail), for the whole run and a window cutting both spans."""
    case = tmp / "dip.toml"
    case.write_text(DIP_CASE)
    files = {}
    for interval in ("5 min", "4 min"):
        h5 = tmp / f"dip_{interval.split()[0]}.h5"
        proc = subprocess.run([THERMORPH, "run", str(case), "-o", str(h5), "--quiet",
                               "--set", f'run.output_interval="{interval}"'], capture_output=True, text=True)
        check(proc.returncode == 0 and h5.is_file(), f"thermorph run dip ({interval}) failed: {proc.stderr[-1500:]}")
        files[interval] = h5
    if not all(h.is_file() for h in files.values()):
        return
    heats = {}
    for interval, h5 in files.items():
        for window, (t0, t1) in ((None, (0.0, 3600.0)), ("20min,40min", (1200.0, 2400.0))):
            out = tmp / f"dip_{interval.split()[0]}_{t0:g}.csv"
            args = [h5, "--csv", out] + (["--window", window] if window else [])
            text = run_report(*args).stdout
            check(f"Caution: {CAUTION}" in text, "the report keeps the caution line")
            with open(out.with_name(f"{out.stem}.exposure.csv"), newline="", encoding="utf-8") as fh:
                rows = {r["segment"]: r for r in csv.DictReader(fh)}
            check(set(rows) == {"leg"}, f"only the legs are ever in water or contact: {sorted(rows)}")
            if "leg" not in rows:
                continue
            r = rows["leg"]
            what = f"{interval} outputs, window {t0:g}..{t1:g} s"
            close(number(r["time in water [s]"]), overlap(DIP_WATER, t0, t1), f"time in water, {what}")
            close(number(r["time in contact [s]"]), overlap(DIP_CONTACT, t0, t1), f"time in contact, {what}")
            close(number(r["contact fraction x time [s]"]),
                  sum(f * overlap([(a, b)], t0, t1) for a, b, f in DIP_CONTACT), f"contact-seconds, {what}")
            close(number(r["mean contact fraction in contact [1]"]), 0.3, f"mean contact fraction, {what}")
            on_outputs = interval == "5 min"
            # Changes between outputs (4 min): the heat there is the solver's own (/steps), so no note; the
            # interpolated heat of files without /steps is section 7's.
            check("NOTE: " not in text.split("Water and substrate")[-1], f"no note: the heat at changes is stored ({what})")
            heats[interval, t0] = (number(r["heat lost to water [J]"]), number(r["heat lost to substrate [J]"]))
            if on_outputs and window is None:
                # Heat by the solver's cumulative energies at the outputs on the changes (one copy stored, 2 legs);
                # the substrate takes heat only in contact, so its share is the run's whole substrate energy.
                with h5py.File(h5, "r") as f:
                    time = f["time"][()]
                    conv = f["segments/leg/cumulative_heat/convection"][()]
                    sub = f["segments/leg/cumulative_heat/substrate"][()]
                i10, i25 = int(np.searchsorted(time, 600.0)), int(np.searchsorted(time, 1500.0))
                close(number(r["heat lost to water [J]"]), -2 * (conv[i25] - conv[i10]), "heat lost to the water",
                      rtol=1e-12, atol=1e-9)
                close(number(r["heat lost to substrate [J]"]), -2 * (sub[-1] - sub[0]), "heat lost to the substrate",
                      rtol=1e-12, atol=1e-9)
                check(number(r["heat lost to water [J]"]) > 0 and number(r["heat lost to substrate [J]"]) > 0,
                      "legs warmer than 8 degC water and a 5 degC substrate lose heat to both")
                check("in water: 900 s (15 min), 25 % of the window" in text, "the printed time in water")
    # The same run with other outputs: the heat with the changes between outputs (from /steps) is that with outputs
    # on them, to the solver's tolerance (the old interpolation was 16 % low on the water's heat here).
    for t0 in (0.0, 1200.0):
        for k, what in enumerate(("water", "substrate")):
            if ("4 min", t0) in heats and ("5 min", t0) in heats:
                print(f"  legs, heat lost to the {what} (window from {t0:g} s): 4-min outputs {heats['4 min', t0][k]:.6g} J, "
                      f"5-min (outputs on the changes) {heats['5 min', t0][k]:.6g} J")
                close(heats["4 min", t0][k], heats["5 min", t0][k],
                      f"heat lost to the {what} (window from {t0:g} s), 4-min outputs against 5-min", rtol=1e-4)
    # The same 4-min file without /steps (as written before 2026-12-05): the heat at the changes is interpolated
    # across them between the outputs, visibly off, and the report says so.
    old, old_csv = tmp / "dip_4_old.h5", tmp / "dip_4_old.csv"
    without_steps(files["4 min"], old)
    text = run_report(old, "--csv", old_csv).stdout
    with open(old_csv.with_name(f"{old_csv.stem}.exposure.csv"), newline="", encoding="utf-8") as fh:
        stale = number(next(csv.DictReader(fh))["heat lost to water [J]"])
    if ("5 min", 0.0) in heats:
        low = 100.0 * (1.0 - stale / heats["5 min", 0.0][0])
        print(f"  legs, heat lost to the water on 4-min outputs without /steps (interpolated across the changes): "
              f"{stale:.6g} J, {low:.3g} % low against the 5-min file's {heats['5 min', 0.0][0]:.6g} J")
        check(abs(low) > 1.0 and "NOTE: " in text.split("Water and substrate")[-1],
              f"without /steps the water's heat is off by {low:.3g} % and noted: the check above is not idle")
    with h5py.File(files["4 min"], "r") as f:
        time = f["time"][()]
        wet = f["segments/leg/in_water"][()]
    naive = float(np.sum(wet[:-1] * np.diff(time)))
    check(abs(naive - 900.0) > 30.0, f"the per-output sum on 4-min outputs is off ({naive:g} s): the check is not idle")


# ---- 7. heat at changes between outputs against Newton cooling in closed form ------------------------------------
# A lumped sphere (R = 2 cm, k = 1000 W/(m K): Bi = h R / k <= 8e-4 with the substrate's 40 W/(m2 K)) with a fixed
# coefficient h = 10 W/(m2 K) (no radiation: the default emissivity with a fixed coefficient is 0), starting at
# 35 degC: in 20 degC air, in 5 degC water from 100 s to 500 s (medium steps), on a 10 degC substrate with half its
# surface (h_sub = 40 W/(m2 K)) from 700 s to 1000 s, outputs every 240 s, so that every change lies between two
# outputs. In each interval of constant surroundings the lumped body relaxes exponentially to the conductance-
# weighted mean of the fluid and substrate temperatures, T_eq = (G_c T_f + G_s T_s) / (G_c + G_s), with
# tau = rho c V / (G_c + G_s), G_c = h (1 - f) A, G_s = h_sub f A (Incropera et al. 2007, eq. 5.6, lumped
# capacitance; the contact split as tests/test_contact_events.cpp), so over an interval of length d starting at
# theta_0 = T_0 - T_eq: integral of (T - T_eq) dt = theta_0 tau (1 - exp(-d / tau)), and the heat lost by a path of
# conductance G to temperature T_x is G (integral of (T - T_eq) dt + (T_eq - T_x) d). Invented values. The heat from
# /steps is within 1.5e-4 of it, an error that scales with 1/k (k = 100 W/(m K): 1.5e-3): the lumped model's.
NEWTON_R, NEWTON_H, NEWTON_HSUB, NEWTON_F = 0.02, 10.0, 40.0, 0.5
NEWTON_RHO_C = 1000.0 * 3000.0
NEWTON_CASE = """title = "Lumped sphere dipped and set down (invented, values illustrative)"
[run]
duration = "1200 s"
output_interval = "240 s"
initial_temperature = "35 degC"
rtol = 1e-10
atol = "1e-10 K"
[tissues.lump]
base = "muscle"
conductivity = "1000 W/(m K)"
density = "1000 kg/m3"
specific_heat = "3000 J/(kg K)"
metabolic_heat = "0 W/m3"
perfusion = "0 1/s"
[[segments]]
name = "ball"
shape = "sphere"
layers = [{ tissue = "lump", thickness = "2 cm", cells = 1 }]
[environment]
medium = "air"
temperature = "20 degC"
convection = "10 W/(m2 K)"
substrate_temperature = "10 degC"
substrate_conductance = "40 W/(m2 K)"
[[events]]
at = "100 s"
environment = { medium = "water", temperature = "5 degC", speed = "0 m/s" }
[[events]]
at = "500 s"
environment = { medium = "air", temperature = "20 degC", speed = "0 m/s" }
[[events]]
at = "700 s"
surface = { ball = { contact_fraction = 0.5 } }
[[events]]
at = "1000 s"
surface = { ball = { contact_fraction = 0 } }
"""
# (start [s], fluid temperature [degC], contact fraction): the surroundings from each start to the next.
NEWTON_PHASES = [(0.0, 20.0, 0.0), (100.0, 5.0, 0.0), (500.0, 20.0, 0.0), (700.0, 20.0, NEWTON_F),
                 (1000.0, 20.0, 0.0), (1200.0, None, None)]


def newton_heat(t0: float, t1: float) -> dict:
    """Closed-form heat [J] lost by the lumped sphere over [t0, t1] (positive: lost): to the water (convection
    while in water), to the air (convection in air), to the substrate; and the convective heat gained since t = 0
    at t1 (negative of both convective losses over [0, t1])."""
    area = 4.0 * np.pi * NEWTON_R ** 2
    capacity = NEWTON_RHO_C * 4.0 / 3.0 * np.pi * NEWTON_R ** 3
    temperature, out = 35.0, {"water": 0.0, "air": 0.0, "substrate": 0.0}
    for (a, fluid, f), (b, _, _) in zip(NEWTON_PHASES[:-1], NEWTON_PHASES[1:]):
        gc, gs = NEWTON_H * (1.0 - f) * area, NEWTON_HSUB * f * area
        t_eq = (gc * fluid + gs * 10.0) / (gc + gs)
        tau = capacity / (gc + gs)
        lo, hi = max(a, t0), min(b, t1)
        if hi > lo:   # theta at lo, then its integral over [lo, hi]
            theta_lo = (temperature - t_eq) * np.exp(-(lo - a) / tau)
            integral = theta_lo * tau * (1.0 - np.exp(-(hi - lo) / tau))
            out["water" if fluid == 5.0 else "air"] += gc * (integral + (t_eq - fluid) * (hi - lo))
            out["substrate"] += gs * (integral + (t_eq - 10.0) * (hi - lo))
        temperature = t_eq + (temperature - t_eq) * np.exp(-(b - a) / tau)
    return out


def check_exact_steps(tmp: Path):
    """The report's heat lost to the water and to the substrate, with every change between outputs, against the
    closed-form integrals above: exact from /steps to the solver's tolerance and the lumped model's Biot error; the
    same file without /steps (as written before 2026-12-05) gives the interpolated heat of the old report, which
    misses them (and says so). Also: /steps holds the event times and the cumulative convection there."""
    case = tmp / "newton.toml"
    case.write_text(NEWTON_CASE)
    h5 = tmp / "newton.h5"
    proc = subprocess.run([THERMORPH, "run", str(case), "-o", str(h5), "--quiet"], capture_output=True, text=True)
    check(proc.returncode == 0 and h5.is_file(), f"thermorph run newton failed: {proc.stderr[-1500:]}")
    if not h5.is_file():
        return
    old = tmp / "newton_old.h5"
    without_steps(h5, old)
    with h5py.File(h5, "r") as src:
        steps = src["steps/step_time"][()]
        body_conv = src["steps/body/cumulative_heat/convection"][()]
        seg_conv = src["steps/segments/ball/cumulative_heat/convection"][()]
        other = max(abs(src[f"body/cumulative_heat/{c}"][-1]) for c in src["body/cumulative_heat"]
                    if c not in ("convection", "substrate", "time"))
    check(np.array_equal(steps, [100.0, 500.0, 700.0, 1000.0]), f"/steps/step_time holds the event times: {steps}")
    check(np.array_equal(body_conv, seg_conv), "one segment: the body's step energies are the segment's")
    for k, t in enumerate(steps):
        exact = -(newton_heat(0.0, t)["water"] + newton_heat(0.0, t)["air"])
        close(float(body_conv[k]), exact, f"/steps convection gained by {t:g} s against the closed form", rtol=2e-4)
    check(other < 1e-6, f"no channel but convection and substrate acts ({other:.2g} J): the closed form is the model")
    print("  heat at changes between outputs (4-min outputs), relative error against the closed form:")
    for window, (t0, t1) in ((None, (0.0, 1200.0)), ("240,960", (240.0, 960.0))):
        exact = newton_heat(t0, t1)
        found = {}
        for label, path in (("new", h5), ("old", old)):
            out = tmp / f"newton_{label}_{t0:g}.csv"
            text = run_report(path, "--csv", out, *(["--window", window] if window else [])).stdout
            check(f"Caution: {CAUTION}" in text, "the report keeps the caution line")
            check(("NOTE: " in text.split("Water and substrate")[-1]) == (label == "old"),
                  f"{label} file, window {t0:g}..{t1:g} s: a note on interpolated heat exactly without /steps")
            with open(out.with_name(f"{out.stem}.exposure.csv"), newline="", encoding="utf-8") as fh:
                found[label] = next(csv.DictReader(fh))
        for what, key, method in (("water", "heat lost to water [J]", "water heat method"),
                                  ("substrate", "heat lost to substrate [J]", "substrate heat method")):
            new, old_value = number(found["new"][key]), number(found["old"][key])
            err_new, err_old = abs(new / exact[what] - 1), abs(old_value / exact[what] - 1)
            print(f"    window {t0:g}..{t1:g} s, heat lost to the {what}: closed form {exact[what]:.6g} J, "
                  f"/steps {new:.6g} J ({err_new:.1e}), interpolated {old_value:.6g} J ({err_old:.1e})")
            close(new, exact[what], f"heat lost to the {what} from /steps, window {t0:g}..{t1:g} s", rtol=2e-4)
            check(found["new"][method] == "cumulative, exact at steps", f"method {found['new'][method]!r}")
            check(err_old > 10 * 2e-4, f"the interpolation across the steps misses the {what}'s heat by over ten "
                                        f"times the bound the exact heat meets ({err_old:.2g}): the check is not idle")
        close(number(found["new"]["time in water [s]"]), max(0.0, min(500.0, t1) - max(100.0, t0)), "time in water")


# ---- 8. window ends between an output and a step, or between two steps, against the same closed form -------------
# The 4-min file of section 7: steps at 100, 500, 700 and 1000 s, outputs every 240 s. The report's cumulative energy
# E at a window end t between the knots a < t < b around it (outputs and steps) is interpolated on that piece only:
# between two outputs by the cubic through E and the flow at both, between an output and a step by the quadratic
# through both energies and the output's flow, between two steps by a straight line. Their errors are the
# remainders of polynomial interpolation (common practice, from memory): max|E''''| (t-a)^2 (b-t)^2 / 24,
# max|E'''| (t-o)^2 |t-s| / 6 (o the output, s the step) and max|E''| (t-a)(b-t) / 2, the derivatives of the closed
# form E (finite differences of newton_heat inside the piece). Each end gets a window from 0 s (an output), checked
# against the closed form to the lumped model's 2e-4 plus that bound, and against the solver's own energy at t (the
# same run with 10-s outputs) to within the bound; the bound is met by the interpolant named and by no cruder one
# (at least a tenth of it is used: the check is not idle).
NEWTON_ENDS = ((50.0, "quadratic", 0.0, 100.0), (170.0, "quadratic", 240.0, 100.0), (300.0, "hermite", 240.0, 480.0),
               (600.0, "linear", 500.0, 700.0), (850.0, "hermite", 720.0, 960.0),
               (1100.0, "quadratic", 1200.0, 1000.0))   # (t, interpolant, the output's side or a, the step's or b)


def newton_energy(t: float) -> float:
    """Closed-form convective heat gained by the sphere since t = 0 [J] (newton_heat)."""
    heat = newton_heat(0.0, t)
    return -(heat["water"] + heat["air"])


def newton_derivative(t: float, order: int, step: float = 2.0) -> float:
    """d^order E / dt^order of the closed form at t by central differences (step 2 s against tau >= 1000 s)."""
    weights = {2: (1, -2, 1), 3: (-0.5, 1, 0, -1, 0.5), 4: (1, -4, 6, -4, 1)}[order]
    half = len(weights) // 2
    return sum(w * newton_energy(t + (k - half) * step) for k, w in enumerate(weights)) / step ** order


def interpolation_bound(t: float, how: str, a: float, b: float) -> float:
    """The remainder bound of the interpolant on the piece between a and b [J] (max of the derivative over the piece
    at its ends and middle, just inside: the closed form is exponential there)."""
    lo, hi = min(a, b), max(a, b)
    order = {"linear": 2, "quadratic": 3, "hermite": 4}[how]
    worst = max(abs(newton_derivative(x, order)) for x in (lo + 5.0, 0.5 * (lo + hi), hi - 5.0))
    if how == "linear":
        return worst * (t - a) * (b - t) / 2
    if how == "quadratic":
        return worst * (t - a) ** 2 * abs(b - t) / 6
    return worst * (t - a) ** 2 * (b - t) ** 2 / 24


def check_window_ends(tmp: Path):
    """Window ends between outputs, on both sides of the steps and between two steps, against the closed form; the
    notes on the pieces bounded by a step, and the output interval they suggest making the end exact."""
    h5, old, fine = tmp / "newton.h5", tmp / "newton_old.h5", tmp / "newton_fine.h5"
    proc = subprocess.run([THERMORPH, "run", str(tmp / "newton.toml"), "-o", str(fine), "--quiet",
                           "--set", 'run.output_interval="10 s"'], capture_output=True, text=True)
    check(proc.returncode == 0 and fine.is_file(), f"thermorph run newton (10-s outputs) failed: {proc.stderr[-1500:]}")
    if not (h5.is_file() and old.is_file() and fine.is_file()):
        return
    with h5py.File(fine, "r") as f:
        solver = dict(zip(f["time"][()].tolist(), f["body/cumulative_heat/convection"][()].tolist()))
    windows = [f"0,{t:g}" for t, *_ in NEWTON_ENDS]
    found = {}
    for label, path in (("new", h5), ("old", old)):
        out = tmp / f"ends_{label}.csv"
        found[label + " text"] = run_report(path, "--csv", out, *[x for w in windows for x in ("--window", w)]).stdout
        with open(out, newline="", encoding="utf-8") as fh:
            found[label] = {float(r["window end [s]"]): float(r["convection"]) * float(r["window end [s]"])
                            for r in csv.DictReader(fh) if r["row"] == "whole body"}
    print("  window ends between outputs and steps (4-min outputs), convection gained since 0 s [J]:")
    for t, how, a, b in NEWTON_ENDS:
        bound = interpolation_bound(t, how, a, b)
        new, stale, exact, own = found["new"][t], found["old"][t], newton_energy(t), solver[t]
        print(f"    t = {t:g} s, report off the solver by {new - own:.3e} J (bound {bound:.2e} J; {how} on "
              f"{min(a, b):g}..{max(a, b):g} s); closed form {exact:.6g} J, solver {own:.6g} J, report {new:.6g} J; "
              f"without /steps off by {stale - own:+.3e} J")
        check(abs(new - own) <= bound, f"t = {t:g} s: the {how} interpolant's error {new - own:.3g} J is within its "
                                       f"remainder bound {bound:.3g} J")
        check(abs(new - own) >= 0.1 * bound, f"t = {t:g} s: the error {new - own:.3g} J is at least a tenth of the "
                                             f"{how} bound {bound:.3g} J (the interpolant named is the one used)")
        close(new, exact, f"t = {t:g} s: the report against the closed form", rtol=2e-4, atol=bound)
        if how != "hermite":
            check(abs(stale - own) > 10 * bound, f"t = {t:g} s: without /steps the cubic across the step is off by "
                                                 f"{stale - own:.3g} J, over ten times the bound: the check is not idle")
    text = found["new text"]
    check("NOTE: the window end 50 s lies between the output at 0 s and the step at 100 s of the timeline: "
          "the cumulative energies there are interpolated by the quadratic" in text, "the end at 50 s is noted")
    check("NOTE: the window end 600 s (10 min) lies between the step at 500 s (8.333 min) and the step at 700 s "
          "(11.67 min) of the timeline: the cumulative energies there are interpolated along a straight line" in text
          and "run.output_interval = 200 s (makes 600 s (10 min) an output time)" in text,
          "the end at 600 s between two steps is noted, with the output interval that makes it exact")
    check("window end 300 s" not in text and "window end 850 s" not in text, "no note between two outputs")
    # The suggested output interval makes the end an output: exact to the lumped model's error, no note.
    exact_h5 = tmp / "newton_200.h5"
    subprocess.run([THERMORPH, "run", str(tmp / "newton.toml"), "-o", str(exact_h5), "--quiet",
                    "--set", 'run.output_interval="200 s"'], capture_output=True, text=True)
    out = tmp / "ends_200.csv"
    text = run_report(exact_h5, "--window", "0,600", "--csv", out).stdout
    check("NOTE" not in text, "no note with the suggested output interval")
    close(number(read_table(out)["whole body"]["convection"]) * 600.0, newton_energy(600.0),
          "t = 600 s on 200-s outputs against the closed form", rtol=2e-4)


def main() -> int:
    with tempfile.TemporaryDirectory(prefix="thermorph_report_") as name:
        tmp = Path(name)
        sections = ((1, check_synthetic), (4, check_windows), (3, check_errors), (2, check_real), (5, check_step_note),
                    (6, check_exposure), (7, check_exact_steps), (8, check_window_ends))
        wanted = None if ONLY is None else ONLY | ({7} if 8 in ONLY else set())
        for number_, section in sections:
            if wanted is None or number_ in wanted:
                section(tmp)
    if FAILURES:
        print(f"test_report: {len(FAILURES)} check(s) failed")
        return 1
    print("test_report: all checks passed")
    return 0


if __name__ == "__main__":
    sys.exit(main())
