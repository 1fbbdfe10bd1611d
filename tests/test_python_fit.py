#!/usr/bin/env python3
"""thermorph.fit (the compiled module) against the command line's `thermorph fit` and against an independent
least-squares computation.

1. The same case and data fitted by the CLI (CSV file) and by the module (the CSV path, a pandas DataFrame with the
   same numbers, a dict of arrays, pandas' nullable Float64 with NA, a DataFrame with a TimedeltaIndex): values, standard errors, 95 % intervals (one log-scale parameter), correlations,
   s^2, AIC/BIC, RMSE, predictions, warnings (a value at its bound) and the report's parameter lines agree (1e-9
   relative; the same drivers, so in practice bit for bit), and the fitted run equals the CLI's results file.
2. Independent check: Newton cooling of a lumped sphere, T(t) = T_inf + (T0 - T_inf) exp(-t / tau), tau = rho c R /
   (3 h) (Incropera et al. 2007, eq. 5.6), observed with seeded Gaussian noise (SD 0.05 K, stated 0.2 K) at
   date-times of a time-zone-aware index; the module's fit of h is compared with a least-squares fit of the analytic curve by
   scipy.optimize.least_squares, and its standard error with the linearised one computed here with numpy,
   SE = sqrt(s^2 (J^T J)^-1), s^2 = SSR / (n - p), J by central differences of the analytic solution (Bates & Watts
   1988, ch. 2; Seber & Wild 1989, sec. 2.1): within 5 %; the true h lies in the 95 % interval.
3. Bad input raises thermorph.CaseError naming the table, the column or key and the expected unit.
4. cold_start=True is `thermorph fit --cold-start`: on a refined grid check of a nonlinear case the cold and the warm
   steady starts give refined predictions that differ in their last digits, and each module fit equals the CLI's
   of the same start bit for bit.

    test_python_fit.py MODULE_DIR THERMORPH_EXE SOURCE_DIR
"""
import math
import subprocess
import sys
import tempfile
import tomllib
from pathlib import Path

import h5py
import numpy as np
import pandas as pd
from scipy.optimize import least_squares

sys.path.insert(0, str(Path(__file__).resolve().parent))
from module_checks import check, exe, failures, src, thermorph  # noqa: E402


def close(a, b, rel=1e-9):
    a, b = np.asarray(a, float), np.asarray(b, float)
    return a.shape == b.shape and bool(np.all(np.abs(a - b) <= rel * np.maximum(np.abs(a), np.abs(b)) + 1e-300))


# The lumped sphere of tests/test_lumped_sphere.hpp (read from there): R = 2 cm, rho = 1 kg/m3, c = 100 J/(kg K),
# k = 1000 W/(m K), one cell: Bi = h R / k = 2e-7, so the lumped solution holds to about 1e-7 (Incropera et al.
# 2007, sec. 5.1); h = 0.01 W/(m2 K), surroundings 10 degC, start 40 degC, 600 s with outputs every 10 s.
_hpp = (src / "tests" / "test_lumped_sphere.hpp").read_text()
CASE = _hpp[_hpp.index('R"toml(') + 7 : _hpp.index(')toml"')]
RHO, C, R = 1.0, 100.0, 0.02


def newton(t, h, t_inf=10.0, t0=40.0):
    """Incropera et al. 2007, eq. 5.6: lumped capacitance, tau = rho V c / (h A) = rho c R / (3 h)."""
    return t_inf + (t0 - t_inf) * np.exp(-t * 3.0 * h / (RHO * C * R))


tmp = tempfile.TemporaryDirectory()
work = Path(tmp.name)
(work / "lump.toml").write_text(CASE)

# The module shows the one caution text (models/caution.hpp), as every results file stores it.
hpp = (src / "models" / "caution.hpp").read_text()
check(thermorph.CAUTION == "".join(hpp[hpp.index("caution =") :].split(";\n")[0].split('"')[1::2]),
      f"thermorph.CAUTION is models/caution.hpp's text: {thermorph.CAUTION!r}")

# ---- 1. the module against the CLI ------------------------------------------------------------------------
rng = np.random.default_rng(11)
t = np.arange(0.0, 601.0, 10.0)
obs = newton(t, 0.01) + rng.normal(0.0, 0.05, t.size)
obs[17] = np.nan  # a missing value
minutes = t / 60.0
with open(work / "obs.csv", "w") as f:
    f.write("# invented test data (illustrative): exact Newton cooling plus Gaussian noise, sd 0.05 K, seed 11\n")
    f.write("time [min], body.core_temperature [degC], body.core_temperature.sd [K]\n")
    for i in range(t.size):
        f.write(f"{minutes[i]!r}, {'NA' if np.isnan(obs[i]) else repr(obs[i])}, {'0.05' if i == 0 else ''}\n")
free = ["environment.convection=0.002 W/(m2 K):0.05 W/(m2 K):log", "environment.temperature=0 degC:20 degC",
        "run.initial_temperature=35 degC:39.9 degC"]  # the truth, 40 degC, lies beyond: the value ends at its bound
start = ["environment.convection=0.006 W/(m2 K)", "environment.temperature=12 degC", "run.initial_temperature=38 degC"]
# Options other than their defaults, each given to both (a wrong mapping moves the values beyond 1e-9).
options = {"prior": "environment.temperature=10 degC:1 K", "multi_start": 2, "converged_se": 0.005, "grid_check": 3,
           "rtol": 1e-8, "step": 2e-4, "max_iterations": 40}
args = [exe, "fit", "lump.toml", "--data", "obs.csv", "-q", "-o", "cli.h5", "--prior", options["prior"],
        "--multi-start", "2", "--converged-se", "0.005", "--grid-check", "3", "--rtol", "1e-8", "--step", "2e-4",
        "--max-iterations", "40"]
for f_ in free:
    args += ["--free", f_]
for s_ in start:
    args += ["--start", s_]
cli = subprocess.run(args, cwd=work, capture_output=True, text=True)
check(cli.returncode == 0, f"CLI fit exit {cli.returncode}: {cli.stderr[-400:]}")

fits = {
    "CSV path": thermorph.fit(str(work / "lump.toml"), str(work / "obs.csv"), free=free, start=start, **options,
                              output=str(work / "py.h5")),
    "DataFrame": thermorph.fit(str(work / "lump.toml"),
                               pd.DataFrame({"time [min]": minutes, "body.core_temperature [degC]": obs,
                                             "body.core_temperature.sd [K]": [0.05] + [None] * (t.size - 1)}),
                               free=free, start=start, **options),
    "dict": thermorph.fit(CASE, {"time [min]": minutes, "body.core_temperature [degC]": obs,
                                 "body.core_temperature.sd [K]": np.full(t.size, 0.05)}, free=free, start=start, **options,
                          base=str(work)),
    "nullable Float64 with NA": thermorph.fit(
        str(work / "lump.toml"), pd.DataFrame({"time [min]": minutes,
                                               "body.core_temperature [degC]": pd.array(
                                                   [None if np.isnan(v) else v for v in obs], dtype="Float64"),
                                               "body.core_temperature.sd [K]": 0.05}),
        free=free, start=start, **options),
    "TimedeltaIndex": thermorph.fit(str(work / "lump.toml"),
                                    pd.DataFrame({"body.core_temperature [degC]": obs,
                                                  "body.core_temperature.sd [K]": 0.05},
                                                 index=pd.to_timedelta(t, unit="s")), free=free, start=start, **options),
}
with h5py.File(work / "cli.h5", "r") as f:
    g = f["fit"]
    names = [n.decode() if isinstance(n, bytes) else n for n in g["parameters/name"][()]]
    ref = {k: g["parameters/" + k][()] for k in ("value", "standard_error", "lower_95", "upper_95")}
    corr, s2, aic, bic = g["correlation"][()], g.attrs["residual_variance"], g.attrs["aic"], g.attrs["bic"]
    warn = g.attrs["warnings"]
    warn = (warn.decode() if isinstance(warn, bytes) else str(warn)).split("\n")
    sg = g["series/body.core_temperature"]
    predicted, rmse = sg["predicted"][()], sg.attrs["rmse"]
    core = f["body/core_temperature"][()]
print("CLI:", dict(zip(names, ref["value"])), "SE", ref["standard_error"])
cli_lines = {ln.split()[0]: ln for ln in cli.stdout.splitlines() if ln.split() and ln.split()[0] in names}
for label, r in fits.items():
    check(r["parameters"] == names, f"{label}: parameter names {r['parameters']}")
    for key, py_key in (("value", "values"), ("standard_error", "standard_errors"), ("lower_95", "lower_95"),
                        ("upper_95", "upper_95")):
        got = [r[py_key][n] for n in names]
        check(close(got, ref[key]), f"{label}: {key} {got} vs CLI {list(ref[key])}")
    check(close(r["correlation"], corr), f"{label}: correlation matrix")
    check(close([r["s2"], r["aic"], r["bic"]], [s2, aic, bic]), f"{label}: s2, AIC, BIC {r['s2']} {r['aic']} {r['bic']}")
    s = r["series"]["body.core_temperature"]
    check(close(s["predicted"], predicted) and close(r["rmse"]["body.core_temperature"], rmse),
          f"{label}: predictions and RMSE")
    check(s["observed"].size == t.size - 1, f"{label}: the NaN cell is missing ({s['observed'].size} observations)")
    check(r["warnings"] == warn, f"{label}: warnings {r['warnings']} vs CLI {warn}")
    check(any("ended at a bound" in w and "run.initial_temperature" in w for w in r["warnings"]),
          f"{label}: the value at its bound is warned")
    check(close(r["run"]["core_temperature"], core, 1e-12), f"{label}: the fitted run equals the CLI's results")
    # The report's parameter lines (value to 8 digits, SE to 4, interval to 8) as the CLI prints them.
    py_lines = {ln.split()[0]: ln for ln in r["report"].splitlines() if ln.split() and ln.split()[0] in names}
    check(py_lines == cli_lines, f"{label}: report lines\n{py_lines}\nvs CLI\n{cli_lines}")
    check(r["report"].rstrip().endswith(thermorph.CAUTION), f"{label}: the report ends with the caution")
    check(r["caution"] == thermorph.CAUTION, f"{label}: caution")
    check(r["grid_check"]["refinement"] == 3 and r["grid_check"]["ok"], f"{label}: grid check 3x {r['grid_check']}")
# The log-scale interval is symmetric in ln(value): value x/ exp(t SE / value).
r = fits["CSV path"]
h, se, tq = r["values"][names[0]], r["standard_errors"][names[0]], r["t_quantile"]
check(close([r["lower_95"][names[0]], r["upper_95"][names[0]]], [h * math.exp(-tq * se / h), h * math.exp(tq * se / h)],
            1e-12), "log-scale interval value x/ exp(t SE / value)")
with h5py.File(work / "py.h5", "r") as f:
    check(close(f["fit/parameters/value"][()], ref["value"]), "output=: the module's results file holds /fit")
    check(f["fit"].attrs["data_files"] in (str(work / "obs.csv"), (str(work / "obs.csv")).encode()),
          f"output=: data_files {f['fit'].attrs['data_files']}")
check(Path(r["fitted_case"]).name == "py_fitted.toml" and Path(r["fitted_case"]).exists(), "output=: the fitted case")
check(Path(r["run"]["output"]).name == "py.h5", f"the fitted run's output {r['run']['output']}")
check(thermorph.CAUTION in Path(r["fitted_case"]).read_text(), "the fitted case keeps the caution")

# ---- 2. independent check: Newton cooling, the linearised SE computed here --------------------------------
# The noise has SD 0.05 K but the data state 0.2 K (sd column): s^2 is then about 1/16, and an SE without the factor
# s^2 (or with the stated SD alone) would be 4 times the linearised one.
h_true, noise, sd = 0.01, 0.05, 0.2
rng = np.random.default_rng(2026)
t = np.arange(0.0, 601.0, 10.0)
obs = newton(t, h_true) + rng.normal(0.0, noise, t.size)
start_utc = pd.Timestamp("2026-06-01T06:00:00Z")
index = (start_utc + pd.to_timedelta(t, unit="s")).tz_convert("Europe/Berlin")  # date-times in local time
frame = pd.DataFrame({"body.core_temperature [degC]": obs, "body.core_temperature.sd [K]": sd}, index=index)
r = thermorph.fit(CASE, frame, free="environment.convection=0.001 W/(m2 K):0.1 W/(m2 K)",
                  start="environment.convection=0.0065 W/(m2 K)", data_start=start_utc.tz_convert("America/Denver"))
key = "environment.convection"
h_fit, se_fit = r["values"][key], r["standard_errors"][key]
lo, hi = r["lower_95"][key], r["upper_95"][key]
check(close(r["series"]["body.core_temperature"]["time"], t, 1e-12), "date-times and data_start give the times")
# Independent estimate: least squares on the analytic curve (scipy), then the linearised SE at it (numpy).
fit_ref = least_squares(lambda p: (newton(t, p[0]) - obs) / sd, [0.0065], xtol=1e-15, ftol=1e-15, gtol=1e-15)
h_ref = fit_ref.x[0]
dh = 1e-6 * h_ref
J = ((newton(t, h_ref + dh) - newton(t, h_ref - dh)) / (2 * dh) / sd)[:, None]
res = (newton(t, h_ref) - obs) / sd
s2 = res @ res / (t.size - 1)
se_ref = math.sqrt(s2 * np.linalg.inv(J.T @ J)[0, 0])
print(f"Newton cooling: h fitted {h_fit:.8g} +- {se_fit:.4g} W/(m2 K) (95 % {lo:.6g} .. {hi:.6g}); "
      f"analytic least squares {h_ref:.8g} +- {se_ref:.4g}; true {h_true}")
check(lo <= h_true <= hi, f"the true h {h_true} lies in the 95 % interval {lo} .. {hi}")
check(abs(h_fit - h_ref) < 0.01 * se_ref, f"h {h_fit} equals the analytic least-squares h {h_ref} within 0.01 SE")
check(abs(se_fit / se_ref - 1) < 0.05, f"SE {se_fit} vs linearised SE {se_ref}: ratio {se_fit / se_ref:.6f}")
check(abs(r["s2"] / s2 - 1) < 1e-3 and 0.03 < s2 < 0.1, f"s^2 {r['s2']} vs {s2} (about (0.05 / 0.2)^2)")
check(r["warnings"] == [], f"no warnings: {r['warnings']}")
# Bounds tighter than the interval (the optimum inside them): the CLI's warning that the interval reaches beyond.
r = thermorph.fit(CASE, frame, free="environment.convection=0.00999 W/(m2 K):0.0101 W/(m2 K)",
                  start="environment.convection=0.01 W/(m2 K)", data_start=start_utc)
check(close(r["values"][key], h_fit, 1e-6) and any("reaches beyond the bounds" in w for w in r["warnings"]),
      f"interval beyond the bounds warned: {r['warnings']}")

# ---- 3. bad input ---------------------------------------------------------------------------------------------
good = pd.DataFrame({"time [s]": t, "body.core_temperature [degC]": obs})
h_free = "environment.convection=0.001 W/(m2 K):0.1 W/(m2 K)"


def refused(what, expect, data=good, free_=h_free, case=CASE, **kw):
    try:
        thermorph.fit(case, data, free=free_, **kw)
    except thermorph.CaseError as e:
        msg = str(e)
        check(all(x in msg for x in expect), f"{what}: {msg}")
        return
    except Exception as e:  # noqa: BLE001
        check(False, f"{what}: {type(e).__name__} instead of CaseError: {e}")
        return
    check(False, f"{what}: accepted")


refused("unknown column", ["<DataFrame>", '"body.core_temp [degC]"', "unknown output", "body.core_temperature"],
        data=good.rename(columns={"body.core_temperature [degC]": "body.core_temp [degC]"}))
refused("unit of the wrong kind", ["<DataFrame>", "body.core_temperature [W]", "expected e.g. [degC] or [K]"],
        data=good.rename(columns={"body.core_temperature [degC]": "body.core_temperature [W]"}))
refused("no unit", ["<DataFrame>", "body.core_temperature", "expected e.g. [degC] or [K]"],
        data=good.rename(columns={"body.core_temperature [degC]": "body.core_temperature"}))
refused("unknown free key", ["--free environment.convektion", "no such case key", "environment.convektion"],
        free_="environment.convektion=1 W/(m2 K):20 W/(m2 K)")
refused("bounds reversed", ["--free environment.convection", "lower bound", "must be below the upper bound"],
        free_="environment.convection=0.1 W/(m2 K):0.001 W/(m2 K)")
refused("bound of the wrong unit", ["environment.convection", "W/(m2 K)"], free_="environment.convection=1 K:2 K")
refused("not a number", ["<data dict>", "row 3 (0-based)", '"body.core_temperature [degC]"', "is not a number"],
        data={"time": t[:5], "body.core_temperature [degC]": ["30", "29", "28", "warm", "27"]})
refused("no time column", ["<DataFrame>", "no time column", "time [UNIT]"], data=good.drop(columns="time [s]"))
refused("a series of date-times", ["<DataFrame>", '"body.core_temperature [degC]"', "holds date-times"],
        data=good.assign(**{"body.core_temperature [degC]": pd.Timestamp("2026-06-01") + pd.to_timedelta(t, unit="s")}))
refused("date-times without data_start", ["<DataFrame>", "data_start="], data=frame)
refused("observation after the run", ["<DataFrame>", "outside the run", "run.duration"],
        data=pd.DataFrame({"time [h]": [0.0, 1.0], "body.core_temperature [degC]": [40.0, 10.0]}))
refused("missing file", ["nothing.csv", "cannot open"], data=str(work / "nothing.csv"))
bad_case = tomllib.loads(CASE)
bad_case["environment"]["convection"] = "0.01 K"
refused("dict case, value of the wrong unit", ["<case dict>", "environment.convection", "W/(m2 K)"], case=bad_case)

# No convergence within one iteration: SolverError (the CLI's exit 3), the history kept in STEM.incomplete.h5.
try:
    thermorph.fit(CASE, good, free=h_free, start="environment.convection=0.0065 W/(m2 K)", max_iterations=1,
                  output=str(work / "short.h5"))
    check(False, "one iteration: no SolverError")
except thermorph.SolverError as e:
    check("did not converge" in str(e) and (work / "short.incomplete.h5").exists() and not (work / "short.h5").exists(),
          f"one iteration: {e}")

# ---- 4. cold_start= is the command line's --cold-start ------------------------------------------------------
# `thermorph fit --cold-start` finds the steady start of a refined run (here the grid check's, on the grid refined
# 2x) by the relaxation from the case's initial temperature instead of by Newton from the unrefined grid's steady state
# (cli/fit_cli.cpp). The invented quadruped (controllers: a nonlinear steady state) with a cold front at 4 min, its
# mean skin temperature "observed" from its own run with seeded noise (SD 0.05 K; illustrative), fur conductivity
# free: the two starts reach the steady state to KINSOL's tolerance, so the grid check's refined predictions differ
# in their last digits (about 1e-12 K), and each of the module's fits equals the CLI's of the same start bit for bit
# (values, the grid check's shift, the refined predictions of its results file): cold_start reaches the driver.
quad = src / "cases" / "quadruped.toml"
qset = ["run.initial=steady", 'run.duration="20 min"', 'run.output_interval="2 min"',
        'events=[{ at = "4 min", environment = { temperature = "-5 degC", speed = "4 m/s" } }]']
qsets = sum([["--set", x] for x in qset], [])
subprocess.run([exe, "run", str(quad), *qsets, "-q", "-o", "qtruth.h5"], cwd=work, check=True,
               stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
with h5py.File(work / "qtruth.h5", "r") as f:
    qt, qskin = f["time"][()], f["body/mean_skin_temperature"][()]
qskin = qskin + np.random.default_rng(5).normal(0.0, 0.05, qskin.size)
with open(work / "qobs.csv", "w") as f:
    f.write("# invented test data (illustrative): the model's own mean skin temperature plus noise, sd 0.05 K\n")
    f.write("time [s], body.mean_skin_temperature [degC], body.mean_skin_temperature.sd [K]\n")
    for i in range(qt.size):
        f.write(f"{qt[i]!r}, {qskin[i]!r}, {'0.05' if i == 0 else ''}\n")
qfree = "tissues.fur.conductivity=0.02 W/(m K):0.1 W/(m K)"
refined_predictions = {}
for cold in (False, True):
    label = "cold" if cold else "warm"
    cli_h5, py_h5 = work / f"q_cli_{label}.h5", work / f"q_py_{label}.h5"
    proc = subprocess.run([exe, "fit", str(quad), *qsets, "--data", "qobs.csv", "--free", qfree, "-j", "1", "-q",
                           "-o", str(cli_h5)] + (["--cold-start"] if cold else []), cwd=work, capture_output=True,
                          text=True)
    check(proc.returncode == 0, f"CLI fit ({label} start) exit {proc.returncode}" + (f": {proc.stderr[-400:]}"
                                                                                    if proc.returncode else ""))
    r = thermorph.fit(str(quad), str(work / "qobs.csv"), free=qfree, set=qset, jobs=1, output=str(py_h5),
                      cold_start=cold)
    with h5py.File(cli_h5, "r") as f, h5py.File(py_h5, "r") as g:
        key = "tissues.fur.conductivity"
        same_value = r["values"][key] == f["fit/parameters/value"][0]
        same_shift = r["grid_check"]["shift"][key] == f["fit/grid_check/shift"][0]
        name = "fit/series/body.mean_skin_temperature/predicted_refined"
        refined_predictions[label] = f[name][()]
        same_refined = np.array_equal(g[name][()], f[name][()])
    check(same_value and same_shift and same_refined,
          f"fit cold_start={cold} equals `thermorph fit{' --cold-start' if cold else ''}` bit for bit: value "
          f"{same_value}, grid-check shift {same_shift}, refined predictions {same_refined}")
gap = float(np.max(np.abs(refined_predictions["cold"] - refined_predictions["warm"])))
print(f"cold against warm start: the grid check's refined predictions differ by up to {gap:.3g} K")
check(0.0 < gap < 1e-6, f"the two starts reach the same steady state to KINSOL's tolerance but not bit for bit "
                        f"({gap:.3g} K): the comparisons above tell the starts apart")

tmp.cleanup()
if failures:
    print(f"{len(failures)} failure(s)")
    sys.exit(1)
print("all checks passed")
