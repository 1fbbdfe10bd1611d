#!/usr/bin/env bash
# Cost of the steady start of a run on a refined grid (`thermorph run|steady --set run.grid_refinement=N`, the fit's
# grid check), cold against warm (a benchmark, not a test; DEVELOPERS.md "Refined runs: the steady start from the
# unrefined grid's"). Cold: the pseudo-time relaxation from the case's initial temperature, then KINSOL (`--cold-start`,
# and every run before the warm start); warm: the unrefined grid's steady state mapped onto the refined cells as
# Newton's start (RunOptions::coarseSteadyStart, drivers/simulation.cpp coarseSteadyGuess).
#
#   bash tests/bench/refined_run_cost.sh [BUILD_DIR]          (default: build)
#
# Per case and factor, `thermorph_bench refined CASE --factor N` (tests/bench/bench.cpp): cold and warm one after
# the other in one process on the same body: the unrefined grid's relaxation steps / Newton iterations / right-hand
# sides and CPU (and how far Newton moved from its state on the refined cells: largest node, weighted mean), the refined grid's relaxation steps / Newton iterations / right-hand sides / Jacobians, the steady
# start's CPU (the unrefined grid's included), the whole run's CPU (`RUN=0`: skipped) and the largest difference of the
# warm steady state from the cold one [K]. With CALLGRIND=1 also the instructions of whole `thermorph steady CASE
# --set run.grid_refinement=N` processes, `--cold-start` against the default (valgrind --tool=callgrind; the
# load-independent number on the shared machine), at CALLGRIND_FACTORS (default 2).
# Environment: CASES (default: the four steady-start examples, cases/diving_seal.toml, cases/env_day_cycle.toml,
# cases/large_bill.toml, cases/wading_bird.toml, and the trial bird on snow tests/bench/studies/refine_snowbird.toml),
# FACTORS (default "2 4"), RUN (default 1), CALLGRIND (default 0), CALLGRIND_FACTORS (default 2).
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)
build=$(cd "${1:-$root/build}" && pwd)
CASES=${CASES:-"$root/cases/diving_seal.toml $root/cases/env_day_cycle.toml $root/cases/large_bill.toml $root/cases/wading_bird.toml $here/studies/refine_snowbird.toml"}
FACTORS=${FACTORS:-"2 4"}
RUN=${RUN:-1}
runflag=()
[ "$RUN" = 1 ] || runflag=(--no-run)
echo "Load average at the start: $(cut -d' ' -f1-3 /proc/loadavg)"
echo
echo "| case | N | nodes | start | warm start from | 1x: relaxation steps / Newton its / rhs | 1x CPU [s] | refined: relaxation steps / Newton its / rhs / Jacobians | steady start CPU [s] | run CPU [s] | transient steps | max warm - cold [K] |"
echo "|---|---:|---:|---|---|---|---:|---|---:|---:|---:|---:|"
for case in $CASES; do
  for n in $FACTORS; do
    (cd "$(dirname "$case")" && nice "$build/tests/bench/thermorph_bench" refined "$case" --factor "$n" "${runflag[@]}")
  done
done
if [ "${CALLGRIND:-0}" = 1 ]; then
  work=$(mktemp -d)
  trap 'rm -rf "$work"' EXIT
  echo
  echo "| case | N | instructions cold [10^9] | warm [10^9] | warm / cold |"
  echo "|---|---:|---:|---:|---:|"
  for case in $CASES; do
    for n in ${CALLGRIND_FACTORS:-2}; do
      counts=()
      for mode in cold warm; do
        flag=()
        [ $mode = cold ] && flag=(--cold-start)
        (cd "$(dirname "$case")" && nice valgrind --tool=callgrind --callgrind-out-file="$work/cg.$mode" \
          "$build/thermorph" steady "$case" --set "run.grid_refinement=$n" -q -o "$work/out.$mode.h5" "${flag[@]}" \
          >/dev/null 2>"$work/log.$mode") || { cat "$work/log.$mode" >&2; exit 1; }
        counts+=("$(grep -m1 '^summary:' "$work/cg.$mode" | awk '{print $2}')")
      done
      awk -v c="$(basename "$case")" -v n="$n" -v a="${counts[0]}" -v b="${counts[1]}" \
        'BEGIN { printf "| %s | %sx | %.3f | %.3f | %.3f |\n", c, n, a / 1e9, b / 1e9, b / a }'
    done
  done
fi
echo
echo "Load average at the end: $(cut -d' ' -f1-3 /proc/loadavg)"
