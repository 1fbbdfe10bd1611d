#!/usr/bin/env python3
"""The compiled Python module against the command line: the same case run in-process and by the CLI gives the
same arrays (bit for bit: both call drivers/simulation.cpp; checked to 1e-12 relative at worst), for a
transient run, a steady state, a case given as a dict and as TOML text, a sweep, and cold_start= (--cold-start). Bad input raises
thermorph.CaseError naming the key. The notebook example runs.

    test_python_module.py MODULE_DIR THERMORPH_EXE SOURCE_DIR
"""
import os
import subprocess
import sys
import tempfile
import tomllib
from pathlib import Path

import h5py
import numpy as np

module_dir, exe, src = sys.argv[1], sys.argv[2], Path(sys.argv[3]).resolve()
sys.path.insert(0, module_dir)
import thermorph  # noqa: E402

failures = []


def check(ok, what):
    if not ok:
        failures.append(what)
        print("FAIL:", what)


def same(a, b, what):
    a, b = np.asarray(a, float), np.asarray(b, float)
    if a.shape != b.shape:
        check(False, f"{what}: shape {a.shape} != {b.shape}")
        return
    ok = np.array_equal(a, b, equal_nan=True) or np.allclose(a, b, rtol=1e-12, atol=0, equal_nan=True)
    check(ok, f"{what}: max difference {np.nanmax(np.abs(a - b)) if a.size else 0}")


def compare(r, h5):
    with h5py.File(h5, "r") as f:
        same(r["time"], f["time"][()], "time")
        for k in ("core_temperature", "blood_temperature", "mean_skin_temperature"):
            same(r[k], f["body/" + k][()], k)
        for c, v in r["heat_flow"].items():
            same(v, f[f"body/heat_flow/{c}"][()], f"heat_flow {c}")
        for c, v in r["cumulative_heat"].items():
            same(v, f[f"body/cumulative_heat/{c}"][()], f"cumulative_heat {c}")
        for name, seg in r["segments"].items():
            g = f[f"segments/{name}"]
            same(seg["temperature"], g["temperature"][()], f"{name} temperature")
            same(seg["radius"], g["radius"][()], f"{name} radius")
            for c, v in seg["heat_flow"].items():
                same(v, g[f"heat_flow/{c}"][()], f"{name} heat_flow {c}")
            for k in ("contact_fraction", "in_water"):
                same(seg[k], g[k][()], f"{name} {k}")
            for k in ("wetted_fraction", "tucked_fraction"):   # stored only where events wet or a segment tucks
                if k in g:
                    same(seg[k], g[k][()], f"{name} {k}")
        same(r["budget"]["energy_balance_error"], f["body/energy_balance_error"][-1], "energy balance error")
        # The timeline's steps (/steps; none in a steady state's file, and none in the module's dict then).
        steps = r["steps"]
        if "steps" not in f:
            check(steps["time"].size == 0, f"steps without /steps in the file: {steps['time']}")
            return
        same(steps["time"], f["steps/step_time"][()], "steps time")
        for c, v in steps["cumulative_heat"].items():
            same(v, f[f"steps/body/cumulative_heat/{c}"][()], f"steps cumulative_heat {c}")
        for name, seg in steps["segments"].items():
            for c, v in seg["cumulative_heat"].items():
                same(v, f[f"steps/segments/{name}/cumulative_heat/{c}"][()], f"steps {name} cumulative_heat {c}")


def main():
    case = src / "cases/limb_cooling.toml"
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        sets = ["environment.temperature=2 degC", "run.duration=30 min"]
        cli = tmp / "cli.h5"
        subprocess.run([exe, "run", str(case), *sum([["--set", s] for s in sets], []), "-o", str(cli), "-q"],
                       check=True, stdout=subprocess.DEVNULL)
        r = thermorph.run(str(case), set=sets)
        check(r["time"].shape == (31,), f"time shape {r['time'].shape}")
        compare(r, cli)
        check("not veterinary or medical advice" in r["caution"], "caution missing")

        # Contact and medium stepped by an event at 10 min: the module's series equal the file's and the event's
        # own steps (contact 0 then 0.3, in water from 10 min; an output at the step holds the value after it).
        step = ['events=[{ at = "10 min", environment = { medium = "water", temperature = "5 degC", speed = "0 m/s" },'
                ' surface = { forelimb = { contact_fraction = 0.3 } } }]',
                "environment.substrate_conductance=30 W/(m2 K)"]
        ev_h5 = tmp / "events.h5"
        subprocess.run([exe, "run", str(case), *sum([["--set", x] for x in sets + step], []), "-o", str(ev_h5), "-q"],
                       check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        r = thermorph.run(str(case), set=sets + step)
        compare(r, ev_h5)
        limb = r["segments"]["forelimb"]
        after = r["time"] >= 600.0
        same(limb["contact_fraction"], np.where(after, 0.3, 0.0), "forelimb contact_fraction against the event")
        same(limb["in_water"], np.where(after, 1.0, 0.0), "forelimb in_water against the event")
        # Wetting by an event (a step to 0.4 at 20 min, then a ramp back to 0 over 5 min, as the case's events
        # say: linear ramp, common practice, no source): the module's series, the file's and the events' own values.
        wet = step[1:] + ['events=[{ at = "10 min", environment = { medium = "water", temperature = "5 degC", '
                      'speed = "0 m/s" }, surface = { forelimb = { contact_fraction = 0.3 } } }, '
                      '{ at = "20 min", environment = { medium = "air", temperature = "2 degC", speed = "0 m/s" }, '
                      'surface = { forelimb = { wetted_fraction = 0.4 } } }, '
                      '{ at = "20 min", ramp = "5 min", surface = { forelimb = { wetted_fraction = 0 } } }]']
        wet_h5 = tmp / "wet.h5"
        subprocess.run([exe, "run", str(case), *sum([["--set", x] for x in sets + wet], []), "-o", str(wet_h5), "-q"],
                       check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        rw = thermorph.run(str(case), set=sets + wet)
        compare(rw, wet_h5)
        tw = rw["time"]
        expect = np.where(tw < 1200.0, 0.0, np.clip(0.4 * (1.0 - (tw - 1200.0) / 300.0), 0.0, 0.4))
        same(rw["segments"]["forelimb"]["wetted_fraction"], expect, "forelimb wetted_fraction against the events")
        with h5py.File(wet_h5, "r") as f:
            check("segments/forelimb/wetted_fraction" in f, "the file stores the event-wetted series")
        same(rw["segments"]["forelimb"]["tucked_fraction"], np.zeros_like(tw), "an untucked segment's tucked_fraction")
        # Sweating ([control.sweating]): the dict's wetted_fraction is the controlled one, as the file's: w_0 plus the
        # state /control/sweating (below max 0.8 here).
        sweat = tmp / "sweat.toml"
        sweat.write_text('title = "sweating sphere"\n[run]\nduration = "20 min"\noutput_interval = "2 min"\n'
                         'initial_temperature = "39 degC"\n[[segments]]\nname = "ball"\nshape = "sphere"\n'
                         'layers = [{ tissue = "muscle", thickness = "3 cm" }]\nsurface = { wetted_fraction = 0.1 }\n'
                         '[environment]\ntemperature = "35 degC"\nrelative_humidity = 0.3\n'
                         '[control.sweating]\nset_point = "37 degC"\ngain = "0.2 1/K"\n')
        sweat_h5 = tmp / "sweat.h5"
        subprocess.run([exe, "run", str(sweat), "-o", str(sweat_h5), "-q"], check=True, stdout=subprocess.DEVNULL,
                       stderr=subprocess.DEVNULL)
        rs = thermorph.run(str(sweat))
        compare(rs, sweat_h5)
        with h5py.File(sweat_h5, "r") as f:
            check("segments/ball/wetted_fraction" in f, "the file stores a sweating segment's wetted fraction")
            state = f["control/sweating"][()]
            check(state.max() > 0.0, f"sweating state {state}")
            same(f["segments/ball/wetted_fraction"][()], 0.1 + state, "the file's wetted fraction = w_0 + the state")
        same(rs["segments"]["ball"]["wetted_fraction"], 0.1 + state, "the dict's wetted fraction = w_0 + the state")
        # The step at 10 min is an output: the energies stored at the step are those of that output (one state).
        check(np.array_equal(r["steps"]["time"], [600.0]), f"steps: the event's time ({r['steps']['time']})")
        at = int(np.searchsorted(r["time"], 600.0))
        with h5py.File(ev_h5, "r") as f:
            for c, v in r["steps"]["segments"]["forelimb"]["cumulative_heat"].items():
                same(v, f[f"segments/forelimb/cumulative_heat/{c}"][at:at + 1], f"forelimb {c}: the step = the output")

        steady_h5 = tmp / "steady.h5"
        subprocess.run([exe, "steady", str(case), "-o", str(steady_h5), "-q"], check=True, stdout=subprocess.DEVNULL)
        compare(thermorph.steady(str(case)), steady_h5)

        # cold_start= is the command line's --cold-start (cli/main.cpp): a refined grid's steady start by the
        # relaxation from initial_temperature instead of by Newton from the unrefined grid's steady state. Each way
        # the module equals the CLI bit for bit, statistics included; the steady state's statistics tell the two
        # ways apart (relaxation steps only cold), so the flag reaches the driver (the run's steady start is not in
        # its statistics, and here both ways reach the same state bit for bit).
        refined = ["run.grid_refinement=2"]
        for cold in (False, True):
            flag = ["--cold-start"] if cold else []
            for kind, extra in (("steady", []), ("run", ["run.initial=steady", "run.duration=10 min"])):
                h5 = tmp / f"{kind}_refined_{cold}.h5"
                subprocess.run([exe, kind, str(case), *sum([["--set", x] for x in refined + extra], []), "-o", str(h5),
                                "-q", *flag], check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
                r = getattr(thermorph, kind)(str(case), set=refined + extra, cold_start=cold)
                compare(r, h5)
                with h5py.File(h5, "r") as f:
                    for key in ("steps", "rhs_evaluations"):
                        check(r["statistics"][key] == f["solver"].attrs[key],
                              f"{kind} cold_start={cold}: {key} {r['statistics'][key]} != the CLI's "
                              f"{f['solver'].attrs[key]}")
                if kind == "steady":
                    check((r["statistics"]["steps"] > 0) == cold,
                          f"steady cold_start={cold}: {r['statistics']['steps']} relaxation steps")

        # The same case as a dict (tomllib) and as TOML text, with the same overrides.
        spec = tomllib.loads(case.read_text())
        compare(thermorph.run(spec, set=sets, base=str(case.parent)), cli)
        compare(thermorph.run(case.read_text(), set=sets), cli)

        # The module can also write the results file, identical in its arrays.
        mod_h5 = tmp / "module.h5"
        compare(thermorph.run(str(case), set=sets, output=str(mod_h5)), mod_h5)

        try:
            thermorph.run(str(case), set=["environment.temperature=hot"])
            check(False, "a bad override raised nothing")
        except thermorph.CaseError as e:
            check("environment.temperature" in str(e), f"CaseError message: {e}")

        sweep_h5 = tmp / "sweep.h5"
        vary = ["environment.temperature=0degC,10degC"]
        subprocess.run([exe, "sweep", str(case), "--set", "run.duration=10 min", "--vary", vary[0], "-j", "1", "-q",
                        "-o", str(sweep_h5)], check=True, stdout=subprocess.DEVNULL)
        s = thermorph.sweep(str(case), vary=vary, set=["run.duration=10 min"])
        with h5py.File(sweep_h5, "r") as f:
            for name, v in s["metrics"].items():
                same(v, f[f"metrics/{name}"][()], f"sweep metric {name}")
            same(s["parameters"]["environment.temperature"], f["parameters/environment.temperature"][()],
                 "sweep parameter")
        check(s["status"] == ["ok", "ok"], f"sweep status {s['status']}")
        with h5py.File(sweep_h5, "r") as f:
            stored = [w.decode() if isinstance(w, bytes) else w for w in f["runs/warnings"][()]]
        # Each run's warnings are a list of strings; the results file joins them with "; " (README, Python module).
        check(all(isinstance(w, list) and all(isinstance(x, str) for x in w) for w in s["warnings"]),
              f"sweep warnings are not a list of strings per run: {s['warnings']}")
        check(["; ".join(w) for w in s["warnings"]] == stored, f"sweep warnings {s['warnings']} != /runs/warnings {stored}")
        # A row's own warnings: a grid coarser than the guard is named in that run's row only, each warning whole.
        coarse = thermorph.sweep(str(case), vary=["segments.forelimb.layers.0.cells=1,4"],
                                 set=["run.duration=10 min"])
        check(any("has 1 radial cells" in w for w in coarse["warnings"][0])
              and not any("radial cells" in w for w in coarse["warnings"][1]),
              f"per-row grid warnings: {coarse['warnings']}")
        check(all(w.startswith("grid: ") for w in coarse["warnings"][0] if "radial cells" in w),
              f"a warning split or joined: {coarse['warnings'][0]}")

        # Warnings reach a notebook as Python warnings (thermorph.ThermorphWarning, a UserWarning), one per kind as
        # the command line prints them on stderr; the dict keeps every text. The limb in 90 degC air for 2 h warms
        # above 45 degC (the hot-tissue warning; its blood is pinned at 37 degC) and its 1-cell layer warns of the grid.
        hot = ["environment.temperature=90 degC", "run.duration=2 h", "segments.forelimb.layers.0.cells=1"]
        proc = subprocess.run([exe, "run", str(case), *sum([["--set", x] for x in hot], []), "-o", str(tmp / "hot.h5"),
                               "-q"], capture_output=True, text=True)
        cli_lines = [l[len("warning: "):] for l in proc.stderr.splitlines() if l.startswith("warning: ")]
        import warnings as pywarnings
        with pywarnings.catch_warnings(record=True) as caught:
            pywarnings.simplefilter("always")
            rh = thermorph.run(str(case), set=hot)
        raised = [str(w.message) for w in caught if issubclass(w.category, thermorph.ThermorphWarning)]
        check(issubclass(thermorph.ThermorphWarning, UserWarning), "ThermorphWarning is a UserWarning")
        check(any("tissue above 45 degC" in w for w in raised) and any("radial cells" in w for w in raised)
              and raised == rh["warnings"] == cli_lines,
              f"run: raised {raised} = the dict's {rh['warnings']} = the CLI's stderr {cli_lines}")
        with pywarnings.catch_warnings():
            pywarnings.simplefilter("error", thermorph.ThermorphWarning)
            try:
                thermorph.run(str(case), set=hot)
                check(False, "simplefilter('error') did not raise the first warning")
            except thermorph.ThermorphWarning as e:
                check(str(e) == rh["warnings"][0], f"the first warning raised as an error: {e}")
        # A sweep: one warning per kind with how many more differ in numbers (two rows, 85 and 90 degC: the hot
        # warning's maximum differs); the command line prints one line per kind too.
        with pywarnings.catch_warnings(record=True) as caught:
            pywarnings.simplefilter("always")
            sh = thermorph.sweep(str(case), vary=["environment.temperature=85 degC,90 degC"], set=hot[1:])
        raised = [str(w.message) for w in caught if issubclass(w.category, thermorph.ThermorphWarning)]
        hot_raised = [w for w in raised if "tissue above 45 degC" in w]
        check(len(hot_raised) == 1 and "(and 1 more of this kind whose numbers differ" in hot_raised[0]
              and hot_raised[0].startswith(sh["warnings"][0][[i for i, w in enumerate(sh["warnings"][0])
                                                               if "tissue above" in w][0]]),
              f"sweep: one hot-tissue warning for two rows: {raised}")

        # A case given as a dict is named "<case dict>" with the key path (its lines would be those of a TOML text
        # the user never sees); a TOML string "<case text>" with its own line and column.
        water = dict(spec, environment=dict(spec["environment"], medium="water", air_temperature="-5 degC"))
        for seg in water["segments"]:
            seg.get("surface", {}).pop("immersion", None)
        r = thermorph.run(water, set=["run.duration=10 min"], base=str(case.parent))
        inert = [w for w in r["warnings"] if "environment.air_temperature has no effect" in w]
        check(len(inert) == 1 and inert[0].startswith("<case dict>: environment.air_temperature has no effect: "),
              f"dict case warning: {r['warnings']}")
        check(not any("case.toml" in w for w in r["warnings"]), f"a warning names case.toml: {r['warnings']}")
        try:
            thermorph.run(dict(spec, run=dict(spec.get("run", {}), duration="-1 h")), base=str(case.parent))
            check(False, "a bad dict value raised nothing")
        except thermorph.CaseError as e:
            check(str(e).startswith("<case dict>: run.duration") and "case.toml" not in str(e),
                  f"dict case error: {e}")
        text = case.read_text()
        line = text[:text.index("[environment]")].count("\n") + 2  # the key below [environment]'s header
        try:
            lines = text.splitlines()
            key = lines[line - 1].split("=")[0].strip()
            lines[line - 1] = f"{key} = \"hot\""
            thermorph.run("\n".join(lines) + "\n", base=str(case.parent))
            check(False, "a bad text value raised nothing")
        except thermorph.CaseError as e:
            check(str(e).startswith(f"<case text>:{line}:") and f"environment.{key}" in str(e), f"text case error: {e}")

        env = dict(os.environ, PYTHONPATH=module_dir, THERMORPH_EXAMPLE_OUT=str(tmp / "nb"), MPLBACKEND="Agg")
        proc = subprocess.run([sys.executable, str(src / "docs/notebook_example.py")], env=env, capture_output=True,
                              text=True)
        check(proc.returncode == 0, f"notebook example: {proc.stderr[-2000:]}")
        check((tmp / "nb/overlay.png").exists() and (tmp / "nb/budget.png").exists()
              and (tmp / "nb/fit.png").exists(), "notebook figures missing")
    if failures:
        print(f"{len(failures)} failures")
        return 1
    print("python module: all checks passed")
    return 0


if __name__ == "__main__":
    sys.exit(main())
