#!/usr/bin/env bash
# End-to-end: `thermorph check` shows each segment's own count and its effective count (own x all ancestors'):
# legs count 2 carrying feet count 2 -> 4 feet; the budget printed by `steady` names them `feet x4`.
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }
cat > "$work/counts.toml" <<'TOML'
[environment]
temperature = "5 degC"
convection = "10 W/(m2 K)"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "20 cm"
layers = [{ tissue = "muscle", thickness = "3 cm", cells = 2 }]
[[segments]]
name = "legs"
parent = "trunk"
count = 2
shape = "cylinder"
length = "10 cm"
layers = [{ tissue = "muscle", thickness = "1 cm", cells = 1 }]
[[segments]]
name = "feet"
parent = "legs"
count = 2
attach_position = 1.0
shape = "cylinder"
length = "4 cm"
layers = [{ tissue = "muscle", thickness = "0.5 cm", cells = 1 }]
TOML
"$exe" check "$work/counts.toml" > "$work/check.txt" 2>/dev/null || fail "check exit $?"
# Columns: segment shape count n ...
read -r _ _ own n _ < <(grep -E '^feet ' "$work/check.txt") || fail "no feet row: $(cat "$work/check.txt")"
[[ "$own" == 2 && "$n" == 4 ]] || fail "feet: count $own, n $n (expected 2 and 4): $(cat "$work/check.txt")"
read -r _ _ own n _ < <(grep -E '^legs ' "$work/check.txt")
[[ "$own" == 2 && "$n" == 2 ]] || fail "legs: count $own, n $n (expected 2 and 2)"
grep -q "times the counts of all its ancestors" "$work/check.txt" || fail "check does not explain n"
"$exe" steady "$work/counts.toml" -o "$work/counts.h5" -q > "$work/steady.txt" 2>/dev/null || fail "steady exit $?"
grep -q "^feet x4 " "$work/steady.txt" || fail "budget does not show feet x4: $(cat "$work/steady.txt")"
echo "e2e_counts: all checks passed"
