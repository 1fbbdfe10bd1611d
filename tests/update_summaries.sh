#!/usr/bin/env bash
# Developer tool (not in ctest): rerun every shipped example as its end-to-end test does and store new regression
# summaries in tests/data/NAME.summary.json. Run it only after a deliberate change of results, and review
# `git diff tests/data` before committing (the commit message says why the numbers moved).
#   bash tests/update_summaries.sh [BUILD_DIR]
set -euo pipefail
root=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
exe=${1:-$root/build}/thermorph
work=$(mktemp -d); trap 'rm -rf "$work"' EXIT
for name in limb_cooling env_day_cycle quadruped diving_seal large_bill wading_bird; do
  "$exe" run "$root/cases/$name.toml" -o "$work/$name.h5" --quiet > /dev/null
  /usr/bin/python3 "$root/tests/regression.py" "$work/$name.h5" "$root/tests/data/$name.summary.json" --update
done
