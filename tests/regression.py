#!/usr/bin/env python3
"""Regression summaries of result files: compare a run with its stored summary within a tolerance.

    regression.py RESULT.h5 SUMMARY.json            compare (exit 1 on a difference)
    regression.py RESULT.h5 SUMMARY.json --update   store a new summary (review the diff before committing)
"""
import json
import sys

import h5py
import numpy as np


def summarise(path):
    out = {}
    with h5py.File(path, "r") as f:
        out["complete"] = int(f.attrs["complete"])
        out["final_time_s"] = float(f["time"][-1])
        out["outputs"] = int(f["time"].shape[0])
        # Each group's `time` is its copy of the netCDF coordinate /time, not a channel.
        for name, ds in f["body/heat_flow"].items():
            if name != "time":
                out[f"body.heat_flow.{name}.final_W"] = float(ds[-1])
        if "body/cumulative_heat" in f:
            for name, ds in f["body/cumulative_heat"].items():
                if name != "time":
                    out[f"body.cumulative_heat.{name}.final_J"] = float(ds[-1])
        for key in ("core_temperature", "blood_temperature", "mean_skin_temperature"):
            if f"body/{key}" in f:
                out[f"body.{key}.final_degC"] = float(f[f"body/{key}"][-1])
        for seg, g in f["segments"].items():
            t = g["temperature"][-1]
            vol = g["volume"][...] if "volume" in g else np.ones_like(t)
            out[f"{seg}.mean_temperature.final_degC"] = float((t * vol).sum() / vol.sum())
            out[f"{seg}.min_temperature.final_degC"] = float(t.min())
            out[f"{seg}.surface_temperature.mean_final_degC"] = float(g["surface_temperature"][-1].mean())
    return out


def main():
    result, stored = sys.argv[1], sys.argv[2]
    current = summarise(result)
    if "--update" in sys.argv:
        with open(stored, "w") as fh:
            json.dump(current, fh, indent=1, sort_keys=True)
        print(f"stored {len(current)} values in {stored}")
        return 0
    with open(stored) as fh:
        expected = json.load(fh)
    failures = []
    for key, want in expected.items():
        got = current.get(key)
        if got is None:
            failures.append(f"{key}: missing")
            continue
        # Within the time-integration error at the cases' default tolerances (rtol 1e-6), so that a change of
        # step pattern passes and a change of physics does not: temperatures 5 mK; flows and energies 1e-3
        # relative plus 1e-4 W (or J) absolute.
        tol = 5e-3 if key.endswith("degC") else 1e-3 * abs(want) + 1e-4
        if abs(got - want) > tol:
            failures.append(f"{key}: got {got!r}, stored {want!r} (tolerance {tol:.3g})")
    for f in failures:
        print("DIFFERS", f)
    print(f"{len(expected) - len(failures)}/{len(expected)} summary values match {stored}")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
