#!/usr/bin/env bash
# Cost of a grid-refinement study per level (a benchmark, not a test; DEVELOPERS.md "Grid refinement cost,
# thirteenth round (issue 11)"): for each case and each build, one table with a row per level of
# `thermorph refine` (1x, 2x, 4x, ... cells): tissue cells, nodes, the time of each phase (body build, steady start,
# CVODE, the rest of the run), CPU, CVODE's steps, right-hand sides, Jacobians, linear-solver setups, Newton
# iterations, convergence and error-test failures, the Jacobian's nonzeros, the linear solver chosen (KLU or the
# band path), L+U nonzeros and fill, and KLU's factorisations, refactorisations and floating-point operations
# per factorisation (`thermorph_bench refine`, tests/bench/bench.cpp).
#
#   bash tests/bench/refine_cost.sh main=main speed3=build
#
# Each NAME=WHAT is a build directory holding tests/bench/thermorph_bench, or a git revision: that revision's
# source (git archive) with this tree's tests/bench/bench.cpp, configured (Release) and its thermorph_bench built
# with -j2 (ccache if CCACHE_DIR is set) in the work folder. Counters a revision's SolverStatistics lacks show "-".
# The builds alternate case by case, so each case's tables are measured side by side under the same load.
# Environment: LEVELS (default 3), CASES (default: the trial swimmer of tests/bench/studies/refine_swimmer.toml, the
# trial bird on snow of tests/bench/studies/refine_snowbird.toml,
# cases/quadruped.toml, cases/large_bill.toml, cases/wading_bird.toml), KEEP=1 keeps the work folder.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)
LEVELS=${LEVELS:-3}
CASES=${CASES:-"$here/studies/refine_swimmer.toml $here/studies/refine_snowbird.toml $root/cases/quadruped.toml $root/cases/large_bill.toml $root/cases/wading_bird.toml"}
[ $# -ge 1 ] || { echo "usage: $0 NAME=BUILD_DIR|GIT_REVISION [NAME=... ...]" >&2; exit 2; }
work=$(mktemp -d)
if [ "${KEEP:-0}" = 1 ]; then echo "work folder: $work" >&2; else trap 'rm -rf "$work"' EXIT; fi

names=()
exes=()
for arg in "$@"; do
  name=${arg%%=*}
  what=${arg#*=}
  if [ -x "$what/tests/bench/thermorph_bench" ]; then
    exe=$(cd "$what" && pwd)/tests/bench/thermorph_bench
  elif git -C "$root" rev-parse --verify -q "$what^{commit}" >/dev/null; then
    src="$work/src-$name"
    mkdir -p "$src"
    git -C "$root" archive "$what" | tar -x -C "$src"
    cp "$here/bench.cpp" "$src/tests/bench/bench.cpp"
    launcher=()
    if [ -n "${CCACHE_DIR:-}" ] && command -v ccache >/dev/null; then
      launcher=(-DCMAKE_CXX_COMPILER_LAUNCHER=ccache -DCMAKE_C_COMPILER_LAUNCHER=ccache)
    fi
    echo "building thermorph_bench of $what ($(git -C "$root" rev-parse --short "$what")) in $src/build ..." >&2
    cmake -S "$src" -B "$src/build" -DCMAKE_BUILD_TYPE=Release "${launcher[@]}" >/dev/null
    cmake --build "$src/build" -j2 --target thermorph_bench >/dev/null
    exe=$src/build/tests/bench/thermorph_bench
  else
    echo "$arg: neither a build directory with tests/bench/thermorph_bench nor a git revision" >&2
    exit 2
  fi
  names+=("$name")
  exes+=("$exe")
done

echo "Load average at the start: $(cut -d' ' -f1-3 /proc/loadavg); levels: $LEVELS"
for case in $CASES; do
  for i in "${!names[@]}"; do
    echo
    echo "#### ${names[$i]}: $(basename "$case")"
    echo
    nice "${exes[$i]}" refine "$case" --levels "$LEVELS"
  done
done
echo
echo "Load average at the end: $(cut -d' ' -f1-3 /proc/loadavg)"
