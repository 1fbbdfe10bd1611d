#!/usr/bin/env bash
# End-to-end: case keys with no effect in the case as written (models/inert_keys.hpp).
# 1. `check`, `run` and `steady` warn of each one the case gives, naming FILE:LINE:COLUMN, the key path and why; the
#    run's results file stores the warning in /provenance/warnings. A case that gives none warns of none.
# 2. The resolved case (`check --resolved`) re-run warns of the same keys when the case gave them, of none when not.
# 3. A sweep, fit, sensitivity or uncertainty run whose parameter has no effect is refused with exit 2 and a message
#    naming the key and why, before any run and without an output file; a sweep whose other axis makes the key act
#    runs (exit 0).
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"; python="${3:-/usr/bin/python3}"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }
cd "$work"
cat > bare.toml <<'TOML'
title = "Swimmer (illustrative)"
[run]
duration = "10 min"
output_interval = "5 min"
[environment]
medium = "water"
temperature = "10 degC"
speed = "0.5 m/s"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "30 cm"
axial_cells = 3
layers = [{ tissue = "muscle", thickness = "5 cm", cells = 4 }, { tissue = "skin", thickness = "0.3 cm", cells = 1 }]
[[segments]]
name = "head"
parent = "trunk"
shape = "sphere"
radius = "5 cm"
layers = [{ tissue = "muscle", cells = 4 }]
TOML
# The same with the air's temperature (line 9, its value at column 19) and a controller that is never on.
sed 's/^speed = "0.5 m\/s"$/speed = "0.5 m\/s"\nair_temperature = "-5 degC"/' bare.toml > swim.toml
printf '[control.shivering]\nenabled = "off"\ngain = "0.8 1/K"\n' >> swim.toml
grep -q '^air_temperature' swim.toml || fail "test set-up"

# 1. Warnings of the given keys, stored in the results.
"$exe" check swim.toml > /dev/null 2> check.err || fail "check exit $?: $(cat check.err)"
grep -q '^warning: swim.toml:9:19: environment.air_temperature has no effect: every segment is in water for the whole run' check.err ||
  fail "no air_temperature warning from check: $(cat check.err)"
grep -q 'control.shivering.gain has no effect: \[control.shivering\] is off for the whole run' check.err ||
  fail "no controller warning: $(cat check.err)"
[[ $(grep -c 'has no effect' check.err) == 2 ]] || fail "expected 2 warnings: $(cat check.err)"
for command in run steady; do
  "$exe" $command swim.toml -q -o $command.h5 > /dev/null 2> $command.err || fail "$command exit $?: $(cat $command.err)"
  grep -q 'environment.air_temperature has no effect' $command.err || fail "$command: no warning: $(cat $command.err)"
done
"$python" - run.h5 <<'PY' || fail "warning not stored in the results file"
import sys, h5py
with h5py.File(sys.argv[1]) as f:
    w = [x.decode() if isinstance(x, bytes) else str(x) for x in f["provenance/warnings"][()]]
assert any("swim.toml:9:19: environment.air_temperature has no effect" in x for x in w), w
PY
"$exe" check bare.toml > /dev/null 2> bare.err || fail "check bare exit $?"
grep -q 'has no effect' bare.err && fail "a case without such keys warns: $(cat bare.err)"

# 2. Resolved cases: the same warnings when given, none when not.
"$exe" check --resolved swim.toml > swim.resolved.toml 2> /dev/null || fail "check --resolved"
"$exe" check swim.resolved.toml > /dev/null 2> resolved.err || fail "check resolved exit $?"
[[ $(grep -c 'has no effect' resolved.err) == 2 ]] || fail "resolved re-run: expected the 2 warnings: $(cat resolved.err)"
grep -q 'swim.resolved.toml:[0-9]*:[0-9]*: environment.air_temperature has no effect' resolved.err || fail "$(cat resolved.err)"
"$exe" check --resolved bare.toml > bare.resolved.toml 2> /dev/null || fail "check --resolved bare"
"$exe" check bare.resolved.toml > /dev/null 2> bare.resolved.err || fail "check bare resolved exit $?"
grep -q 'has no effect' bare.resolved.err && fail "the resolved case of a case without such keys warns: $(cat bare.resolved.err)"

# 3. Parameters with no effect: refused before any run.
expect2() {  # expect2 TEXT ARGS...: exit 2 and TEXT on stderr, no output file
  local text="$1"; shift
  "$exe" "$@" > out.txt 2> err.txt; local rc=$?
  [[ $rc == 2 ]] || fail "$* : exit $rc, expected 2: $(cat err.txt)"
  grep -q -- "$text" err.txt || fail "$* : message lacks \"$text\": $(cat err.txt)"
  [[ -e out.csv || -e out.h5 ]] && fail "$* : an output file was written"
  return 0
}
expect2 "bare.toml: --vary environment.air_temperature: the key has no effect in this case, so every run would give the same results: every segment is in water" \
  sweep bare.toml --vary "environment.air_temperature=-10 degC:10 degC:3" -o out.csv -q
expect2 "segments.0.surface.emissivity: the key has no effect" sweep bare.toml --vary "segments.0.surface.emissivity=0.5,0.9" -o out.csv -q
"$exe" sweep bare.toml --vary "environment.air_temperature=-10 degC:10 degC:2" --vary "segments.head.surface.immersion=body,never" \
  -o acts.csv -q > /dev/null 2> acts.err || fail "sweep with an axis that makes the key act: exit $?: $(cat acts.err)"
printf 'time [min], body.core_temperature [degC], body.core_temperature.sd [K]\n0, 37, 0.1\n5, 36.9,\n10, 36.8,\n' > obs.csv
expect2 "--free environment.air_temperature=-10 degC:10 degC: the key has no effect in this case" \
  fit bare.toml --data obs.csv --free "environment.air_temperature=-10 degC:10 degC" --start "environment.air_temperature=0 degC" -o out.h5 -q
expect2 "the key has no effect in this case" \
  sensitivity bare.toml --set environment.air_temperature="0 degC" --method morris --param "environment.air_temperature=-10 degC:10 degC" -N 2 -o out.h5 -q
expect2 "--param environment.air_temperature: the key has no effect in this case" \
  uncertainty bare.toml --param "environment.air_temperature[degC]=normal:10:2" --samples 4 -o out.h5 -q

# 4. [[events]] vasomotor and metabolism targets that cannot act (the head has no skin; no segment has shunts), and
#    the body-wide vasomotor controller when every skin follows a local one: warned at their line and column, and
#    refused as sweep, fit and sensitivity parameters.
cp bare.toml events.toml
cat >> events.toml <<'TOML'
[control.vasomotor]
gain = "2 1/K"
[control.local.trunk]
segments = "trunk"
[[events]]
at = "2 min"
vasomotor = { head = { skin_perfusion = 0.2 } }
metabolism = { activity = 2 }
TOML
line=$(grep -n 'head = { skin_perfusion' events.toml | cut -d: -f1)
column=$(awk -v n="$line" 'NR == n { print index($0, "0.2") }' events.toml)  # of the value, as the file has it
"$exe" check events.toml > /dev/null 2> events.err || fail "check events exit $?: $(cat events.err)"
grep -q "^warning: events.toml:$line:$column: events.0.vasomotor.head.skin_perfusion has no effect: segment head has no perfused skin" events.err ||
  fail "no skin_perfusion warning at line $line: $(cat events.err)"
grep -q "^warning: events.toml:[0-9]*:8: control.vasomotor.gain has no effect: every segment with a layer of role skin" events.err ||
  fail "no body-wide controller warning: $(cat events.err)"
grep -q 'metabolism.activity has no effect' events.err && fail "a metabolism event that acts warns: $(cat events.err)"
expect2 "--vary events.0.vasomotor.head.skin_perfusion: the key has no effect in this case" \
  sweep events.toml --vary "events.0.vasomotor.head.skin_perfusion=0.2,2" -o out.csv -q
expect2 "--free control.vasomotor.gain=0.5 1/K:4 1/K: the key has no effect in this case" \
  fit events.toml --data obs.csv --free "control.vasomotor.gain=0.5 1/K:4 1/K" --start "control.vasomotor.gain=1 1/K" -o out.h5 -q
expect2 "the key has no effect in this case" \
  sensitivity events.toml --method morris --param "events.0.vasomotor.head.skin_perfusion=0.2:2" -N 2 -o out.h5 -q
expect2 "the key has no effect in this case" \
  sensitivity events.toml --set 'tissues.muscle.metabolic_heat="0 W/m3"' --set 'tissues.skin.metabolic_heat="0 W/m3"' \
  --method morris --param "events.0.metabolism.activity=1:3" -N 2 -o out.h5 -q

# 5. [sweep] window of a steady sweep: warned; two windows give the same table, and in a transient sweep different.
for mode in steady transient; do
  for window in "1 min:2 min" "5 min:10 min"; do
    cp bare.toml win.toml
    printf '[sweep]\nmode = "%s"\nwindow = "%s"\n' "$mode" "$window" >> win.toml
    "$exe" sweep win.toml --vary "environment.temperature=5 degC,15 degC" -o "$mode-${window%% *}.csv" -q > /dev/null 2> win.err ||
      fail "sweep $mode $window: exit $?: $(cat win.err)"
    if [[ $mode == steady ]]; then
      grep -q "win.toml:$(wc -l < win.toml):$(awk 'END { print index($0, "\"") }' win.toml): sweep.window has no effect: sweep.mode = \"steady\"" win.err ||
        fail "no sweep.window warning: $(cat win.err)"
    else
      grep -q 'sweep.window has no effect' win.err && fail "a transient sweep's window warns: $(cat win.err)"
    fi
  done
done
"$python" - <<'PY' || fail "sweep tables"
import csv
def rows(name):  # every column but the warnings (which name the window's line)
    with open(name) as f:
        return [[v for k, v in r.items() if k != "warnings"] for r in csv.DictReader(f)]
assert rows("steady-1.csv") == rows("steady-5.csv"), "steady sweeps with two windows differ"
assert rows("transient-1.csv") != rows("transient-5.csv"), "transient sweeps with two windows agree"
PY

# 6. Third round: a superficial return on a segment without perfused tissue, a shunt gain with no shunts to open,
#    keys a gain of 0 leaves without effect, and [run] integration keys of a steady state: warned at their line and
#    column, and refused as sweep parameters; [run] integration keys of a steady sweep refused, not warned.
cp bare.toml third.toml
cat >> third.toml <<'TOML'
[[segments]]
name = "fin"
parent = "trunk"
shape = "cylinder"
length = "10 cm"
axial_cells = 2
layers = [{ tissue = "keratin", thickness = "1 cm", cells = 2 }]
vasomotor = { superficial_return = 0.5 }
[tissues.keratin]
base = "bone"
perfusion = "0 1/s"
[control.vasomotor]
shunt_gain = "2 1/K"
[control.shivering]
gain = "0 1/K"
set_point = "37.5 degC"
TOML
sed -i 's/^output_interval = "5 min"$/output_interval = "5 min"\nrtol = 1e-7/' third.toml
"$exe" check third.toml > /dev/null 2> third.err || fail "check third exit $?: $(cat third.err)"
at() { local n; n=$(grep -n -- "$1" third.toml | head -1 | cut -d: -f1); echo "third.toml:$n:$(awk -v n="$n" -v v="$2" 'NR == n { print index($0, v) }' third.toml)"; }
grep -q "^warning: $(at 'superficial_return = 0.5' 0.5): segments.fin.vasomotor.superficial_return has no effect: segment fin has no perfused tissue" third.err ||
  fail "no superficial_return warning: $(cat third.err)"
grep -q "^warning: $(at 'shunt_gain' '"2'): control.vasomotor.shunt_gain has no effect: no segment with arteriovenous shunts" third.err ||
  fail "no shunt_gain warning: $(cat third.err)"
grep -q "^warning: $(at 'set_point = "37.5' '"37.5'): control.shivering.set_point has no effect: control.shivering.gain = 0" third.err ||
  fail "no zero-gain warning: $(cat third.err)"
[[ $(grep -c 'has no effect' third.err) == 3 ]] || fail "check third: expected 3 warnings: $(cat third.err)"
# run.rtol acts in a transient run and not on a steady state; neither `run` nor `steady` warns of it (a case serves
# both), a steady sweep refuses it as a parameter (below).
for command in run steady; do
  "$exe" $command third.toml -q -o third-$command.h5 > /dev/null 2> third-$command.err || fail "$command third exit $?"
  grep -q 'run.rtol has no effect' third-$command.err && fail "$command warns of run.rtol: $(cat third-$command.err)"
done
expect2 "--vary segments.fin.vasomotor.superficial_return: the key has no effect in this case" \
  sweep third.toml --vary "segments.fin.vasomotor.superficial_return=0,0.9" -o out.csv -q
expect2 "--vary control.vasomotor.shunt_gain: the key has no effect in this case" \
  sweep third.toml --vary "control.vasomotor.shunt_gain=0.5 1/K,3 1/K" -o out.csv -q
expect2 "--vary control.shivering.max_power: the key has no effect in this case" \
  sweep third.toml --vary "control.shivering.max_power=5 W,50 W" -o out.csv -q
expect2 "--vary run.rtol: the key has no effect in this case" \
  sweep third.toml --steady --vary "run.rtol=1e-4,1e-8" -o out.csv -q
# The same refusal names the option given: sensitivity --param with --steady (local and morris), and a case whose
# sweep.mode is steady; without --steady the same parameter runs.
expect2 "third.toml: --param run.rtol: the key has no effect in this case, so the results cannot depend on it: the sweep solves each run's steady state" \
  sensitivity third.toml --steady --method local --param run.rtol -o out.h5 -q
expect2 "--param run.atol=1e-7 K:1e-5 K: the key has no effect in this case" \
  sensitivity third.toml --steady --method morris --param "run.atol=1e-7 K:1e-5 K" -N 2 -o out.h5 -q
printf '[sweep]\nmode = "steady"\n' | cat third.toml - > third-steady.toml
"$exe" sensitivity third-steady.toml --method local --param run.atol -o out.h5 -q > out.txt 2> err.txt; rc=$?
[[ $rc == 2 ]] && grep -q -- "--param run.atol: the key has no effect" err.txt || fail "sweep.mode = steady: exit $rc: $(cat err.txt)"
rm -f out.h5
"$exe" sensitivity third.toml --method local --param run.rtol -o rtol-local.h5 -q > /dev/null 2> rtol-local.err ||
  fail "transient local sensitivity of run.rtol: exit $?: $(cat rtol-local.err)"
# The same keys where they act: a transient sweep of run.rtol, and the shivering's power with a gain.
"$exe" sweep third.toml --vary "run.rtol=1e-3,1e-8" -o rtol.csv -q > /dev/null 2> rtol.err || fail "transient rtol sweep: exit $?: $(cat rtol.err)"
"$exe" sweep third.toml --set 'control.shivering.gain="0.5 1/K"' --vary "control.shivering.max_power=5 W,50 W" -o power.csv -q \
  > /dev/null 2> power.err || fail "shivering power sweep with a gain: exit $?: $(cat power.err)"
"$python" - <<'PY' || fail "sweep tables where the keys act"
import csv
def rows(name):
    with open(name) as f:
        # the results only: temperatures (each run's own index, key value, timings and warnings differ anyway)
        return [[v for k, v in r.items() if "temperature" in k] for r in csv.DictReader(f)]
for name in ("rtol.csv", "power.csv"):
    a, b = rows(name)
    assert a != b, name + ": the two runs agree"
PY
# 7. Fourth round: a CIVD of opening 0, and a segment's superficial return set by an [[events]] step at t = 0 s:
#    warned at their line and column (the event's too), refused as sweep parameters; the results file equal, dataset
#    by dataset, to the case without them.
cp bare.toml fourth.toml
sed -i 's/^layers = \[{ tissue = "muscle", thickness = "5 cm", cells = 4 }, { tissue = "skin", thickness = "0.3 cm", cells = 1 }\]$/&\nvessels = { shunt_flow_max = "20 mL\/min" }/' fourth.toml
cat >> fourth.toml <<'TOML'
[control.local.trunk]
segments = "trunk"
shunt_gain = "-0.5 1/K"
TOML
cp fourth.toml fourth-without.toml
cat >> fourth.toml <<'TOML'
civd = { threshold = "36 degC", width = "1 K", opening = 0 }
TOML
printf '[[events]]\nat = "0 s"\nvasomotor = { trunk = { superficial_return = 0 } }\n' | tee -a fourth-without.toml >> fourth.toml
sed -i 's/^vessels = { shunt_flow_max = "20 mL\/min" }$/&\nvasomotor = { superficial_return = 0.4 }/' fourth.toml
grep -q 'superficial_return = 0.4' fourth.toml && grep -q 'shunt_flow_max' fourth-without.toml || fail "test set-up (fourth)"
"$exe" run fourth.toml -q -o fourth.h5 > /dev/null 2> fourth.err || fail "run fourth exit $?: $(cat fourth.err)"
at4() { local n; n=$(grep -n -- "$1" fourth.toml | head -1 | cut -d: -f1); echo "fourth.toml:$n:$(awk -v n="$n" -v v="$2" 'NR == n { print index($0, v) }' fourth.toml)"; }
grep -q "^warning: $(at4 'civd = {' '0 }'): \[control.local.trunk.civd\] has no effect: control.local.trunk.civd.opening = 0" fourth.err ||
  fail "no CIVD warning: $(cat fourth.err)"
grep -q "^warning: $(at4 'superficial_return = 0.4' 0.4): segments.trunk.vasomotor.superficial_return has no effect: events.0.vasomotor.trunk.superficial_return ($(at4 'trunk = { superficial_return = 0 }' '0 }')) sets it from t = 0 s" fourth.err ||
  fail "no superficial_return warning: $(cat fourth.err)"
[[ $(grep -c 'has no effect' fourth.err) == 2 ]] || fail "run fourth: expected 2 warnings: $(cat fourth.err)"
"$exe" run fourth-without.toml -q -o fourth-without.h5 > /dev/null 2> fourth-without.err || fail "run fourth-without exit $?"
grep -q 'has no effect' fourth-without.err && fail "the case without the keys warns: $(cat fourth-without.err)"
"$python" - fourth.h5 fourth-without.h5 <<'PY' || fail "the keys with no effect moved the results"
import sys, h5py, numpy as np
def datasets(path):
    out = {}
    with h5py.File(path) as f:
        f.visititems(lambda n, o: out.__setitem__(n, o[()]) if isinstance(o, h5py.Dataset) and n.split("/")[0] in ("body", "segments", "control") else None)
    return out
a, b = datasets(sys.argv[1]), datasets(sys.argv[2])
assert a.keys() == b.keys(), sorted(set(a) ^ set(b))
assert len(a) > 20
for k in a:
    assert a[k].tobytes() == b[k].tobytes(), k
PY
expect2 "--vary control.local.trunk.civd.threshold: the key has no effect in this case" \
  sweep fourth.toml --vary "control.local.trunk.civd.threshold=30 degC,36 degC" -o out.csv -q
expect2 "--vary segments.trunk.vasomotor.superficial_return: the key has no effect in this case" \
  sweep fourth.toml --vary "segments.trunk.vasomotor.superficial_return=0.1,0.9" -o out.csv -q
# Where they act: the CIVD's opening as the axis (its value 0 has no effect, 0.5 acts).
"$exe" sweep fourth.toml --vary "control.local.trunk.civd.opening=0,0.5" -o civd.csv -q > /dev/null 2> civd.err ||
  fail "sweep of the CIVD opening: exit $?: $(cat civd.err)"
"$python" - <<'PY' || fail "the CIVD opening does not act"
import csv
with open("civd.csv") as f:
    a, b = [[v for k, v in r.items() if "temperature" in k] for r in csv.DictReader(f)]
assert a != b
PY
echo "e2e_inert: ok"
