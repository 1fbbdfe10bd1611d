#!/usr/bin/env python3
"""thermorph.sensitivity and thermorph.uncertainty (the compiled module) against the command line's
`thermorph sensitivity` / `thermorph uncertainty` and against analytic values.

Case: tests/data/lumped_sphere.toml, a lumped sphere cooling in air (conductivity 1000 W/(m K), Biot number 2e-7): Newton cooling,
T(t) = T_inf + (T_i - T_inf) exp(-t / tau), tau = rho c R / (3 h) (Incropera et al. 2007, eq. 5.6), the case of the
command line's tests (tests/e2e_sensitivity.sh, tests/test_fit_sensitivity.cpp).

1. Module = command line on the same arguments and seeds: Sobol' (with bootstrap intervals), Morris and local
   indices, the design, the per-run metric values, and uncertainty quantiles, bands and samples, bit for bit; the
   module's output= files hold the same /sensitivity and /uncertainty datasets as the CLI's -o; the report keeps the
   caution; warnings are the CLI's.
2. Independent references:
   - Sobol': the final core temperature T = (1 - e) T_inf + e T_i, e = exp(-t / tau), is additive and linear in
     the environment temperature and the initial temperature; for independent uniform inputs of widths w_1, w_2 the
     first-order indices are S_i = V_i / V with V_1 = (1 - e)^2 w_1^2 / 12, V_2 = e^2 w_2^2 / 12, and S_Ti = S_i
     (additive model: Sobol' 1993; Saltelli et al. 2008, Global Sensitivity Analysis: The Primer, sec. 4.2,
     variance of a uniform w^2 / 12). Checked: |S - exact| < 0.02, the exact value in the 95 % bootstrap interval,
     the estimated variance within 2 % of V.
   - Uncertainty: T_inf ~ N(10, 2^2) gives T(t) ~ N(10 + 30 e, (2 (1 - e))^2) (linear in T_inf); 5, 50, 95 %
     quantiles at mean -+ 1.6449 SD (the idea of tests/test_fit_sensitivity.cpp, "A normal environment temperature
     through Newton cooling gives the exact quantiles"); 400 Latin-hypercube samples, within 3 % of the SD.
3. Bad input (unknown method, malformed --param, unknown key, unknown distribution) raises thermorph.CaseError
   with the command line's message (its stderr "error: MESSAGE", exit 2).
4. The case given as a dict or as TOML text, as run() and fit() take it: Sobol', local and uncertainty results
   equal the CLI's on the case file bit for bit, warnings and a bad value's message are the CLI's naming
   "<case dict>" (key path, no line) or "<case text>" (its own line and column).

    test_python_sensitivity.py MODULE_DIR THERMORPH_EXE SOURCE_DIR
"""
import math
import re
import subprocess
import sys
import tempfile
import tomllib
from pathlib import Path

import h5py
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from module_checks import check, exe, finish, src, thermorph  # noqa: E402


TAU = 1 * 100 * 0.02 / (3 * 0.01)  # rho c R / (3 h), s
E = math.exp(-100 / TAU)            # at the end of the run


def cli(*args):
    return subprocess.run([exe, *args], capture_output=True, text=True)


def texts(d):
    return [x.decode() if isinstance(x, bytes) else x for x in d[()]]


def same_group(module_result, path, group, what):
    """Every dataset of the file's group (recursively) equals the module's entry exactly."""
    bad = []

    def visit(g, d, prefix):
        for name, item in g.items():
            if isinstance(item, h5py.Group):
                if name not in d:
                    bad.append(prefix + name + " missing")
                else:
                    visit(item, d[name], prefix + name + "/")
                continue
            if name not in d:
                bad.append(prefix + name + " missing")
            elif item.dtype.kind in "OS":
                if texts(item) != list(d[name]):
                    bad.append(prefix + name)
            elif not np.array_equal(item[()], np.asarray(d[name]), equal_nan=True) or item.shape != np.shape(d[name]):
                bad.append(prefix + name)

    with h5py.File(path) as f:
        visit(f[group], module_result, "")
    check(not bad, f"{what}: every {group} dataset of the CLI's file equals the module's (bit for bit){': ' + ', '.join(bad) if bad else ''}")


with tempfile.TemporaryDirectory() as tmp:
    tmp = Path(tmp)
    case = tmp / "lump.toml"
    case.write_text((src / "tests/data/lumped_sphere.toml").read_text())
    params = ["environment.temperature=0 degC:20 degC", "run.initial_temperature=24 degC:44 degC"]  # below 45 degC: no hot-tissue warnings
    metric = "body.core_temperature.final"

    # ---- 1 + 2: Sobol' -------------------------------------------------------------------------------------
    n = 1024
    r = cli("sensitivity", str(case), "--method", "sobol", "-N", str(n), "--param", params[0], "--param", params[1],
            "--metric", metric, "--seed", "3", "--bootstrap", "500", "-j", "2", "-q", "-o", str(tmp / "cli_sobol.h5"))
    check(r.returncode == 0, f"CLI sobol exit {r.returncode}" + ("" if r.returncode == 0 else r.stderr[-300:]))
    s = thermorph.sensitivity(str(case), params=params, method="sobol", samples=n, metrics=[metric], seed=3,
                              bootstrap=500, jobs=2)
    same_group(s, tmp / "cli_sobol.h5", "sensitivity", "sobol")
    with h5py.File(tmp / "cli_sobol_runs.h5") as f:
        check(np.array_equal(f["metrics/" + metric][()], s["runs"]["metrics"][metric]),
              "sobol: per-run metric values = the CLI's runs table")
        check(texts(f["runs/status"]) == s["runs"]["status"], "sobol: per-run status = the CLI's")
    check(s["output"] == "" and s["runs_table"] == "" and not any(tmp.glob("lump_sobol*")),
          "sobol without output=: no file left, none named")
    check(thermorph.CAUTION in s["report"] and s["caution"] == thermorph.CAUTION, "sobol report keeps the caution")
    cli_lines = [l for l in r.stdout.splitlines() if l.startswith("    ")]
    check(cli_lines == [l for l in s["report"].splitlines() if l.startswith("    ")], "sobol report's index lines = the CLI's")
    cli_warnings = [l for l in r.stderr.splitlines() if l.startswith("warning")]
    check(len(s["warnings"]) == len(cli_warnings) >= 1 and all(w in c for w, c in zip(s["warnings"], cli_warnings)),
          f"sobol warnings = the CLI's ({len(cli_warnings)}: the 1-cell grid)")
    check(s["first"].shape == (1, 2) and s["parameters"] == ["environment.temperature", "run.initial_temperature"]
          and s["metrics"] == [metric] and s["units"] == ["degC"] and s["design"]["values"].shape == (n * 4, 2),
          "sobol shapes: indices [metric, parameter], design [runs, parameter]")
    w1 = w2 = 20.0
    v1, v2 = (1 - E) ** 2 * w1 ** 2 / 12, E ** 2 * w2 ** 2 / 12
    exact = np.array([v1, v2]) / (v1 + v2)
    first, total = s["first"][0], s["total"][0]
    print(f"  Sobol' N = {n}: S1 {first} ST {total}, exact S1 = ST = {exact}; V {s['variance'][0]:.4f} exact {v1 + v2:.4f}")
    check(np.all(np.abs(first - exact) < 0.02), f"S1 {first} within 0.02 of the analytic V_i / V {exact}")
    check(np.all(np.abs(total - exact) < 0.02), f"ST {total} within 0.02 of the analytic (additive: ST = S1)")
    check(np.all((s["first_low"][0] <= exact) & (exact <= s["first_high"][0])), "analytic S1 inside the 95 % intervals")
    check(abs(s["variance"][0] / (v1 + v2) - 1) < 0.02, f"variance {s['variance'][0]:.4f} within 2 % of {v1 + v2:.4f}")

    # output= writes what -o writes.
    s2 = thermorph.sensitivity(str(case), params=params, method="sobol", samples=64, metrics=[metric], seed=3,
                               bootstrap=100, output=str(tmp / "mod_sobol.h5"))
    check(Path(s2["output"]).is_file() and (tmp / "mod_sobol_runs.h5").is_file() and (tmp / "mod_sobol_runs.csv").is_file(),
          "output=: indices file and the runs table beside it, as -o")
    with h5py.File(tmp / "mod_sobol.h5") as f:
        check(thermorph.CAUTION == f.attrs["caution"], "output= file carries the caution")
    same_group(s2, tmp / "mod_sobol.h5", "sensitivity", "output= file")

    # Morris and local.
    r = cli("sensitivity", str(case), "--method", "morris", "-N", "6", "--param", params[0], "--param", params[1],
            "--metric", metric, "--seed", "5", "-q", "-o", str(tmp / "cli_morris.h5"))
    check(r.returncode == 0, f"CLI morris exit {r.returncode}")
    mo = thermorph.sensitivity(str(case), params=params, method="morris", samples=6, metrics=[metric], seed=5)
    same_group(mo, tmp / "cli_morris.h5", "sensitivity", "morris")
    local = ["environment.convection", "tissues.lump.density"]
    r = cli("sensitivity", str(case), "--method", "local", "--param", local[0], "--param", local[1], "--metric", metric,
            "-q", "-o", str(tmp / "cli_local.h5"))
    check(r.returncode == 0, f"CLI local exit {r.returncode}")
    lo = thermorph.sensitivity(str(case), params=local, method="local", metrics=[metric])
    same_group(lo, tmp / "cli_local.h5", "sensitivity", "local")
    # d ln(T - T_inf) / d ln h = -t / tau and the density the opposite (Incropera eq. 5.6).
    d = lo["normalised"][0]
    check(abs(d[0] + d[1]) < 1e-4 * abs(d[0]), f"local: normalised coefficients of h and rho opposite ({d})")

    # ---- 1 + 2: uncertainty --------------------------------------------------------------------------------
    up = ["environment.temperature[degC]=normal:10:2"]
    r = cli("uncertainty", str(case), "--param", up[0], "--series", "body.core_temperature", "--samples", "400",
            "--seed", "7", "-j", "2", "-q", "-o", str(tmp / "cli_unc.h5"))
    check(r.returncode == 0, f"CLI uncertainty exit {r.returncode}" + ("" if r.returncode == 0 else r.stderr[-300:]))
    u = thermorph.uncertainty(str(case), params=up, series=["body.core_temperature"], samples=400, seed=7, jobs=2,
                              output=str(tmp / "mod_unc.h5"))
    same_group(u, tmp / "cli_unc.h5", "uncertainty", "uncertainty")
    same_group(u, tmp / "mod_unc.h5", "uncertainty", "uncertainty output= file")
    check(thermorph.CAUTION in u["report"] and u["warnings"] == [], "uncertainty report keeps the caution; no warning")
    band = u["series"]["body.core_temperature"]
    worst = 0.0
    for i, t in enumerate(u["time"]):
        if i == 0:
            continue
        e = math.exp(-t / TAU)
        mean, sd = 10 + 30 * e, 2 * (1 - e)
        for q, z in (("q05", -1.6448536), ("q50", 0.0), ("q95", 1.6448536)):
            worst = max(worst, abs(band[q][i] - (mean + z * sd)) / sd)
    print(f"  uncertainty: worst quantile error {worst:.4f} SD (400 LHS samples)")
    check(worst < 0.03, f"quantiles of the band within 3 % of the SD of the exact normal ({worst:.4f})")
    mq = u["metric_quantiles"][u["metric_names"].index(metric)]
    mean, sd = 10 + 30 * E, 2 * (1 - E)
    check(np.all(np.abs(mq[[0, 2, 4]] - (mean + np.array([-1.6448536, 0, 1.6448536]) * sd)) < 0.03 * sd),
          f"metric quantiles {mq[[0, 2, 4]]} at the exact normal's")
    only = thermorph.uncertainty(str(case), params=up, samples=20, metrics=[metric])
    check(only["metric_names"] == [metric] and only["metric_quantiles"].shape == (1, 5)
          and only["metric_values"].shape == (20, 1), "metrics= selects the rows")
    # metrics= is --metric: a threshold as well; equal to the command line's file bit for bit.
    thr = ["time_to:body.core_temperature<25 degC", "body.core_temperature.final"]
    ut = thermorph.uncertainty(str(case), params=up, samples=20, metrics=thr, output=str(tmp / "py_thr.h5"))
    rc = cli("uncertainty", str(case), "--param", up[0], "--samples", "20", "--metric", thr[0], "--metric", thr[1],
             "-q", "-j", "1", "-o", str(tmp / "cli_thr.h5"))
    check(rc.returncode == 0, f"CLI uncertainty --metric exit 0 ({rc.stderr[-300:]})")
    with h5py.File(tmp / "cli_thr.h5") as f:
        same = all(np.array_equal(np.asarray(f["uncertainty"][k][()]), np.asarray(ut[k]), equal_nan=True)
                   for k in ("metric_values", "metric_quantiles", "metric_reached"))
    check(sorted(ut["metric_names"]) == sorted(["body.core_temperature.final", "time_to.body.core_temperature<25degC"])
          and same, "metrics= takes --metric's thresholds, as the command line (bit for bit)")

    # A draw the case refuses: the CLI's warning, as a string.
    bad = ["environment.convection[W/(m2 K)]=normal:0.01:0.02"]
    r = cli("uncertainty", str(case), "--param", bad[0], "--samples", "20", "-q", "-o", str(tmp / "cli_refuse.h5"))
    ub = thermorph.uncertainty(str(case), params=bad, samples=20)
    cli_w = [l[len("warning: "):] for l in r.stderr.splitlines() if l.startswith("warning: ")]
    check(len(cli_w) == 1 and ub["warnings"] == cli_w, f"refused draws: the CLI's warning ({cli_w[0][:60] if cli_w else ''}...)")

    # ---- 3: bad input --------------------------------------------------------------------------------------
    def refused(what, call, args):
        r = cli(*args, "-q", "-o", str(tmp / "bad.h5"))
        message = next((l[len("error: "):] for l in r.stderr.splitlines() if l.startswith("error: ")), None)
        try:
            call()
            check(False, f"{what}: no CaseError")
        except thermorph.CaseError as e:
            check(r.returncode == 2 and str(e) == message, f"{what}: CaseError with the CLI's message ({e})")

    refused("unknown method", lambda: thermorph.sensitivity(str(case), params=params, method="fourier"),
            ["sensitivity", str(case), "--method", "fourier", "--param", params[0], "--param", params[1]])
    refused("malformed --param", lambda: thermorph.sensitivity(str(case), params=["environment.temperature"]),
            ["sensitivity", str(case), "--param", "environment.temperature"])
    refused("unknown key", lambda: thermorph.sensitivity(str(case), params=["environment.temprature=0 degC:20 degC"]),
            ["sensitivity", str(case), "--param", "environment.temprature=0 degC:20 degC"])
    refused("malformed uncertainty --param", lambda: thermorph.uncertainty(str(case), params=["environment.temperature"]),
            ["uncertainty", str(case), "--param", "environment.temperature"])
    refused("unknown distribution", lambda: thermorph.uncertainty(str(case), params=["environment.temperature[degC]=gamma:1:2"]),
            ["uncertainty", str(case), "--param", "environment.temperature[degC]=gamma:1:2"])
    refused("unknown uncertainty key", lambda: thermorph.uncertainty(str(case), params=["environment.temprature[degC]=normal:1:2"]),
            ["uncertainty", str(case), "--param", "environment.temprature[degC]=normal:1:2"])
    refused("from_fit missing", lambda: thermorph.uncertainty(str(case), from_fit=str(tmp / "missing.h5")),
            ["uncertainty", str(case), "--from-fit", str(tmp / "missing.h5")])

    # ---- 1 + 3: a case given as a dict or as TOML text (as run() and fit() take it) ---------------------------
    # The same results as the file's, bit for bit, against the CLI on the file; messages name "<case dict>" with the
    # key path (a dict has no lines of its own) or "<case text>" with its own line and column, as run() does.
    def as_given(what, message, path):
        if what == "dict":
            return re.sub(re.escape(str(path)) + r"(:\d+:\d+)?", "<case dict>", message)
        return message.replace(str(path), "<case text>")

    text = case.read_text()
    forms = (("dict", tomllib.loads(text)), ("TOML text", text))
    r = cli("sensitivity", str(case), "--method", "sobol", "-N", "64", "--param", params[0], "--param", params[1],
            "--metric", metric, "--seed", "3", "--bootstrap", "100", "-q", "-o", str(tmp / "cli_sobol64.h5"))
    check(r.returncode == 0, f"CLI sobol 64 exit {r.returncode}")
    cli_warnings = [l.split("): ", 1)[-1] for l in r.stderr.splitlines() if l.startswith("warning (")]  # per kind
    for what, given in forms:
        kind = "dict" if what == "dict" else "text"
        sd = thermorph.sensitivity(given, params=params, method="sobol", samples=64, metrics=[metric], seed=3,
                                   bootstrap=100, base=str(tmp))
        same_group(sd, tmp / "cli_sobol64.h5", "sensitivity", f"sobol, case as a {what}")
        with h5py.File(tmp / "cli_sobol64_runs.h5") as f:
            check(np.array_equal(f["metrics/" + metric][()], sd["runs"]["metrics"][metric]),
                  f"sobol, case as a {what}: per-run metric values = the CLI's on the file")
        expect = [as_given(kind, w, case) for w in cli_warnings]
        check(len(expect) >= 1 and sd["warnings"] == expect and not any("/<case" in w for w in sd["warnings"]),
              f"sobol, case as a {what}: the CLI's warnings ({sd['warnings']})")
        check(thermorph.CAUTION in sd["report"] and str(tmp) not in sd["report"],
              f"sobol, case as a {what}: the report keeps the caution and names no scratch file")
        lo2 = thermorph.sensitivity(given, params=local, method="local", metrics=[metric], base=str(tmp))
        same_group(lo2, tmp / "cli_local.h5", "sensitivity", f"local (CVODES), case as a {what}")
        u2 = thermorph.uncertainty(given, params=up, series=["body.core_temperature"], samples=400, seed=7, jobs=2,
                                   base=str(tmp))
        same_group(u2, tmp / "cli_unc.h5", "uncertainty", f"uncertainty, case as a {what}")
        check(thermorph.CAUTION in u2["report"], f"uncertainty, case as a {what}: the report keeps the caution")

    # A sweep of the case as a dict or text: the rows of the file's sweep, bit for bit.
    vary = ["environment.temperature=0 degC:10 degC:3"]
    sw = thermorph.sweep(str(case), vary=vary, metrics=[metric])
    for what, given in forms:
        sg = thermorph.sweep(given, vary=vary, metrics=[metric], base=str(tmp))
        check(np.array_equal(sg["metrics"][metric], sw["metrics"][metric]) and sg["warnings"] == sw["warnings"],
              f"sweep, case as a {what}: the file's metrics and warnings")

    # A value of the wrong unit: the CLI's message on the same text in a file, naming the key path and the unit.
    bad_text = text.replace('convection = "0.01 W/(m2 K)"', 'convection = "0.01 K"')
    check(bad_text != text, "the bad case differs from the good one")
    bad_file = tmp / "bad_lump.toml"
    bad_file.write_text(bad_text)
    for command, call in (("sensitivity", lambda g: thermorph.sensitivity(g, params=params, base=str(tmp))),
                          ("uncertainty", lambda g: thermorph.uncertainty(g, params=up, base=str(tmp)))):
        first = params if command == "sensitivity" else up
        r = cli(command, str(bad_file), *[x for p in first for x in ("--param", p)], "-q", "-o", str(tmp / "bad.h5"))
        message = next((l[len("error: "):] for l in r.stderr.splitlines() if l.startswith("error: ")), "")
        check(r.returncode == 2 and "environment.convection" in message and "W/(m2 K)" in message,
              f"{command} CLI on a bad unit: exit 2 naming the key path and the unit ({message})")
        for what, given in (("dict", tomllib.loads(bad_text)), ("TOML text", bad_text)):
            kind = "dict" if what == "dict" else "text"
            try:
                call(given)
                check(False, f"{command}, bad {what}: no CaseError")
            except thermorph.CaseError as e:
                expect = as_given(kind, message, bad_file)
                check(str(e) == expect and str(e).startswith(f"<case {kind}>"),
                      f"{command}, bad {what}: the CLI's message naming <case {kind}> ({e}; expected {expect})")
    try:
        thermorph.sensitivity(str(tmp / "missing.toml"), params=params)
        check(False, "a missing case file: no CaseError")
    except thermorph.CaseError as e:
        check("missing.toml" in str(e) and "cannot open the case file" in str(e), f"a missing case file: {e}")

finish()
