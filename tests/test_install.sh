#!/usr/bin/env bash
# cmake --install into a temporary prefix, then build and run a tiny C++ consumer (tests/consumer/) with
# find_package(thermorph); check the man page and that the installed Python module imports.
# Arguments: BUILD_DIR SOURCE_DIR PYTHON
set -uo pipefail
build="$1"; src="$2"; python="${3:-/usr/bin/python3}"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }
cmake --install "$build" --prefix "$work/prefix" > "$work/install.log" 2>&1 || { cat "$work/install.log"; fail "install"; }
[ -x "$work/prefix/bin/thermorph" ] || fail "no bin/thermorph"
[ -f "$work/prefix/include/thermorph/drivers/simulation.hpp" ] || fail "no headers"
man="$(find "$work/prefix" -name thermorph.1)"
[ -n "$man" ] && grep -q '^\.SH "THERMORPH run"' "$man" || fail "man page without the run subcommand"
# thermorph-fit (run by `thermorph fit`) has its page too, with the fit options (none before 2026-12-05).
fitman="$(find "$work/prefix" -name thermorph-fit.1)"
[ -n "$fitman" ] && grep -q -- '--free' "$fitman" && grep -q 'not veterinary or medical advice' "$fitman" \
  || fail "no man page thermorph-fit.1 with the fit options and the caution"
cmake -S "$src/tests/consumer" -B "$work/consumer" -DCMAKE_PREFIX_PATH="$work/prefix" -DCMAKE_BUILD_TYPE=Release \
      > "$work/configure.log" 2>&1 || { cat "$work/configure.log"; fail "consumer configure"; }
cmake --build "$work/consumer" > "$work/build.log" 2>&1 || { cat "$work/build.log"; fail "consumer build"; }
"$work/consumer/consumer" || fail "consumer run"
module="$(find "$work/prefix" -name 'thermorph.cpython-*.so' | head -1)"
if [ -n "$module" ]; then
  PYTHONPATH="$(dirname "$module")" "$python" -c "import thermorph, thermorph_post; print('installed module', thermorph.__version__)" \
    || fail "installed Python module does not import"
fi

# A researcher's session outside the source tree (the new-user trial of 2026-12-05): the installed commands only, on
# PATH, in a folder of one's own, a case of one's own. Before that trial the installed executable read the unit
# database from the source tree, the Python folder (lib/python3/dist-packages) was not on /usr/bin/python3's path
# under /usr/local, and the figure and report commands were not installed.
prefix="$work/prefix"
export PATH="$prefix/bin:$PATH"
trial="$work/trial"; mkdir -p "$trial"; cd "$trial" || fail "cd $trial"
cat > burrower.toml <<'EOF'
# An invented 1.5 kg burrowing mammal leaving its burrow into a cold wind (values illustrative).
title = "Invented 1.5 kg burrower (illustrative)"
[run]
duration = "30 min"
output_interval = "2 min"
[body]
mass = "1.5 kg"
[environment]
temperature = "14 degC"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "22 cm"
axial_cells = 6
layers = [{ tissue = "viscera", thickness = "3 cm", cells = 3 }, { tissue = "muscle", thickness = "1.5 cm", cells = 2 },
          { tissue = "skin", thickness = "0.2 cm", cells = 1 }]
coat = { material = "fur", thickness = "1.5 cm", cells = 2 }
[[segments]]
name = "head"
parent = "trunk"
attach_position = 1.0
shape = "sphere"
layers = [{ tissue = "brain", thickness = "1.8 cm", cells = 2 }, { tissue = "skin", thickness = "0.2 cm", cells = 1 }]
coat = { material = "fur", thickness = "0.8 cm", cells = 1 }
[[events]]
at = "10 min"
label = "outside"
environment = { temperature = "2 degC", speed = "4 m/s" }
EOF
thermorph check burrower.toml > check.txt 2> check.err || { cat check.err; fail "installed thermorph check"; }
grep -q "Invented 1.5 kg burrower" check.txt || fail "check: no description"
grep -q "not veterinary or medical advice" check.err || fail "check: no caution line"
thermorph run burrower.toml -o run.h5 > run.txt 2> run.err || { cat run.err; fail "installed thermorph run"; }
thermorph steady burrower.toml -o steady.h5 > /dev/null 2>&1 || fail "installed thermorph steady"
thermorph sweep burrower.toml --steady --vary "environment.temperature=0 degC:20 degC:3" -o sweep.h5 > /dev/null 2>&1 \
  || fail "installed thermorph sweep"
thermorph check "$prefix/share/thermorph/cases/limb_cooling.toml" > /dev/null 2>&1 || fail "installed example case"
# The installed unit database, not the source tree's (strace where installed).
if command -v strace > /dev/null; then
  strace -f -e trace=openat -o units.trace thermorph check burrower.toml > /dev/null 2>&1
  grep -q "\"$prefix/share/thermorph/thermorph-units.xml\".* = [0-9]" units.trace \
    || fail "installed thermorph does not read $prefix/share/thermorph/thermorph-units.xml"
  ! grep -q "$src/models/udunits" units.trace || fail "installed thermorph reads the source tree's unit database"
else
  echo "strace not installed: unit database path not checked"
fi
# The post-processing commands in bin/, without PYTHONPATH.
thermorph-report run.h5 --window 10min,30min --above core=36 > report.txt 2>&1 || { cat report.txt; fail "thermorph-report"; }
grep -q "not veterinary or medical advice" report.txt || fail "thermorph-report: no caution line"
thermorph-figures run.h5 --only temperatures --formats png --out figures > figures.log 2>&1 || { cat figures.log; fail "thermorph-figures"; }
[ -s figures/temperatures.png ] || fail "thermorph-figures: no figures/temperatures.png"
thermorph-sweep-figure sweep.h5 --metric body.core_temperature.final --formats png --out sweepfig > sweepfig.log 2>&1 \
  || { cat sweepfig.log; fail "thermorph-sweep-figure"; }
thermorph-export run.h5 /body --out body.csv > export.log 2>&1 || { cat export.log; fail "thermorph-export"; }
[ -s body.csv ] || fail "thermorph-export: no body.csv"
# A fit with the installed thermorph (it runs the installed thermorph-fit) and its figure with the installed
# thermorph-fit-figure (fit_figure.py; not installed as a command before 2026-12-05): a lumped sphere cooling in air,
# h fitted to its exact Newton-cooling curve (Incropera et al. 2007 eq. 5.6; tests/e2e_fit.sh, there with noise).
cat > lump.toml <<'EOF'
title = "lumped sphere (Newton cooling; illustrative)"
[run]
duration = "600 s"
output_interval = "20 s"
initial_temperature = "40 degC"
[tissues.lump]
base = "muscle"
conductivity = "1000 W/(m K)"
density = "1 kg/m3"
specific_heat = "100 J/(kg K)"
metabolic_heat = "0 W/m3"
perfusion = "0 1/s"
[[segments]]
name = "ball"
shape = "sphere"
layers = [{ tissue = "lump", thickness = "2 cm", cells = 1 }]
[environment]
temperature = "10 degC"
convection = "0.01 W/(m2 K)"
EOF
"$python" -c '
import math
tau = 1 * 100 * 0.02 / (3 * 0.01)   # rho c R / (3 h) [s]
print("time [s], body.core_temperature [degC], body.core_temperature.sd [K]")
for i in range(31):
    print(f"{20 * i}, {10 + 30 * math.exp(-20 * i / tau)!r}, {0.05 if i == 0 else str()}")
' > obs.csv || fail "writing obs.csv"
thermorph fit lump.toml --data obs.csv --free "environment.convection=0.001 W/(m2 K):0.1 W/(m2 K)" \
  --start "environment.convection=0.0065 W/(m2 K)" --grid-check 0 -q -o fit.h5 > fit.txt 2> fit.err \
  || { cat fit.err; fail "installed thermorph fit"; }
thermorph-fit-figure fit.h5 --out fitfig > fitfig.log 2>&1 || { cat fitfig.log; fail "thermorph-fit-figure"; }
[ -s fitfig/fit_fit_0.png ] || { cat fitfig.log; fail "thermorph-fit-figure: no fitfig/fit_fit_0.png"; }
grep -q "not veterinary or medical advice" fitfig.log || fail "thermorph-fit-figure: no caution line"
# The module from the prefix: the same core temperatures as the installed executable's file, bit for bit; the file
# through xarray as the README shows; the module's folder on the interpreter's path under /usr/local (Debian).
[ -n "$module" ] || fail "no Python module installed"
pydir="$(dirname "$module")"
PYTHONPATH="$pydir" "$python" - "$prefix" "$pydir" <<'EOF' || fail "installed Python module on the trial case"
import os, sys
import h5py, numpy as np
import thermorph
prefix, pydir = sys.argv[1], sys.argv[2]
assert os.path.realpath(thermorph.__file__).startswith(os.path.realpath(prefix)), thermorph.__file__
r = thermorph.run("burrower.toml")
with h5py.File("run.h5", "r") as f:
    assert np.array_equal(r["core_temperature"], f["body/core_temperature"][...]), "module and executable differ"
import xarray as xr
body = xr.open_dataset("run.h5", group="/body", engine="h5netcdf")
assert float(body.core_temperature.sel(time=600)) == float(r["core_temperature"][5])
relative = os.path.relpath(pydir, prefix)
if any(p.startswith("/usr/local/lib/python") for p in sys.path):
    assert "/usr/local/" + relative in sys.path, f"/usr/local/{relative} is not on {sys.executable}'s path {sys.path}"
else:
    print("no /usr/local entries on sys.path: the default install folder is not checked")
print("installed module:", thermorph.__file__, "core", r["core_temperature"][-1], "degC")
EOF
echo "install: all checks passed"
