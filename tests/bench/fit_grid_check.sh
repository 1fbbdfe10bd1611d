#!/usr/bin/env bash
# The grid check of the fitting example (cases/quadruped_fit.md, "Grid check"): the 4-parameter fit with
# `--grid-check 4` (one run on the grid refined 4x, 42 279 nodes) and `--grid-check 2`, then an actual refit on the
# grid refined 2x (10 981 nodes; no check), and the predicted shifts beside the refit's. A benchmark, not a ctest:
# several minutes on two cores (the refit alone ~4x the fit's time).
#   bash tests/bench/fit_grid_check.sh        BUILD_DIR (default ./build), OUT (default ./fit_grid_check)
set -euo pipefail
src="$(cd "$(dirname "$0")/../.." && pwd)"
build="${BUILD_DIR:-$src/build}"
exe="$build/thermorph"
out="${OUT:-$PWD/fit_grid_check}"
py=/usr/bin/python3
mkdir -p "$out"
fit=(fit "$src/cases/quadruped.toml" --set "environment.temperature=5 degC" --set "environment.speed=2 m/s"
     --set "run.duration=200 min" --set "run.output_interval=4 min"
     --set 'events=[{ at = "100 min", vasomotor = { ears = { shunt = 0 } }, label = "ear shunts close" }]'
     --data "$src/cases/quadruped_logger.csv"
     --free "tissues.fur.conductivity=0.02 W/(m K):0.1 W/(m K)" --free "segments.ears.vasomotor.shunt=0:1"
     --free "segments.ears.vessels.countercurrent_conductance=0.005 W/K:0.2 W/K:log" --free "body.activity=0.5:3")
now() { date +%s.%N; }
t0=$(now); "$exe" "${fit[@]}" --grid-check 4 -q -o "$out/fit4.h5" > "$out/fit4.txt"; t1=$(now)
"$exe" "${fit[@]}" --grid-check 2 -q -o "$out/fit2.h5" > "$out/fit2.txt"; t2=$(now)
"$exe" "${fit[@]}" --set run.grid_refinement=2 --grid-check 0 -q -o "$out/refit2.h5" > "$out/refit2.txt"; t3=$(now)
"$py" - "$out" "$(echo "$t1 - $t0" | bc)" "$(echo "$t2 - $t1" | bc)" "$(echo "$t3 - $t2" | bc)" <<'PY'
import sys, h5py
out, w4, w2, wr = sys.argv[1], *map(float, sys.argv[2:])
def load(name):
    with h5py.File(f"{out}/{name}.h5") as f:
        g = f["fit"]
        names = [n.decode() for n in g["parameters/name"][...]]
        d = {"value": g["parameters/value"][...], "se": g["parameters/standard_error"][...],
             "wall": g.attrs["wall_seconds"], "nodes": g.attrs["grid_nodes"]}
        if "grid_check" in g and "shift" in g["grid_check"]:
            c = g["grid_check"]
            d.update({k: c[k][...] for k in ("shift", "shift_se", "bias", "bias_se", "bias_relative")})
            d["check_wall"], d["check_nodes"] = c.attrs["wall_seconds"], c.attrs["nodes"]
        return names, d
names, f4 = load("fit4")
_, f2 = load("fit2")
_, r2 = load("refit2")
print(f"fit on {f4['nodes']:.0f} nodes: {f4['wall']:.1f} s; 2x check ({f2['check_nodes']:.0f} nodes) {f2['check_wall']:.1f} s, "
      f"4x check ({f4['check_nodes']:.0f} nodes) {f4['check_wall']:.1f} s; refit on the 2x grid ({r2['nodes']:.0f} nodes) "
      f"{r2['wall']:.1f} s (commands: {w4:.0f} s, {w2:.0f} s, {wr:.0f} s wall)")
print("| parameter | fitted | SE | 2x: predicted shift | 2x: refit shift | 4x: predicted shift (SE) | 4x: bias (SE, % of value) |")
print("|---|---:|---:|---:|---:|---:|---:|")
for j, n in enumerate(names):
    actual = r2["value"][j] - f2["value"][j]
    print(f"| {n} | {f2['value'][j]:.6g} | {f2['se'][j]:.3g} | {f2['shift'][j]:+.3g} | {actual:+.3g} | "
          f"{f4['shift'][j]:+.3g} ({f4['shift_se'][j]:+.2f}) | {f4['bias'][j]:+.3g} ({f4['bias_se'][j]:+.2f}, "
          f"{100 * f4['bias_relative'][j]:.2f} %) |")
PY
