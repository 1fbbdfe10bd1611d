#!/usr/bin/env python3
"""Does the graded axial estimate bound the error?  (A benchmark, not a test; DEVELOPERS.md "Cheapest axial grading
against `thermorph refine`".)

For each case: every appendage whose automatic axial grid `run.axial_grading = "graded"` changes (the cheapest of
uniform cells and cells graded towards the junction, Q = 10 ... 1000, meeting the same estimate; read from `thermorph
check`), with the estimated error `check` states for it on each grid; then `thermorph refine --levels 3` of the case
with the uniform automatic grid and with `--set run.axial_grading=graded`, and the measured 1x error of the
segment's heat flows against the Richardson value (the largest channel's |1x - R| over the segment's largest |R|; R:
the Richardson column, the 4x value where the three grids are not monotone), against its own study and against the
uniform study's R (the two studies' R should agree). Cost (--cost): `thermorph run` of each 1x grid: nodes, CVODE
steps and the user CPU (the median of REPEAT runs, side by side).

  /usr/bin/python3 tests/bench/graded_refine.py --exe build/thermorph [--transient] [--cost] [--repeat 3] [CASE ...]

--transient runs the cases' own transients (minutes under load); the default is `refine --steady`. Without CASE:
every example case, the trial roosts (/work/team/trial4/roost*.toml where present) and tests/bench/studies/roost_wings.
"""
import argparse, csv, io, os, re, resource, statistics, subprocess, sys, tempfile

here = os.path.dirname(os.path.abspath(__file__))
root = os.path.abspath(os.path.join(here, "..", ".."))
TRIALS = sorted(os.path.join("/work/team/trial4", f) for f in (os.listdir("/work/team/trial4")
                if os.path.isdir("/work/team/trial4") else []) if f.startswith("roost") and f.endswith(".toml"))
CASES = sorted(os.path.join(root, "cases", f) for f in os.listdir(os.path.join(root, "cases")) if f.endswith(".toml")) + \
    TRIALS + [os.path.join(here, "studies", "roost_wings.toml")]
GRADED = ["--set", "run.axial_grading=graded"]


def grid(exe, case, extra):
    """Per segment: (axial cells, Q, estimated error) from `thermorph check`."""
    out = subprocess.run([exe, "check", case] + extra, capture_output=True, text=True, check=True).stdout
    rows = {}
    for m in re.finditer(r"^  (\S+) +(\d+)\*?(?:/([\d.e+]+)\*?)? .*?([\d.e+-]+)%$", out, re.M):
        rows[m.group(1)] = (int(m.group(2)), float(m.group(3) or 1), float(m.group(4)) / 100)
    return rows


def refine(exe, case, extra, steady, work):
    path = os.path.join(work, "r.csv")
    subprocess.run([exe, "refine", case, "--levels", "3", "--csv", path] + (["--steady"] if steady else []) + extra,
                   capture_output=True, text=True, check=True)
    return {r["quantity"]: r for r in csv.DictReader(open(path))}


def num(x):
    try:
        return float(x)
    except ValueError:
        return float("nan")


def reference(table, seg):
    rows = {k: v for k, v in table.items() if k.startswith(f"segments.{seg}.heat_flow.") and not k.endswith(".storage")}
    ref = {}
    for k, r in rows.items():
        rich = num(r["richardson"])
        ref[k] = rich if rich == rich else num(r["4x"])
    return rows, ref


def error(rows, ref):
    scale = max(abs(v) for v in ref.values())
    worst, which = 0.0, "-"
    for k, r in rows.items():
        e = abs(num(r["1x"]) - ref[k]) / scale
        if e > worst: worst, which = e, k.split(".")[-1]
    return worst, which


def run_cost(exe, case, extra, work, repeat):
    cpu = []
    for _ in range(repeat):
        before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_utime
        p = subprocess.run([exe, "run", case, "-q", "-o", os.path.join(work, "r.h5")] + extra,
                           capture_output=True, text=True, check=True)
        cpu.append(resource.getrusage(resource.RUSAGE_CHILDREN).ru_utime - before)
    m = re.search(r"Solver: (\d+) steps.*?; (\d+) nodes", p.stdout)
    return int(m.group(1)), int(m.group(2)), statistics.median(cpu)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--exe", default=os.path.join(root, "build", "thermorph"))
    ap.add_argument("--transient", action="store_true")
    ap.add_argument("--cost", action="store_true")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("cases", nargs="*")
    a = ap.parse_args()
    steady = not a.transient
    with tempfile.TemporaryDirectory() as work:
        print(f"{'case':15s} {'segment':14s} {'cells u':>7s} {'graded/Q':>10s} {'est. u':>7s} {'est. g':>7s}  "
              f"{'1x err uniform':>22s}  {'1x err graded':>22s} {'vs uniform R':>12s}" +
              (f"  {'steps u/g':>11s} {'nodes u/g':>11s} {'CPU s u/g':>11s}" if a.cost else ""))
        for case in a.cases or CASES:
            gu, gg = grid(a.exe, case, []), grid(a.exe, case, GRADED)
            segs = [s for s in gu if s in gg and gg[s][1] > 1 and gu[s][1] == 1]
            if not segs:
                print(f"{os.path.basename(case)[:-5]:15s} (no appendage changes)")
                continue
            tu = refine(a.exe, case, [], steady, work)
            tg = refine(a.exe, case, GRADED, steady, work)
            if a.cost:
                cu = run_cost(a.exe, case, [], work, a.repeat)
                cg = run_cost(a.exe, case, GRADED, work, a.repeat)
            for i, s in enumerate(segs):
                ru, refu = reference(tu, s)
                rg, refg = reference(tg, s)
                eu, wu = error(ru, refu)
                eg, wg = error(rg, refg)
                ex, _ = error(rg, refu)
                cost = ""
                if a.cost:
                    cost = (f"  {cu[0]:5d}/{cg[0]:<5d} {cu[1]:5d}/{cg[1]:<5d} {cu[2]:5.2f}/{cg[2]:<5.2f}" if i == 0
                            else "  (same run)")
                print(f"{os.path.basename(case)[:-5]:15s} {s:14s} {gu[s][0]:7d} {gg[s][0]:5d}/{gg[s][1]:<4g} "
                      f"{100 * gu[s][2]:6.2f}% {100 * gg[s][2]:6.2f}%  "
                      f"{100 * eu:8.3f} % {wu:>11s}  {100 * eg:8.3f} % {wg:>11s} {100 * ex:10.3f} %{cost}")
            sys.stdout.flush()
    print("est.: `thermorph check`'s estimated error of the segment's heat flows (uniform / graded grid); error: the "
          "largest |1x - R| of the segment's heat-flow channels (storage excluded) over its largest |R|; R from "
          "`thermorph refine --levels 3`" + (" --steady" if steady else "") + " (Richardson; the 4x value where not "
          "monotone); 'vs uniform R': the graded 1x against the uniform study's R.")
    print("Model estimates for research, not veterinary or medical advice; follow local regulations, animal-welfare "
          "rules and licensed veterinary or medical practice.")


if __name__ == "__main__":
    main()
