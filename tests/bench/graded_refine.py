#!/usr/bin/env python3
"""Can the graded axial estimate be trusted?  (A benchmark, not a test; DEVELOPERS.md "Cheapest axial grading
against `thermorph refine`".)

For each appendage below: the axial cells the automatic grid gives it uniform, and the cheapest graded grid (the Q of
10, 30, 100, 300, 1000 with the fewest automatic cells meeting the same estimate, read from `thermorph check --set
segments.X.axial_grading=Q`); then `thermorph refine --levels 3` of the case with the uniform automatic grid and with
every listed segment of the case at its cheapest Q, and the 1x error of the segment's heat flows against the
Richardson value (the largest channel's |1x - R| over the segment's largest |R|; R: the Richardson column, the 4x
value where the three grids are not monotone), against its own study and against the uniform study's R (the two
studies' R should agree). Cost: `thermorph run` of each 1x grid: tissue cells, nodes, CVODE steps and the user CPU
(the median of REPEAT runs, side by side).

  /usr/bin/python3 tests/bench/graded_refine.py --exe build/thermorph [--transient] [--repeat 3]

--transient runs the cases' own transients (minutes under load); the default is `refine --steady`.
"""
import argparse, csv, io, os, re, resource, statistics, subprocess, sys, tempfile

here = os.path.dirname(os.path.abspath(__file__))
root = os.path.abspath(os.path.join(here, "..", ".."))
CASES = [  # case, appendages of interest
    (os.path.join(here, "studies", "roost_wings.toml"), ["wings"]),
    (os.path.join(root, "cases", "large_bill.toml"), ["bill", "legs"]),
    (os.path.join(root, "cases", "diving_seal.toml"), ["fore_flippers", "hind_flippers"]),
    (os.path.join(root, "cases", "cold_feet_demo.toml"), ["leg", "foot"]),
    (os.path.join(root, "cases", "tucked_bird.toml"), ["leg"]),
    (os.path.join(root, "cases", "quadruped.toml"), ["ears"]),
]
QS = [1, 10, 30, 100, 300, 1000]


def axial_cells(exe, case, seg, q):
    args = [exe, "check", case] + ([] if q == 1 else ["--set", f"segments.{seg}.axial_grading={q}"])
    out = subprocess.run(args, capture_output=True, text=True, check=True).stdout
    m = re.search(rf"^  {re.escape(seg)} +(\d+)\*", out, re.M)
    return int(m.group(1))


def sets(graded):
    out = []
    for seg, q in graded.items():
        if q > 1: out += ["--set", f"segments.{seg}.axial_grading={q}"]
    return out


def refine(exe, case, graded, steady, work):
    path = os.path.join(work, "r.csv")
    subprocess.run([exe, "refine", case, "--levels", "3", "--csv", path] + (["--steady"] if steady else []) +
                   sets(graded), capture_output=True, text=True, check=True)
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


def run_cost(exe, case, graded, work, repeat):
    cpu = []
    for _ in range(repeat):
        before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_utime
        p = subprocess.run([exe, "run", case, "-q", "-o", os.path.join(work, "r.h5")] + sets(graded),
                           capture_output=True, text=True, check=True)
        cpu.append(resource.getrusage(resource.RUSAGE_CHILDREN).ru_utime - before)
    m = re.search(r"Solver: (\d+) steps.*?; (\d+) nodes", p.stdout)
    return int(m.group(1)), int(m.group(2)), statistics.median(cpu)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--exe", default=os.path.join(root, "build", "thermorph"))
    ap.add_argument("--transient", action="store_true")
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()
    steady = not a.transient
    with tempfile.TemporaryDirectory() as work:
        print(f"{'case':15s} {'segment':14s} {'uniform':>8s} {'graded':>8s}  {'1x err uniform':>22s}  "
              f"{'1x err graded':>22s} {'vs uniform R':>12s}  {'steps u/g':>11s} {'nodes u/g':>11s} {'CPU s u/g':>11s}")
        for case, segs in CASES:
            cells = {s: {q: axial_cells(a.exe, case, s, q) for q in QS} for s in segs}
            cheapest = {s: min(QS, key=lambda q: (cells[s][q], q)) for s in segs}
            tu = refine(a.exe, case, {}, steady, work)
            tg = refine(a.exe, case, cheapest, steady, work)
            cu = run_cost(a.exe, case, {}, work, a.repeat)
            cg = run_cost(a.exe, case, cheapest, work, a.repeat)
            for s in segs:
                ru, refu = reference(tu, s)
                rg, refg = reference(tg, s)
                eu, wu = error(ru, refu)
                eg, wg = error(rg, refg)
                ex, _ = error(rg, refu)
                print(f"{os.path.basename(case)[:-5]:15s} {s:14s} {cells[s][1]:8d} {cells[s][cheapest[s]]:4d}/{cheapest[s]:<4d}  "
                      f"{100 * eu:8.3f} % {wu:>11s}  {100 * eg:8.3f} % {wg:>11s} {100 * ex:10.3f} %  "
                      f"{cu[0]:5d}/{cg[0]:<5d} {cu[1]:5d}/{cg[1]:<5d} {cu[2]:5.2f}/{cg[2]:<5.2f}")
            sys.stdout.flush()
    print("error: the largest |1x - R| of the segment's heat-flow channels (storage excluded) over its largest |R|; "
          "R from `thermorph refine --levels 3`" + (" --steady" if steady else "") + " (Richardson; the 4x value "
          "where not monotone); 'vs uniform R': the graded 1x against the uniform study's R.")
    print("Model estimates for research, not veterinary or medical advice; follow local regulations, animal-welfare "
          "rules and licensed veterinary or medical practice.")


if __name__ == "__main__":
    main()
