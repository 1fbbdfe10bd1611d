#!/usr/bin/env bash
# Instructions per run of each example study inside a one-thread sweep, several executables side by side (a
# benchmark, not a test; DEVELOPERS.md "Per-run CPU in sweeps, eighth round"). Instruction counts do not depend
# on the machine's load, unlike CPU times (sweep_cpu.sh), so they are the number to compare on a shared machine.
#
#   bash tests/bench/sweep_instructions.sh before=/tmp/old/thermorph after=build/thermorph
#
# Per study and executable: instructions (valgrind --tool=callgrind, whole process) of
# `sweep STUDY -j 1 --scale body=1:1:(RUNS+1)` minus those of a one-run sweep, divided by RUNS, so start-up and the
# sweep table are not counted. Environment: RUNS (default 5), STUDIES (default: the four frozen studies in
# tests/bench/studies/). Needs valgrind.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
RUNS=${RUNS:-5}
read -r -a studies <<< "${STUDIES:-hare_ears diving_seal wading_bird quadruped}"
[ $# -ge 1 ] || { echo "usage: $0 NAME=EXE [NAME=EXE ...]" >&2; exit 2; }
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
refs() {  # instructions of one command
  valgrind --tool=callgrind --callgrind-out-file=/dev/null "$@" 2>&1 >/dev/null |
    awk '/I *refs/ {gsub(",", "", $NF); print $NF}'
}
echo "Instructions per run in a one-thread sweep [10^6] ((($((RUNS + 1)))-run - 1-run sweep) / $RUNS, callgrind); $(date -u '+%Y-%m-%d %H:%M UTC')"
printf "| study |"; for ne in "$@"; do printf " %s |" "${ne%%=*}"; done
[ $# -eq 2 ] && printf " %s / %s |" "${1%%=*}" "${2%%=*}"
echo
printf "|---|"; for _ in "$@"; do printf -- "---:|"; done; [ $# -eq 2 ] && printf -- "---:|"; echo
for c in "${studies[@]}"; do
  printf "| %s |" "$c"
  vals=()
  for ne in "$@"; do
    n=${ne%%=*} e=${ne#*=}
    one=$(refs "$e" sweep "$here/studies/$c.toml" -j 1 -q -o "$work/$n.h5" --scale body=1)
    many=$(refs "$e" sweep "$here/studies/$c.toml" -j 1 -q -o "$work/$n.h5" --scale "body=1:1:$((RUNS + 1))")
    v=$(echo "($many - $one) / $RUNS / 1000000" | bc -l)
    vals+=("$v")
    printf " %.2f |" "$v"
  done
  [ $# -eq 2 ] && printf " %.3f× |" "$(echo "${vals[0]} / ${vals[1]}" | bc -l)"
  echo
done
