#!/usr/bin/env bash
# End-to-end: the example quadruped (cases/quadruped.toml) runs and matches its stored summary; its result stores
# one axial series per cell of the grid `check --resolved` reports (whatever counts the automatic rule chooses);
# `check` describes a ~3 kg body; bad trees and negative flows exit 2 with the segment names.
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"; python="${3:-/usr/bin/python3}"
case="$src/cases/quadruped.toml"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }

# 1. One simulated hour: budget printed, body temperatures and blood streams stored, summary matches.
"$exe" run "$case" -o "$work/quadruped.h5" --quiet > "$work/out.txt" || fail "run exit $?"
grep -q "ears x2" "$work/out.txt" || fail "budget does not show the pair of ears: $(cat "$work/out.txt")"
grep -q "blood_pool" "$work/out.txt" || fail "budget has no blood pool row"
"$python" "$src/tests/regression.py" "$work/quadruped.h5" "$src/tests/data/quadruped.summary.json" || fail "regression"
# The grid the case resolves to (automatic counts filled in): the result must have one axial series per cell of it.
"$exe" check "$case" --resolved > "$work/resolved.toml" 2> /dev/null || fail "check --resolved exit $?"
"$python" - "$work/quadruped.h5" "$work/resolved.toml" <<'PY' || fail "result layout"
import sys, tomllib, h5py
with open(sys.argv[2], "rb") as fh:
    resolved = tomllib.load(fh)
grid = {s["name"]: s["axial_cells"] for s in resolved["segments"]}
assert sorted(grid) == sorted(("trunk", "head", "forelegs", "hindlegs", "tail", "ears")), grid
with h5py.File(sys.argv[1]) as f:
    nt = f["time"].shape[0]
    for key in ("core_temperature", "blood_temperature", "mean_skin_temperature"):
        assert f["body/" + key].shape == (nt,), key
    for seg, nz in grid.items():
        assert nz >= 1, (seg, nz)
        for key in ("arterial_temperature", "venous_temperature"):
            assert f[f"segments/{seg}/{key}"].shape == (nt, nz), (seg, key, f[f"segments/{seg}/{key}"].shape, nz)
        assert f"segments/{seg}/heat_flow/blood" in f, seg
    # Blood only moves heat: the body's blood channel is zero to round-off (W) against ~10 W of metabolism
    # (conservation of the advected enthalpy, common practice, no source).
    assert abs(f["body/heat_flow/blood"][-1]) < 1e-9, f["body/heat_flow/blood"][-1]
    print(f"quadruped: axial cells {grid}, {f['solver'].attrs['steps']} steps")
PY

# 2. check: every segment listed, body mass about 3 kg.
"$exe" check "$case" > "$work/check.txt" || fail "check exit $?"
for seg in trunk head forelegs hindlegs tail ears; do
  grep -q "^$seg " "$work/check.txt" || fail "check does not list $seg"
done
mass=$(sed -n 's/^Body mass \([0-9.]*\) kg.*/\1/p' "$work/check.txt")
"$python" -c "import sys; m = float('$mass'); sys.exit(0 if 2.7 <= m <= 3.3 else 1)" || fail "body mass '$mass' kg, expected about 3"

# 3. Bad trees and flows: exit 2, the message names the segments.
expect_error() {  # description, expected text..., then -- and the --set assignments
  local what="$1"; shift
  local texts=()
  while [[ "$1" != "--" ]]; do texts+=("$1"); shift; done
  shift
  local sets=()
  for s in "$@"; do sets+=(--set "$s"); done
  "$exe" check "$case" "${sets[@]}" > /dev/null 2> "$work/err.txt"
  local rc=$?
  [[ $rc -eq 2 ]] || fail "$what: exit $rc, expected 2 ($(cat "$work/err.txt"))"
  for t in "${texts[@]}"; do
    grep -qF "$t" "$work/err.txt" || fail "$what: message lacks '$t': $(cat "$work/err.txt")"
  done
}
expect_error "unknown parent" "segments.tail.parent" '"rump"' -- 'segments.tail.parent="rump"'
expect_error "cycle" "cycle" "head -> ears -> head" -- 'segments.head.parent="ears"'
expect_error "two roots" "2 root segments" "trunk" "tail" -- 'segments.tail.parent=""'
expect_error "negative shunt" "segments.ears.vasomotor.shunt" -- 'segments.ears.vasomotor.shunt=-1'
expect_error "negative shunt flow" "segments.ears.vessels.shunt_flow_max" -- 'segments.ears.vessels.shunt_flow_max="-1 mL/min"'
expect_error "shunts without skin" "shunts need skin" "tail" '"muscle"' -- \
  'segments.tail.layers.2.tissue="muscle"' 'segments.tail.vessels.shunt_flow_max="1 mL/min"'
echo "e2e_quadruped: all checks passed"
