#!/usr/bin/python3
"""One table, one run: thermorph against the SciPy peer (scipy_bdf.py), per-run cost in sweeps, start-up, memory.

    peer_table.py [--repeat N] [--sweep-runs N] [--only PARTS] NAME=EXE [NAME=EXE ...]

--only peer,sweep,startup,memory selects parts of the table (default: all).

Each NAME=EXE is a thermorph executable (e.g. before=/tmp/old/thermorph after=build/thermorph); the table has
one column per executable, so a before/after comparison is measured in the same session under the same load.
Not part of ctest: it measures, it does not pass or fail. Run through peer_table.sh (see DEVELOPERS.md).

Measured (whole processes: wall time by time.perf_counter, CPU and peak RSS from os.wait4's rusage; the memory rows'
peak RSS by /usr/bin/time, the command's own, not floored by this script's as wait4's is: measure()):
  - the peer problem at 500, 5 000 and 20 000 radial cells (cylinder, Pennes perfusion, Q10 metabolism,
    convection, 1 h, output every minute, rtol = atol = 1e-6): whole process and solver only (thermorph's
    "Solver: ... s wall", SciPy's solve_ivp wall), best of N by wall time;
  - per-run CPU of each example study (frozen copies in tests/bench/studies/) inside a sweep on one thread:
    (CPU of a sweep of K + 1 identical runs - CPU of a sweep of 1 run) / K, so start-up is not counted; the verdict
    compares the last executable with the FIRST, so give the issue's baseline executable first (commit 212fe53,
    main at the start of issue 11) for it to be the issue's target, and run on an idle machine: the baseline
    measured at load 6-10 took 61.4 ms per hare run, idle 31.7 ms (DEVELOPERS.md, sixteenth round);
  - sweep throughput on all cores (runs/s, wall) for the hare study;
  - start-up: `check` of the hare study and `run` of a 100-node radial case (98 cells + 2 state rows), whole
    process wall, best of N;
  - peak RSS of a `run` at 10^4 and 10^5 nodes (radial 9 998 and 99 998 cells), per node;
  - part `bodymemory` (not in the default): peak RSS of a `run` of the large invented body of large_body.py
    (many 2-D segments, exchangers, one budget group per segment) at about 10^4 and 10^5 nodes (10 segments x 40
    axial x 20 radial cells: 9 278 nodes; 40 x 100 x 24: 108 199 nodes; the second takes minutes).
"""
import argparse
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
from datetime import datetime, timezone
from pathlib import Path

HERE = Path(__file__).resolve().parent
PY = "/usr/bin/python3"
SCIPY = str(HERE / "scipy_bdf.py")
STUDIES = ["hare_ears", "diving_seal", "wading_bird", "quadruped"]


def radial_case(cells, duration=3600.0, interval=60.0):
    """The peer problem (same text as thermorph_bench's radial cases; illustrative values, SI numbers)."""
    return f"""# Benchmark (illustrative values): 1-D radial cylinder, one tissue, {cells} radial cells.
title = "bench: 1-D radial, {cells} cells"

[run]
duration = {duration:.1f}          # s
output_interval = {interval:.1f}     # s
initial_temperature = 310.15
rtol = 1e-6
atol = 1e-6

[circulation]
fixed_arterial_temperature = 310.15
blood_density = 1050.0
blood_specific_heat = 3617.0

# Built-in muscle values written out (McIntosh & Anderson 2010, from memory); perfusion 37 mL/(min kg).
[tissues.muscle]
conductivity = 0.49
density = 1090.0
specific_heat = 3421.0
metabolic_heat = 684.0
perfusion = 6.7216666666666667e-4
q10 = 2.0

[[segments]]
name = "trunk"
shape = "cylinder"
length = 0.2
radius = 0.04
axial_cells = 1
layers = [ {{ tissue = "muscle", thickness = 0.04, cells = {cells} }} ]
surface = {{ ends = "insulated", convection = 20.0 }}

[environment]
temperature = 283.15
convection = 20.0
"""


class Result:
    def __init__(self, wall, cpu, rss_kb, out):
        self.wall, self.cpu, self.rss, self.out = wall, cpu, rss_kb * 1024.0, out


def measure(cmd, cwd, own_rss=False):
    """Run cmd; wall [s], CPU user + system [s], peak RSS [B], stdout.

    The peak RSS that wait4 reports for a child of this script starts from this Python process's own: the kernel keeps
    the largest resident set of the process's memory before exec (Linux exec_mmap, setmax_mm_hiwater_rss), and a child
    forked or vforked from Python holds Python's pages until then (about 12-13 MB here, more than a 10^4-node run's).
    With own_rss the command is started by /usr/bin/time (a small process) and its %M, the command's own peak, is taken.
    """
    if own_rss:
        cmd = ["/usr/bin/time", "-f", "thermorph-bench-maxrss %M", *cmd]
    start = time.perf_counter()
    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
        proc = subprocess.Popen(cmd, cwd=cwd, stdout=out, stderr=err)
        _, status, usage = os.wait4(proc.pid, 0)
        wall = time.perf_counter() - start
        proc.returncode = os.waitstatus_to_exitcode(status)
        out.seek(0)
        err.seek(0)
        text = out.read().decode()
        errors = err.read().decode()
        if proc.returncode != 0:
            sys.exit(f"failed ({proc.returncode}): {' '.join(cmd)}\n{text}\n{errors}")
    rss_kb = usage.ru_maxrss
    if own_rss:
        rss_kb = int(number(r"thermorph-bench-maxrss ([0-9]+)", errors))
    return Result(wall, usage.ru_utime + usage.ru_stime, rss_kb, text)


def best(cmd, cwd, repeat):
    runs = [measure(cmd, cwd) for _ in range(repeat)]
    return min(runs, key=lambda r: r.wall)


def number(pattern, text):
    m = re.search(pattern, text)
    if not m:
        sys.exit(f"no '{pattern}' in:\n{text}")
    return float(m.group(1))


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--sweep-runs", type=int, default=10)
    ap.add_argument("--only", default="peer,sweep,startup,memory",
                    help="comma-separated parts: peer, sweep, startup, memory, bodymemory (default: all but bodymemory)")
    ap.add_argument("exes", nargs="+")
    args = ap.parse_args()
    parts = set(args.only.split(","))
    exes = [tuple(e.split("=", 1)) if "=" in e else (e, e) for e in args.exes]
    exes = [(name, str(Path(path).resolve())) for name, path in exes]
    work = Path(tempfile.mkdtemp(prefix="thermorph-peer."))
    R = args.repeat
    ncpu = os.cpu_count() or 1
    load0 = open("/proc/loadavg").read().split()[:3]
    rows = []  # (measure, scipy cell, {name: cell}, target, verdict on the last executable)

    def fmt_s(x):
        return f"{x * 1e3:.2f} ms" if x < 0.01 else f"{x * 1e3:.1f} ms" if x < 1.0 else f"{x:.3f} s"

    try:
        for c in STUDIES:
            shutil.copy(HERE / "studies" / f"{c}.toml", work / f"{c}.toml")
        # ---- the peer problem ----
        for cells, whole_target, solver_target in ((500, 5, 10), (5000, 3, None), (20000, 2, None)) if "peer" in parts else ():
            case = work / f"radial_{cells}.toml"
            case.write_text(radial_case(cells))
            sp = best([PY, SCIPY, "run", str(case), str(work / "s.npz")], work, R)
            s_solve = number(r"solve_ivp ([0-9.]+) s wall", sp.out)
            whole, solver = {}, {}
            last = None
            for name, exe in exes:
                r = best([exe, "run", str(case), "-o", str(work / f"{name}.h5"), "-q"], work, R)
                t_solve = number(r"([0-9.]+) s wall", r.out)
                agree = subprocess.run([PY, SCIPY, "compare", str(work / "s.npz"), str(work / f"{name}.h5")],
                                       capture_output=True, text=True).stdout.split(",")[0]
                whole[name] = (f"{fmt_s(r.wall)} (CPU {fmt_s(r.cpu)}); SciPy solve / this {s_solve / r.wall:.2f}×,"
                               f" SciPy process / this {sp.wall / r.wall:.2f}×")
                solver[name] = f"{fmt_s(t_solve)}; SciPy solve / this {s_solve / t_solve:.2f}× ({agree})"
                last = (s_solve / r.wall, sp.wall / r.wall, s_solve / t_solve)
            rows.append((f"peer {cells} cells: whole process", f"{fmt_s(sp.wall)} process, {fmt_s(s_solve)} solve",
                         whole, f"≥ {whole_target}× vs SciPy",
                         f"{'met' if last[0] >= whole_target else 'MISSED'} vs SciPy solve, "
                         f"{'met' if last[1] >= whole_target else 'MISSED'} vs SciPy process"))
            rows.append((f"peer {cells} cells: solver only", f"{fmt_s(s_solve)}", solver,
                         f"≥ {solver_target}×" if solver_target else "",
                         ("met" if last[2] >= solver_target else "MISSED") if solver_target else ""))
        # ---- per-run CPU in a sweep ----
        K = args.sweep_runs
        base = {}
        for c in STUDIES if "sweep" in parts else ():
            cells = {}
            for name, exe in exes:
                sweep = [exe, "sweep", str(work / f"{c}.toml"), "-j", "1", "-q", "-o", str(work / f"sw_{name}.h5")]
                one = min((measure(sweep + ["--scale", "body=1"], work) for _ in range(2)), key=lambda r: r.cpu)
                many = min((measure(sweep + ["--scale", f"body=1:1:{K + 1}"], work) for _ in range(2)),
                           key=lambda r: r.cpu)
                per = (many.cpu - one.cpu) / K
                cells[name] = per
            first = exes[0][0]
            rows.append((f"{c}: CPU per run in a sweep (-j 1)", "",
                         {n: f"{v * 1e3:.1f} ms" + (f" ({cells[first] / v:.2f}× less)" if n != first else "")
                          for n, v in cells.items()},
                         f"≥ 4× less than {first}",
                         ("met" if cells[first] / cells[exes[-1][0]] >= 4 else "MISSED") if len(exes) > 1 else ""))
            base[c] = cells
        cells = {}
        for name, exe in exes if "sweep" in parts else ():
            n = 20 * ncpu
            r = measure([exe, "sweep", str(work / "hare_ears.toml"), "-j", str(ncpu), "-q", "-o",
                         str(work / f"swj_{name}.h5"), "--scale", f"body=1:1:{n}"], work)
            cells[name] = f"{n / r.wall:.1f} runs/s ({n} runs, {ncpu} threads)"
        if "sweep" in parts:
            rows.append(("hare_ears: sweep on all cores", "", cells, "", ""))
        # ---- start-up ----
        small = work / "radial_98.toml"
        small.write_text(radial_case(98, duration=3600.0, interval=36.0))
        cells, last = {}, 0.0
        for name, exe in exes if "startup" in parts else ():
            r = best([exe, "check", str(work / "hare_ears.toml")], work, R)
            cells[name] = f"{fmt_s(r.wall)} (CPU {fmt_s(r.cpu)}, RSS {r.rss / 2**20:.1f} MB)"
        if "startup" in parts:
            rows.append(("start-up: `check` hare_ears", "", cells, "", ""))
        cells = {}
        for name, exe in exes if "startup" in parts else ():
            r = best([exe, "run", str(small), "-o", str(work / "small.h5"), "-q"], work, R)
            steps = int(number(r"Solver: ([0-9]+) steps", r.out))
            nodes = int(number(r"; ([0-9]+) nodes", r.out))
            cells[name] = f"{fmt_s(r.wall)} (CPU {fmt_s(r.cpu)}; {nodes} nodes, {steps} steps, 101 outputs)"
            last = r.wall
        if "startup" in parts:
            rows.append(("100-node `run`, whole process", "", cells, "≤ 15 ms", "met" if last <= 0.015 else "MISSED"))
        # ---- memory ----
        for cells_n in (9998, 99998) if "memory" in parts else ():
            case = work / f"radial_{cells_n}.toml"
            case.write_text(radial_case(cells_n))
            cells = {}
            for name, exe in exes:
                r = measure([exe, "run", str(case), "-o", str(work / "mem.h5"), "-q"], work, own_rss=True)
                nodes = int(number(r"; ([0-9]+) nodes", r.out))
                cells[name] = f"{r.rss / 2**20:.1f} MB = {r.rss / nodes:.0f} B/node ({fmt_s(r.wall)})"
                last = r.rss / nodes
            rows.append((f"peak RSS of `run` at {nodes} nodes", "", cells,
                         "≤ 400 B/node" if cells_n > 10000 else "",
                         ("met" if last <= 400 else "MISSED") if cells_n > 10000 else ""))
        for shape in ((10, 40, 20), (40, 100, 24)) if "bodymemory" in parts else ():
            case = work / f"body_{'_'.join(map(str, shape))}.toml"
            case.write_text(subprocess.run([sys.executable, str(Path(__file__).with_name("large_body.py")),
                                            *map(str, shape)], check=True, capture_output=True, text=True).stdout)
            cells = {}
            for name, exe in exes:
                r = measure([exe, "run", str(case), "-o", str(work / "mem.h5"), "-q"], work, own_rss=True)
                nodes = int(number(r"; ([0-9]+) nodes", r.out))
                cells[name] = f"{r.rss / 2**20:.1f} MB = {r.rss / nodes:.0f} B/node ({fmt_s(r.wall)})"
            rows.append((f"peak RSS of `run`, large body {'x'.join(map(str, shape))}, {nodes} nodes", "", cells, "", ""))
    finally:
        shutil.rmtree(work, ignore_errors=True)

    names = [n for n, _ in exes]
    print(f"Date: {datetime.now(timezone.utc):%Y-%m-%d %H:%M} UTC; machine: {os.uname().nodename}, {ncpu} cores; "
          f"load average at start {' '.join(load0)}, at end {' '.join(open('/proc/loadavg').read().split()[:3])}; "
          f"best of {R} by wall time; executables: " + ", ".join(f"{n} = {p}" for n, p in exes) + ".")
    print()
    print("| measure | SciPy peer | " + " | ".join(names) + " | target | " + names[-1] + " |")
    print("|---|---|" + "---|" * len(names) + "---|---|")
    for label, scipy, cells, target, verdict in rows:
        print(f"| {label} | {scipy} | " + " | ".join(cells[n] for n in names) + f" | {target} | {verdict} |")


if __name__ == "__main__":
    main()
