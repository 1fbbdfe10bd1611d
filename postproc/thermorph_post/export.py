#!/usr/bin/python3
"""Export groups of a thermorph results file (HDF5) to CSV at full precision.

    export_csv.py RESULT.h5 GROUP --out FILE.csv [--recursive]
    export_csv.py RESULT.h5 --all DIR
    export_csv.py RESULT.h5 --tidy FILE.csv [GROUP]

A group's time series become one table: `time [s]` first, then one column per
dataset, headed `name [units]`; 2-D and 3-D datasets are flattened to one
column per cell, e.g. `temperature[z=3,r=5] [degC]` (0-based axial and radial
cell indices; positions are in the group's `axial` and `radius` exports).
Datasets not indexed by time (radius, axial, layer) go to FILE.NAME.csv beside
FILE.csv; a group of equal-length per-item datasets (/events) is one table;
group attributes (/solver, the root) become `attribute,value` rows.
--tidy writes the long form: columns time (s), segment, quantity, value, unit,
one row per time and cell (see tidy_rows).
Numbers are written with Python's shortest round-trip repr, so reading them
back gives the stored binary64 values exactly.
"""

from __future__ import annotations

import argparse
import csv
import sys
from pathlib import Path

import h5py
import numpy as np

# Datasets in a segment group that are not time series: coordinates (results contract) and
# the cell volumes [nz, nr] that thermorph also writes.
SEGMENT_STATIC = {"radius", "axial", "layer", "volume"}
# Column order: contract order for known names, then alphabetical.
PREFERRED_ORDER = ("start", "end", "label",
                   "core_temperature", "blood_temperature", "mean_skin_temperature", "energy_balance_error",
                   "temperature", "surface_temperature", "arterial_temperature", "venous_temperature",
                   "metabolism", "blood", "convection", "radiation", "solar", "evaporation",
                   "respiration", "substrate", "storage")


def _column_order(name: str):
    """Sort key for a dataset's relative name: subgroup depth, contract order, then name."""
    base = name.rsplit("/", 1)[-1]
    rank = PREFERRED_ORDER.index(base) if base in PREFERRED_ORDER else len(PREFERRED_ORDER)
    return (name.count("/"), name.rsplit("/", 1)[0] if "/" in name else "", rank, name)


def _text(value) -> str:
    """Decode bytes to str; leave str alone."""
    return value.decode("utf-8", errors="replace") if isinstance(value, (bytes, np.bytes_)) else str(value)


def cell_text(value) -> str:
    """One CSV cell: shortest round-trip repr for floats, plain ints, decoded strings."""
    if isinstance(value, (float, np.floating)):
        return repr(float(value))
    if isinstance(value, (bool, np.bool_)):
        return str(int(value))
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    return _text(value)


def column_text(array) -> list[str]:
    """A 1-D array as CSV cells (fast path for floats and ints)."""
    array = np.asarray(array)
    if array.dtype.kind == "f":
        return [repr(v) for v in array.astype(np.float64).tolist()]
    if array.dtype.kind in "iub":
        return [str(int(v)) for v in array.tolist()]
    return [cell_text(v) for v in array.tolist()]


def header(name: str, units: str) -> str:
    """Column header `name [units]` (just `name` when units are empty)."""
    return f"{name} [{units}]" if units else name


def units_of(ds) -> str:
    """The dataset's `units` attribute as str ("" when missing)."""
    return _text(ds.attrs.get("units", ""))


def _datasets(group, recursive: bool):
    """(relative name, dataset) for datasets in the group, subgroups too if recursive."""
    found = []

    def visit(name, obj):
        if isinstance(obj, h5py.Dataset) and (recursive or "/" not in name):
            found.append((name, obj))

    group.visititems(visit)
    return sorted(found, key=lambda item: _column_order(item[0]))


def _full_parts(group_path: str, name: str) -> list[str]:
    """Components of a dataset's absolute path, e.g. ['segments', 'tail', 'radius']."""
    return f"{group_path.strip('/')}/{name}".strip("/").split("/")


def _is_time_series(group_path: str, name: str, ds, nt: int) -> bool:
    """Whether a dataset is indexed by output time along its first axis."""
    parts = _full_parts(group_path, name)
    if parts[0] in ("events", "steps") or ds.ndim == 0 or ds.shape[0] != nt:  # /steps: indexed by step_time
        return False
    return not (len(parts) == 3 and parts[0] == "segments" and parts[2] in SEGMENT_STATIC)


def _dim_names(group_path: str, name: str, ndim: int) -> tuple[str, ...]:
    """Index names for the non-time axes: z (axial), r (radial) inside segments, else i, j, k."""
    if _full_parts(group_path, name)[0] == "segments" and ndim <= 2:
        return ("z", "r")[:ndim]
    return ("i", "j", "k", "l")[:ndim]


def _flatten(group_path: str, name: str, ds) -> tuple[list[str], np.ndarray]:
    """Column headers and an [nt, ncol] array for a time series of any rank."""
    values = ds[()]
    units = units_of(ds)
    if values.ndim == 1:
        return [header(name, units)], values.reshape(-1, 1)
    dims = _dim_names(group_path, name, values.ndim - 1)
    heads = [header(f"{name}[{','.join(f'{d}={i}' for d, i in zip(dims, idx))}]", units)
             for idx in np.ndindex(*values.shape[1:])]
    return heads, values.reshape(values.shape[0], -1)


def _write_rows(path: Path, heads: list[str], columns: list[list[str]]):
    """Write a header and equal-length columns of cell text."""
    path.parent.mkdir(parents=True, exist_ok=True)
    with open(path, "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh, lineterminator="\n")
        writer.writerow(heads)
        writer.writerows(zip(*columns))


def _attribute_rows(path: Path, attrs):
    """Write group attributes as `attribute,value` rows."""
    path.parent.mkdir(parents=True, exist_ok=True)
    with open(path, "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh, lineterminator="\n")
        writer.writerow(["attribute", "value"])
        for key, value in attrs.items():
            if isinstance(value, np.ndarray):
                value = value.item() if value.size == 1 else ";".join(cell_text(v) for v in value.ravel())
            writer.writerow([key, cell_text(value)])


def export_group(h5: h5py.File, group_path: str, out: Path, recursive: bool = False) -> list[Path]:
    """Export one group to `out` (and side files FILE.NAME.csv); return the paths written."""
    group_path = "/" + group_path.strip("/")
    if group_path not in h5 or not isinstance(h5[group_path], h5py.Group):
        groups = []
        h5.visititems(lambda n, o: groups.append("/" + n) if isinstance(o, h5py.Group) else None)
        raise KeyError(f"no group {group_path}; groups are: / {' '.join(groups)}")
    group = h5[group_path]
    nt = len(h5["time"]) if "time" in h5 else -1
    # /time and each group's copy of it (its netCDF coordinate) are the time column.
    entries = [(n, d) for n, d in _datasets(group, recursive) if n.split("/")[-1] != "time"]
    series = [(n, d) for n, d in entries if _is_time_series(group_path, n, d, nt)]
    static = [(n, d) for n, d in entries if not _is_time_series(group_path, n, d, nt)]
    written = []
    main_done = False

    if series or (group_path == "/" and "time" in h5):
        heads, columns = [header("time", units_of(h5["time"]))], [column_text(h5["time"][()])]
        for name, ds in series:
            hs, table = _flatten(group_path, name, ds)
            heads += hs
            columns += [column_text(table[:, j]) for j in range(table.shape[1])]
        _write_rows(out, heads, columns)
        written.append(out)
        main_done = True
    elif static and len({d.shape for _, d in static}) == 1 and static[0][1].ndim == 1:
        n = static[0][1].shape[0]
        heads = ["index"] + [header(name, units_of(ds)) for name, ds in static]
        columns = [[str(i) for i in range(n)]] + [column_text(ds[()]) for _, ds in static]
        _write_rows(out, heads, columns)
        written.append(out)
        static, main_done = [], True

    for name, ds in static:
        side = out.with_name(f"{out.stem}.{name.replace('/', '.')}.csv")
        values = np.atleast_1d(ds[()])
        heads = ["index", header(name, units_of(ds))]
        columns = [[str(i) for i in range(values.shape[0])]]
        if values.ndim == 1:
            columns.append(column_text(values))
        else:  # first index down the rows (column `z` or `i`), the rest across, e.g. volume[r=5]
            dims = _dim_names(group_path, name, values.ndim)
            heads = [dims[0]] + [
                header(f"{name}[{','.join(f'{d}={i}' for d, i in zip(dims[1:], idx))}]", units_of(ds))
                for idx in np.ndindex(*values.shape[1:])]
            flat = values.reshape(values.shape[0], -1)
            columns += [column_text(flat[:, j]) for j in range(flat.shape[1])]
        if "layer_names" in ds.attrs and values.ndim == 1:
            names = [_text(v) for v in np.atleast_1d(ds.attrs["layer_names"])]
            heads.append("layer_name")
            columns.append([names[int(v)] if 0 <= int(v) < len(names) else "" for v in values])
        _write_rows(side, heads, columns)
        written.append(side)

    if len(group.attrs):
        target = out if not main_done else out.with_name(f"{out.stem}.attributes.csv")
        _attribute_rows(target, group.attrs)
        written.append(target)
        main_done = True
    if not written:
        subgroups = [k for k, v in group.items() if isinstance(v, h5py.Group)]
        raise KeyError(f"group {group_path} holds no datasets or attributes"
                       + (f"; its subgroups are: {', '.join(subgroups)}" if subgroups else ""))
    return written


def export_all(h5: h5py.File, out_dir: Path) -> list[Path]:
    """Export every group that holds datasets or attributes to out_dir/GROUP.csv (slashes as dots)."""
    groups = ["/"]
    h5.visititems(lambda n, o: groups.append("/" + n) if isinstance(o, h5py.Group) else None)
    written = []
    for g in groups:
        grp = h5[g]
        if not len(grp.attrs) and not any(isinstance(v, h5py.Dataset) for v in grp.values()):
            continue
        stem = "root" if g == "/" else g.strip("/").replace("/", ".")
        written += export_group(h5, g, out_dir / f"{stem}.csv")
    return written


def tidy_rows(h5: h5py.File, groups=None):
    """Long ("tidy") rows (time [s], segment, quantity, value, unit) of every time series in the file.

    `segment` is the segment name for /segments/NAME/..., `body` for /body, `environment` for /environment
    (else the group path). `quantity` is the dataset path inside that group with slashes as dots
    (`heat_flow.convection`), with the cell of a 2-D or 3-D dataset in brackets: `surface_temperature[z=3]`,
    `temperature[z=3,r=5]` (0-based axial and radial cells). `groups`: only datasets under these paths.
    """
    time = h5["time"][()]
    nt = len(time)
    found = []
    h5.visititems(lambda n, o: found.append(n) if isinstance(o, h5py.Dataset) else None)
    prefixes = ["/" + g.strip("/") for g in groups] if groups else None
    for name in sorted(found, key=lambda n: (n.split("/")[0] != "body", _column_order(n))):
        if name.split("/")[-1] == "time" or (prefixes and not any(("/" + name).startswith(p + "/") or p == "/" for p in prefixes)):
            continue
        ds = h5[name]
        if not _is_time_series("/", name, ds, nt):
            continue
        parts = name.split("/")
        if parts[0] == "segments" and len(parts) >= 3:
            owner, rel = parts[1], parts[2:]
        elif parts[0] in ("body", "environment") and len(parts) >= 2:
            owner, rel = parts[0], parts[1:]
        else:
            owner, rel = "/".join(parts[:-1]) or "/", parts[-1:]
        quantity = ".".join(rel)
        units = units_of(ds)
        values = ds[()]
        flat = values.reshape(nt, -1)
        if values.ndim == 1:
            labels = [quantity]
        else:
            dims = ("z", "r") if parts[0] == "segments" and values.ndim <= 3 else ("i", "j", "k", "l")
            labels = [f"{quantity}[{','.join(f'{d}={i}' for d, i in zip(dims, idx))}]"
                      for idx in np.ndindex(*values.shape[1:])]
        for j, lab in enumerate(labels):
            column = flat[:, j]
            for k in range(nt):
                yield time[k], owner, lab, column[k], units


def export_tidy(h5: h5py.File, out: Path, groups=None) -> list[Path]:
    """Write tidy_rows() to `out` with the header time,segment,quantity,value,unit; return [out]."""
    if "time" not in h5:
        raise KeyError("dataset /time missing; not a thermorph results file")
    out.parent.mkdir(parents=True, exist_ok=True)
    with open(out, "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh, lineterminator="\n")
        writer.writerow(["time", "segment", "quantity", "value", "unit"])
        for t, owner, quantity, value, units in tidy_rows(h5, groups):
            writer.writerow([cell_text(t), owner, quantity, cell_text(value), units])
    return [out]


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(prog="thermorph-export", description="Export groups of a thermorph results file to CSV (full precision).")
    ap.add_argument("result", help="results file (HDF5) written by thermorph")
    ap.add_argument("group", nargs="?", help="group to export, e.g. body/heat_flow or segments/left_ear")
    ap.add_argument("--out", help="CSV file for GROUP")
    ap.add_argument("--all", metavar="DIR", help="export every group to DIR/GROUP.csv instead")
    ap.add_argument("--recursive", action="store_true", help="include datasets in subgroups of GROUP")
    ap.add_argument("--tidy", metavar="FILE", help="long form instead: one row per time, segment and quantity "
                    "(columns time [s], segment, quantity, value, unit) of every time series, or of GROUP's")
    args = ap.parse_intermixed_args(argv)
    if args.tidy and (args.all or args.out):
        ap.error("--tidy FILE.csv replaces --out and --all")
    if args.all and (args.group or args.out):
        ap.error("give either GROUP --out FILE.csv or --all DIR, not both")
    if not args.all and not args.tidy and not (args.group and args.out):
        ap.error("give GROUP --out FILE.csv, --all DIR, or --tidy FILE.csv [GROUP]")
    try:
        with h5py.File(args.result, "r") as h5:
            if "time" not in h5:
                raise KeyError("dataset /time missing; not a thermorph results file")
            if args.tidy:
                if args.group and "/" + args.group.strip("/") not in h5 and args.group.strip("/"):
                    raise KeyError(f"no group /{args.group.strip('/')}")
                written = export_tidy(h5, Path(args.tidy), [args.group] if args.group else None)
            else:
                written = (export_all(h5, Path(args.all)) if args.all
                           else export_group(h5, args.group, Path(args.out), args.recursive))
    except (OSError, KeyError) as err:
        msg = err.args[0] if isinstance(err, KeyError) and err.args else err
        print(f"export_csv: error: {args.result}: {msg}", file=sys.stderr)
        return 2
    for path in written:
        print(path)
    return 0


if __name__ == "__main__":
    sys.exit(main())
