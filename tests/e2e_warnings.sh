#!/usr/bin/env bash
# End-to-end: warnings are stored, not only printed.
# 1. Tissue below 0 degC: a thin unperfused rod in -10 degC wind (no blood, so nothing rewarms it) freezes; the
#    run's result file holds the freezing warning in /provenance/warnings with the segment, and its minimum
#    equals the lowest tissue temperature stored in the file (read independently with h5py); in 20 degC air no
#    such warning. (0 degC as the freezing point of tissue: common practice, no source.)
#    Tissue above 45 degC (the model's hot limit, drivers/record_tissue_limits.hpp; a choice, common practice,
#    no source): the same rod in 46 degC air reaches it (its tissue heat is ~0.03 K of rise, and Newton heating
#    brings it from 37 to within 0.6 K of the air in 1 h: time constant rho c r / (2 h) ~ 3 min, Incropera et al.
#    2007 eq. 5.6), so the run warns with the file's highest tissue temperature; in 44 degC air (settles near 44.03
#    degC) it does not.
# 2. Sweep rows: the freezing row carries the warning in the CSV and in /runs/warnings, the warm row does not.
# 3. Correlation-range warnings per row: Mitchell's sphere constants on a cylinder warn in every row, also with
#    two threads (the validity log is per thread and reset per run).
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"; python="${3:-/usr/bin/python3}"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }
cat > "$work/rod.toml" <<'TOML'
title = "Thin rod in frost (illustrative)"
[run]
duration = "1 h"
output_interval = "5 min"
[environment]
temperature = "-10 degC"
speed = "3 m/s"
[tissues.cold]
base = "muscle"
perfusion = 0
[[segments]]
name = "rod"
shape = "cylinder"
length = "6 cm"
axial_cells = 4
layers = [{ tissue = "cold", thickness = "0.3 cm", cells = 2 }]
TOML
"$exe" run "$work/rod.toml" -o "$work/cold.h5" -q > /dev/null 2> "$work/cold.err" || fail "cold run exit $?"
grep -q "segment rod: tissue below 0 degC (freezing)" "$work/cold.err" || fail "no freezing warning printed: $(cat "$work/cold.err")"
"$exe" run "$work/rod.toml" --set environment.temperature="20 degC" -o "$work/warm.h5" -q > /dev/null 2>&1 || fail "warm run exit $?"
"$python" - "$work/cold.h5" "$work/warm.h5" <<'PY' || fail "warnings in the result files"
import re, sys, h5py
def warnings(path):
    with h5py.File(path) as f:
        return [x.decode() if isinstance(x, bytes) else str(x) for x in f["provenance/warnings"][()]], f
cold, _ = warnings(sys.argv[1])
hits = [w for w in cold if "tissue below 0 degC" in w]
assert len(hits) == 1 and hits[0].startswith("segment rod:"), cold
with h5py.File(sys.argv[1]) as f:
    t = f["segments/rod/temperature"][...]          # [time, axial, radial] degC, no coat here
    times = f["time"][...]
lowest = float(t.min())
m = re.search(r"minimum (\S+) degC at t = (\S+) s", hits[0])
assert m, hits[0]
stated, when = float(m.group(1)), float(m.group(2))
print(f"freezing warning: minimum {stated} degC at {when} s; file: lowest tissue {lowest:.4g} degC at {times[t.min(axis=(1, 2)).argmin()]:g} s")
assert lowest < 0.0
assert abs(stated - lowest) <= 0.005 * abs(lowest) + 1e-3, (stated, lowest)
assert when == float(times[t.min(axis=(1, 2)).argmin()]), when
warm, _ = warnings(sys.argv[2])
assert not any("tissue below 0 degC" in w for w in warm), warm
PY
"$exe" run "$work/rod.toml" --set environment.temperature="46 degC" -o "$work/hot.h5" -q > /dev/null 2> "$work/hot.err" \
  || fail "hot run exit $?"
grep -q "segment rod: tissue above 45 degC (hyperthermia)" "$work/hot.err" || fail "no hot-tissue warning printed: $(cat "$work/hot.err")"
"$exe" run "$work/rod.toml" --set environment.temperature="44 degC" -o "$work/hot44.h5" -q > /dev/null 2> "$work/hot44.err" \
  || fail "44 degC run exit $?"
grep -q "tissue above" "$work/hot44.err" && fail "44 degC air warned of hot tissue: $(cat "$work/hot44.err")"
"$python" - "$work/hot.h5" "$work/hot44.h5" <<'PY' || fail "hot-tissue warnings in the result files"
import re, sys, h5py
def read(path):
    with h5py.File(path) as f:
        w = [x.decode() if isinstance(x, bytes) else str(x) for x in f["provenance/warnings"][()]]
        return w, f["segments/rod/temperature"][...], f["time"][...]
w, t, times = read(sys.argv[1])
hits = [x for x in w if "tissue above 45 degC" in x]
assert len(hits) == 1 and hits[0].startswith("segment rod:"), w
m = re.search(r"maximum (\S+) degC at t = (\S+) s", hits[0])
first = re.search(r"first above 45 degC at t = (\S+) s", hits[0])
assert m and first, hits[0]
highest = float(t.max())
peak_time = float(times[t.max(axis=(1, 2)).argmax()])
first_file = float(times[(t.max(axis=(1, 2)) > 45.0).argmax()])
print(f"hot warning: maximum {m.group(1)} degC at {m.group(2)} s, first at {first.group(1)} s; "
      f"file: highest {highest:.4g} degC at {peak_time:g} s, first above 45 at {first_file:g} s")
assert 45.0 < highest < 46.1, highest
assert abs(float(m.group(1)) - highest) <= 1e-3, (m.group(1), highest)
assert float(m.group(2)) == peak_time and float(first.group(1)) == first_file
w44, t44, _ = read(sys.argv[2])
assert float(t44.max()) < 45.0 and not any("tissue above" in x for x in w44), (float(t44.max()), w44)
PY
# The stored warnings reach a reader who has only the file: report.py lists every one (the hot run also stores the
# 4-cell rod's grid warning), a figure's footer counts them and quotes the first.
"$python" "$src/postproc/report.py" "$work/hot.h5" > "$work/hot.report" 2>&1 || fail "report.py exit $?"
grep -q "Warnings stored with the run (2; /provenance/warnings):" "$work/hot.report" \
  && grep -q "segment rod: tissue above 45 degC (hyperthermia)" "$work/hot.report" \
  && grep -q "grid: segment rod: axial_cells = 4" "$work/hot.report" \
  || fail "report.py does not list the stored warnings: $(head -12 "$work/hot.report")"
"$python" "$src/postproc/report.py" "$work/hot44.h5" | grep -q "tissue above" && fail "report.py lists a hot warning of a run without one"
PYTHONPATH="$src/postproc" "$python" - "$work/hot.h5" <<'PY' || fail "figure footer note of the stored warnings"
import sys, h5py
from thermorph_post.results import Results
from thermorph_post.style import warnings_note
with h5py.File(sys.argv[1]) as f:
    stored = [x.decode() if isinstance(x, bytes) else str(x) for x in f["provenance/warnings"][()]]
with Results(sys.argv[1]) as r:
    note = warnings_note(r)
assert note.startswith(f"The run stored {len(stored)} warnings") and stored[0][:100] in note, (note, stored)
PY
"$exe" sweep "$work/rod.toml" --vary "environment.temperature=-10 degC,20 degC" -j 2 -q -o "$work/s.h5" > /dev/null 2>&1 \
  || fail "sweep exit $?"
sed -n 2p "$work/s.csv" | grep -q "segment rod: tissue below 0 degC" || fail "row 0 lacks the freezing warning: $(sed -n 2p "$work/s.csv")"
sed -n 3p "$work/s.csv" | grep -q "tissue below 0 degC" && fail "row 1 should not warn: $(sed -n 3p "$work/s.csv")"
"$python" - "$work/s.h5" <<'PY' || fail "HDF5 /runs/warnings per row"
import sys, h5py
with h5py.File(sys.argv[1]) as f:
    w = [x.decode() if isinstance(x, bytes) else str(x) for x in f["runs/warnings"][()]]
assert "segment rod: tissue below 0 degC" in w[0], w
assert "tissue below 0 degC" not in w[1], w
PY
"$exe" sweep "$work/rod.toml" --set segments.rod.surface.correlation=mitchell \
  --vary "environment.temperature=20 degC,21 degC,22 degC,23 degC" -j 2 -q -o "$work/m.h5" > /dev/null 2>&1 \
  || fail "mitchell sweep exit $?"
"$python" - "$work/m.h5" <<'PY' || fail "correlation warnings per row"
import sys, h5py
with h5py.File(sys.argv[1]) as f:
    w = [x.decode() if isinstance(x, bytes) else str(x) for x in f["runs/warnings"][()]]
assert len(w) == 4 and all("Mitchell" in x for x in w), w
PY
# 4. The sweep's summary on stderr counts each warning over the runs that have it, not each run's set of warnings:
#    freezing in 1 of 2 runs and Mitchell's constants in 2 of 2 (before, a run with both and a run with one made two
#    lines that each named a different set); /provenance/warnings lists single warnings.
"$exe" sweep "$work/rod.toml" --set segments.rod.surface.correlation=mitchell --set segments.rod.axial_cells=40 \
  --vary "environment.temperature=-10 degC,20 degC" -j 1 -q -o "$work/k.h5" > /dev/null 2> "$work/k.err" \
  || fail "kinds sweep exit $?"
grep -q "^warning (1 of 2 runs): segment rod: tissue below 0 degC" "$work/k.err" \
  || fail "freezing not counted as its own kind: $(cat "$work/k.err")"
grep -q "^warning (2 of 2 runs): Mitchell (1976)" "$work/k.err" \
  || fail "Mitchell's warning not counted over both runs: $(cat "$work/k.err")"
[[ $(grep -c "^warning (" "$work/k.err") -eq 2 ]] || fail "expected two kinds: $(cat "$work/k.err")"
"$python" - "$work/k.h5" <<'PY' || fail "sweep /provenance/warnings"
import sys, h5py
with h5py.File(sys.argv[1]) as f:
    w = [x.decode() if isinstance(x, bytes) else str(x) for x in f["provenance/warnings"][()]]
    rows = [x.decode() if isinstance(x, bytes) else str(x) for x in f["runs/warnings"][()]]
assert len(w) == 2 and sum("Mitchell" in x for x in w) == 1 and sum("freezing" in x for x in w) == 1, w
assert "freezing" in rows[0] and "Mitchell" in rows[0] and "; " in rows[0], rows   # a row keeps all its warnings
assert "freezing" not in rows[1] and "Mitchell" in rows[1], rows
PY
echo "e2e_warnings: all checks passed"
