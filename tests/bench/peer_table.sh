#!/usr/bin/env bash
# One table, one run: thermorph vs the SciPy peer (scipy_bdf.py) at 500 / 5 000 / 20 000 cells, per-run CPU of
# every example study in a sweep, sweep runs/s, start-up of `check` and of a 100-node `run`, peak memory at
# 10^4 and 10^5 nodes. Not part of ctest. From the repository root:
#   bash tests/bench/peer_table.sh                          # the executable of ./build
#   bash tests/bench/peer_table.sh before=/tmp/old/thermorph after=build/thermorph   # side by side
# Environment: BUILD_DIR (default ./build), REPEAT (best of N by wall time, default 5), SWEEP_RUNS (default 10),
# ONLY (parts of the table: peer,sweep,startup,memory,bodymemory; default all but bodymemory, the large-body memory rows).
set -euo pipefail
ROOT=$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)
BUILD=${BUILD_DIR:-$ROOT/build}
if [[ $# -eq 0 ]]; then
  cmake --build "$BUILD" --target thermorph -j2 >/dev/null
  set -- "thermorph=$BUILD/thermorph"
fi
exec /usr/bin/python3 "$ROOT/tests/bench/peer_table.py" --repeat "${REPEAT:-5}" --sweep-runs "${SWEEP_RUNS:-10}" \
  --only "${ONLY:-peer,sweep,startup,memory}" "$@"
