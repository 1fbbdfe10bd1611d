#!/usr/bin/env bash
# End-to-end: local vasomotor controllers and CIVD ([control.local.NAME]) from the command line. The demo case
# runs and stores one state per foot controller; bad local-controller input exits 2 with file, line and key path
# and leaves an earlier result untouched; the resolved case reloads.
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"; python="${3:-/usr/bin/python3}"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }
case_file="$src/cases/cold_feet_demo.toml"

# 1. The demo runs; /control holds the feet's states; energy balance near round-off.
"$exe" run "$case_file" -o "$work/feet.h5" --quiet > "$work/out.txt" || fail "demo run exit $?"
grep -q "Energy balance error" "$work/out.txt" || fail "no energy balance line"
"$python" - "$work/feet.h5" <<'PY' || fail "control datasets"
import sys, h5py
with h5py.File(sys.argv[1]) as f:
    names = set(f["control"])
    for n in ("vasomotor_skin_perfusion", "feet_foot_skin_perfusion", "feet_foot_shunts", "feet_foot_civd"):
        assert n in names, (n, sorted(names))
    assert abs(f["body/energy_balance_error"][-1]) < 1e-6, f["body/energy_balance_error"][-1]
PY

# 2. Bad input: exit 2; the message names the file with line and column and the key path.
cp "$work/feet.h5" "$work/keep.h5"
expect_bad() {  # TEXT-TO-APPEND KEY-PATH WHAT
  { cat "$case_file"; printf '%s\n' "$1"; } > "$work/bad.toml"
  "$exe" run "$work/bad.toml" -o "$work/feet.h5" 2> "$work/err.txt"; rc=$?
  [[ $rc -eq 2 ]] || fail "$2: exit $rc, expected 2: $(cat "$work/err.txt")"
  grep -q "bad.toml:[0-9]*:[0-9]*: $2" "$work/err.txt" || fail "message lacks file:line:column: $2: $(cat "$work/err.txt")"
  grep -q "$3" "$work/err.txt" || fail "message lacks '$3': $(cat "$work/err.txt")"
  cmp -s "$work/feet.h5" "$work/keep.h5" || fail "a refused run changed the earlier result"
}
expect_bad '[control.local.paws]
segments = "paw"' "control.local.paws.segments" 'no segment named "paw"'
expect_bad '[control.local.paws]
segments = "trunk"
signal = "tail_skin"' "control.local.paws.signal" "is not one of"
expect_bad '[control.local.paws]
segments = "leg, foot"' "control.local.paws.segments" "already controlled by \[control.local.feet\]"
expect_bad '[[events]]
at = "1 h"
control = { paws = { enabled = "off" } }' "events.0.control.paws" 'unknown controller "paws"'
{ sed 's/{ tissue = "skin", thickness = "0.25 cm" }/{ tissue = "fat", thickness = "0.25 cm" }/' "$case_file" \
  | sed 's/^vessels = { shunt_flow_max = "1.5 mL\/min" }$//; s/^vasomotor = { shunt = 1 }$//'; } > "$work/noskin.toml"
"$exe" check "$work/noskin.toml" > /dev/null 2> "$work/err.txt"; rc=$?
[[ $rc -eq 2 ]] || fail "controller on a segment without skin: exit $rc"
grep -q "noskin.toml:[0-9]*:[0-9]*: control.local.feet.segments: segment \"foot\" has no layer with role skin" "$work/err.txt" \
  || fail "no-skin message: $(cat "$work/err.txt")"
"$exe" run "$case_file" -o "$work/feet.h5" --set control.local.feet.signal=toes 2> "$work/err.txt"; rc=$?
[[ $rc -eq 2 ]] || fail "--set of a bad signal: exit $rc"
grep -q "control.local.feet.signal" "$work/err.txt" || fail "--set message: $(cat "$work/err.txt")"

# 3. The resolved case reloads with the same controllers.
"$exe" check "$case_file" --resolved > "$work/resolved.toml" || fail "resolved exit $?"
grep -q "local_skin" "$work/resolved.toml" || fail "resolved case lacks the local controller"
"$exe" check "$work/resolved.toml" > "$work/check.txt" || fail "the resolved case does not load"
grep -q "feet_foot_civd" "$work/check.txt" || fail "check of the resolved case lacks the CIVD state"
echo "e2e_local_control: ok"
