#!/usr/bin/env bash
# End-to-end: grid warnings per sweep row (CSV column and HDF5 /runs/warnings), command-line environment values
# that the timeline would override (exit 2 naming the key path), `check` grid table and `refine`.
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"; python="${3:-/usr/bin/python3}"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }

# 1. Per-row warnings: one cell across the bone (radius 5 mm) is coarser than the guard, four are not.
limb="$src/cases/limb_cooling.toml"
"$exe" sweep "$limb" --vary "segments.forelimb.layers.0.cells=1,4" --set run.duration="10 min" -j 1 -q \
    -o "$work/w.h5" > /dev/null 2>&1 || fail "sweep exit $?"
head -1 "$work/w.csv" | grep -q ",warnings,error$" || fail "CSV header: $(head -1 "$work/w.csv")"
sed -n 2p "$work/w.csv" | grep -q "grid: segment forelimb: layer 0 (bone) has 1 radial cells" || fail "row 0 warning: $(sed -n 2p "$work/w.csv")"
sed -n 3p "$work/w.csv" | grep -q "grid: segment forelimb: layer 0" && fail "row 1 should not warn: $(sed -n 3p "$work/w.csv")"
"$python" - "$work/w.h5" <<'PY' || fail "HDF5 /runs/warnings per row"
import sys, h5py
with h5py.File(sys.argv[1]) as f:
    w = [x.decode() if isinstance(x, bytes) else str(x) for x in f["runs/warnings"][()]]
assert "layer 0 (bone) has 1 radial cells" in w[0], w
assert "layer 0 (bone)" not in w[1], w
PY

# 2. A swept or --set value that the weather file overrides from t = 0: refused, exit 2, key path named.
day="$src/cases/env_day_cycle.toml"
"$exe" sweep "$day" --vary "environment.speed=1 m/s,2 m/s" -q -o "$work/s.h5" > "$work/s.txt" 2>&1
code=$?; [ "$code" -eq 2 ] || fail "sweep over a weather column: exit $code, expected 2"
grep -q "environment.speed" "$work/s.txt" || fail "message does not name the key: $(cat "$work/s.txt")"
[ -e "$work/s.h5" ] && fail "a refused sweep wrote a table"
"$exe" run "$day" --set environment.speed="3 m/s" -q -o "$work/r.h5" > "$work/r.txt" 2>&1
code=$?; [ "$code" -eq 2 ] || fail "run --set over a weather column: exit $code, expected 2"
grep -q "environment.speed.*never take effect" "$work/r.txt" || fail "run message: $(cat "$work/r.txt")"

# 3. check lists the grid; a coarse axial grid warns with the cells that meet 1 %.
"$exe" check "$src/cases/quadruped.toml" --set segments.ears.axial_cells=2 > "$work/c.txt" 2> "$work/c.err" || fail "check exit $?"
grep -q "^Grid" "$work/c.txt" || fail "check prints no grid table"
grep -q "grid: segment ears: axial_cells = 2 leaves an estimated error of .* axial cells meet 1 %" "$work/c.err" \
    || fail "coarse-grid warning: $(cat "$work/c.err")"

# 4. refine: three levels, an order column, the caution; bad --levels is exit 2.
"$exe" refine "$limb" --duration "5 min" --metric body.heat_flow.convection --csv "$work/ref.csv" > "$work/ref.txt" \
    || fail "refine exit $?"
grep -q "Richardson" "$work/ref.txt" || fail "refine table: $(cat "$work/ref.txt")"
grep -q "not veterinary or medical advice" "$work/ref.txt" || fail "refine output lacks the caution"
grep -q "^body.heat_flow.convection,W," "$work/ref.csv" || fail "refine CSV: $(cat "$work/ref.csv")"
# --cold-start on a case without a steady start (the limb starts at 37 degC): the same table bit for bit.
"$exe" refine "$limb" --duration "5 min" --metric body.heat_flow.convection --cold-start --csv "$work/cold.csv" \
    > /dev/null || fail "refine --cold-start exit $?"
cmp -s "$work/ref.csv" "$work/cold.csv" || fail "refine --cold-start without a steady start changed the table"
grep -q "steady solve" "$work/ref.txt" && fail "refine reports a steady solve for a case without one: $(cat "$work/ref.txt")"
# A controller's state is a refine row (controls.NAME.STAT, unit 1; its range in the same unit, not kelvin), as the
# controller grid warning tells the user to measure it (README "Controller outputs").
tree="$src/tests/bench/studies/tree_dweller_night.toml"
"$exe" refine "$tree" --metric controls.shivering --csv "$work/ctl.csv" > /dev/null \
    || fail "refine --metric controls.shivering exit $?"
grep -q "^controls.shivering.final,1,0\.[0-9]" "$work/ctl.csv" || fail "refine controls row: $(cat "$work/ctl.csv")"
grep -q "^controls.shivering.range,1," "$work/ctl.csv" || fail "refine controls range unit: $(cat "$work/ctl.csv")"
"$exe" refine "$limb" --levels 2 > /dev/null 2>&1; code=$?
[ "$code" -eq 2 ] || fail "refine --levels 2: exit $code, expected 2"
# 5. run.axial_grading: a bad value is exit 2 with file:line:column and the key path, and leaves an earlier result
#    untouched (also from --set); `check` hints at "graded" where an appendage's uniform cells cost twice the graded
#    ones, and the key grades them (the trial wings: 732 uniform cells, 28 graded Q = 1000).
wings="$src/tests/bench/studies/roost_wings.toml"
"$exe" run "$limb" --set run.duration="2 min" -q -o "$work/keep.h5" > /dev/null 2>&1 || fail "limb run exit $?"
cp "$work/keep.h5" "$work/before.h5"
{ sed '/^\[run\]/a axial_grading = "geometric"' "$limb"; } > "$work/bad.toml"
grep -q '^axial_grading = "geometric"' "$work/bad.toml" || fail "test setup: no [run] table in $limb"
"$exe" run "$work/bad.toml" -q -o "$work/keep.h5" > /dev/null 2> "$work/bad.err"; code=$?
[ "$code" -eq 2 ] || fail "run.axial_grading = geometric: exit $code, expected 2"
grep -q 'bad.toml:[0-9]*:[0-9]*: run.axial_grading: "geometric" is not one of: uniform, graded' "$work/bad.err" \
    || fail "bad axial_grading message: $(cat "$work/bad.err")"
cmp -s "$work/keep.h5" "$work/before.h5" || fail "a refused run changed the earlier result"
"$exe" check "$limb" --set run.axial_grading=1000 > /dev/null 2> "$work/set.err"; code=$?
[ "$code" -eq 2 ] || fail "--set run.axial_grading=1000: exit $code, expected 2"
grep -q "run.axial_grading" "$work/set.err" || fail "--set message: $(cat "$work/set.err")"
"$exe" check "$wings" > "$work/u.txt" || fail "check wings exit $?"
grep -q '^hint: segment wings: 732 uniform axial cells; 28 cells graded towards its junction (Q = 1000) .*run.axial_grading = "graded"' \
    "$work/u.txt" || fail "no hint: $(grep -i hint "$work/u.txt")"
"$exe" check "$wings" --set run.axial_grading=graded > "$work/g.txt" || fail "check graded exit $?"
grep -q "^  wings  *28\*/1000\* " "$work/g.txt" || fail "graded wings: $(grep wings "$work/g.txt")"
grep -q "^hint" "$work/g.txt" && fail "hint under run.axial_grading = graded: $(grep hint "$work/g.txt")"
echo "e2e_grid: ok"
