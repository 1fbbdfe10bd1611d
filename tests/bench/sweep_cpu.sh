#!/usr/bin/env bash
# Per-run CPU of each example study inside a one-thread sweep, several executables side by side in one run
# (a benchmark, not a test; DEVELOPERS.md "Per-run CPU in sweeps, fourth round").
#
#   bash tests/bench/sweep_cpu.sh before=/tmp/old/thermorph after=build/thermorph
#
# Per study and executable: CPU (perf stat task-clock) of `sweep STUDY -j 1 --scale body=1:1:(RUNS+1)` minus that
# of a one-run sweep, divided by RUNS, so start-up and the sweep table are not counted. The executables alternate
# within each round (same load); the lowest and the median of ROUNDS rounds are printed. Environment: RUNS
# (default 20), ROUNDS (default 3), SIZES (default 1:1, every run the same case; e.g. SIZES=0.9:1.1 for a size series
# of RUNS+1 bodies from 0.9 to 1.1 x, whose runs differ: caches keyed on a run's inputs then help only where they
# would in a real size series). Studies: the frozen copies in tests/bench/studies/. Needs perf.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
RUNS=${RUNS:-20}
ROUNDS=${ROUNDS:-3}
[ $# -ge 1 ] || { echo "usage: $0 NAME=EXE [NAME=EXE ...]" >&2; exit 2; }
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
studies=(hare_ears diving_seal wading_bird quadruped)
cpu() {  # milliseconds of task-clock of one command
  perf stat -e task-clock -x, "$@" 2>&1 >/dev/null | awk -F, '/task-clock/ {print $1}'
}
declare -A best all
for ((r = 1; r <= ROUNDS; ++r)); do
  for c in "${studies[@]}"; do
    for ne in "$@"; do
      n=${ne%%=*} e=${ne#*=}
      one=$(cpu "$e" sweep "$here/studies/$c.toml" -j 1 -q -o "$work/$n.h5" --scale body=1)
      many=$(cpu "$e" sweep "$here/studies/$c.toml" -j 1 -q -o "$work/$n.h5" --scale "body=${SIZES:-1:1}:$((RUNS + 1))")
      v=$(echo "($many - $one) / $RUNS" | bc -l)
      k="$n:$c"
      all[$k]="${all[$k]:-} $v"
      if [ -z "${best[$k]:-}" ] || (($(echo "$v < ${best[$k]}" | bc -l))); then best[$k]=$v; fi
    done
  done
done
median() { tr ' ' '\n' | grep . | sort -g | awk '{v[NR] = $1} END {print (NR % 2 ? v[(NR + 1) / 2] : (v[NR / 2] + v[NR / 2 + 1]) / 2)}'; }
echo "Per-run CPU in a one-thread sweep [ms] (body=${SIZES:-1:1}), lowest / median of $ROUNDS rounds; $(date -u '+%Y-%m-%d %H:%M UTC'); load $(cut -d' ' -f1-3 /proc/loadavg)"
printf "| study |"; for ne in "$@"; do printf " %s |" "${ne%%=*}"; done; echo
printf "|---|"; for _ in "$@"; do printf -- "---:|"; done; echo
for c in "${studies[@]}"; do
  printf "| %s |" "$c"
  for ne in "$@"; do
    k="${ne%%=*}:$c"
    printf " %.2f / %.2f |" "${best[$k]}" "$(echo "${all[$k]}" | median)"
  done
  echo
done
