#!/usr/bin/env bash
# The coarse test copy tests/data/quadruped_coarse.toml (hand-set cell counts, 229 nodes) used by the sweep and
# sensitivity tests has not drifted from the real case cases/quadruped.toml (automatic grid, 6 coat cells): the
# fully resolved cases (`thermorph check --resolved`: every tissue, segment, vessel, surface and run value written
# out) are equal once their cell counts (`cells = `, `axial_cells = `) and the header naming the source file are
# left out. Then the copy's grid really differs (else the copy is pointless) and both build.
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }
"$exe" check "$src/cases/quadruped.toml" --resolved > "$work/real.toml" 2> /dev/null || fail "check --resolved of the real case exit $?"
"$exe" check "$src/tests/data/quadruped_coarse.toml" --resolved > "$work/coarse.toml" 2> /dev/null \
  || fail "check --resolved of the coarse copy exit $?"
strip() { grep -vE '^[[:space:]]*(axial_)?cells = |^# Written by ' "$1"; }
[[ $(strip "$work/real.toml" | wc -l) -gt 100 ]] || fail "the resolved real case is unexpectedly short"
if ! diff <(strip "$work/real.toml") <(strip "$work/coarse.toml") > "$work/diff.txt"; then
  cat "$work/diff.txt"
  fail "tests/data/quadruped_coarse.toml differs from cases/quadruped.toml in more than its cell counts (diff above:" \
       "< real, > copy); copy the change over"
fi
cmp -s "$work/real.toml" "$work/coarse.toml" && fail "the copy has the real case's cells: it is no coarse copy"
grep -E '^[[:space:]]*(axial_)?cells = ' "$work/coarse.toml" > "$work/cc.txt"
grep -E '^[[:space:]]*(axial_)?cells = ' "$work/real.toml" > "$work/rc.txt"
cmp -s "$work/cc.txt" "$work/rc.txt" && fail "the copy's cell counts equal the real case's"
echo "e2e_quadruped_coarse: the coarse copy equals the real case but for its cell counts"
