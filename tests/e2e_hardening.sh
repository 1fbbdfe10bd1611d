#!/usr/bin/env bash
# End-to-end hardening (issue 15): output paths refused before any work (exit 2), a full disk (exit 3, earlier
# result kept, no temporary file), SIGINT/SIGTERM during run, steady and sweep (exit 130/143, partial results,
# no temporary file), one sweep per output (a lock), command-line limits. The Catch2 side: "[hardening]".
# Arguments: THERMORPH_EXE SOURCE_DIR PYTHON
set -uo pipefail
exe="$1"; src="$2"; python="${3:-/usr/bin/python3}"
work="$(mktemp -d)"; trap 'chmod -R u+w "$work" 2>/dev/null; rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }
case="$work/limb.toml"
cp "$src/cases/limb_cooling.toml" "$case"
temporaries() { find "$work" -name '.thermorph-*' | wc -l; }
# The exit code of a command, its stderr in $work/err.txt.
code() { "$@" > "$work/out.txt" 2> "$work/err.txt"; echo $?; }
expect() {  # expect CODE TEXT COMMAND...: exit code and a phrase of the message
  local want="$1" text="$2"; shift 2
  local rc; rc=$(code "$@")
  [[ $rc -eq $want ]] || fail "$* gave exit $rc, expected $want: $(head -c 600 "$work/err.txt")"
  grep -qF -- "$text" "$work/err.txt" || fail "$*: message lacks \"$text\": $(head -c 600 "$work/err.txt")"
}

"$exe" run "$case" -o "$work/limb.h5" -q > /dev/null || fail "first run"
cp "$work/limb.h5" "$work/keep.h5"

# Row 6: the output may not be an input (the case, its weather file), and the case survives.
cp "$case" "$work/case-copy.toml"
expect 2 "is an input" "$exe" run "$case" -o "$case" -q
cmp -s "$case" "$work/case-copy.toml" || fail "the case file was changed"
cp "$src/cases/env_day_cycle.toml" "$src/cases/env_day_cycle.csv" "$work/"
expect 2 "env_day_cycle.csv" "$exe" run "$work/env_day_cycle.toml" -o "$work/env_day_cycle.csv" -q
expect 2 "is an input" "$exe" sweep "$case" --vary "run.rtol=1e-6,1e-7" -o "$work/limb.toml" -q

# Row 7: devices and FIFOs are refused, and stay what they were.
mkfifo "$work/fifo"
expect 2 "not a regular file" "$exe" run "$case" -o "$work/fifo" -q
[[ -p "$work/fifo" ]] || fail "the FIFO was replaced"
expect 2 "not a regular file" "$exe" steady "$case" -o /dev/null -q

# Row 9: missing folder, a folder, a name too long, a read-only folder: exit 2 before computing (no budget
# printed), with the path and the reason.
expect 2 "does not exist" "$exe" run "$case" -o "$work/missing/x.h5" -q
expect 2 "is a folder" "$exe" run "$case" -o "$work" -q
long="$work/$(printf 'a%.0s' $(seq 251)).h5"
expect 2 "bytes long" "$exe" run "$case" -o "$long" -q
grep -q "Heat budget" "$work/out.txt" && fail "the run computed before refusing the output"
expect 2 "does not exist" "$exe" sweep "$case" --vary "run.rtol=1e-6,1e-7" -o "$work/missing/s.h5" -q
mkdir "$work/readonly"; chmod 555 "$work/readonly"; chmod 755 "$work"
if [[ $(id -u) -ne 0 ]]; then
  expect 2 "cannot create files" "$exe" run "$case" -o "$work/readonly/x.h5" -q
elif command -v setpriv > /dev/null && setpriv --reuid=65534 --regid=65534 --clear-groups true 2> /dev/null &&
     setpriv --reuid=65534 --regid=65534 --clear-groups test -r "$case" -a -x "$exe" 2> /dev/null; then
  expect 2 "cannot create files" setpriv --reuid=65534 --regid=65534 --clear-groups "$exe" run "$case" \
    -o "$work/readonly/x.h5" -q
else
  echo "e2e_hardening: read-only folder skipped (root, and no setpriv to drop privileges)"
fi
[[ $(temporaries) -eq 0 ]] || fail "a refused output left a temporary file"

# Row 2: a full disk, made by a file-size limit (no privileges needed; SIGXFSZ ignored gives EFBIG like ENOSPC):
# exit 3 naming the reason, the earlier result byte for byte, no temporary file. run, steady and sweep.
for command in run steady; do
  expect 3 "File too large" bash -c "trap '' XFSZ; ulimit -f 40; exec \"\$0\" \"\$@\"" "$exe" $command "$case" \
    -o "$work/limb.h5" -q
  cmp -s "$work/limb.h5" "$work/keep.h5" || fail "$command on a full disk changed the earlier result"
  [[ $(temporaries) -eq 0 ]] || fail "$command on a full disk left a temporary file"
done
expect 3 "--resume" bash -c "ulimit -f 4; exec \"\$0\" \"\$@\"" "$exe" sweep "$case" \
  --vary "run.rtol=1e-6,1e-7" -o "$work/s.h5" -q
[[ -f "$work/s.progress" ]] || fail "a sweep on a full disk lost its progress file"
[[ $(temporaries) -eq 0 ]] || fail "a sweep on a full disk left a temporary file"
"$exe" sweep "$case" --vary "run.rtol=1e-6,1e-7" -o "$work/s.h5" -q --resume > /dev/null || fail "resume after full disk"
[[ -f "$work/s.h5" && ! -f "$work/s.progress" ]] || fail "resume did not write the table"

# Row 8: SIGINT / SIGTERM during run and steady: stop at the next step, NAME.incomplete.h5 with complete = 0,
# exit 130 / 143, no temporary file, the earlier NAME.h5 untouched.
started() {  # wait until the command has created its temporary results file (it is running then)
  for _ in $(seq 200); do [[ $(temporaries) -gt 0 ]] && return 0; sleep 0.05; done
  return 1
}
for signal in INT TERM; do
  rm -f "$work/limb.incomplete.h5"
  "$exe" run "$case" -o "$work/limb.h5" -q --set "run.duration=300 d" --set "run.max_step=20 s" --set "run.output_interval=1 h" \
    > /dev/null 2> "$work/err.txt" &
  pid=$!
  started || fail "the long run did not start"
  sleep 0.3
  kill -$signal $pid
  wait $pid; rc=$?
  want=$([[ $signal == INT ]] && echo 130 || echo 143)
  [[ $rc -eq $want ]] || fail "SIG$signal during run gave exit $rc, expected $want: $(cat "$work/err.txt")"
  grep -q "stopped by SIG$signal" "$work/err.txt" || fail "no stop message: $(cat "$work/err.txt")"
  [[ $(temporaries) -eq 0 ]] || fail "SIG$signal left a temporary file"
  cmp -s "$work/limb.h5" "$work/keep.h5" || fail "SIG$signal changed the earlier result"
  "$python" - "$work/limb.incomplete.h5" <<'PY' || fail "SIG$signal: the partial result"
import sys, h5py
with h5py.File(sys.argv[1]) as f:
    assert int(f.attrs["complete"]) == 0
    assert "stopped" in f.attrs["failure"], f.attrs["failure"]
    t = f["time"][:]
    assert len(t) >= 2 and t[-1] < 300 * 86400 and (t[1:] - t[:-1] == 3600).all(), t[-3:]
PY
done
# A second signal stops at once, and still removes the temporary file.
"$exe" run "$case" -o "$work/twice.h5" -q --set "run.duration=300 d" --set "run.max_step=20 s" --set "run.output_interval=1 h" \
  > /dev/null 2>&1 &
pid=$!
started || fail "the long run did not start"
kill -INT $pid; kill -INT $pid
wait $pid; rc=$?
[[ $rc -eq 130 ]] || fail "two SIGINTs gave exit $rc, expected 130"
[[ $(temporaries) -eq 0 ]] || fail "two SIGINTs left a temporary file"
# steady: a body large enough that the solve takes a while.
big=(--set segments.forelimb.axial_cells=200 --set "segments.forelimb.layers.1.cells=30")
"$exe" steady "$case" -o "$work/steady.h5" -q "${big[@]}" > /dev/null 2> "$work/err.txt" &
pid=$!
started || fail "the steady solve did not start"
kill -TERM $pid
wait $pid; rc=$?
if [[ $rc -eq 143 ]]; then
  [[ -f "$work/steady.incomplete.h5" ]] || fail "SIGTERM during steady: no partial result"
elif [[ $rc -ne 0 ]]; then
  fail "SIGTERM during steady gave exit $rc: $(cat "$work/err.txt")"
fi
[[ $(temporaries) -eq 0 ]] || fail "SIGTERM during steady left a temporary file"

# Row 17: one sweep per output: a second identical sweep is refused (exit 2) while the first runs; the first,
# stopped by SIGTERM, resumes.
sweep=("$exe" sweep "$case" --vary "environment.temperature=-10 degC:10 degC:400" --metric body.core_temperature
       -o "$work/lock.h5" -q -j 1)
"${sweep[@]}" > /dev/null 2>&1 &
pid=$!
for _ in $(seq 200); do [[ -s "$work/lock.progress" ]] && break; sleep 0.05; done
[[ -s "$work/lock.progress" ]] || fail "the first sweep did not start"
expect 2 "locked by another sweep" "${sweep[@]}"
expect 2 "locked by another sweep" "${sweep[@]}" --resume
kill -TERM $pid; wait $pid; rc=$?
[[ $rc -eq 143 ]] || fail "SIGTERM during a sweep gave exit $rc"
[[ $(temporaries) -eq 0 ]] || fail "the stopped sweep left a temporary file"

# Rows 10, 11, 17: command-line limits.
expect 2 "at most 1000000" "$exe" sweep "$case" --vary "environment.temperature=0degC:10degC:100000000" --list
expect 2 "at most 1000000" "$exe" sweep "$case" --vary "environment.temperature=0degC:10degC:1000000000" --list
expect 2 "jobs" "$exe" sweep "$case" --vary "run.rtol=1e-6,1e-7" -j -1
expect 2 "--set segments.forelimb" "$exe" check "$case" --set segments.forelimb=5
# A large list in bounded memory (1 GB of address space is plenty).
rc=$(bash -c "ulimit -v 1000000; \"\$0\" sweep \"\$1\" --vary 'environment.temperature=0degC:10degC:200000' --list | wc -l" \
  "$exe" "$case")
[[ $rc -eq 200000 ]] || fail "--list of 200000 runs printed $rc lines"

echo "e2e_hardening: all checks passed"
