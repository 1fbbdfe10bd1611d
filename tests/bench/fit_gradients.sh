#!/usr/bin/env bash
# Fit Jacobians by CVODES forward sensitivities against central differences of whole runs, side by side in one
# run (DEVELOPERS.md, "Fits and sensitivity"): the 4-parameter fit of the example quadruped to its 200 invented
# observations (cases/quadruped_fit.md) with --gradient auto and --gradient fd, and a local sensitivity of the
# same 4 parameters, interleaved, best of REPEAT (default 3) by wall time, -j 2. Not a test (not in ctest).
#   bash tests/bench/fit_gradients.sh        BUILD_DIR (default ./build), REPEAT
set -euo pipefail
src="$(cd "$(dirname "$0")/../.." && pwd)"
exe="${BUILD_DIR:-$src/build}/thermorph"
repeat="${REPEAT:-3}"
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
scenario=(--set "environment.temperature=5 degC" --set "environment.speed=2 m/s" --set "run.duration=200 min"
          --set "run.output_interval=4 min")
free=(--free "tissues.fur.conductivity=0.02 W/(m K):0.1 W/(m K)" --free "segments.ears.vasomotor.shunt=0:1"
      --free "segments.ears.vessels.countercurrent_conductance=0.005 W/K:0.2 W/K:log" --free "body.activity=0.5:3")
params=(--param tissues.fur.conductivity --param segments.ears.vasomotor.shunt
        --param segments.ears.vessels.countercurrent_conductance --param body.activity)
now() { date +%s.%N; }
declare -A best
for ((k = 1; k <= repeat; ++k)); do
  for g in auto fd; do
    t0=$(now)
    "$exe" fit "$src/cases/quadruped.toml" "${scenario[@]}" --data "$src/cases/quadruped_logger.csv" "${free[@]}" \
      -j 2 -q --grid-check 0 --gradient "$g" -o "$tmp/fit_$g.h5" > "$tmp/fit_$g.txt" 2> /dev/null
    t1=$(now)
    w=$(echo "$t1 - $t0" | bc)
    [[ -z "${best[fit_$g]:-}" || $(echo "$w < ${best[fit_$g]}" | bc) == 1 ]] && best[fit_$g]=$w
    t0=$(now)
    "$exe" sensitivity "$src/cases/quadruped.toml" "${scenario[@]}" --method local "${params[@]}" \
      --metric body.core_temperature.final --metric body.heat_flow.convection -j 2 -q --gradient "$g" \
      -o "$tmp/local_$g.h5" > "$tmp/local_$g.txt" 2> /dev/null
    t1=$(now)
    w=$(echo "$t1 - $t0" | bc)
    [[ -z "${best[local_$g]:-}" || $(echo "$w < ${best[local_$g]}" | bc) == 1 ]] && best[local_$g]=$w
  done
done
echo "| task | Jacobian | wall [s], best of $repeat | model runs | fitted coat conductivity [W/(m K)] |"
echo "|---|---|---:|---:|---:|"
for g in auto fd; do
  runs=$(grep -o "([0-9]* model runs" "$tmp/fit_$g.txt" | grep -o "[0-9]*")
  kc=$(grep "^tissues.fur.conductivity" "$tmp/fit_$g.txt" | awk '{print $2}')
  echo "| 4-parameter fit, 200 observations (-j 2) | $g | ${best[fit_$g]} | $runs | $kc |"
done
for g in auto fd; do
  echo "| local sensitivity, 4 parameters, 2 metrics (-j 2) | $g | ${best[local_$g]} | | |"
done
/usr/bin/python3 - "$tmp/local_auto.h5" "$tmp/local_fd.h5" <<'PY'
import sys, h5py, numpy as np
a = h5py.File(sys.argv[1], "r")["sensitivity/derivative"][()]
b = h5py.File(sys.argv[2], "r")["sensitivity/derivative"][()]
print(f"local derivatives, CVODES vs central differences (step 1e-3): largest relative difference "
      f"{np.max(np.abs(a - b) / np.maximum(np.abs(b), 1e-300)):.2e}")
PY
