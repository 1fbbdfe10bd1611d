#!/usr/bin/python3
"""Write a small synthetic thermorph results file (the HDF5 results contract) for tests.

The numbers are invented and smooth, not a simulation: a 12 kg animal with a
trunk (cylinder, furred), a left ear (cone, 10 axial cells) and a tail
(cylinder, 6 axial cells) sits in 20 degC air that drops to 5 degC for an hour.
Segment heat flows are made to close exactly (storage = sum of the other
channels) and the body flows are the sums over segments.

    make_sample.py OUT.h5 [--incomplete] [--minimal] [--steady] [--hours H]
"""

import argparse
import datetime
import sys

import h5py
import numpy as np

CASE_TOML = """\
title = "Synthetic sample for post-processing tests (invented values)"

[run]
duration = "3 h"
output_interval = "1 min"
initial_temperature = "37 degC"

[body]
mass = "12 kg"
basal_metabolic_rate = "kleiber"

[environment]
medium = "air"
temperature = "20 degC"
speed = "1 m/s"

[[segments]]
name = "trunk"
shape = "cylinder"
length = "45 cm"
axial_cells = 1
layers = [{ tissue = "viscera", thickness = "7 cm", cells = 4 },
          { tissue = "muscle", thickness = "2 cm", cells = 3 },
          { tissue = "skin", thickness = "3 mm", cells = 2 }]
coat = { material = "fur", thickness = "2 cm", cells = 3 }

[[segments]]
name = "left_ear"
shape = "cone"
parent = "trunk"
length = "10 cm"
radius_proximal = "1.2 cm"
radius_distal = "0.4 cm"
axial_cells = 10
layers = [{ tissue = "cartilage", thickness = "5 mm", cells = 3 },
          { tissue = "skin", thickness = "2 mm", cells = 2 }]
coat = { material = "fur", thickness = "3 mm", cells = 2 }

[[segments]]
name = "tail"
shape = "cylinder"
parent = "trunk"
length = "30 cm"
axial_cells = 6
layers = [{ tissue = "bone", thickness = "4 mm", cells = 2 },
          { tissue = "muscle", thickness = "6 mm", cells = 3 },
          { tissue = "skin", thickness = "2 mm", cells = 2 }]
"""

# (name, [(layer name, thickness m, cells)], nz, length m, outer area m2, metabolic W)
SEGMENTS = [
    ("trunk", [("viscera", 0.07, 4), ("muscle", 0.02, 3), ("skin", 0.003, 2), ("fur", 0.02, 3)],
     1, 0.45, 0.41, 20.0),
    ("left_ear", [("cartilage", 0.005, 3), ("skin", 0.002, 2), ("fur", 0.003, 2)],
     10, 0.10, 0.0068, 0.15),
    ("tail", [("bone", 0.004, 2), ("muscle", 0.006, 3), ("skin", 0.002, 2)],
     6, 0.30, 0.0226, 0.6),
]

CHANNELS = ("metabolism", "blood", "convection", "radiation", "solar",
            "evaporation", "respiration", "substrate")


def write(ds_parent, name, values, units, **attrs):
    """Create dataset `name` with a `units` attribute (and any extra attributes)."""
    ds = ds_parent.create_dataset(name, data=values)
    ds.attrs["units"] = units
    for k, v in attrs.items():
        ds.attrs[k] = v
    return ds


def radial_grid(layers):
    """Cell-centre radii [m] and layer index per cell for layers given inside out."""
    centres, layer_index, r0 = [], [], 0.0
    for i, (_, thickness, cells) in enumerate(layers):
        dr = thickness / cells
        centres += [r0 + (j + 0.5) * dr for j in range(cells)]
        layer_index += [i] * cells
        r0 += thickness
    return np.array(centres), np.array(layer_index, dtype=np.int32), r0


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("out", help="results file to write (HDF5)")
    ap.add_argument("--incomplete", action="store_true", help="mark the run incomplete (complete = 0)")
    ap.add_argument("--minimal", action="store_true",
                    help="omit optional datasets: body temperatures, arterial/venous, environment, events")
    ap.add_argument("--steady", action="store_true", help="a single time point, as a steady solve writes")
    ap.add_argument("--hours", type=float, default=3.0,
                    help="length of the run [h] (default 3; the cold hour stays at 1 h to 2 h)")
    args = ap.parse_args(argv)

    rng = np.random.default_rng(20240601)
    time = np.array([0.0]) if args.steady else np.arange(0.0, args.hours * 3600.0 + 1.0, 60.0 if args.hours <= 3.0 else 600.0)
    nt = len(time)
    # Air temperature: 20 degC, 5 degC between 1 h and 2 h, reached with a 5 min lag [degC].
    cold = (time >= 3600.0) & (time < 7200.0)
    target = np.where(cold, 5.0, 20.0)
    t_air = np.empty(nt)
    t_air[0] = target[0]
    for i in range(1, nt):
        a = np.exp(-(time[i] - time[i - 1]) / 300.0)
        t_air[i] = target[i] + (t_air[i - 1] - target[i]) * a
    t_core = 37.2 - 0.4 * (20.0 - t_air) / 15.0 + 0.01 * rng.standard_normal(nt)

    with h5py.File(args.out, "w") as f:
        f.attrs["tool_version"] = "thermorph postproc synthetic sample 0.1"
        f.attrs["command_line"] = " ".join(["make_sample.py"] + (argv if argv is not None else sys.argv[1:]))
        f.attrs["case"] = CASE_TOML
        f.attrs["created"] = datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds")
        f.attrs["complete"] = np.int32(0 if args.incomplete else 1)
        write(f, "time", time, "s")

        body_flows = {c: np.zeros(nt) for c in CHANNELS + ("storage",)}
        skin_temps = []
        for name, layers, nz, length, area, metab in SEGMENTS:
            g = f.create_group(f"segments/{name}")
            radius, layer, r_out = radial_grid(layers)
            axial = (np.arange(nz) + 0.5) * length / nz
            write(g, "radius", radius, "m")
            write(g, "axial", axial, "m")
            write(g, "layer", layer, "1", layer_names=[lyr[0] for lyr in layers])
            # Surface temperature: a share of the core-to-air difference, falling distally [degC].
            share = (0.25 if name == "tail" else 0.4) - 0.25 * axial / length if nz > 1 else np.array([0.25])
            surf = t_air[:, None] + share[None, :] * (t_core - t_air)[:, None]
            # Tissue: parabolic from core to surface; the coat (fur) carries most of the drop.
            rr = (radius / r_out)[None, None, :]
            temp = t_core[:, None, None] - (t_core[:, None, None] - surf[:, :, None]) * rr ** 2
            temp = temp + 1e-3 * rng.standard_normal(temp.shape)
            write(g, "temperature", temp, "degC")
            write(g, "surface_temperature", surf, "degC")
            skin_temps.append((area, surf.mean(axis=1)))
            if not args.minimal:
                write(g, "arterial_temperature", t_core[:, None] - 0.3 * axial[None, :] / length, "degC")
                write(g, "venous_temperature", surf * 0.2 + t_core[:, None] * 0.8, "degC")
            # Heat flows, positive into the body [W].
            ds_mean = surf.mean(axis=1)
            flows = {
                "metabolism": metab * (1.0 + 0.3 * (20.0 - t_air) / 15.0),
                "blood": -0.1 * metab * (ds_mean - t_air) / 10.0 if name != "trunk" else 0.8 * np.ones(nt),
                "convection": -8.0 * area * (ds_mean - t_air),
                "radiation": -5.5 * area * (ds_mean - t_air - 1.0),
                "solar": 40.0 * area * np.clip(np.sin(np.pi * time / 10800.0), 0.0, None),
                "evaporation": -0.08 * metab * np.ones(nt),
                "respiration": (-0.06 * metab if name == "trunk" else 0.0) * np.ones(nt),
                "substrate": (-2.0 if name == "trunk" else 0.0) * np.ones(nt),
            }
            flows["storage"] = sum(flows.values())
            for c, v in flows.items():
                write(g, f"heat_flow/{c}", v, "W")
                if c != "blood":
                    body_flows[c] += v
        body_flows.pop("blood")
        body_flows["storage"] = sum(v for c, v in body_flows.items() if c != "storage")
        for c, v in body_flows.items():
            write(f, f"body/heat_flow/{c}", v, "W")
        write(f, "body/energy_balance_error", np.cumsum(1e-7 * rng.standard_normal(nt)), "J")
        if not args.minimal:
            write(f, "body/core_temperature", t_core, "degC")
            write(f, "body/blood_temperature", t_core - 0.15, "degC")
            total_area = sum(a for a, _ in skin_temps)
            write(f, "body/mean_skin_temperature", sum(a * s for a, s in skin_temps) / total_area, "degC")
            write(f, "environment/temperature", t_air, "degC")
            write(f, "environment/speed", np.ones(nt), "m s-1")
            write(f, "environment/relative_humidity", 0.5 * np.ones(nt), "1")
            write(f, "environment/solar_irradiance", 400.0 * np.clip(np.sin(np.pi * time / 10800.0), 0.0, None),
                  "W m-2")
            if not args.steady:
                ev = f.create_group("events")
                write(ev, "start", np.array([3600.0, 9000.0]), "s")
                write(ev, "end", np.array([7200.0, 9000.0]), "s")
                write(ev, "label", np.array(["cold air", "handling"], dtype=h5py.string_dtype()), "1")
        sol = f.create_group("solver")
        for k, v in dict(steps=412, rhs_evaluations=530, jacobian_evaluations=21,
                         nonlinear_iterations=498, error_test_failures=7).items():
            sol.attrs[k] = np.int64(v)
        sol.attrs["wall_seconds"] = 0.84
    return 0


if __name__ == "__main__":
    sys.exit(main())
