#!/usr/bin/env bash
# BDF stability: a whole body whose countercurrent feet and tail on a refined grid drove CVODE's order-5 BDF into
# a regime of tiny steps (eigenvalues of the blood streams' upwind advection near the imaginary axis, where BDF of
# order 3-5 is not stable: Hairer & Wanner 1996, sec. V.2; CVODE's stability limit detection, Hindmarsh et al.
# 2005, is the remedy). Checks: the step count stays that of a stable integration, the energy balance closes, and
# the temperatures agree with an integration at 100x tighter tolerances.
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"; python="${3:-/usr/bin/python3}"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }
case="$src/tests/data/swimmer_pinned.toml"
"$exe" run "$case" --set run.grid_refinement=2 -o "$work/a.h5" -q > "$work/a.txt" 2> "$work/a.err" ||
  fail "run exit $?: $(cat "$work/a.err")"
steps=$(sed -n 's/^Solver: \([0-9]*\) steps.*/\1/p' "$work/a.txt")
[[ -n "$steps" ]] || fail "no solver line"
# 316 steps with stability limit detection, 26 795 without (measured 2026-12-05): a margin of 3x either way.
(( steps < 1000 )) || fail "$steps steps for 5 min (316 when stable): BDF order 5 unstable again?"
"$exe" run "$case" --set run.grid_refinement=2 --set run.rtol=1e-8 --set "run.atol=1e-8" -o "$work/b.h5" -q \
  > "$work/b.txt" 2>&1 || fail "tight run exit $?"
"$python" - "$work/a.h5" "$work/b.h5" <<'PY' || fail "results"
import sys, h5py, numpy as np
a, b = h5py.File(sys.argv[1]), h5py.File(sys.argv[2])
err = abs(a["body/energy_balance_error"][-1])
total = sum(abs(v[-1]) for v in a["body/cumulative_heat"].values() if v.ndim == 1)
assert err <= 1e-9 * total, (err, total)
for q in ("core_temperature", "mean_skin_temperature"):
    d = np.max(np.abs(a["body/" + q][:] - b["body/" + q][:]))
    assert d < 5e-3, (q, d)   # K: within the time-integration error at rtol 1e-6
print("e2e_stability: max |core - tight| =", np.max(np.abs(a["body/core_temperature"][:] - b["body/core_temperature"][:])))
PY
echo "e2e_stability: $steps steps; all checks passed"
