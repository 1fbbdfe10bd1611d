#!/usr/bin/env bash
# End-to-end: the controller-output grid check (drivers/record_control_grid.cpp) is a stored warning.
# A muscle core in a fat shell (illustrative values) with proportional thermogenesis on 1+1 radial cells: its
# steady shivering is 28 % off the exact value (tests/test_control_grid.cpp), so `steady` warns on stderr, the
# result file keeps the warning in /provenance/warnings, and every sweep row in its CSV; on the automatic grid at
# run.grid_tolerance = 0.002 no such warning.
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"; python="${3:-/usr/bin/python3}"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }
write_case() {  # $1: cells keys of the two layers (may be empty)
cat > "$work/core.toml" <<TOML
title = "Core and shell with thermogenesis (illustrative)"
[control.shivering]
set_point = "37 degC"
gain = "0.5 1/K"
max_power = "20 W"
[tissues.core]
role = "muscle"
conductivity = 0.5
density = 1000
specific_heat = 3500
metabolic_heat = 10000
perfusion = 0
q10 = 1
[tissues.shell]
role = "fat"
conductivity = 0.2
density = 900
specific_heat = 2300
metabolic_heat = 0
perfusion = 0
q10 = 1
[[segments]]
name = "body"
shape = "cylinder"
length = "20 cm"
axial_cells = 1
surface = { ends = "insulated" }
layers = [{ tissue = "core", thickness = "2 cm"$1 }, { tissue = "shell", thickness = "1 cm"$1 }]
[environment]
temperature = "20 degC"
convection = 10
TOML
}
write_case ", cells = 1"
"$exe" steady "$work/core.toml" -o "$work/coarse.h5" -q > "$work/coarse.out" 2> "$work/coarse.err" || fail "coarse run exit $?"
grep -q "warning: grid: controller shivering:" "$work/coarse.err" || fail "no controller warning printed: $(cat "$work/coarse.err")"
grep -q "Caution" "$work/coarse.out" "$work/coarse.err" || fail "no caution with the output"
"$python" - "$work/coarse.h5" <<'PY' || fail "warning not stored in the result file"
import sys, h5py
with h5py.File(sys.argv[1]) as f:
    w = [x.decode() if isinstance(x, bytes) else str(x) for x in f["provenance/warnings"][()]]
hits = [x for x in w if x.startswith("grid: controller shivering:")]
assert len(hits) == 1, w
assert "run.grid_tolerance = " in hits[0], hits[0]
print("stored:", hits[0][:160])
PY
"$exe" sweep "$work/core.toml" --steady --vary "environment.temperature=15 degC,20 degC" -j 2 -q -o "$work/s.h5" \
  > /dev/null 2>&1 || fail "sweep exit $?"
for row in 2 3; do
  sed -n ${row}p "$work/s.csv" | grep -q "grid: controller shivering:" || fail "sweep row $row lacks the warning: $(sed -n ${row}p "$work/s.csv")"
done
write_case ""
"$exe" steady "$work/core.toml" --set run.grid_tolerance=0.002 -o "$work/tight.h5" -q > /dev/null 2> "$work/tight.err" \
  || fail "tight run exit $?"
if grep -q "grid: controller" "$work/tight.err"; then fail "warning at grid_tolerance 0.002: $(cat "$work/tight.err")"; fi
echo "control grid warnings: OK"
