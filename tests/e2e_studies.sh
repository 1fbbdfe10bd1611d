#!/usr/bin/env bash
# End-to-end: the example studies cases/hare_ears.toml and cases/wading_bird.toml each run from one command in well
# under a few seconds and match their stored summaries (tests/data/NAME.summary.json); their results carry the
# labelled events, the controllers' channels and the segments the studies' notes talk about.
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"; python="${3:-/usr/bin/python3}"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }

for study in hare_ears wading_bird; do
  start=$(date +%s.%N)
  "$exe" run "$src/cases/$study.toml" -o "$work/$study.h5" --quiet > "$work/$study.txt" || fail "$study: run exit $?"
  end=$(date +%s.%N)
  "$python" -c "import sys; w = $end - $start; print(f'$study: whole command {w:.2f} s'); sys.exit(0 if w < 3.0 else 1)" \
    || fail "$study: the run took more than 3 s"
  grep -q "Energy balance error" "$work/$study.txt" || fail "$study: no budget printed: $(cat "$work/$study.txt")"
  "$python" "$src/tests/regression.py" "$work/$study.h5" "$src/tests/data/$study.summary.json" || fail "$study: regression"
done

"$python" - "$work/hare_ears.h5" "$work/wading_bird.h5" <<'PY' || fail "result contents"
import sys
import h5py
import numpy as np

with h5py.File(sys.argv[1]) as f:
    labels = [x.decode() if isinstance(x, bytes) else x for x in f["events/label"][...]]
    assert "ear shunts open" in labels, labels
    k = labels.index("ear shunts open")
    assert f["events/start"][k] == 7200.0 and f["events/end"][k] == 14400.0, (f["events/start"][k], f["events/end"][k])
    t = f["time"][...]
    ears = f["segments/ears/heat_flow"]
    exchange = ears["convection"][...] + ears["radiation"][...] + ears["solar"][...]
    before, after = exchange[np.searchsorted(t, 7200.0)], exchange[np.searchsorted(t, 7800.0)]
    # Opening the shunts in air cooler than the blood raises each ear's heat loss (common practice, no source).
    assert after < before < 0.0, (before, after)
    assert "respiration" in f["body/heat_flow"], "panting controller without respiration"
    print(f"hare_ears: per-ear exchange {before:.3f} W before, {after:.3f} W 10 min after the shunts open")

with h5py.File(sys.argv[2]) as f:
    labels = [x.decode() if isinstance(x, bytes) else x for x in f["events/label"][...]]
    assert labels == ["sunrise"], labels
    assert "shivering" in f["body/heat_flow"], "no shivering channel"
    leg = f["segments/leg"]
    assert leg["arterial_temperature"].shape[1] == 6
    # The exchanger precools the arterial blood along the leg (countercurrent exchange; common practice, no source).
    artery = leg["arterial_temperature"][0]
    assert np.all(np.diff(artery) < 0.0), artery
    core = f["body/core_temperature"][0]
    assert 36.0 < core < 41.0, f"steady start not the physiological state: core {core} degC"
    print(f"wading_bird: leg artery {artery[0]:.1f} -> {artery[-1]:.1f} degC, core {core:.2f} degC at t = 0")
PY
echo "e2e_studies: all checks passed"
