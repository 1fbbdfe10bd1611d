#!/usr/bin/env bash
# Whole-body benchmark: the example quadruped, a day of hourly weather, and large invented bodies of 10-50
# segments (about 1,000 nodes each): nodes, steps, Jacobian and KLU L+U nonzeros, cost per step and node.
#   bash tests/bench/whole_body_bench.sh     (from the repository root; not part of ctest)
set -euo pipefail
exe="${BUILD_DIR:-build}/thermorph"
python=/usr/bin/python3
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
row() {  # label, case, extra args
  local label="$1" case="$2"; shift 2
  local start end out
  start=$(date +%s.%N)
  out=$("$exe" run "$case" -o "$work/out.h5" -q "$@")
  end=$(date +%s.%N)
  local line
  line=$(grep '^Solver:' <<< "$out")
  local steps nodes jnz lu wall
  steps=$(sed -E 's/Solver: ([0-9]+) steps.*/\1/' <<< "$line")
  wall=$(sed -E 's/.* ([0-9.]+) s wall.*/\1/' <<< "$line")
  nodes=$(sed -E 's/.*; ([0-9]+) nodes.*/\1/' <<< "$line")
  jnz=$(sed -E 's/.*Jacobian ([0-9]+) nonzeros.*/\1/' <<< "$line")
  lu=$(sed -E 's/.*KLU L\+U ([0-9]+).*/\1/' <<< "$line")
  "$python" - "$label" "$nodes" "$steps" "$jnz" "$lu" "$wall" "$start" "$end" <<'PY'
import sys
label, nodes, steps, jnz, lu, wall, start, end = sys.argv[1:]
nodes, steps, jnz, lu, wall = int(nodes), int(steps), int(jnz), int(lu), float(wall)
print(f"| {label} | {nodes} | {steps} | {jnz} | {lu} | {lu / jnz:.2f} | {wall:.3f} | "
      f"{float(end) - float(start):.3f} | {1e9 * wall / steps / nodes:.0f} |")
PY
}
echo "| case | nodes | steps | Jacobian nnz | KLU L+U nnz | fill ratio | solver wall [s] | process wall [s] | ns per step and node |"
echo "|---|---:|---:|---:|---:|---:|---:|---:|---:|"
row "quadruped, 1 h" cases/quadruped.toml
row "quadruped, 24 h hourly weather" cases/quadruped.toml --set environment.weather=env_day_cycle.csv --set run.duration="24 h" --set run.output_interval="10 min"
for n in 10 25 50; do
  "$python" tests/bench/large_body.py "$n" 25 40 > "$work/large_$n.toml"
  row "large body, $n segments, 1 h" "$work/large_$n.toml"
done
