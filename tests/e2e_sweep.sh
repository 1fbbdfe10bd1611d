#!/usr/bin/env bash
# End-to-end: thermorph sweep on the example quadruped. Same table on one and two threads; a failed run inside
# the grid is recorded and the rest complete; a sweep stopped by SIGTERM resumes with only the missing runs;
# size series checked against `thermorph check`; steady sweeps; figures; input errors.
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"; python="${3:-/usr/bin/python3}"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }
case="$src/tests/data/quadruped_coarse.toml"   # the coarse test copy of cases/quadruped.toml

# 1. One and two threads: identical CSV byte for byte; a negative length fails its two runs, the rest complete.
grid=(--vary "segments.ears.length=-2 cm,3 cm,6 cm,12 cm" --vary "environment.temperature=20degC,40degC")
"$exe" sweep "$case" "${grid[@]}" -j 1 -q -o "$work/j1.h5" > "$work/j1.txt" || fail "sweep -j 1 exit $?"
"$exe" sweep "$case" "${grid[@]}" -j 2 -q -o "$work/j2.h5" > /dev/null || fail "sweep -j 2 exit $?"
cmp -s "$work/j1.csv" "$work/j2.csv" || fail "-j 1 and -j 2 tables differ"
grep -q "8 runs (4 x 2): 6 ok, 2 failed" "$work/j1.txt" || fail "summary line: $(cat "$work/j1.txt")"
"$python" - "$work/j1.h5" "$work/j2.h5" <<'PY' || fail "table contents"
import sys, h5py, numpy as np
with h5py.File(sys.argv[1]) as a, h5py.File(sys.argv[2]) as b:
    assert a.attrs["kind"] == "thermorph sweep" and int(a.attrs["complete"]) == 1
    status = list(a["runs/status"].asstr()[()])
    assert status == ["failed"] * 2 + ["ok"] * 6, status
    for e in a["runs/error"].asstr()[:2]:
        assert "segments.ears.length" in e and "out of range" in e, e
    length = a["parameters/segments.ears.length"]
    assert length.attrs["units"] == "cm" and list(length[()]) == [-2, -2, 3, 3, 6, 6, 12, 12]
    assert list(a["parameters/environment.temperature"][()]) == [20, 40] * 4
    for name, ds in a["metrics"].items():
        if name == "run":  # the netCDF coordinate (run index)
            continue
        assert ds.attrs["units"] in ("W", "degC", "s"), name
        assert np.all(np.isnan(ds[:2])) and not np.any(np.isnan(ds[2:])), name
        assert np.array_equal(ds[()], b["metrics"][name][()], equal_nan=True), name
    # More ear, more heat lost by the ears in 20 degC air (common practice, no source: area grows with length).
    ear = a["metrics/segments.ears.heat_flow.convection"][()]
    assert ear[2] > ear[4] > ear[6], ear
PY

# 2. Resume: SIGTERM in the middle, then --resume runs only the missing runs; the table equals an uninterrupted one.
long=(--set "run.duration=6 h" --vary "segments.ears.length=3 cm:12 cm:8" --vary "environment.temperature=10degC:30degC:4")
"$exe" sweep "$case" "${long[@]}" -j 2 -q -o "$work/ref.h5" > /dev/null || fail "reference sweep exit $?"
"$exe" sweep "$case" "${long[@]}" -j 1 -q -o "$work/cut.h5" > /dev/null 2> "$work/cut.txt" &
pid=$!
for _ in $(seq 1 1000); do
  [[ -f "$work/cut.progress" ]] && (( $(wc -l < "$work/cut.progress") >= 4 )) && break
  sleep 0.01
done
kill -TERM "$pid"; wait "$pid"; rc=$?
[[ $rc -eq 143 ]] || fail "a sweep stopped by SIGTERM exits $rc, expected 143"
grep -q "stopped by SIGTERM" "$work/cut.txt" || fail "no stop message: $(cat "$work/cut.txt")"
done_before=$(( $(wc -l < "$work/cut.progress") - 1 ))
(( done_before >= 3 && done_before < 32 )) || fail "progress file holds $done_before runs"
"$python" - "$work/cut.h5" "$done_before" <<'PY' || fail "partial table"
import sys, h5py
with h5py.File(sys.argv[1]) as f:
    assert int(f.attrs["complete"]) == 0 and int(f.attrs["interrupted"]) == 1
    assert int(f.attrs["runs_ok"]) == int(sys.argv[2]), (f.attrs["runs_ok"], sys.argv[2])
    assert list(f["runs/status"].asstr()[()]).count("not run") == 32 - int(sys.argv[2])
PY
# A line cut short by a kill (here: half of a copy of the first row) is ignored on resume.
sed -n 2p "$work/cut.progress" | head -c 40 >> "$work/cut.progress"
"$exe" sweep "$case" "${long[@]}" -j 1 -q -o "$work/cut.h5" > /dev/null 2> "$work/err.txt"; rc=$?
[[ $rc -eq 2 ]] || fail "a new sweep over an interrupted one exits $rc, expected 2"
grep -q -- "--resume" "$work/err.txt" || fail "message does not mention --resume: $(cat "$work/err.txt")"
"$exe" sweep "$case" "${long[@]}" -j 2 -q --resume -o "$work/cut.h5" > "$work/resume.txt" || fail "resume exit $?"
grep -q "$done_before done earlier, $(( 32 - done_before )) run now" "$work/resume.txt" ||
  fail "resume did not run exactly the missing runs ($done_before done): $(cat "$work/resume.txt")"
cmp -s "$work/ref.csv" "$work/cut.csv" || fail "the resumed table differs from the uninterrupted one"
[[ -f "$work/cut.progress" ]] && fail "progress file left after a complete sweep"

# 3. Size series against `thermorph check`: area x f^2 and volume x f^3 (geometric similarity, the square-cube
#    law; common practice, no source). check prints 4 significant digits: tolerance 2e-3.
row() {  # area [cm2] and volume [cm3] of a row of `thermorph check` (6th and 5th columns from the right)
  awk -v name="$1" '/^Grid/ { exit } $1 == name { print $(NF - 5), $(NF - 4) }'
}
for target in body ears; do
  line=$("$exe" sweep "$case" --scale "$target=1,2" --list | sed -n 2p)
  [[ "$line" == "run 1:"* ]] || fail "--list output: $line"
  eval "args=(${line#run 1:})"
  base=$("$exe" check "$case" 2> /dev/null | row "$target") || fail "check"
  scaled=$("$exe" check "$case" "${args[@]}" 2> /dev/null | row "$target") || fail "check of the scaled case"
  "$python" -c "
a0, v0 = map(float, '$base'.split()); a1, v1 = map(float, '$scaled'.split())
assert abs(a1 / a0 / 4 - 1) < 2e-3 and abs(v1 / v0 / 8 - 1) < 2e-3, ('$target', a1 / a0, v1 / v0)
" || fail "size series of $target: base '$base', scaled '$scaled'"
done

# 4. Steady sweep: no storage at the steady state (to the solver tolerance).
"$exe" sweep "$case" --steady --vary "environment.temperature=0degC,10degC" --metric body.heat_flow -q \
  -o "$work/steady.h5" > /dev/null || fail "steady sweep exit $?"
"$python" - "$work/steady.h5" <<'PY' || fail "steady storage"
import sys, h5py, numpy as np
with h5py.File(sys.argv[1]) as f:
    assert f.attrs["mode"] == "steady"
    storage = f["metrics/body.heat_flow.storage"][()]
    assert np.all(np.abs(storage) < 1e-6), storage
PY

# 5. Figures: lines and a heat map, PDF, SVG, PNG and source data, with the failed runs as gaps.
"$python" "$src/postproc/sweep_figure.py" "$work/j1.h5" --metric segments.ears.heat_flow.convection \
  --out "$work/fig" > "$work/fig.txt" || fail "sweep_figure.py lines"
"$python" "$src/postproc/sweep_figure.py" "$work/ref.h5" --metric body.core_temperature.final --heatmap \
  --out "$work/fig" >> "$work/fig.txt" || fail "sweep_figure.py heat map"
[[ $(grep -c . "$work/fig.txt") -eq 8 ]] || fail "figure files (pdf, svg, png, data.csv of two figures): $(cat "$work/fig.txt")"
while read -r f; do [[ -s "$f" ]] || fail "empty figure $f"; done < "$work/fig.txt"
head -c 4 "$work/fig/ref_body.core_temperature.final_map.pdf" | grep -q "%PDF" || fail "not a PDF"

# 6. Input errors: exit 2 with the option named.
"$exe" sweep "$case" --vary "segments.ears.length=2 cm:12 cm" 2> "$work/err.txt"; rc=$?
[[ $rc -eq 2 ]] && grep -q "START:END:COUNT" "$work/err.txt" || fail "bad spec: exit $rc, $(cat "$work/err.txt")"
"$exe" sweep "$case" --vary "segments.ear.length=2 cm,3 cm" 2> "$work/err.txt"; rc=$?
[[ $rc -eq 2 ]] && grep -q 'no segment "ear"' "$work/err.txt" || fail "bad key: exit $rc, $(cat "$work/err.txt")"
echo "e2e_sweep: all checks passed"
