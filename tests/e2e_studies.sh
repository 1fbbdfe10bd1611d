#!/usr/bin/env bash
# End-to-end: the example studies cases/large_bill.toml and cases/wading_bird.toml each run from one command in well
# under a few seconds and match their stored summaries (tests/data/NAME.summary.json); their results carry the
# labelled events, the controllers' channels and the segments the studies' notes talk about; the bill's shunts,
# opened by the vasomotor controller, raise its heat loss.
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"; python="${3:-/usr/bin/python3}"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }

for study in large_bill wading_bird; do
  "$python" "$src/tests/cpu_limit.py" 3.0 "$study" "$work/$study.txt" -- \
    "$exe" run "$src/cases/$study.toml" -o "$work/$study.h5" --quiet \
    || fail "$study: run failed or took more than 3 s of CPU"
  grep -q "Energy balance error" "$work/$study.txt" || fail "$study: no budget printed: $(cat "$work/$study.txt")"
  "$python" "$src/tests/regression.py" "$work/$study.h5" "$src/tests/data/$study.summary.json" || fail "$study: regression"
done

"$exe" run "$src/cases/large_bill.toml" --set segments.bill.vasomotor.shunt=0 -o "$work/closed.h5" --quiet \
  > /dev/null || fail "large_bill with closed shunts: run exit $?"

"$python" - "$work/large_bill.h5" "$work/wading_bird.h5" "$work/closed.h5" <<'PY' || fail "result contents"
import sys
import h5py
import numpy as np

with h5py.File(sys.argv[1]) as f, h5py.File(sys.argv[3]) as g:
    labels = [x.decode() if isinstance(x, bytes) else x for x in f["events/label"][...]]
    assert labels == ["midday heat"], labels
    assert f["events/start"][0] == 1800.0 and f["events/end"][0] == 14400.0, (f["events/start"][0], f["events/end"][0])
    shunts, panting = f["control/vasomotor_shunts"][...], f["control/panting"][...]
    # The controller opens the bill's shunts as the core warms, and panting follows (controllers of the case).
    assert shunts[0] < 0.2 and shunts[-1] > 0.95, (shunts[0], shunts[-1])
    assert panting[0] == 1.0 and panting[-1] > 1.5, (panting[0], panting[-1])
    assert "respiration" in f["body/heat_flow"], "panting controller without respiration"
    assert f["body/heat_flow/respiration"][-1] < 1.5 * f["body/heat_flow/respiration"][0], "panting raised no loss"
    def exchange(h):
        b = h["segments/bill/heat_flow"]
        return b["convection"][-1] + b["radiation"][-1] + b["solar"][-1]
    # Open shunts in air cooler than the blood raise the bill's heat loss (common practice, no source).
    opened, closed = exchange(f), exchange(g)
    assert opened < closed < 0.0, (opened, closed)
    assert f["body/core_temperature"][-1] < g["body/core_temperature"][-1]
    print(f"large_bill: bill exchange at 14:00 {opened:.3f} W with the shunts, {closed:.3f} W without")

with h5py.File(sys.argv[2]) as f:
    labels = [x.decode() if isinstance(x, bytes) else x for x in f["events/label"][...]]
    assert labels == ["sunrise"], labels
    assert "shivering" in f["body/heat_flow"], "no shivering channel"
    leg = f["segments/leg"]
    assert leg["arterial_temperature"].shape[1] >= 6  # axial cells chosen automatically
    # The exchanger precools the arterial blood along the leg (countercurrent exchange; common practice, no source):
    # by kelvins over the leg; where both streams have reached the water's temperature, the long distal cells of the
    # graded grid may differ by micro-kelvins either way (4e-6 K measured on 260 cells graded to Q = 100).
    artery = leg["arterial_temperature"][0]
    assert artery[0] - artery[-1] > 10.0, artery
    assert np.all(np.diff(artery) < 1e-4), artery
    core = f["body/core_temperature"][0]
    assert 36.0 < core < 41.0, f"steady start not the physiological state: core {core} degC"
    print(f"wading_bird: leg artery {artery[0]:.1f} -> {artery[-1]:.1f} degC, core {core:.2f} degC at t = 0")
PY
echo "e2e_studies: all checks passed"
