#!/usr/bin/env bash
# Coverage study of the fitting example itself (cases/quadruped_fit.md): D invented logger records from the hidden
# values with independent Gaussian noise (seeds 1..D; SDs as in cases/quadruped_logger.csv), one 4-parameter fit
# each from the case's values, then per parameter: mean reported SE / observed SD of the estimates (issue 10:
# within 25 %) and the share of 95 % intervals that cover the truth (~0.95). Not a ctest: minutes of CPU.
#   bash tests/bench/fit_coverage.sh [D]      (default 50 draws; BUILD_DIR, OUT, JOBS as in fit_example.sh)
set -euo pipefail
src="$(cd "$(dirname "$0")/../.." && pwd)"
build="${BUILD_DIR:-$src/build}"
exe="$build/thermorph"
draws="${1:-50}"
out="${OUT:-$PWD/fit_coverage}"
jobs="${JOBS:-2}"
py=/usr/bin/python3
mkdir -p "$out"
case="$src/cases/quadruped.toml"
scenario=(--set 'environment.temperature=5 degC' --set 'environment.speed=2 m/s' --set 'run.duration=200 min'
          --set 'run.output_interval=4 min'
          --set 'events=[{ at = "100 min", vasomotor = { ears = { shunt = 0 } }, label = "ear shunts close" }]')
hidden=(--set 'tissues.fur.conductivity=0.055 W/(m K)' --set 'segments.ears.vasomotor.shunt=0.45'
        --set 'segments.ears.vessels.countercurrent_conductance=0.03 W/K' --set 'body.activity=1.3')
free=(--free 'tissues.fur.conductivity=0.02 W/(m K):0.1 W/(m K)' --free 'segments.ears.vasomotor.shunt=0:1'
      --free 'segments.ears.vessels.countercurrent_conductance=0.005 W/K:0.2 W/K:log' --free 'body.activity=0.5:3')
"$exe" run "$case" "${scenario[@]}" "${hidden[@]}" --set run.rtol=1e-8 --set 'run.atol=1e-8 K' -q -o "$out/truth.h5" \
  > /dev/null 2>&1
start=$(date +%s.%N)
for ((d = 1; d <= draws; d++)); do
  "$py" - "$out/truth.h5" "$out/data_$d.csv" "$d" <<'PY'
import sys, h5py, numpy as np
rng = np.random.default_rng(int(sys.argv[3]))
with h5py.File(sys.argv[1]) as f:
    t = f["time"][:]
    core, skin = f["body/core_temperature"][:], f["body/mean_skin_temperature"][:]
    T = f["segments/ears/temperature"][:]
    layers = [l.decode() if isinstance(l, bytes) else l for l in f["segments/ears/layer"].attrs["layer_names"]]
    layer, vol, axial = f["segments/ears/layer"][:], f["segments/ears/volume"][:], f["segments/ears/axial"][:]
    # skin@0.5 as `thermorph fit` reads it: linear between the two cells whose centres bracket mid-length
    cells = np.where(layer == layers.index("skin"))[0]
    mean = (T[:, :, cells] * vol[None, :, cells]).sum(axis=2) / vol[:, cells].sum(axis=1)[None, :]
    ear = np.array([np.interp(0.5 * (axial[-1] + axial[0]), axial, row) for row in mean])
    met = f["body/heat_flow/metabolism"][:]
    if "shivering" in f["body/heat_flow"]:
        met = met + f["body/heat_flow/shivering"][:]
sd = {"core": 0.05, "skin": 0.2, "ear": 0.3, "met": 0.4}
with open(sys.argv[2], "w") as out:
    out.write("# INVENTED data (tests/bench/fit_coverage.sh), illustrative.\n")
    out.write("time [min], body.core_temperature [degC], body.core_temperature.sd [K], body.mean_skin_temperature [degC], "
              "body.mean_skin_temperature.sd [K], segments.ears.temperature.skin@0.5 [degC], "
              "segments.ears.temperature.skin@0.5.sd [K], body.metabolic_rate [W], body.metabolic_rate.sd [W]\n")
    for i in range(1, len(t)):
        first = i == 1
        out.write(", ".join([f"{t[i] / 60:g}",
                             f"{core[i] + rng.normal(0, sd['core']):.3f}", f"{sd['core']}" if first else "",
                             f"{skin[i] + rng.normal(0, sd['skin']):.2f}", f"{sd['skin']}" if first else "",
                             f"{ear[i] + rng.normal(0, sd['ear']):.2f}", f"{sd['ear']}" if first else "",
                             f"{met[i] + rng.normal(0, sd['met']):.2f}", f"{sd['met']}" if first else ""]) + "\n")
PY
  "$exe" fit "$case" "${scenario[@]}" --data "$out/data_$d.csv" "${free[@]}" -j "$jobs" -q --grid-check 0 -o "$out/fit_$d.h5" \
    > "$out/fit_$d.txt" 2>&1 || echo "draw $d: fit failed (exit $?)"
done
end=$(date +%s.%N)
"$py" - "$out" "$draws" "$(echo "$end - $start" | bc)" <<'PY'
import sys, os, h5py, numpy as np
out, draws, seconds = sys.argv[1], int(sys.argv[2]), float(sys.argv[3])
truth = {"tissues.fur.conductivity": 0.055, "segments.ears.vasomotor.shunt": 0.45,
         "segments.ears.vessels.countercurrent_conductance": 0.03, "body.activity": 1.3}
vals, ses, cover, ok = {k: [] for k in truth}, {k: [] for k in truth}, {k: 0 for k in truth}, 0
for d in range(1, draws + 1):
    path = os.path.join(out, f"fit_{d}.h5")
    if not os.path.exists(path):
        continue
    with h5py.File(path) as f:
        g = f["fit/parameters"]
        names = [n.decode() for n in g["name"][:]]
        ok += 1
        for i, k in enumerate(names):
            vals[k].append(g["value"][i]); ses[k].append(g["standard_error"][i])
            cover[k] += int(g["lower_95"][i] <= truth[k] <= g["upper_95"][i])
print(f"coverage study of the fitting example: {ok} of {draws} draws fitted, {seconds:.0f} s wall")
for k in truth:
    v, s = np.array(vals[k]), np.array(ses[k])
    print(f"  {k:<50} mean {v.mean():.5g} (truth {truth[k]}), mean SE / SD of estimates = {s.mean() / v.std(ddof=1):.3f}, "
          f"coverage {cover[k] / ok:.2f}")
PY
