#!/usr/bin/env python3
"""Provenance in result and sweep files: source revision, SHA-256 of the case and of the weather file it reads
(checked against Python's hashlib, a reference implementation outside this project), and the run's warnings.

    test_provenance.py THERMORPH_EXE SOURCE_DIR
"""
import hashlib
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

import h5py

failures = []


def check(ok, what):
    if not ok:
        failures.append(what)
        print("FAIL:", what)


def text(v):
    return v.decode() if isinstance(v, bytes) else str(v)


def git_revision(src):
    git = shutil.which("git")
    if not git:
        return None
    r = subprocess.run([git, "-C", str(src), "rev-parse", "HEAD"], capture_output=True, text=True)
    return r.stdout.strip() if r.returncode == 0 else None


def git_commit_time(src):
    """Committer time of HEAD (seconds since the epoch)."""
    r = subprocess.run([shutil.which("git"), "-C", str(src), "log", "-1", "--format=%ct"], capture_output=True,
                       text=True)
    return int(r.stdout.strip()) if r.returncode == 0 and r.stdout.strip() else float("inf")


EXE_MTIME = 0.0


def check_provenance(path, case_file, extra, src):
    with h5py.File(path, "r") as f:
        check("provenance" in f, f"{path.name}: no /provenance")
        p = f["provenance"]
        sha = hashlib.sha256(case_file.read_bytes()).hexdigest()
        check(text(p.attrs["case_sha256"]) == sha, f"{path.name}: case_sha256 {text(p.attrs['case_sha256'])} != {sha}")
        roles = [text(v) for v in p.attrs["input_roles"]]
        hashes = [text(v) for v in p.attrs["input_sha256"]]
        check(roles[0] == "case", f"{path.name}: first input {roles}")
        for role, file in extra.items():
            check(role in roles, f"{path.name}: no input {role} in {roles}")
            if role in roles:
                want = hashlib.sha256(file.read_bytes()).hexdigest()
                check(hashes[roles.index(role)] == want, f"{path.name}: {role} sha256")
        rev, commit = text(p.attrs["source_revision"]), text(p.attrs["source_commit"])
        check(bool(rev), f"{path.name}: empty source_revision")
        # The revision is worked out at every build (cmake/revision.cmake), not when CMake configures: an
        # executable built after HEAD was committed records HEAD (a configure-time revision recorded the commit of
        # the last configure, stale after `git pull` and a rebuild). An executable older than HEAD may carry an
        # earlier commit; then only its form is checked. Without git: "unknown".
        head = git_revision(src)
        if head is not None and commit != "unknown":
            check(len(commit) == 40 and all(c in "0123456789abcdef" for c in commit), f"source_commit {commit}")
            if EXE_MTIME > git_commit_time(src):
                check(commit == head, f"{path.name}: source_commit {commit} is not HEAD {head}, though the "
                      f"executable was built after HEAD was committed")
                check(head[:7] in rev, f"{path.name}: source_revision {rev} does not name HEAD {head[:7]}")
        check("warnings" in p and isinstance(p["warnings"], h5py.Dataset), f"{path.name}: no /provenance/warnings")
        return [text(w) for w in p["warnings"][()]] if "warnings" in p else []


def main():
    global EXE_MTIME
    exe, src = sys.argv[1], Path(sys.argv[2]).resolve()
    EXE_MTIME = Path(exe).stat().st_mtime
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        case = src / "cases/env_day_cycle.toml"
        out = tmp / "day.h5"
        proc = subprocess.run([exe, "run", str(case), "--set", "run.duration=2 h", "-o", str(out), "-q"],
                              capture_output=True, text=True)
        check(proc.returncode == 0, f"run exit {proc.returncode}: {proc.stderr}")
        warnings = check_provenance(out, case, {"environment.weather": src / "cases/env_day_cycle.csv"}, src)
        printed = [l[len("warning: "):] for l in proc.stderr.splitlines() if l.startswith("warning: ")]
        check(sorted(set(printed)) == sorted(warnings), f"warnings printed {printed} != stored {warnings}")

        # Air at -60 degC lies below the range of the Buck (1981) saturation vapour pressure fit (-20 to 50 degC,
        # Buck 1981, J. Appl. Meteorol. 20, Table 2): the validity warning printed is stored.
        cold = tmp / "cold.h5"
        proc = subprocess.run([exe, "run", str(src / "cases/quadruped.toml"), "--set", "run.duration=10 min",
                               "--set", "environment.temperature=-60 degC", "-o", str(cold), "-q"],
                              capture_output=True, text=True)
        check(proc.returncode == 0, f"cold run exit {proc.returncode}: {proc.stderr}")
        warnings = check_provenance(cold, src / "cases/quadruped.toml", {}, src)
        printed = [l[len("warning: "):] for l in proc.stderr.splitlines() if l.startswith("warning: ")]
        check(any("Buck (1981)" in w for w in warnings), f"no Buck (1981) validity warning stored: {warnings}")
        check(sorted(set(printed)) == sorted(warnings), f"warnings printed {printed} != stored {warnings}")

        sweep = tmp / "sweep.h5"
        proc = subprocess.run([exe, "sweep", str(case), "--set", "run.duration=1 h", "--vary",
                               "segments.legs.length=10 cm,12 cm", "-j", "1", "-q", "-o", str(sweep)],
                              capture_output=True, text=True)
        check(proc.returncode == 0, f"sweep exit {proc.returncode}: {proc.stderr}")
        check_provenance(sweep, case, {"environment.weather": src / "cases/env_day_cycle.csv"}, src)
    if failures:
        print(f"{len(failures)} failures")
        return 1
    print("provenance: all checks passed")
    return 0


if __name__ == "__main__":
    sys.exit(main())
