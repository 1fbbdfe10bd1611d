#!/usr/bin/env bash
# End-to-end: the diving study (cases/diving_seal.toml) runs its bout of five dives in well under 10 s of CPU and matches its
# stored summary; the medium steps between air and sea water at every dive start and surfacing; and the diver's
# core cools more slowly with vasoconstriction during dives than without it.
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"; python="${3:-/usr/bin/python3}"
case="$src/cases/diving_seal.toml"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }

# 1. The bout: whole command well under 10 s of CPU (user + system of the child, not wall time, which depends on the
# machine's load; about 1.5 s on the automatic grid of 4099 nodes), summary as stored.
"$python" "$src/tests/cpu_limit.py" 10.0 diving_seal "$work/out.txt" -- \
  "$exe" run "$case" -o "$work/dive.h5" --quiet || fail "run failed or the bout took too long"
"$python" "$src/tests/regression.py" "$work/dive.h5" "$src/tests/data/diving_seal.summary.json" || fail "regression"

# 2. The medium follows the dives: at each dive start (an output time) the segments are in sea water (h of order
#    1e3 W/(m2 K), no radiation); at each surfacing in air (h of order 10, radiation back). Water carries heat
#    away about two orders of magnitude better than air (Incropera et al. Tables A.4 and A.6; common practice).
"$python" - "$work/dive.h5" <<'PY' || fail "medium steps or events"
import sys, h5py, numpy as np
with h5py.File(sys.argv[1]) as f:
    t = f["time"][:]
    labels = [x.decode() if isinstance(x, bytes) else x for x in f["events/label"][:]]
    starts = f["events/start"][:]
    dives = [s for s, lab in zip(starts, labels) if lab.startswith("dive")]
    assert len(dives) == 5, labels
    surfacings = [s + 300.0 for s in dives]
    rad = f["body/heat_flow/radiation"][:]
    for seg in ("trunk", "head", "fore_flippers", "hind_flippers"):
        h = f[f"segments/{seg}/convection_coefficient"][:]
        for d, s in zip(dives, surfacings):
            i, j = int(np.flatnonzero(t == d)[0]), int(np.flatnonzero(t == s)[0])
            assert h[i] > 500 and h[i - 1] < 50, (seg, d, h[i - 1], h[i])
            assert h[j] < 50 and h[j - 1] > 500, (seg, s, h[j - 1], h[j])
            assert rad[i] == 0.0 and rad[j] != 0.0, (d, rad[i], rad[j])
    print(f"diving_seal: {len(dives)} dives; trunk h {f['segments/trunk/convection_coefficient'][1]:.1f} W/(m2 K) "
          f"in air, {f['segments/trunk/convection_coefficient'][int(np.flatnonzero(t == dives[0])[0])]:.0f} in sea "
          f"water; solver {float(f['solver'].attrs['wall_seconds']):.3f} s")
PY

# 2b. The head's Reynolds number in sea water at 1.5 m/s (about 1.7e5) lies above the range of Whitaker's (1972)
#     sphere correlation [3.5, 7.6e4]: the run's validity warning is stored in the result file (the notes say it).
#     A second grid estimate after the body was built once cleared the run's pending warnings (2026-12-03).
"$python" - "$work/dive.h5" <<'PY' || fail "the head's validity warning is not stored"
import sys, h5py
with h5py.File(sys.argv[1]) as f:
    w = [x.decode() if isinstance(x, bytes) else x for x in f["provenance/warnings"][:]]
    assert any(x.startswith("Whitaker (1972) sphere in forced flow: Re =") for x in w), w
PY

# 3. Physiological sense (common practice, no source): with vasoconstriction on during the dives, the diver's core
#    cools more slowly than with it off. The second run keeps the dives' skin perfusion at its basal level
#    (multiplier 1 instead of 0.1) by --set on the five dive events (events 0, 2, 4, 6, 8 of the case); everything
#    else, including the closed flipper shunts and bradycardia, is the same.
sets=()
for i in 0 2 4 6 8; do sets+=(--set "events.$i.vasomotor.all.skin_perfusion=1"); done
"$exe" run "$case" -o "$work/dilated.h5" --quiet "${sets[@]}" > /dev/null || fail "run without vasoconstriction exit $?"
"$python" - "$work/dive.h5" "$work/dilated.h5" <<'PY' || fail "vasoconstriction does not slow the cooling of the core"
import sys, h5py, numpy as np
with h5py.File(sys.argv[1]) as on, h5py.File(sys.argv[2]) as off:
    t = on["time"][:]
    assert np.array_equal(t, off["time"][:])
    c_on, c_off = on["body/core_temperature"][:], off["body/core_temperature"][:]
    # Identical before the first dive (the override touches the dives only).
    first = t < 120.0
    assert np.array_equal(c_on[first], c_off[first]), "runs differ before the first dive"
    drop_on, drop_off = c_on[0] - c_on[-1], c_off[0] - c_off[-1]
    print(f"diving_seal: core {c_on[0]:.2f} degC at the start; at the end of the bout {c_on[-1]:.2f} degC with "
          f"vasoconstriction (drop {drop_on:.2f} K), {c_off[-1]:.2f} degC without (drop {drop_off:.2f} K)")
    assert drop_on > 0.0 and drop_off > drop_on + 0.1, (drop_on, drop_off)
PY
echo "e2e_diving: all checks passed"
