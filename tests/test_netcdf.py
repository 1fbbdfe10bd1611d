#!/usr/bin/env python3
"""Result and sweep files read by a netCDF-4 reader: every group opens with xarray (h5netcdf engine, a
general-purpose reader outside this project) with named dimensions, `time` is a coordinate with units in
every group that holds time series, and the values xarray reads equal h5py's.

    test_netcdf.py THERMORPH_EXE SOURCE_DIR

References: HDF5 Dimension Scale specification (The HDF Group, 2005, "HDF5 Dimension Scale Specification and
Design Notes"); NetCDF Climate and Forecast (CF) Metadata Conventions 1.10 (Eaton et al., 2022), section 3.1
(units) and 3.2 (long_name); netCDF-4 maps dimension scales to dimensions (Unidata, netCDF User Guide,
"NetCDF-4 Format and HDF5").
"""
import subprocess
import sys
import tempfile
from pathlib import Path

import h5py
import numpy as np
import xarray as xr

failures = []


def check(ok, what):
    if not ok:
        failures.append(what)
        print("FAIL:", what)


def groups_of(path):
    names = ["/"]
    with h5py.File(path, "r") as f:
        f.visititems(lambda n, o: names.append("/" + n) if isinstance(o, h5py.Group) else None)
    return names


def check_result(path):
    with h5py.File(path, "r") as f:
        time = f["time"][()]
        for group in groups_of(path):
            ds = xr.open_dataset(path, group=group, engine="h5netcdf")
            phony = [d for d in ds.dims if str(d).startswith("phony_dim")]
            check(not phony, f"{group}: anonymous dimensions {phony}")
            timed = [v for v in ds.data_vars if "time" in ds[v].dims]
            # /fit/series/NAME has its own time coordinate: the observation times.
            if (timed or group == "/") and not group.startswith("/fit"):
                check("time" in ds.coords, f"{group}: time is not a coordinate")
                if "time" in ds.coords:
                    check(ds["time"].attrs.get("units") == "s", f"{group}: time units {ds['time'].attrs}")
                    check(bool(ds["time"].attrs.get("long_name")), f"{group}: time has no long_name")
                    check(np.array_equal(ds["time"].values, time), f"{group}: time differs from /time")
            for v in ds.data_vars:
                numeric = ds[v].dtype.kind in "fiu"
                check("units" in ds[v].attrs or not numeric, f"{group}/{v}: no units")
                if group.startswith("/fit"):
                    check(bool(ds[v].attrs.get("long_name")), f"{group}/{v}: no long_name")
                if v in ds.data_vars and ds[v].dtype.kind == "f":
                    h5 = f[f"{group.rstrip('/')}/{v}"][()]
                    check(np.array_equal(ds[v].values, h5, equal_nan=True), f"{group}/{v}: xarray and h5py differ")
            ds.close()
        # Field layout: time, then the segment's own axial and radial coordinates.
        for name in f["segments"]:
            g = f"/segments/{name}"
            ds = xr.open_dataset(path, group=g, engine="h5netcdf")
            check(ds["temperature"].dims == ("time", "axial", "radius"), f"{g}/temperature dims {ds['temperature'].dims}")
            check(ds["radius"].attrs.get("units") == "m" and ds["axial"].attrs.get("units") == "m",
                  f"{g}: radius/axial units")
            check(ds["volume"].dims == ("axial", "radius"), f"{g}/volume dims {ds['volume'].dims}")
            check(np.array_equal(ds["radius"].values, f[g + "/radius"][()]), f"{g}: radius values")
            ds.close()
        if "events" in f:
            ev = xr.open_dataset(path, group="/events", engine="h5netcdf")
            check(ev["start"].dims == ("label",), f"/events/start dims {ev['start'].dims}")
            ev.close()
    # Selecting by coordinate value works across groups (the point of named coordinates).
    body = xr.open_dataset(path, group="/body", engine="h5netcdf")
    t_mid = float(body["time"][len(body["time"]) // 2])
    core = float(body["core_temperature"].sel(time=t_mid))
    with h5py.File(path, "r") as f:
        i = int(np.searchsorted(f["time"][()], t_mid))
        check(core == f["body/core_temperature"][i], "sel(time=...) picks the output at that time")
    body.close()


def check_analysis(path, top):
    """A sensitivity or uncertainty file: every group below `top` opens with named dimensions only, every
    variable and coordinate has a CF long_name, numeric ones units, and xarray reads what h5py reads."""
    with h5py.File(path, "r") as f:
        for group in [g for g in groups_of(path) if g.startswith(top)]:
            ds = xr.open_dataset(path, group=group, engine="h5netcdf")
            phony = [d for d in ds.dims if str(d).startswith("phony_dim")]
            check(not phony, f"{path.name}{group}: anonymous dimensions {phony}")
            for v in list(ds.data_vars) + list(ds.coords):
                check(bool(ds[v].attrs.get("long_name")), f"{path.name}{group}/{v}: no long_name")
                if ds[v].dtype.kind in "fiu":
                    check("units" in ds[v].attrs, f"{path.name}{group}/{v}: no units")
                    if v in ds.data_vars:
                        h5 = f[f"{group.rstrip('/')}/{v}"][()]
                        check(np.array_equal(ds[v].values, h5, equal_nan=True),
                              f"{path.name}{group}/{v}: xarray and h5py differ")
            ds.close()
    return True


LUMPED = """
title = "lumped sphere (netcdf test)"
[run]
duration = "600 s"
output_interval = "60 s"
initial_temperature = "40 degC"
[tissues.lump]
base = "muscle"
conductivity = "1000 W/(m K)"
density = "1 kg/m3"
specific_heat = "100 J/(kg K)"
metabolic_heat = "0 W/m3"
perfusion = "0 1/s"
[[segments]]
name = "ball"
shape = "sphere"
layers = [{ tissue = "lump", thickness = "2 cm", cells = 1 }]
[environment]
temperature = "10 degC"
convection = "0.01 W/(m2 K)"
"""


def check_fit_and_friends(exe, tmp):
    """/fit (in a fitted run's results), /sensitivity (local, with a CVODES and a finite-difference
    parameter) and /uncertainty: dimension scales and CF attributes."""
    case = tmp / "lumped.toml"
    case.write_text(LUMPED)
    tau = 1.0 * 100.0 * 0.02 / (3 * 0.012)   # Incropera et al. 2007, eq. 5.6, h = 0.012 W/(m2 K)
    rows = ["time [s],body.core_temperature [degC],body.core_temperature.sd [degC]"]
    for k in range(1, 11):
        t = 60.0 * k
        rows.append(f"{t},{10 + 30 * np.exp(-t / tau):.9f},0.01")
    data = tmp / "lumped.csv"
    data.write_text("\n".join(rows) + "\n")
    fit = tmp / "fit.h5"
    subprocess.run([exe, "fit", str(case), "--data", str(data), "--free",
                    "environment.convection=0.005 W/(m2 K):0.05 W/(m2 K)", "-j", "1", "-q", "-o", str(fit)],
                   check=True, stdout=subprocess.DEVNULL)
    check_result(fit)
    with h5py.File(fit, "r") as f:
        check(f["fit/parameters/gradient_method"][0].decode() == "cvodes", "fit: h uses CVODES sensitivities")
    par = xr.open_dataset(fit, group="/fit/parameters", engine="h5netcdf")
    check(par["value"].dims == ("parameter",), f"/fit/parameters/value dims {par['value'].dims}")
    par.close()
    top = xr.open_dataset(fit, group="/fit", engine="h5netcdf")
    check(top["covariance"].dims == ("parameter", "parameter_b"), f"/fit/covariance dims {top['covariance'].dims}")
    top.close()
    local = tmp / "local.h5"
    subprocess.run([exe, "sensitivity", str(case), "--method", "local", "--param", "environment.convection",
                    "--param", "segments.ball.layers.0.thickness", "--metric", "body.core_temperature.final",
                    "-j", "1", "-q", "-o", str(local)], check=True, stdout=subprocess.DEVNULL)
    check_analysis(local, "/sensitivity")
    sens = xr.open_dataset(local, group="/sensitivity", engine="h5netcdf")
    check(sens["derivative"].dims == ("metrics", "parameters"), f"/sensitivity/derivative dims {sens['derivative'].dims}")
    methods = [m.decode() if isinstance(m, bytes) else str(m) for m in sens["gradient_method"].values]
    check(methods == ["cvodes", "finite differences"], f"local sensitivity methods {methods}")
    sens.close()
    unc = tmp / "unc.h5"
    subprocess.run([exe, "uncertainty", str(case), "--param", "environment.temperature[degC]=normal:10:1",
                    "--samples", "4", "--series", "body.core_temperature", "-j", "1", "-q", "-o", str(unc)],
                   check=True, stdout=subprocess.DEVNULL)
    check_analysis(unc, "/uncertainty")
    u = xr.open_dataset(unc, group="/uncertainty", engine="h5netcdf")
    check(u["metric_quantiles"].dims == ("metric_names", "probability"),
          f"/uncertainty/metric_quantiles dims {u['metric_quantiles'].dims}")
    u.close()


def check_sweep(path):
    for group in ("/parameters", "/metrics", "/runs"):
        ds = xr.open_dataset(path, group=group, engine="h5netcdf")
        check(list(ds.dims) == ["run"], f"sweep {group}: dimensions {list(ds.dims)}")
        check("run" in ds.coords, f"sweep {group}: run is not a coordinate")
        ds.close()


def main():
    exe, src = sys.argv[1], Path(sys.argv[2])
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        # A case with events, a controller, surroundings and several segments; shortened for speed.
        run = tmp / "dive.h5"
        subprocess.run([exe, "run", str(src / "cases/diving_seal.toml"), "--set", "run.duration=1 h",
                        "-o", str(run), "-q"], check=True, stdout=subprocess.DEVNULL)
        check_result(run)
        steady = tmp / "steady.h5"
        subprocess.run([exe, "steady", str(src / "cases/limb_cooling.toml"), "-o", str(steady), "-q"], check=True,
                       stdout=subprocess.DEVNULL)
        check_result(steady)
        sweep = tmp / "sweep.h5"
        subprocess.run([exe, "sweep", str(src / "cases/limb_cooling.toml"), "--set", "run.duration=10 min",
                        "--vary", "environment.temperature=0degC,10degC", "-j", "1", "-q", "-o", str(sweep)],
                       check=True, stdout=subprocess.DEVNULL)
        check_sweep(sweep)
        check_fit_and_friends(exe, tmp)
    if failures:
        print(f"{len(failures)} failures")
        return 1
    print("netcdf: all checks passed")
    return 0


if __name__ == "__main__":
    sys.exit(main())
