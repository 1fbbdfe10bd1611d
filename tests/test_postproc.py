#!/usr/bin/python3
"""Test of postproc/: figures and CSV export on synthetic results files.

    /usr/bin/python3 tests/test_postproc.py [PYTHON]

Writes sample files with postproc/make_sample.py into a temporary directory,
runs figures.py and export_csv.py on them, and checks that the outputs exist,
are well-formed, and that every number in the CSV export equals the HDF5
dataset bit for bit. Exits 1 on any failure.
"""

import csv
import struct
import subprocess
import sys
import tempfile
import xml.etree.ElementTree as ET
from pathlib import Path

import h5py
import numpy as np

ROOT = Path(__file__).resolve().parent.parent
POSTPROC = ROOT / "postproc"
PYTHON = sys.argv[1] if len(sys.argv) > 1 else sys.executable
sys.path.insert(0, str(POSTPROC))
import thermorph_results as tr  # noqa: E402

FAILURES = []


def check(condition: bool, what: str):
    """Record a failed check (and print it) without stopping the run."""
    if not condition:
        FAILURES.append(what)
        print(f"FAIL: {what}")


def run(script: str, *args, expect: int = 0) -> subprocess.CompletedProcess:
    """Run a postproc script; check its exit code."""
    proc = subprocess.run([PYTHON, str(POSTPROC / script), *map(str, args)], capture_output=True, text=True)
    check(proc.returncode == expect,
          f"{script} {' '.join(map(str, args))}: exit {proc.returncode}, expected {expect}\n{proc.stderr}")
    return proc


def listed_files(proc) -> list[Path]:
    """Files printed by a script, one per line."""
    return [Path(line) for line in proc.stdout.splitlines() if line.strip()]


def png_dpi(path: Path) -> float | None:
    """Horizontal resolution from the PNG pHYs chunk [dots per inch] (PNG spec, W3C 2003, §11.3.5.3)."""
    data = path.read_bytes()
    pos = 8
    while pos < len(data):
        length, kind = struct.unpack(">I4s", data[pos:pos + 8])
        if kind == b"pHYs":
            ppu_x, _, unit = struct.unpack(">IIB", data[pos + 8:pos + 17])
            return ppu_x * 0.0254 if unit == 1 else None
        pos += 12 + length
    return None


def svg_text(path: Path) -> str:
    """All text content of an SVG (text is kept as text: svg.fonttype none)."""
    return " ".join(t for t in ET.parse(path).getroot().itertext())


# ---- reader helpers against exact geometry and definitions --------------------------------
def check_reader_helpers():
    # Mean of a linear ramp over [t0, t1] is its value at the midpoint (exact calculus; the
    # trapezoidal rule is exact for linear functions). Uneven sampling on purpose.
    t = np.array([0.0, 10.0, 35.0, 70.0, 100.0])
    y = 3.0 + 0.25 * t
    mean = tr.time_average(t, y, 12.5, 80.0)
    check(abs(mean - (3.0 + 0.25 * 46.25)) < 1e-12, f"time_average of a ramp: {mean}")
    # Cell volumes from centres: uniform cells of a cylinder are annuli, area ∝ (i+1)² − i²;
    # of a sphere, shells ∝ (i+1)³ − i³ (exact geometry, common practice, no source).
    centres = (np.arange(5) + 0.5) * 0.002
    for shape, k in (("cylinder", 2), ("sphere", 3), ("plate", 1)):
        expected = np.array([(i + 1) ** k - i ** k for i in range(5)], float) / 5 ** k
        got = tr.radial_cell_weights(centres, shape)
        check(np.allclose(got, expected, rtol=0, atol=1e-14), f"radial weights {shape}: {got} vs {expected}")
    # Non-uniform cells (two layers) whose centres are midpoints: faces recovered exactly.
    faces = np.array([0.0, 0.003, 0.006, 0.007, 0.008])
    got = tr.faces_from_centres(0.5 * (faces[1:] + faces[:-1]))
    check(np.allclose(got, faces, rtol=0, atol=1e-15), f"faces from centres: {got}")
    # 0 degC = 273.15 K (SI Brochure, 9th ed., 2019, §2.3.1).
    check(tr.ZERO_CELSIUS_IN_KELVIN == 273.15, "Celsius offset")
    # Mass strings: 1 lb = 0.45359237 kg exactly (international yard and pound agreement, 1959).
    for text, kg in (("12 kg", 12.0), ("450 g", 0.45), (3, 3.0), ("10 lb", 4.5359237)):
        got = tr.parse_mass(text)
        check(got is not None and abs(got - kg) < 1e-12, f"parse_mass({text!r}) = {got}, expected {kg}")


def check_mean_tissue_excludes_coat(sample: Path, tmp: Path):
    """Uniform 30 degC tissue under a 10 degC coat: the mean tissue temperature must be 30 degC."""
    copy = tmp / "uniform.h5"
    copy.write_bytes(sample.read_bytes())
    with h5py.File(copy, "r+") as f:
        layer = f["segments/left_ear/layer"][()]
        coat = layer.max()  # coat last (results contract)
        temp = f["segments/left_ear/temperature"]
        field = np.where(layer == coat, 10.0, 30.0)[None, None, :] * np.ones(temp.shape)
        temp[...] = field
    with tr.Results(copy) as res:
        seg = res.segments(["left_ear"])[0]
        got = seg.mean_tissue_temperature()
        check(np.allclose(got, 30.0, rtol=0, atol=1e-12), f"mean tissue temperature with coat: {got[:3]}")
    # With a stored `volume` [nz, nr] (thermorph writes one) the mean uses it: all volume in the
    # cell z=2, r=1 gives that cell's temperature exactly (definition of a volume-weighted mean).
    with h5py.File(copy, "r+") as f:
        temp = f["segments/left_ear/temperature"]
        nz, nr = temp.shape[1:]
        temp[:, 2, 1] = 33.25
        vol = np.zeros((nz, nr))
        vol[2, 1] = 1e-6
        f.create_dataset("segments/left_ear/volume", data=vol).attrs["units"] = "m3"
    with tr.Results(copy) as res:
        got = res.segments(["left_ear"])[0].mean_tissue_temperature()
        check(np.allclose(got, 33.25, rtol=0, atol=1e-12), f"mean tissue temperature from volume: {got[:3]}")


# ---- figures ------------------------------------------------------------------------------
def check_figures(sample: Path, out: Path, extra=(), expect_maps=("left_ear", "tail"),
                  incomplete=False, events=True, per_kg=True):
    proc = run("figures.py", sample, "--out", out, *extra)
    files = listed_files(proc)
    stems = {"temperatures", "budget"} | {f"maps_{s}" for s in expect_maps}
    expected = {out / f"{s}.{ext}" for s in stems for ext in ("pdf", "svg", "png")}
    check(set(files) == expected, f"figures {sample.name} {extra}: wrote {sorted(map(str, files))}")
    for path in files:
        check(path.is_file() and path.stat().st_size > 1000, f"{path} missing or tiny")
    for path in (p for p in files if p.suffix == ".pdf"):
        check(path.read_bytes()[:5] == b"%PDF-", f"{path} is not a PDF")
    for path in (p for p in files if p.suffix == ".png"):
        dpi = png_dpi(path)
        check(dpi is not None and abs(dpi - 150.0) < 0.1, f"{path}: {dpi} dpi, expected 150")
    for path in (p for p in files if p.suffix == ".svg"):
        text = svg_text(path)
        check(("INCOMPLETE RUN" in text) == incomplete, f"{path}: INCOMPLETE RUN marking wrong")
        if path.stem == "budget":
            check("Model estimates for research; not veterinary or medical advice." in text,
                  f"{path}: caution footer missing")
            check(("W/kg" in text) == per_kg, f"{path}: body heat flow unit W/kg expected {per_kg}")
        if path.stem == "temperatures":
            check(("cold air" in text) == events, f"{path}: event label 'cold air' expected {events}")
    return files


# ---- CSV export ---------------------------------------------------------------------------
def read_csv(path: Path):
    """Header and columns (as lists of strings) of a CSV file."""
    with open(path, newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    return rows[0], [list(col) for col in zip(*rows[1:])] if len(rows) > 1 else [[] for _ in rows[0]]


def same(cells: list[str], values: np.ndarray, what: str):
    """CSV cells equal the stored values exactly (floats bit for bit, NaN = NaN)."""
    values = np.asarray(values).ravel()
    if len(cells) != len(values):
        check(False, f"{what}: {len(cells)} rows, expected {len(values)}")
        return
    if values.dtype.kind == "f":
        got = np.array([float(c) for c in cells], dtype=np.float64)
        exp = values.astype(np.float64)
        ok = np.array_equal(got.view(np.uint64), exp.view(np.uint64)) or \
            np.array_equal(got, exp, equal_nan=True)
        check(ok, f"{what}: values differ (max |diff| {np.nanmax(np.abs(got - exp)) if len(got) else 0})")
    elif values.dtype.kind in "iu":
        check([int(c) for c in cells] == values.tolist(), f"{what}: integers differ")
    else:
        exp = [v.decode() if isinstance(v, bytes) else str(v) for v in values.tolist()]
        check(cells == exp, f"{what}: strings differ: {cells} vs {exp}")


def is_static(path: str) -> bool:
    """Datasets not indexed by time (results contract): segment coordinates and /events."""
    parts = path.strip("/").split("/")
    return parts[0] == "events" or (len(parts) == 3 and parts[0] == "segments"
                                    and parts[2] in ("radius", "axial", "layer", "volume"))


def check_export_all(sample: Path, out: Path):
    proc = run("export_csv.py", sample, "--all", out)
    files = listed_files(proc)
    for path in files:
        check(path.is_file() and path.stat().st_size > 0, f"{path} missing or empty")
    covered = 0
    with h5py.File(sample, "r") as f:
        nt = len(f["time"])
        datasets = []
        f.visititems(lambda n, o: datasets.append(n) if isinstance(o, h5py.Dataset) else None)
        for name in datasets:
            ds = f[name]
            group, base = (name.rsplit("/", 1) if "/" in name else ("", name))
            stem = group.replace("/", ".") or "root"
            units = ds.attrs["units"]
            units = units.decode() if isinstance(units, bytes) else str(units)
            if name == "time":
                head, cols = read_csv(out / "root.csv")
                check(head[0] == "time [s]", f"root.csv header {head}")
                same(cols[0], ds[()], "/time")
                covered += 1
                continue
            if group == "events":
                head, cols = read_csv(out / "events.csv")
            elif is_static(name):
                head, cols = read_csv(out / f"{stem}.{base}.csv")
            else:
                head, cols = read_csv(out / f"{stem}.csv")
                check(head[0] == "time [s]", f"{stem}.csv: first column {head[0]!r}, expected 'time [s]'")
                same(cols[0], f["time"][()], f"{stem}.csv time column")
                check(ds.shape[0] == nt, f"{name}: time series of length {ds.shape[0]} != {nt}")
            values = ds[()]
            if values.ndim == 2 and is_static(name):  # e.g. volume [nz, nr]: rows z, columns r
                for j in range(values.shape[1]):
                    col = f"{base}[r={j}] [{units}]"
                    check(col in head, f"{name}: column {col!r} missing")
                    if col in head:
                        same(cols[head.index(col)], values[:, j], f"{name}[:, {j}]")
                covered += 1
                continue
            if values.ndim <= 1 or is_static(name):
                col = f"{base} [{units}]"
                check(col in head, f"{name}: column {col!r} not in {head[:6]}...")
                if col in head:
                    same(cols[head.index(col)], values, name)
                    covered += 1
                continue
            # Flattened: one column per cell, e.g. `temperature[z=3,r=5] [degC]` (0-based cells).
            dims = ("z", "r") if group.startswith("segments/") else ("i", "j", "k")
            for idx in np.ndindex(*values.shape[1:]):
                col = f"{base}[{','.join(f'{d}={i}' for d, i in zip(dims, idx))}] [{units}]"
                if col not in head:
                    check(False, f"{name}: column {col!r} missing")
                    break
                same(cols[head.index(col)], values[(slice(None),) + idx], f"{name}{list(idx)}")
            else:
                covered += 1
        check(covered == len(datasets), f"CSV export covers {covered} of {len(datasets)} datasets")
        # Solver counters as attribute rows.
        head, cols = read_csv(out / "solver.csv")
        rows = dict(zip(cols[0], cols[1])) if cols else {}
        for key, value in f["solver"].attrs.items():
            if isinstance(value, (bytes, str)):
                ok = key in rows and rows[key] == (value.decode() if isinstance(value, bytes) else value)
            else:
                ok = key in rows and float(rows[key]) == float(value)
            check(ok, f"solver attribute {key}")
    return covered


def check_export_group(sample: Path, out: Path):
    """Single group with subgroups, and the spec's column name for a 3-D dataset."""
    csv_path = out / "ear.csv"
    files = listed_files(run("export_csv.py", sample, "segments/left_ear", "--out", csv_path, "--recursive"))
    check(csv_path in files, f"export of segments/left_ear wrote {files}")
    head, cols = read_csv(csv_path)
    with h5py.File(sample, "r") as f:
        temp = f["segments/left_ear/temperature"][()]
        col = "temperature[z=3,r=5] [degC]"
        check(col in head, f"{col!r} missing from the left_ear export")
        if col in head:
            same(cols[head.index(col)], temp[:, 3, 5], col)
        col = "heat_flow/convection [W]"
        check(col in head, f"{col!r} missing from the recursive export")
        if col in head:
            same(cols[head.index(col)], f["segments/left_ear/heat_flow/convection"][()], col)
        head, cols = read_csv(out / "ear.layer.csv")
        names = [n.decode() if isinstance(n, bytes) else str(n)
                 for n in f["segments/left_ear/layer"].attrs["layer_names"]]
        check(cols[-1] == [names[i] for i in f["segments/left_ear/layer"][()]], "layer_name column")


def main() -> int:
    check_reader_helpers()
    with tempfile.TemporaryDirectory(prefix="thermorph_postproc_") as tmpname:
        tmp = Path(tmpname)
        full, minimal, steady = tmp / "full.h5", tmp / "minimal.h5", tmp / "steady.h5"
        run("make_sample.py", full)
        run("make_sample.py", minimal, "--minimal", "--incomplete")
        run("make_sample.py", steady, "--steady")
        check_mean_tissue_excludes_coat(full, tmp)

        check_figures(full, tmp / "fig_full")
        check_figures(full, tmp / "fig_window", extra=("--window", "3600,7200", "--times", "0,5400",
                                                       "--segments", "tail,trunk"), expect_maps=("tail",))
        check_figures(minimal, tmp / "fig_min", extra=("--units", "si"), incomplete=True, events=False,
                      per_kg=False)
        check_figures(steady, tmp / "fig_steady", events=False)
        only = listed_files(run("figures.py", full, "--out", tmp / "only", "--only", "budget"))
        check(sorted(p.name for p in only) == ["budget.pdf", "budget.png", "budget.svg"], f"--only budget: {only}")
        # Errors: wording is part of the interface.
        proc = run("figures.py", full, "--out", tmp / "bad", "--segments", "tial", expect=2)
        check("no segment tial" in proc.stderr and "left_ear" in proc.stderr, f"bad segment message: {proc.stderr}")
        run("figures.py", tmp / "missing.h5", "--out", tmp / "bad", expect=2)
        run("figures.py", full, "--only", "histogram", expect=2)

        for sample in (full, minimal, steady):
            check_export_all(sample, tmp / f"csv_{sample.stem}")
        check_export_group(full, tmp / "csv_group")
        proc = run("export_csv.py", full, "no_such_group", "--out", tmp / "x.csv", expect=2)
        check("no group /no_such_group" in proc.stderr, f"bad group message: {proc.stderr}")

    if FAILURES:
        print(f"test_postproc: {len(FAILURES)} check(s) failed")
        return 1
    print("test_postproc: all checks passed")
    return 0


if __name__ == "__main__":
    sys.exit(main())
