#!/usr/bin/env bash
# Speed of the Sobol' analysis of the fitting example (cases/quadruped_fit.md; issue 10's target: 4 parameters,
# 512 base samples = 3072 runs, under 2 minutes on two cores). Not a ctest: it measures.
#   bash tests/bench/sobol_speed.sh [N]        N base samples (default 512)
# Environment: BUILD_DIR (default ./build), BASELINE_EXE (optional: a second thermorph, e.g. a build of an
# earlier commit; then both run ROUNDS times, interleaved, in this one run), ROUNDS (default 1), JOBS (default 2).
# Prints per executable and round: wall and CPU time of the whole command, runs/s, the load average, and from the
# runs table the median per-run load, build and solve times and steps (the profile's parts).
set -euo pipefail
src="$(cd "$(dirname "$0")/../.." && pwd)"
build="${BUILD_DIR:-$src/build}"
n="${1:-512}"
rounds="${ROUNDS:-1}"
jobs="${JOBS:-2}"
out="$(mktemp -d)"
trap 'rm -rf "$out"' EXIT
exes=("$build/thermorph")
[[ -n "${BASELINE_EXE:-}" ]] && exes=("$BASELINE_EXE" "${exes[@]}")
scenario=(--set 'environment.temperature=5 degC' --set 'environment.speed=2 m/s' --set 'run.duration=200 min'
          --set 'run.output_interval=4 min')
params=(--param 'tissues.fur.conductivity=0.03 W/(m K):0.08 W/(m K)' --param 'segments.ears.vasomotor.shunt=0:1'
        --param 'segments.ears.vessels.countercurrent_conductance=0.01 W/K:0.1 W/K:log' --param 'body.activity=0.8:1.6')
printf "%-40s %5s %6s %9s %8s %7s %6s %9s %9s %9s %6s\n" executable round runs "wall [s]" "CPU [s]" "runs/s" load \
  "load[ms]" "build[ms]" "solve[ms]" steps
for ((r = 1; r <= rounds; r++)); do
  for exe in "${exes[@]}"; do
    /usr/bin/time -f "%e %U %S" -o "$out/time" "$exe" sensitivity "$src/cases/quadruped.toml" "${scenario[@]}" \
      --method sobol -N "$n" -j "$jobs" -q "${params[@]}" --metric body.core_temperature.final \
      --metric body.heat_flow.convection -o "$out/sobol.h5" > "$out/stdout" 2> "$out/stderr"
    load=$(cut -d' ' -f1 /proc/loadavg)
    read -r wall user sys < "$out/time"
    /usr/bin/python3 - "$out/sobol_runs.h5" "$exe" "$r" "$wall" "$user" "$sys" "$load" <<'PY'
import sys, h5py, numpy as np
path, exe, r, wall, user, system, load = sys.argv[1:]
with h5py.File(path) as f:
    g = f["runs"]
    runs = len(g["status"])
    med = {k: 1e3 * float(np.median(g[k][...])) for k in ("load_seconds", "build_seconds", "solve_seconds")}
    steps = float(np.median(g["steps"][...]))
wall, cpu = float(wall), float(user) + float(system)
name = exe if len(exe) <= 40 else "..." + exe[-37:]
print(f"{name:<40} {r:>5} {runs:>6} {wall:>9.1f} {cpu:>8.1f} {runs / wall:>7.1f} {load:>6} "
      f"{med['load_seconds']:>9.2f} {med['build_seconds']:>9.2f} {med['solve_seconds']:>9.2f} {steps:>6.0f}")
PY
  done
done
echo "per-run medians are wall times of each run on its thread (inflated by the machine's load); CPU [s] is user + system"
