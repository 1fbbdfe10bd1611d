#!/usr/bin/env bash
# End-to-end: the demo case runs and matches its stored summary; bad input exits 2 and never clobbers results.
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"; python="${3:-/usr/bin/python3}"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }

# 1. Demo case: runs, writes results, prints the budget, matches the stored summary.
"$exe" run "$src/cases/limb_cooling.toml" -o "$work/demo.h5" --quiet > "$work/out.txt" || fail "demo run exit $?"
grep -q "Heat budget" "$work/out.txt" || fail "no budget table"
grep -q "Energy balance error" "$work/out.txt" || fail "no energy balance line"
"$python" "$src/tests/regression.py" "$work/demo.h5" "$src/tests/data/limb_cooling.summary.json" || fail "demo regression"
# The printed final temperatures are the results file's last values (rounded to 0.01 K as printed).
"$python" - "$work/out.txt" "$work/demo.h5" <<'PY' || fail "printed temperatures differ from the results file"
import re, sys, h5py
text = open(sys.argv[1]).read()
m = re.search(r"Temperatures at t = (\S+) s: core (\S+) degC, blood (\S+) degC, mean skin (\S+) degC", text)
assert m, "no temperature line"
with h5py.File(sys.argv[2], "r") as f:
    assert float(m.group(1)) == f["time"][-1]
    for i, q in ((2, "core_temperature"), (3, "blood_temperature"), (4, "mean_skin_temperature")):
        assert abs(float(m.group(i)) - f["body/" + q][-1]) <= 0.005 + 1e-9, (q, m.group(i), f["body/" + q][-1])
PY

# After a steady start the starting temperatures are printed too, equal to the file's first values (a steady start
# in cold surroundings without controllers starts cold: a new-user trial saw only the final core).
"$exe" run "$src/cases/limb_cooling.toml" --set run.initial=steady -o "$work/steady_start.h5" --quiet \
  > "$work/out_steady.txt" || fail "steady-start run exit $?"
"$python" - "$work/out_steady.txt" "$work/steady_start.h5" "$work/out.txt" <<'PY' || fail "steady start line"
import re, sys, h5py
text = open(sys.argv[1]).read()
m = re.search(r"Steady start at t = 0 s: core (\S+) degC, (?:blood (\S+) degC, )?mean skin (\S+) degC", text)
assert m, "no steady-start line"
with h5py.File(sys.argv[2], "r") as f:
    assert f["time"][0] == 0.0
    for i, q in ((1, "core_temperature"), (2, "blood_temperature"), (3, "mean_skin_temperature")):
        if m.group(i) is not None:
            assert abs(float(m.group(i)) - f["body/" + q][0]) <= 0.005 + 1e-9, (q, m.group(i), f["body/" + q][0])
assert "Steady start" not in open(sys.argv[3]).read(), "a uniform start printed a steady-start line"
PY

# 2. Bad input: exit 2, message names the key, the earlier result survives byte for byte.
cp "$work/demo.h5" "$work/keep.h5"
"$exe" run "$src/cases/limb_cooling.toml" -o "$work/demo.h5" --set environment.temperature="5 kg" 2> "$work/err.txt"
rc=$?; [[ $rc -eq 2 ]] || fail "bad unit gave exit $rc, expected 2"
grep -q "environment.temperature" "$work/err.txt" || fail "message lacks the key path: $(cat "$work/err.txt")"
cmp -s "$work/demo.h5" "$work/keep.h5" || fail "a failed run changed the earlier result"
ls -a "$work" | grep -q "^\.thermorph-\|tmp-" && fail "temporary file left behind"

"$exe" run "$work/missing.toml" 2> "$work/err.txt"; rc=$?
[[ $rc -eq 2 ]] || fail "missing file gave exit $rc"
grep -q "cannot open" "$work/err.txt" || fail "missing-file message: $(cat "$work/err.txt")"

# [control.sweating]: max above 1, an unknown segment, a segment whose outer surface is a coat: exit 2 naming the file,
# line and key path; the earlier result survives.
printf 'title = "t"\n[[segments]]\nname = "ball"\nshape = "sphere"\nlayers = [{ tissue = "muscle", thickness = "2 cm" }]\n[control.sweating]\nmax = 1.2\nsegments = "ball"\n' > "$work/sweat.toml"
"$exe" run "$work/sweat.toml" -o "$work/demo.h5" 2> "$work/err.txt"; rc=$?
[[ $rc -eq 2 ]] || fail "sweating max 1.2 gave exit $rc"
grep -q "sweat.toml:7:7: control.sweating.max: max = 1.2: out of range" "$work/err.txt" || fail "sweating max message: $(cat "$work/err.txt")"
"$exe" run "$work/sweat.toml" -o "$work/demo.h5" --set control.sweating.max=0.5 --set control.sweating.segments=tail 2> "$work/err.txt"; rc=$?
[[ $rc -eq 2 ]] || fail "sweating unknown segment gave exit $rc"
grep -q "control.sweating.segments: no segment named \"tail\"" "$work/err.txt" || fail "sweating segment message: $(cat "$work/err.txt")"
"$exe" run "$src/cases/limb_cooling.toml" -o "$work/demo.h5" --set control.sweating.segments=forelimb 2> "$work/err.txt"; rc=$?
[[ $rc -eq 2 ]] || fail "sweating coated segment gave exit $rc"
grep -q "control.sweating.segments: segment \"forelimb\" has a coat" "$work/err.txt" || fail "sweating coat message: $(cat "$work/err.txt")"
cmp -s "$work/demo.h5" "$work/keep.h5" || fail "a refused sweating case changed the earlier result"

# Command-line errors are bad input too: exit 2.
"$exe" run 2> /dev/null; rc=$?; [[ $rc -eq 2 ]] || fail "missing case argument gave exit $rc"
"$exe" run "$src/cases/limb_cooling.toml" --no-such-option 2> /dev/null; rc=$?
[[ $rc -eq 2 ]] || fail "unknown option gave exit $rc"
# The message names the subcommand and the unexpected arguments in the order given (CLI11 2.3 reversed them:
# "24 --bogus" for "--bogus 24") and where the options are listed.
"$exe" uncertainty "$src/cases/limb_cooling.toml" --bogus 24 2> "$work/err.txt"; rc=$?
[[ $rc -eq 2 ]] || fail "uncertainty --bogus gave exit $rc"
grep -q "thermorph uncertainty: unexpected arguments: --bogus 24 .*thermorph uncertainty --help" "$work/err.txt" ||
  fail "unexpected-argument message: $(cat "$work/err.txt")"

# 3. check, steady, and the resolved case round trip.
"$exe" check "$src/cases/limb_cooling.toml" > "$work/check.txt" || fail "check exit $?"
grep -q "forelimb" "$work/check.txt" || fail "check does not list the segment"
"$exe" check "$src/cases/limb_cooling.toml" --resolved > "$work/resolved.toml" || fail "resolved exit $?"
"$exe" check "$work/resolved.toml" > /dev/null || fail "the resolved case does not load"
"$exe" steady "$src/cases/limb_cooling.toml" -o "$work/steady.h5" --quiet > /dev/null || fail "steady exit $?"
"$python" - "$work/steady.h5" <<'PY' || fail "steady result layout"
import sys, h5py
with h5py.File(sys.argv[1]) as f:
    assert f["time"].shape == (1,), f["time"].shape
    assert f["segments/forelimb/temperature"].shape[0] == 1
    for name, ds in f["body/heat_flow"].items():
        assert ds.attrs["units"] == ("s" if name == "time" else "W"), name  # time: the group's coordinate
    assert int(f.attrs["complete"]) == 1
    assert "[[segments]]" in f.attrs["case"]
PY
echo "e2e_cli: all checks passed"
