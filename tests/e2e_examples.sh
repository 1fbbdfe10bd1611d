#!/usr/bin/env bash
# Example cases without an end-to-end script of their own: each runs and matches its stored summary.
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"; python="${3:-/usr/bin/python3}"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
for name in env_day_cycle; do
  "$exe" run "$src/cases/$name.toml" -o "$work/$name.h5" --quiet > /dev/null || { echo "FAIL: $name exit $?"; exit 1; }
  "$python" "$src/tests/regression.py" "$work/$name.h5" "$src/tests/data/$name.summary.json" || { echo "FAIL: $name regression"; exit 1; }
done
echo "e2e_examples: all checks passed"
