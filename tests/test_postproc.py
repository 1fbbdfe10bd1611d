#!/usr/bin/python3
"""Test of postproc/: figures and CSV export on synthetic results files.

    /usr/bin/python3 tests/test_postproc.py [PYTHON [THERMORPH]]

Writes sample files with postproc/make_sample.py into a temporary directory,
runs figures.py and export_csv.py on them, and checks that the outputs exist,
are well-formed, and that every number in the CSV export equals the HDF5
dataset bit for bit. Then runs thermorph (THERMORPH, else $THERMORPH_EXE,
else ../thermorph from the working directory as under ctest, else
build/thermorph) on small real cases and checks that the numbers each figure
plots (its NAME.data.csv, read from the drawn artists) equal values computed
here from the CSV export of the same file, and that events are shaded.
Exits 1 on any failure.
"""

import contextlib
import csv
import importlib
import io
import os
import struct
import subprocess
import sys
import tempfile
import tomllib
import xml.etree.ElementTree as ET
from pathlib import Path

import h5py
import numpy as np

ROOT = Path(__file__).resolve().parent.parent
POSTPROC = ROOT / "postproc"
PYTHON = sys.argv[1] if len(sys.argv) > 1 else sys.executable


def find_thermorph() -> str:
    """The thermorph executable: argument 2, $THERMORPH_EXE, ../thermorph (ctest's cwd is build/tests), build/."""
    candidates = ([sys.argv[2]] if len(sys.argv) > 2 else []) + \
        ([os.environ["THERMORPH_EXE"]] if os.environ.get("THERMORPH_EXE") else []) + \
        [str(Path.cwd().parent / "thermorph"), str(ROOT / "build" / "thermorph")]
    for c in candidates:
        if Path(c).is_file() and os.access(c, os.X_OK):
            return c
    return candidates[0]


THERMORPH = find_thermorph()
sys.path.insert(0, str(POSTPROC))
import thermorph_results as tr  # noqa: E402
from thermorph_post import CAUTION  # noqa: E402

FAILURES = []


def check(condition: bool, what: str):
    """Record a failed check (and print it) without stopping the run."""
    if not condition:
        FAILURES.append(what)
        print(f"FAIL: {what}")


def run(script: str, *args, expect: int = 0, subprocess_run: bool = False) -> subprocess.CompletedProcess:
    """Run a postproc script's main(argv) in this process (stdout and stderr captured; saves starting
    Python and matplotlib each time), or as a separate process with subprocess_run; check its exit code."""
    argv = [str(a) for a in args]
    if subprocess_run:
        proc = subprocess.run([PYTHON, str(POSTPROC / script), *argv], capture_output=True, text=True)
    else:
        module = importlib.import_module(Path(script).stem)
        out, err = io.StringIO(), io.StringIO()
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            try:
                code = module.main(argv)
            except SystemExit as exit_:   # argparse errors
                code = exit_.code
        proc = subprocess.CompletedProcess([script, *argv], code, out.getvalue(), err.getvalue())
    check(proc.returncode == expect,
          f"{script} {' '.join(argv)}: exit {proc.returncode}, expected {expect}\n{proc.stderr}")
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
def check_figures(sample: Path, out: Path, extra=(), expect_maps=("left_ear", "tail", "trunk"),
                  incomplete=False, events=True, per_kg=True, formats=("pdf", "svg", "png"), forcing=True):
    proc = run("figures.py", sample, "--out", out, "--formats", ",".join(formats), *extra)
    files = listed_files(proc)
    stems = {"temperatures", "budget"} | {f"maps_{s}" for s in expect_maps} | ({"forcing"} if forcing else set())
    expected = {out / f"{s}.{ext}" for s in stems for ext in formats + ("data.csv",)}
    check(set(files) == expected, f"figures {sample.name} {extra}: wrote {sorted(map(str, files))}")
    for path in files:
        check(path.is_file() and path.stat().st_size > (0 if path.name.endswith(".csv") else 1000),
              f"{path} missing or tiny")
    for path in (p for p in files if p.name.endswith(".data.csv")):
        head, cols = read_csv(path)
        check(head[:4] == ["panel", "series", "x", "y"] and len(cols[0]) > 0, f"{path}: source data {head}")
    for path in (p for p in files if p.suffix == ".pdf"):
        check(path.read_bytes()[:5] == b"%PDF-", f"{path} is not a PDF")
    for path in (p for p in files if p.suffix == ".png"):
        dpi = png_dpi(path)
        check(dpi is not None and abs(dpi - 300.0) < 0.1, f"{path}: {dpi} dpi, expected 300 (the default)")
    for path in (p for p in files if p.suffix == ".svg"):
        text = " ".join(svg_text(path).split())
        check(("INCOMPLETE RUN" in text) == incomplete, f"{path}: INCOMPLETE RUN marking wrong")
        # The caution footer is on every figure by default (thermorph_post.CAUTION, wrapped over lines).
        check(CAUTION in text, f"{path}: caution footer missing")
        if path.stem == "budget":
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


# ---- real thermorph results: plotted numbers against the CSV export -------------------------
LENGTH_UNITS = {"mm": 1e-3, "cm": 1e-2, "m": 1.0}   # SI prefixes (SI Brochure, 9th ed., 2019, Table 7)
TIME_UNITS = {"min": 60.0, "h": 3600.0}
ENVIRONMENT_CHANNELS = ("convection", "radiation", "solar", "evaporation", "substrate", "respiration")
EVENTS_TOML = """
[[events]]
at = "2 min"
span = "3 min"
label = "cold snap"
environment = { temperature = "-15 degC" }

[[events]]
at = "6 min"
span = "2 min"
label = "thaw"
environment = { temperature = "0 degC" }
"""


def thermorph_run(case: Path, out: Path, *settings) -> bool:
    """Run thermorph on a case with --set overrides; check it succeeded."""
    args = [THERMORPH, "run", str(case), "-o", str(out), "--quiet"]
    for setting in settings:
        args += ["--set", setting]
    try:
        proc = subprocess.run(args, capture_output=True, text=True)
    except OSError as err:
        check(False, f"cannot run thermorph ({THERMORPH}): {err}; pass its path as the second argument")
        return False
    check(proc.returncode == 0 and out.is_file(), f"thermorph run {case.name} failed: {proc.stderr[-1500:]}")
    return out.is_file()


def source_data(path: Path) -> dict:
    """A figure's NAME.data.csv as {(panel, series): [row dicts]}."""
    data = {}
    with open(path, newline="", encoding="utf-8") as fh:
        for row in csv.DictReader(fh):
            data.setdefault((row["panel"], row["series"]), []).append(row)
    return data


def columns(path: Path) -> dict:
    """An exported CSV as {header: float array} (text columns kept as lists of str)."""
    head, cols = read_csv(path)
    out = {}
    for h, col in zip(head, cols):
        try:
            out[h] = np.array([float(v) for v in col])
        except ValueError:
            out[h] = col
    return out


def axis_unit(label: str) -> str:
    """The unit in the last parentheses of an axis label, e.g. 'Time (min)' -> 'min'."""
    return label.rsplit("(", 1)[-1].rstrip(")") if "(" in label else ""


def xy(rows, field="y"):
    """x and another field of source-data rows as float arrays."""
    return np.array([float(r["x"]) for r in rows]), np.array([float(r[field]) for r in rows])


def same_numbers(got, expected, what: str, rtol: float = 0.0, atol: float = 0.0):
    """Arrays of equal length and equal values (exactly by default)."""
    got, expected = np.asarray(got, float), np.asarray(expected, float)
    if got.shape != expected.shape:
        check(False, f"{what}: {got.shape} values plotted, expected {expected.shape}")
        return
    ok = np.allclose(got, expected, rtol=rtol, atol=atol, equal_nan=True) if (rtol or atol) else \
        np.array_equal(got, expected, equal_nan=True)
    check(ok, f"{what}: plotted values differ (max |diff| {np.nanmax(np.abs(got - expected)):.3g})")


def energy_mean(t, e):
    """Mean heat flow over the run from a cumulative energy E [J]: (E(end) − E(start)) / duration [W]."""
    return float((e[-1] - e[0]) / (t[-1] - t[0]))


def trapezoid_mean(t, y):
    """Mean over the run by the trapezoidal rule on the outputs [units of y]."""
    return float(np.sum(0.5 * (y[1:] + y[:-1]) * np.diff(t)) / (t[-1] - t[0]))


class Exported:
    """The CSV export (--all) of a results file, with the arrays a figure is built from."""

    def __init__(self, h5: Path, out: Path):
        run("export_csv.py", h5, "--all", out)
        self.dir = out
        self.time = columns(out / "root.csv")["time [s]"]
        attrs = dict(zip(*read_csv(out / "root.attributes.csv")[1]))
        self.case = tomllib.loads(attrs["case"])
        body_attrs = dict(zip(*read_csv(out / "body.attributes.csv")[1]))
        self.mass = float(body_attrs["mass"])
        self.body = columns(out / "body.csv")
        self.body_flow = columns(out / "body.heat_flow.csv")
        self.body_energy = {h.split(" [")[0]: v for h, v in columns(out / "body.cumulative_heat.csv").items()
                            if h != "time [s]"}
        self.environment = columns(out / "environment.csv")

    def segment(self, name: str) -> dict:
        """Temperature [nt, nz, nr], surface [nt, nz], volume [nz, nr], coordinates, layers and flows."""
        stem = self.dir / f"segments.{name}"
        seg = columns(stem.with_name(stem.name + ".csv"))
        radius = columns(stem.with_name(stem.name + ".radius.csv"))["radius [m]"]
        axial = columns(stem.with_name(stem.name + ".axial.csv"))["axial [m]"]
        layers = columns(stem.with_name(stem.name + ".layer.csv"))["layer_name"]
        vol = columns(stem.with_name(stem.name + ".volume.csv"))
        nz, nr = len(axial), len(radius)
        volume = np.array([[vol[f"volume[r={r}] [m3]"][z] for r in range(nr)] for z in range(nz)])
        temp = np.stack([np.stack([seg[f"temperature[z={z},r={r}] [degC]"] for r in range(nr)], axis=1)
                         for z in range(nz)], axis=1)
        surface = np.stack([seg[f"surface_temperature[z={z}] [degC]"] for z in range(nz)], axis=1)
        flows = {h.split(" [")[0]: v for h, v in columns(stem.with_name(stem.name + ".heat_flow.csv")).items()
                 if h != "time [s]"}
        energy = {h.split(" [")[0]: v for h, v in
                  columns(stem.with_name(stem.name + ".cumulative_heat.csv")).items() if h != "time [s]"}
        entry = next(e for e in self.case["segments"] if e["name"] == name)
        return dict(temp=temp, surface=surface, volume=volume, radius=radius, axial=axial, layers=layers,
                    flows=flows, energy=energy, coat=entry.get("coat", {}).get("material"))

    def copies(self, name: str) -> int:
        """Copies of a segment: its count times its parent's copies (counts multiply down the tree)."""
        entries = {e["name"]: e for e in self.case["segments"]}
        n = 1
        while name:
            n *= int(entries[name].get("count", 1))
            name = entries[name].get("parent", "")
        return n


def check_real_limb(tmp: Path):
    """Every figure on a 10-minute forelimb run; the plotted numbers against the CSV export."""
    h5 = tmp / "limb.h5"
    if not thermorph_run(ROOT / "cases" / "limb_cooling.toml", h5, 'run.duration="10 min"'):
        return
    figs = tmp / "fig_limb"
    files = listed_files(run("figures.py", h5, "--out", figs, subprocess_run=True))
    expected = {figs / f"{s}.{e}" for s in ("temperatures", "budget", "maps_forelimb", "forcing")
                for e in ("pdf", "svg", "png", "data.csv")}
    check(set(files) == expected, f"limb figures: wrote {sorted(map(str, files))}")
    for path in files:
        check(path.is_file() and path.stat().st_size > (1000 if not path.name.endswith(".csv") else 0),
              f"{path} missing or empty")
    ex = Exported(h5, tmp / "csv_limb")
    seg = ex.segment("forelimb")
    t = ex.time

    # Temperatures: time in minutes (a 10 min run), temperatures in degC as stored.
    data = source_data(figs / "temperatures.data.csv")
    x, y = xy(data[("body temperatures", "core")])
    same_numbers(x * TIME_UNITS[axis_unit(data[("body temperatures", "core")][0]["x_label"])], t,
                 "core: time axis", rtol=1e-14)
    same_numbers(y, ex.body["core_temperature [degC]"], "core temperature")
    # Mean tissue temperature: volume-weighted over the cells not in the coat (definition).
    tissue = np.array([name != seg["coat"] for name in seg["layers"]])
    w = seg["volume"] * tissue[None, :]
    expected = np.einsum("tzr,zr->t", seg["temp"], w) / w.sum()
    same_numbers(xy(data[("segment mean tissue temperatures", "forelimb")])[1], expected,
                 "forelimb mean tissue temperature", rtol=1e-13)
    # Mean surface temperature: equal axial cells here, so the plain mean over the cells.
    check(np.allclose(np.diff(seg["axial"]), np.diff(seg["axial"])[0], rtol=1e-12), "limb: uniform axial cells")
    same_numbers(xy(data[("segment mean surface temperatures", "forelimb")])[1], seg["surface"].mean(axis=1),
                 "forelimb mean surface temperature", rtol=1e-13)
    same_numbers(xy(data[("segment mean surface temperatures", "air")])[1],
                 ex.environment["temperature [degC]"], "air temperature")

    # Budget: bars are the segment's mean flows over the run from its cumulative energies (integrated by the solver;
    # the trapezoid on the 1-min outputs missed the start's fast transient: convection 0.21 W off); whole body in W/kg.
    data = source_data(figs / "budget.data.csv")
    drawn = {s for (p, s) in data if p == "segment budget"}
    nonzero = {c for c, v in seg["flows"].items() if c != "storage" and np.any(v != 0)}
    check(drawn == nonzero | {"sum of channels", "storage (rate of heat stored)"},
          f"budget bars: drawn {sorted(drawn)}, non-zero channels {sorted(nonzero)}")
    total = 0.0
    for c in sorted(nonzero):
        rows = data.get(("segment budget", c), [])
        check([r["x"] for r in rows] == ["forelimb"], f"budget bar {c}: categories {[r['x'] for r in rows]}")
        mean = energy_mean(t, seg["energy"][c])
        total += mean
        same_numbers([float(r["y"]) for r in rows], [mean], f"budget bar {c}", rtol=1e-12, atol=1e-15)
    same_numbers([float(r["y"]) for r in data[("segment budget", "sum of channels")]], [total],
                 "budget: sum of channels", rtol=1e-12, atol=1e-15)
    same_numbers([float(r["y"]) for r in data[("segment budget", "storage (rate of heat stored)")]],
                 [energy_mean(t, seg["energy"]["storage"])], "budget: storage bar", rtol=1e-12, atol=1e-15)
    # Energy conservation of the segment over the run: the sum of the channels equals the storage bar.
    same_numbers([total], [energy_mean(t, seg["energy"]["storage"])], "budget: channels = storage", rtol=1e-8,
                 atol=1e-9)
    for c, flow in ex.body_flow.items():
        c = c.split(" [")[0]
        if c == "time" or not np.any(flow != 0):
            check(("whole-body heat flows", c) not in data, f"zero channel {c} drawn")
            continue
        rows = data.get(("whole-body heat flows", c))
        check(rows is not None, f"whole-body channel {c} not drawn")
        if rows:
            x, y = xy(rows)
            check(rows[0]["y_label"].endswith("(W/kg)"), f"body flow unit {rows[0]['y_label']}")
            same_numbers(x * 60.0, t, f"body {c}: time axis", rtol=1e-14)
            same_numbers(y * ex.mass, flow, f"body {c} [W/kg x mass]", rtol=1e-13)

    # Maps: every cell of each map equals the stored temperature at that time; profiles at mid-length.
    data = source_data(figs / "maps_forelimb.data.csv")
    maps = {p: rows for (p, s), rows in data.items() if p.startswith("map at t = ")}
    check(len(maps) == 3, f"maps: {len(maps)} times drawn, expected first, middle and last")
    nz, nr = len(seg["axial"]), len(seg["radius"])
    for panel, rows in maps.items():
        i = int(np.argmin(np.abs(t - float(panel.split("=")[1].split()[0]))))
        ux, uy = LENGTH_UNITS[axis_unit(rows[0]["x_label"])], LENGTH_UNITS[axis_unit(rows[0]["y_label"])]
        cells = set()
        for r in rows:
            z = int(np.argmin(np.abs(float(r["x"]) * ux - seg["axial"])))
            k = int(np.argmin(np.abs(float(r["y"]) * uy - seg["radius"])))
            cells.add((z, k))
            if float(r["value"]) != seg["temp"][i, z, k]:
                check(False, f"{panel}: cell z={z}, r={k} plotted {r['value']}, stored {seg['temp'][i, z, k]!r}")
                break
        check(len(cells) == len(rows) == nz * nr, f"{panel}: {len(cells)} distinct cells of {nz * nr}")
    # Twelve equal axial cells: mid-length lies halfway between the centres of cells 5 and 6.
    profiles = {s: rows for (p, s), rows in data.items() if p == "radial profiles at mid-length"}
    check(len(profiles) == 3, f"profiles: {sorted(profiles)}")
    for label, rows in profiles.items():
        i = int(np.argmin(np.abs(t - float(label.split()[2]) * TIME_UNITS[label.split()[3]])))
        x, y = xy(rows)
        same_numbers(x * LENGTH_UNITS[axis_unit(rows[0]["x_label"])], seg["radius"], f"profile {label}: radius",
                     rtol=1e-14)
        same_numbers(y, 0.5 * (seg["temp"][i, 5, :] + seg["temp"][i, 6, :]), f"profile {label}", rtol=1e-13)


def check_real_events(tmp: Path):
    """A tiny case with two labelled events with a span: shaded where /events says, labelled in the SVG."""
    case = tmp / "events.toml"
    case.write_text((ROOT / "cases" / "limb_cooling.toml").read_text() + EVENTS_TOML)
    h5 = tmp / "events.h5"
    if not thermorph_run(case, h5, 'run.duration="10 min"'):
        return
    figs = tmp / "fig_events"
    run("figures.py", h5, "--out", figs, "--only", "temperatures,budget", "--formats", "svg")
    text = svg_text(figs / "temperatures.svg")
    for label in ("cold snap", "thaw"):
        check(label in text, f"event label {label!r} missing from temperatures.svg")
    ex = columns(_export_events(h5, tmp / "events.csv"))
    for stem in ("temperatures", "budget"):
        data = source_data(figs / f"{stem}.data.csv")
        for k, label in enumerate(ex["label"]):
            rows = [r for (p, s), rs in data.items() if s == f"event: {label}" for r in rs]
            check(len(rows) >= 1, f"{stem}: event {label!r} not shaded")
            for r in rows:
                unit = TIME_UNITS[axis_unit(r["x_label"])]
                same_numbers([float(r["x"]) * unit, float(r["value"]) * unit],
                             [ex["start [s]"][k], ex["end [s]"][k]], f"{stem}: shading of {label!r}", rtol=1e-14)


def _export_events(h5: Path, out: Path) -> Path:
    """Export /events to CSV; return its path."""
    run("export_csv.py", h5, "events", "--out", out)
    return out


def check_real_quadruped(tmp: Path):
    """Many segments, a blood pool, shivering and respiration: default top-N selection and the extra bars."""
    h5 = tmp / "quadruped.h5"
    if not thermorph_run(ROOT / "cases" / "quadruped.toml", h5, 'run.duration="20 min"',
                         'run.output_interval="2 min"', 'control.shivering.set_point="37.5 degC"'):
        return
    figs = tmp / "fig_quadruped"
    run("figures.py", h5, "--out", figs, "--only", "temperatures,budget", "--top", "3", "--formats", "png")
    ex = Exported(h5, tmp / "csv_quadruped")
    t = ex.time
    names = [e["name"] for e in ex.case["segments"]]
    segs = {n: ex.segment(n) for n in names}
    copies = {n: ex.copies(n) for n in names}
    # Heat lost to the surroundings: minus the mean of the exchange channels, all copies.
    loss = {n: -copies[n] * sum(trapezoid_mean(t, s["flows"][c]) for c in ENVIRONMENT_CHANNELS if c in s["flows"])
            for n, s in segs.items()}
    top = sorted(names, key=lambda n: -loss[n])[:3]
    rest = [n for n in names if n not in top]
    label = lambda n: n if copies[n] == 1 else f"{n} ×{copies[n]}"  # noqa: E731
    data = source_data(figs / "budget.data.csv")
    cats = [r["x"] for r in data[("segment budget", "sum of channels")]]
    check(cats == [label(n) for n in top] + [f"other segments ({len(rest)})", "blood pool"],
          f"quadruped budget bars {cats}, expected top 3 {top} then the others and the pool")
    for c in ("metabolism", "blood", "shivering", "respiration", "radiation"):
        rows = {r["x"]: float(r["y"]) for r in data.get(("segment budget", c), [])}
        check(bool(rows), f"quadruped: channel {c} not drawn")
        if not rows:
            continue
        for n in top:
            same_numbers([rows[label(n)]], [copies[n] * energy_mean(t, segs[n]["energy"][c])],
                         f"quadruped {label(n)} {c}", rtol=1e-12, atol=1e-15)
        others = sum(copies[n] * energy_mean(t, segs[n]["energy"][c]) for n in rest)
        same_numbers([rows[f"other segments ({len(rest)})"]], [others], f"quadruped others {c}", rtol=1e-12,
                     atol=1e-15)
        # The blood pool is not a segment: the whole body minus all segments.
        pool = energy_mean(t, ex.body_energy[c]) - sum(copies[n] * energy_mean(t, segs[n]["energy"][c]) for n in names)
        same_numbers([rows["blood pool"]], [pool], f"quadruped blood pool {c}", atol=1e-12)
    data = source_data(figs / "temperatures.data.csv")
    drawn = [s for (p, s) in data if p == "segment mean tissue temperatures"]
    check(drawn == top, f"quadruped temperatures: segments {drawn}, expected the top 3 {top}")


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
                                                       "--segments", "tail,trunk"), expect_maps=("tail", "trunk"),
                      formats=("svg",))
        check_figures(minimal, tmp / "fig_min", extra=("--units", "si"), incomplete=True, events=False,
                      per_kg=False, formats=("svg",), forcing=False)
        check_figures(steady, tmp / "fig_steady", events=False, formats=("svg",))
        only = listed_files(run("figures.py", full, "--out", tmp / "only", "--only", "budget", "--formats", "png"))
        check(sorted(p.name for p in only) == ["budget.data.csv", "budget.png"], f"--only budget: {only}")
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

        check_real_limb(tmp)
        check_real_events(tmp)
        check_real_quadruped(tmp)

    if FAILURES:
        print(f"test_postproc: {len(FAILURES)} check(s) failed")
        return 1
    print("test_postproc: all checks passed")
    return 0


if __name__ == "__main__":
    sys.exit(main())
