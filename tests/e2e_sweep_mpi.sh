#!/usr/bin/env bash
# End-to-end: the same sweep on two MPI ranks (thermorph-mpi) and on local threads (thermorph) gives the same
# table; a failed run is recorded by a worker rank; resume under MPI runs only the missing runs; thermorph itself
# does not load MPI and, launched under mpirun, says to use thermorph-mpi (exit 2). Skipped (exit 0) without
# mpirun or without MPI support in the build (no thermorph-mpi beside thermorph).
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"; python="${3:-/usr/bin/python3}"
mpiexe="$(dirname "$exe")/thermorph-mpi"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }
if command -v ldd > /dev/null && ldd "$exe" | grep -q libmpi; then fail "thermorph links the MPI libraries"; fi
"$exe" sweep --help | grep -q "use thermorph-mpi under mpirun" || fail "thermorph sweep --help does not name thermorph-mpi"
if ! command -v mpirun > /dev/null; then
  echo "e2e_sweep_mpi: SKIPPED: mpirun not found (install openmpi-bin and libopenmpi-dev)"; exit 0
fi
if [[ ! -x "$mpiexe" ]] || ! "$mpiexe" sweep --help | grep -q "MPI: built in"; then
  echo "e2e_sweep_mpi: SKIPPED: no thermorph-mpi (built without MPI: -DTHERMORPH_WITH_MPI=OFF or no libopenmpi-dev)"; exit 0
fi
case="$src/tests/data/quadruped_coarse.toml"   # the coarse test copy of cases/quadruped.toml
mpi=(mpirun --allow-run-as-root --oversubscribe -np 2)

grid=(--vary "segments.ears.length=-2 cm,3 cm:12 cm:7" --vary "environment.temperature=20degC,40degC")
"$exe" sweep "$case" "${grid[@]}" -j 1 -q -o "$work/local.h5" > /dev/null || fail "local sweep exit $?"
# thermorph (no MPI) under mpirun: a clear message and exit 2 on every rank, no table.
"${mpi[@]}" "$exe" sweep "$case" "${grid[@]}" -q -o "$work/plain.h5" > "$work/plain.txt" 2>&1
status=$?
[[ $status -ne 0 ]] || fail "thermorph under mpirun -np 2 exited 0"
grep -q "mpirun -np N thermorph-mpi sweep" "$work/plain.txt" || fail "no thermorph-mpi hint: $(cat "$work/plain.txt")"
[[ ! -e "$work/plain.h5" ]] || fail "thermorph under mpirun wrote a table"
"${mpi[@]}" "$mpiexe" sweep "$case" "${grid[@]}" -q -o "$work/mpi.h5" > "$work/mpi.txt" 2>&1 || fail "MPI sweep exit $?: $(cat "$work/mpi.txt")"
grep -q "MPI: 2 ranks" "$work/mpi.txt" || fail "not an MPI sweep: $(cat "$work/mpi.txt")"
cmp -s "$work/local.csv" "$work/mpi.csv" || fail "MPI and local tables differ"
"$python" - "$work/local.h5" "$work/mpi.h5" <<'PY' || fail "MPI table contents"
import sys, h5py, numpy as np
with h5py.File(sys.argv[1]) as a, h5py.File(sys.argv[2]) as b:
    assert b.attrs["engine"] == "MPI: 2 ranks" and int(b.attrs["complete"]) == 1
    assert list(a["runs/status"].asstr()[()]) == list(b["runs/status"].asstr()[()])
    assert list(b["runs/status"].asstr()[:2]) == ["failed", "failed"]
    assert list(a["runs/error"].asstr()[()]) == list(b["runs/error"].asstr()[()])
    for group in ("parameters", "metrics"):
        assert sorted(a[group]) == sorted(b[group])
        for name in a[group]:
            assert np.array_equal(a[group][name][()], b[group][name][()], equal_nan=True), name
PY

# Resume under MPI from a progress file cut to its first 5 runs (as a kill would leave it).
"$exe" sweep "$case" "${grid[@]}" -j 1 -q -o "$work/cut.h5" > /dev/null & pid=$!
for _ in $(seq 1 4000); do  # bash builtins only: poll every ~1 ms
  [[ -f "$work/cut.progress" ]] && mapfile -t lines < "$work/cut.progress" && (( ${#lines[@]} >= 6 )) && break
  read -r -t 0.001 <> <(:) || true
done
kill -KILL "$pid"; wait "$pid" 2> /dev/null
[[ -f "$work/cut.progress" ]] || fail "no progress file after SIGKILL (did the sweep finish before the kill?)"
head -n 6 "$work/cut.progress" > "$work/head" && mv "$work/head" "$work/cut.progress"
"${mpi[@]}" "$mpiexe" sweep "$case" "${grid[@]}" -q --resume -o "$work/cut.h5" > "$work/resume.txt" 2>&1 ||
  fail "MPI resume exit $?: $(cat "$work/resume.txt")"
grep -q "5 done earlier, 11 run now" "$work/resume.txt" || fail "MPI resume: $(cat "$work/resume.txt")"
cmp -s "$work/local.csv" "$work/cut.csv" || fail "MPI-resumed table differs"
echo "e2e_sweep_mpi: all checks passed"
