#!/usr/bin/env bash
# End-to-end: thermorph fit on a lumped sphere cooling in air (Newton cooling, Incropera et al. 2007 eq. 5.6).
# A fit from noisy data (fixed noise written in the file) recovers h within 2 SE; the results file holds the
# fitted run and /fit; the fitted case reproduces the fitted run; the figure script draws it; bad input exits 2
# naming the file and key; a fit stopped by its iteration limit exits 3 and keeps its history.
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"; python="${3:-/usr/bin/python3}"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }
cd "$work"
# `thermorph fit` runs thermorph-fit (Ceres) in its place; thermorph itself loads none of Ceres' libraries.
if command -v ldd > /dev/null && ldd "$exe" | grep -Eq "libglog|libcholmod|liblapack"; then
  fail "thermorph links Ceres' shared libraries"
fi
[[ -x "$(dirname "$exe")/thermorph-fit" ]] || fail "no thermorph-fit beside $exe"
cat > lump.toml <<'TOML'
title = "lumped sphere (Newton cooling)"
[run]
duration = "600 s"
output_interval = "10 s"
initial_temperature = "40 degC"
[tissues.lump]
base = "muscle"
conductivity = "1000 W/(m K)"
density = "1 kg/m3"
specific_heat = "100 J/(kg K)"
metabolic_heat = "0 W/m3"
perfusion = "0 1/s"
[[segments]]
name = "ball"
shape = "sphere"
layers = [{ tissue = "lump", thickness = "2 cm", cells = 1 }]
[environment]
temperature = "10 degC"
convection = "0.01 W/(m2 K)"
TOML
# Exact curve with h = 0.01 W/(m2 K) (tau = rho c R / (3 h) = 66.67 s) plus Gaussian noise, sd 0.05 K (seed 7).
"$python" - <<'PY' || fail "writing the data"
import math, random
random.seed(7)
tau = 1 * 100 * 0.02 / (3 * 0.01)
with open("obs.csv", "w") as f:
    f.write("# invented test data: exact Newton cooling plus Gaussian noise (sd 0.05 K, seed 7)\n")
    f.write("time [min], body.core_temperature [degC], body.core_temperature.sd [K]\n")
    for i in range(61):
        t = 10 * i
        f.write(f"{t / 60!r}, {10 + 30 * math.exp(-t / tau) + random.gauss(0, 0.05):.6f}, {0.05 if i == 0 else ''}\n")
PY
free=(--free "environment.convection=0.001 W/(m2 K):0.1 W/(m2 K)" --start "environment.convection=0.0065 W/(m2 K)")
"$exe" fit lump.toml --data obs.csv "${free[@]}" -q -o fit.h5 > fit.txt 2> fit.err || fail "fit exit $?: $(cat fit.err)"
grep -q "converged" fit.txt || fail "report: $(cat fit.txt)"
grep -q "Grid check: one run at the fitted values on the grid refined 2x" fit.txt || fail "no grid check: $(cat fit.txt)"
[[ -f fit_fitted.toml ]] || fail "no fitted case"
"$exe" run fit_fitted.toml -q -o rerun.h5 > /dev/null || fail "fitted case does not run"
"$python" - <<'PY' || fail "fit file contents"
import h5py, numpy as np
with h5py.File("fit.h5") as f, h5py.File("rerun.h5") as r:
    g = f["fit"]
    v, se = g["parameters/value"][0], g["parameters/standard_error"][0]
    assert abs(v - 0.01) < 2 * se, (v, se)
    assert int(g.attrs["converged"]) == 1
    s = g["series/body.core_temperature"]
    assert s["observed"].shape == s["predicted"].shape == (61,)
    assert np.allclose(s["residual"][:], s["predicted"][:] - s["observed"][:])
    assert g["covariance"].shape == (1, 1) and g["jacobian"].shape == (61, 1)
    assert len(g["history/cost"]) >= 2
    # the fitted run's full results are in the same file, and the fitted case reproduces them
    assert np.array_equal(f["body/core_temperature"][:], r["body/core_temperature"][:])
    assert "Model estimates for research" in g.attrs["caution"]
    # the default grid check (2x): a lumped sphere (Bi 2e-7) barely changes with its cells, so its fitted h moves by
    # far less than 0.2 SE and nothing is warned (the check's own validation: tests/test_fit_grid.cpp)
    c = g["grid_check"]
    assert int(c.attrs["refinement"]) == 2 and int(c.attrs["ok"]) == 1, dict(c.attrs)
    assert c.attrs["nodes"] > c.attrs["case_nodes"], dict(c.attrs)
    assert abs(c["shift_se"][0]) < 0.2 and c.attrs["warnings"] == "", (c["shift_se"][:], c.attrs["warnings"])
    assert s["predicted_refined"].shape == (61,)
    assert "Model estimates for research" in c.attrs["caution"]
    shift, shift_se = c["shift"][0], c["shift_se"][0]
print("fit: h =", v, "+-", se, "; grid check 2x shift", shift, "(", shift_se, "SE)")
PY
"$python" "$src/postproc/fit_figure.py" fit.h5 --out figs > /dev/null || fail "fit_figure.py"
[[ -f figs/fit_fit_0.png ]] || fail "no figure"

# Bad input: exit 2, the file or key named; earlier results untouched.
cp fit.h5 keep.h5
expect2() {  # expect2 PATTERN ARGS...
  local pattern="$1"; shift
  "$exe" fit lump.toml "$@" -q -o fit.h5 > out.txt 2> err.txt; local rc=$?
  [[ $rc -eq 2 ]] || fail "exit $rc (expected 2) for $*: $(cat err.txt)"
  grep -q -- "$pattern" err.txt || fail "message for $*: $(cat err.txt) (expected $pattern)"
}
expect2 "no such case key \"environment.convektion\"" --data obs.csv --free "environment.convektion=1:2"
expect2 "not a continuous numeric key" --data obs.csv --free "segments.ball.shape=1:2"
expect2 "lies outside the bounds" --data obs.csv --free "environment.convection=0.02 W/(m2 K):0.1 W/(m2 K)"
printf 'time [s], body.core_temperature [degC]\n' > empty.csv
expect2 "empty.csv: no data rows" --data empty.csv "${free[@]}"
printf 'time [s], body.ear_temperature [degC]\n0, 1\n' > unknown.csv
expect2 "unknown.csv:1: column 2: unknown output" --data unknown.csv "${free[@]}"
printf 'time [s], body.core_temperature [W]\n0, 1\n' > unit.csv
expect2 "is not a temperature" --data unit.csv "${free[@]}"
printf 'time [s], body.core_temperature [degC]\n0, 37\n900, 30\n' > late.csv
expect2 "outside the run" --data late.csv "${free[@]}"
printf 'time [s], body.core_temperature [degC], body.metabolic_rate [W]\n0, 37,\n10, 36,\n' > blank.csv
expect2 "every value is missing" --data blank.csv "${free[@]}"
expect2 "no observed data" "${free[@]}"
expect2 "grid-check 1: expected 0 (no check) or a refinement from 2 to 16" --data obs.csv "${free[@]}" --grid-check 1
cmp -s fit.h5 keep.h5 || fail "a refused fit changed earlier results"

# No convergence within one iteration: exit 3, the history kept in fit.incomplete.h5.
"$exe" fit lump.toml --data obs.csv "${free[@]}" --max-iterations 1 -q -o fit.h5 > out.txt 2> err.txt; rc=$?
[[ $rc -eq 3 ]] || fail "iteration limit: exit $rc (expected 3): $(cat err.txt)"
grep -q "did not converge" err.txt || fail "message: $(cat err.txt)"
"$python" -c "
import h5py
with h5py.File('fit.incomplete.h5') as f:
    assert int(f['fit'].attrs['converged']) == 0 and len(f['fit/history/cost']) >= 1
" || fail "incomplete history"
cmp -s fit.h5 keep.h5 || fail "a failed fit changed earlier results"
echo "e2e_fit: ok"
