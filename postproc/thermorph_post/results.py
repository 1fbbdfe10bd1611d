"""Reader for thermorph results files (HDF5) with units kept beside every array.

The layout is the one thermorph writes (main README, "Results (HDF5)"; cases/REFERENCE.md for the case).
Optional parts (body temperatures, arterial/venous temperatures, /environment,
/events, the root attribute `complete`) may be absent; the accessors return
None or empty collections instead of raising.

    with Results("run.h5") as res:
        t, t_units = res.time, res.units("/time")
        for seg in res.segments():
            print(seg.name, seg.mean_tissue_temperature()[-1])
"""

from __future__ import annotations

import bisect
import re
import sys
import tomllib
from dataclasses import dataclass
from pathlib import Path

import h5py
import numpy as np

#: Heat-flow channels in the order of thermorph's budget table (storage last).
CHANNEL_ORDER = ("metabolism", "shivering", "blood", "conduction", "tucking", "convection", "radiation", "solar",
                 "evaporation", "substrate", "respiration", "storage")

#: Channels that exchange heat with the surroundings (losses here are "heat lost to the environment").
ENVIRONMENT_CHANNELS = ("convection", "radiation", "solar", "evaporation", "substrate", "respiration")

#: Values of the case's `medium` that are water (the others, "air", are air).
WATER_MEDIA = ("water", "sea_water")

#: Offset between the Celsius and kelvin scales [K] (SI Brochure, 9th ed., 2019, §2.3.1).
ZERO_CELSIUS_IN_KELVIN = 273.15

TIME_UNITS = {"s": 1.0, "min": 60.0, "h": 3600.0, "d": 86400.0}


def parse_time(text: str) -> float:
    """A time such as '600', '10 min' or '1.5h' [s]; ValueError naming the forms otherwise."""
    match = re.fullmatch(r"\s*([-+]?[0-9.]+(?:[eE][-+]?[0-9]+)?)\s*([a-z]*)\s*", text)
    if not match or (match.group(2) or "s") not in TIME_UNITS:
        raise ValueError(f"bad time {text!r}: expected a number in s, or with a unit "
                         f"({', '.join(TIME_UNITS)}), e.g. 600 or 10min")
    try:
        return float(match.group(1)) * TIME_UNITS[match.group(2) or "s"]
    except ValueError:
        raise ValueError(f"bad time {text!r}: not a number") from None

# Mass units accepted in the case's `[body] mass` string [kg per unit].
# Pound: exact by the 1959 international yard and pound agreement.
_MASS_UNITS = {"kg": 1.0, "g": 1e-3, "mg": 1e-6, "t": 1e3, "lb": 0.45359237}


class ResultsError(Exception):
    """A results file that does not follow the contract (message names the path)."""


def _text(value) -> str:
    """Decode an HDF5 string attribute or element (bytes, str or 0-d array) to str."""
    if isinstance(value, np.ndarray) and value.shape == ():
        value = value[()]
    if isinstance(value, (bytes, np.bytes_)):
        return value.decode("utf-8", errors="replace")
    return str(value)


def is_default_event_label(label: str) -> bool:
    """Whether an event label is the one thermorph writes for an unlabelled event ("event at 3600 s")."""
    return re.fullmatch(r"event at [-+0-9.eE]+ s", label.strip()) is not None


def data_names(group) -> list[str]:
    """Names of the datasets of `group` that are data, not coordinates: each group of a results file holds its
    own copy of the netCDF coordinate `time` (an HDF5 dimension scale), which is not a channel or a variable."""
    return [k for k, v in group.items()
            if isinstance(v, h5py.Dataset) and _text(v.attrs.get("CLASS", b"")) != "DIMENSION_SCALE"]


def ordered_channels(names) -> list[str]:
    """Heat-flow channel names in contract order, unknown names after, alphabetically."""
    known = [c for c in CHANNEL_ORDER if c in names]
    return known + sorted(n for n in names if n not in CHANNEL_ORDER)


def parse_mass(value) -> float | None:
    """Body mass from a case value: a number in kg or a string such as "12 kg" [kg].

    Returns None (with a warning on stderr) when the value cannot be read.
    """
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float)):
        return float(value)
    match = re.fullmatch(r"\s*([-+0-9.eE]+)\s*([A-Za-z]*)\s*", str(value))
    if match:
        try:
            number = float(match.group(1))
        except ValueError:
            number = None
        unit = match.group(2) or "kg"
        if number is not None and unit in _MASS_UNITS:
            return number * _MASS_UNITS[unit]
    print(f"thermorph_results: cannot read body mass {value!r}; "
          f"expected a number in kg or a string with one of {sorted(_MASS_UNITS)}",
          file=sys.stderr)
    return None


def time_average(time, values, t0: float, t1: float):
    """Time-weighted mean of `values` over [t0, t1] by the trapezoidal rule [units of values].

    `time` [nt] s, `values` [nt, ...]; samples are linearly interpolated at t0 and t1.
    With t0 == t1, or a single sample, returns the (interpolated) value at t0.
    """
    time = np.asarray(time, dtype=float)
    values = np.asarray(values, dtype=float)
    flat = values.reshape(len(time), -1)
    if len(time) == 1 or t1 <= t0:
        out = np.array([np.interp(t0, time, flat[:, j]) for j in range(flat.shape[1])])
        return out.reshape(values.shape[1:]) if values.ndim > 1 else out[0]
    inside = (time > t0) & (time < t1)
    grid = np.concatenate(([t0], time[inside], [t1]))
    out = np.empty(flat.shape[1])
    for j in range(flat.shape[1]):
        y = np.interp(grid, time, flat[:, j])
        out[j] = np.sum(0.5 * (y[1:] + y[:-1]) * np.diff(grid)) / (t1 - t0)
    return out.reshape(values.shape[1:]) if values.ndim > 1 else out[0]


def faces_from_centres(centres, inner_face: float = 0.0):
    """Cell faces [m] estimated from cell-centre positions [m] ([n] -> [n+1]).

    The first face is `inner_face` (the axis, mid-plane or proximal end); every
    further face sits so that each centre is midway between its two faces, which
    is exact whenever the centres are cell midpoints (uniform or not). If that
    walk fails (a face passing its centre), interior faces fall back to
    midpoints between neighbouring centres.
    """
    centres = np.asarray(centres, dtype=float)
    faces = np.empty(len(centres) + 1)
    faces[0] = inner_face
    for i, c in enumerate(centres):
        faces[i + 1] = 2.0 * c - faces[i]
    if np.all(np.diff(faces) > 0) and np.all((faces[:-1] < centres) & (centres < faces[1:])):
        return faces
    faces[1:-1] = 0.5 * (centres[1:] + centres[:-1])
    faces[0] = min(inner_face, centres[0])
    faces[-1] = centres[-1] + (centres[-1] - faces[-2])
    return faces


#: Exponent of r in the cell volume for each shape: dV ∝ r^k dr (plate k=0, cylinder/cone 1, sphere 2).
SHAPE_RADIAL_EXPONENT = {"plate": 0, "cylinder": 1, "cone": 1, "sphere": 2}


def radial_cell_weights(radius, shape: str):
    """Relative cell volumes across the radial direction [1], summing to 1 ([nr]).

    Volume between faces r_i, r_{i+1} is ∝ (r_{i+1}^(k+1) − r_i^(k+1)) with k from
    SHAPE_RADIAL_EXPONENT (cylinder: annulus area; sphere: shell volume; plate: slab).
    """
    k = SHAPE_RADIAL_EXPONENT.get(shape, 1)
    faces = faces_from_centres(radius)
    vol = np.diff(faces ** (k + 1))
    return vol / vol.sum()


@dataclass
class Series:
    """A dataset's values with their `units` attribute and HDF5 path."""
    path: str
    values: np.ndarray
    units: str


class Segment:
    """One body segment: coordinates, layers and per-cell temperatures."""

    def __init__(self, results: "Results", name: str):
        self.results = results
        self.name = name
        self.path = f"/segments/{name}"
        self.group = results.file[self.path]
        self.case_entry = results.case_segment(name)

    def has(self, rel: str) -> bool:
        """Whether dataset `rel` (relative to the segment group) exists."""
        return rel in self.group and isinstance(self.group[rel], h5py.Dataset)

    def read(self, rel: str) -> Series:
        """Dataset `rel` relative to the segment group, with units."""
        return self.results.read(f"{self.path}/{rel}")

    @property
    def shape(self) -> str:
        """Shape name (sphere|cylinder|cone|plate) from the group attribute or the stored case, or ""."""
        if "shape" in self.group.attrs:
            return _text(self.group.attrs["shape"])
        return str(self.case_entry.get("shape", "")) if self.case_entry else ""

    @property
    def radius(self) -> np.ndarray:
        """Radial cell-centre positions from the axis or mid-plane, coat included [m] ([nr])."""
        return self.read("radius").values

    @property
    def axial(self) -> np.ndarray:
        """Axial cell-centre positions from the proximal end [m] ([nz])."""
        return self.read("axial").values

    @property
    def layer(self) -> np.ndarray:
        """Layer index of each radial cell, coat last ([nr])."""
        return self.read("layer").values.astype(int)

    @property
    def layer_names(self) -> list[str]:
        """Names of the layers, indexed by the values in `layer`."""
        names = self.group["layer"].attrs.get("layer_names") if "layer" in self.group else None
        if names is None:
            return [f"layer {i}" for i in range(int(self.layer.max()) + 1)]
        return [_text(n) for n in np.atleast_1d(names)]

    def coat_layer(self) -> int | None:
        """Index of the coat layer (fur or feathers), or None when the segment has none."""
        names = self.layer_names
        if self.case_entry and "coat" in self.case_entry:
            return len(names) - 1
        for i, n in enumerate(names):
            if n.lower() in ("coat", "fur", "feathers", "plumage", "pelage"):
                return i
        return None

    @property
    def count(self) -> int:
        """How many identical copies of this segment the body has [1] (Results.segment_count).

        /segments/NAME/heat_flow holds one copy; whole-body sums multiply by the count.
        """
        return self.results.segment_count(self.name)

    @property
    def label(self) -> str:
        """Display name: the segment name, with "×N" when the body has N copies."""
        return self.name if self.count == 1 else f"{self.name} ×{self.count}"

    def heat_flow(self, channel: str) -> np.ndarray | None:
        """Heat flow of one copy of the segment by `channel` [W] ([nt]), None when not stored."""
        return self.read(f"heat_flow/{channel}").values if self.has(f"heat_flow/{channel}") else None

    def cumulative_heat(self, channel: str) -> np.ndarray | None:
        """Heat gained by one copy of the segment by `channel` since t = 0 [J] ([nt]), integrated by the solver;
        `storage`: the change of its stored heat. None when not stored (files before these datasets)."""
        path = f"cumulative_heat/{channel}"
        return self.read(path).values if self.has(path) else None

    def step_cumulative_heat(self, channel: str) -> np.ndarray | None:
        """Heat gained by one copy of the segment by `channel` since t = 0 [J] at each step of the timeline
        (Results.step_times: /steps/segments/NAME/cumulative_heat/CHANNEL, the solver's value where it stopped, not
        interpolated between outputs); `storage`: the change of its stored heat. None in files without /steps
        (written before 2026-12-05) or for a channel not stored."""
        path = f"/steps/segments/{self.name}/cumulative_heat/{channel}"
        return self.results.read(path).values if self.results.has(path) else None

    def contact_fraction(self) -> Series:
        """Share of the surface touching the substrate at each output [1] ([nt]): the stored series
        /segments/NAME/contact_fraction (events step it), or, in a file written before that series (2026-12-05),
        the segment's static `surface.contact_fraction` from the stored case (0 when it gives none) at every
        output, as such a file's run had it unless an event changed it (path "" then)."""
        if self.has("contact_fraction"):
            return self.read("contact_fraction")
        surface = self.case_entry.get("surface", {}) if self.case_entry else {}
        value = surface.get("contact_fraction", 0.0) if isinstance(surface, dict) else 0.0
        value = float(value) if isinstance(value, (int, float)) and not isinstance(value, bool) else 0.0
        return Series("", np.full(len(self.results.time), value), "1")

    def in_water(self) -> np.ndarray | None:
        """Whether the segment is in water (True) or air (False) at each output ([nt]), from the stored series
        /segments/NAME/in_water; None in files written before it (2026-12-05)."""
        return self.read("in_water").values > 0.5 if self.has("in_water") else None

    def heat_flow_channels(self) -> list[str]:
        """Heat-flow channels stored for this segment, in contract order."""
        if "heat_flow" not in self.group:
            return []
        return ordered_channels(data_names(self.group["heat_flow"]))

    def cell_volumes(self) -> np.ndarray:
        """Volume of each cell [m3] ([nz, nr]), or relative volumes [1] when not stored.

        Uses the optional dataset `volume` [nz, nr] when the file has it; otherwise
        estimates from the cell-centre coordinates (faces from faces_from_centres)
        and the shape: radial weights r^k dr (radial_cell_weights) times axial cell
        length (a cone's taper along its length is then not weighted).
        """
        nz = len(self.axial)
        if self.has("volume"):
            vol = np.asarray(self.read("volume").values, dtype=float)
            if vol.shape == (nz, len(self.radius)):
                return vol
        w_r = radial_cell_weights(self.radius, self.shape)
        w_z = np.diff(faces_from_centres(self.axial)) if nz > 1 else np.ones(1)
        return np.outer(w_z, w_r)

    def tissue_cells(self) -> np.ndarray:
        """Whether each radial cell is tissue (not coat) [1] ([nr]); all True for a coat-only segment."""
        coat = self.coat_layer()
        tissue = self.layer != coat if coat is not None else np.ones(len(self.layer), dtype=bool)
        return tissue if np.any(tissue) else np.ones(len(self.layer), dtype=bool)

    def mean_tissue_temperature(self) -> np.ndarray:
        """Volume-weighted mean temperature of the tissue cells, coat excluded [degC] ([nt]).

        Weights from cell_volumes(); coat cells get weight 0 (all cells count if
        the segment were coat only).
        """
        temp = self.read("temperature").values  # [nt, nz, nr]
        w = np.where(self.tissue_cells()[None, :], self.cell_volumes(), 0.0)
        return np.tensordot(temp, w, axes=([1, 2], [0, 1])) / w.sum()

    def extreme_tissue_temperature(self, which: str) -> np.ndarray:
        """Lowest ("min") or highest ("max") temperature of any tissue cell, coat excluded [degC] ([nt])."""
        temp = self.read("temperature").values[:, :, self.tissue_cells()]
        flat = temp.reshape(temp.shape[0], -1)
        return flat.min(axis=1) if which == "min" else flat.max(axis=1)

    def mean_surface_temperature(self) -> np.ndarray:
        """Mean surface temperature over the axial cells, weighted by cell length [degC] ([nt])."""
        surf = self.read("surface_temperature").values  # [nt, nz]
        if surf.shape[1] == 1:
            return surf[:, 0]
        w_z = np.diff(faces_from_centres(self.axial))
        return surf @ w_z / w_z.sum()


class Results:
    """An open thermorph results file. Use as a context manager, or call close()."""

    def __init__(self, path):
        self.path = Path(path)
        if not self.path.is_file():
            raise ResultsError(f"{self.path}: no such file")
        try:
            self.file = h5py.File(self.path, "r")
        except OSError as err:
            raise ResultsError(f"{self.path}: not a readable HDF5 file ({err})") from err
        if "time" not in self.file:
            self.file.close()
            raise ResultsError(f"{self.path}: dataset /time missing; not a thermorph results file")
        self.time = np.asarray(self.file["time"][()], dtype=float)
        self._case = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def close(self):
        """Close the HDF5 file."""
        self.file.close()

    # ---- generic access -------------------------------------------------------------
    def has(self, path: str) -> bool:
        """Whether a dataset exists at `path`."""
        return path in self.file and isinstance(self.file[path], h5py.Dataset)

    def units(self, path: str) -> str:
        """The `units` attribute of dataset `path` ("" when missing)."""
        return _text(self.file[path].attrs.get("units", ""))

    def read(self, path: str) -> Series:
        """Dataset `path` with its units; raises ResultsError naming the path if absent."""
        if not self.has(path):
            raise ResultsError(f"{self.path}: dataset {path} missing")
        return Series(path, self.file[path][()], self.units(path))

    def optional(self, path: str) -> Series | None:
        """Dataset `path` with its units, or None when absent."""
        return self.read(path) if self.has(path) else None

    def attr(self, name: str, default=None):
        """Root attribute `name` decoded to str (or int for `complete`), or default."""
        if name not in self.file.attrs:
            return default
        value = self.file.attrs[name]
        if name == "complete":
            return int(np.asarray(value).ravel()[0])
        return _text(value)

    # ---- run metadata ----------------------------------------------------------------
    @property
    def warnings(self) -> list[str]:
        """Every warning stored with the run (/provenance/warnings: grid, ranges, hot or freezing tissue, ...)."""
        if not self.has("/provenance/warnings"):
            return []
        return [_text(w) for w in np.atleast_1d(self.file["/provenance/warnings"][()])]

    @property
    def complete(self) -> bool:
        """False only when the root attribute `complete` is 0 (a run stopped early)."""
        return self.attr("complete", 1) != 0

    @property
    def duration(self) -> float:
        """Simulated time span of the stored output [s]."""
        return float(self.time[-1] - self.time[0]) if len(self.time) else 0.0

    @property
    def case(self) -> dict:
        """The resolved case parsed from the root attribute `case` (TOML); {} if absent or unreadable."""
        if self._case is None:
            text = self.attr("case", "")
            try:
                self._case = tomllib.loads(text) if text else {}
            except tomllib.TOMLDecodeError as err:
                print(f"thermorph_results: {self.path}: root attribute `case` is not valid TOML ({err})",
                      file=sys.stderr)
                self._case = {}
        return self._case

    def case_segment(self, name: str) -> dict:
        """The `[[segments]]` entry called `name` in the stored case, or {}."""
        for entry in self.case.get("segments", []) or []:
            if isinstance(entry, dict) and entry.get("name") == name:
                return entry
        return {}

    def segment_count(self, name: str) -> int:
        """Copies of segment `name` in the body [1]: its `count` times its parent's copies (counts
        multiply down the tree), 1 when the stored case does not say."""
        count, seen = 1, set()
        while name and name not in seen:
            seen.add(name)
            entry = self.case_segment(name)
            try:
                count *= max(1, int(entry.get("count", 1)))
            except (TypeError, ValueError):
                pass
            name = entry.get("parent", "")
        return count

    @property
    def body_mass(self) -> float | None:
        """Body mass: the case's `[body] mass`, else the attribute `mass` of /body (the built body), else None [kg]."""
        body = self.case.get("body", {})
        if isinstance(body, dict) and "mass" in body:
            return parse_mass(body["mass"])
        grp = self.file.get("body")
        if grp is not None and "mass" in grp.attrs:
            mass = float(np.asarray(grp.attrs["mass"]).ravel()[0])
            return mass if np.isfinite(mass) and mass > 0 else None
        return None

    # ---- groups ----------------------------------------------------------------------
    def segment_names(self) -> list[str]:
        """Names of the segment groups, in the order of the stored case (any others after, in file order)."""
        stored = list(self.file["segments"].keys()) if "segments" in self.file else []
        in_case = [e.get("name") for e in self.case.get("segments", []) or [] if isinstance(e, dict)]
        return [n for n in in_case if n in stored] + [n for n in stored if n not in in_case]

    def segments(self, names=None) -> list[Segment]:
        """Segment objects, all or those named (ResultsError lists valid names on a typo)."""
        available = self.segment_names()
        if names is None:
            names = available
        unknown = [n for n in names if n not in available]
        if unknown:
            raise ResultsError(f"{self.path}: no segment {', '.join(unknown)}; "
                               f"segments are: {', '.join(available) or '(none)'}")
        return [Segment(self, n) for n in names]

    def body_channels(self) -> list[str]:
        """Heat-flow channels stored for the whole body, in contract order."""
        grp = self.file.get("body/heat_flow")
        return ordered_channels(data_names(grp)) if grp is not None else []

    def body_heat_flow(self, channel: str) -> np.ndarray | None:
        """Whole-body heat flow by `channel`, copies of segments and the blood pool included [W] ([nt])."""
        path = f"/body/heat_flow/{channel}"
        return self.read(path).values if self.has(path) else None

    def cumulative_heat(self, channel: str) -> np.ndarray | None:
        """Whole-body energy exchanged by `channel` since t = 0 [J] ([nt]); None when not stored."""
        path = f"/body/cumulative_heat/{channel}"
        return self.read(path).values if self.has(path) else None

    def step_times(self) -> np.ndarray | None:
        """Times of the timeline's steps the run reached [s] (/steps/step_time: events, ends of ramps, weather rows,
        where the integrator stopped and restarted; empty when the timeline has none), at which /steps stores the
        cumulative energies exactly; None in files without /steps (before 2026-12-05, and steady states)."""
        return np.asarray(self.read("/steps/step_time").values, float) if self.has("/steps/step_time") else None

    def step_cumulative_heat(self, channel: str) -> np.ndarray | None:
        """Whole-body energy exchanged by `channel` since t = 0 [J] at each step_times() time; None when not
        stored."""
        path = f"/steps/body/cumulative_heat/{channel}"
        return self.read(path).values if self.has(path) else None

    def environment(self) -> dict[str, Series]:
        """The /environment time series by variable name ({} when absent)."""
        grp = self.file.get("environment")
        if grp is None:
            return {}
        return {k: self.read(f"/environment/{k}") for k in data_names(grp)}

    def events(self) -> list[tuple[float, float, str]]:
        """Intervals to shade as (start [s], end [s], label), sorted, duplicates dropped; [] without /events."""
        grp = self.file.get("events")
        if grp is None or "start" not in grp:
            return []
        start = np.atleast_1d(grp["start"][()]).astype(float)
        end = np.atleast_1d(grp["end"][()]).astype(float) if "end" in grp else start
        labels = [_text(x) for x in np.atleast_1d(grp["label"][()])] if "label" in grp else [""] * len(start)
        return sorted({(float(s), float(max(e, s)), lab) for s, e, lab in zip(start, end, labels)})

    def timeline_steps(self) -> list[tuple[float, str]]:
        """Times of the timeline's steps (events with no ramp, from the stored case) as (time [s], label), sorted.
        Heat flows jump there, so values interpolated between two outputs that bracket a step mix both sides."""
        steps = set()
        for e in self.case.get("events", []) or []:
            if not isinstance(e, dict):
                continue
            try:
                at, ramp = float(e.get("at", 0.0)), float(e.get("ramp", 0.0))
            except (TypeError, ValueError):
                continue
            if ramp == 0.0:
                steps.add((at, str(e.get("label", "")) or f"event at {at:g} s"))
        return sorted(steps)

    def timeline_changes(self) -> list[tuple[float, float]]:
        """Every event of the stored case's timeline as (at [s], ramp [s]), sorted by time (weather rows are
        stored as events); [] without a readable case."""
        changes = []
        for e in self.case.get("events", []) or []:
            if not isinstance(e, dict):
                continue
            try:
                changes.append((float(e.get("at", 0.0)), float(e.get("ramp", 0.0))))
            except (TypeError, ValueError):
                continue
        return sorted(changes)

    def timeline_knots(self) -> tuple[np.ndarray, np.ndarray]:
        """Times [s] at which the surroundings are drawn, and whether each is the value just before a step: every
        output, plus the timeline's breakpoints between outputs, so that lines bend and jump at their own times.
        A step (an event without a ramp) in (first output, last output] gets a knot `before` it (flag True) and,
        between outputs, one at it; the start and end of a ramp strictly between outputs get one knot each."""
        time = np.asarray(self.time, float)
        if time.size < 2:
            return time.copy(), np.zeros(time.size, bool)
        outputs = set(time.tolist())
        steps = {at for at, ramp in self.timeline_changes() if ramp == 0.0}
        kinks = {t for at, ramp in self.timeline_changes() if ramp > 0.0 for t in (at, at + ramp)} - steps
        knots = [(t, False) for t in time.tolist()]
        for s in steps:
            if time[0] < s <= time[-1]:
                knots.append((s, True))
                if s not in outputs:
                    knots.append((s, False))
        knots += [(k, False) for k in kinks if time[0] < k < time[-1] and k not in outputs]
        knots.sort(key=lambda k: (k[0], not k[1]))   # the value before a step first
        return np.array([k[0] for k in knots]), np.array([k[1] for k in knots])

    def _schedule(self, name: str, units: str):
        """The timeline of /environment/NAME from the stored case as points [(t [s], value in `units`)] of a line
        with jumps at repeated times (steps), or None when the case does not give it as numbers (a case stored
        unresolved, or an unknown unit). Temperatures are stored in the case in K."""
        offset = {"degC": -ZERO_CELSIUS_IN_KELVIN, "1": 0.0, "m s-1": 0.0, "W m-2": 0.0}.get(units)
        env = self.case.get("environment", {})
        value = env.get(name) if isinstance(env, dict) else None
        if offset is None or isinstance(value, bool) or not isinstance(value, (int, float)):
            return None
        points = [(-np.inf, float(value) + offset)]
        events = [e for e in self.case.get("events", []) or []
                  if isinstance(e, dict) and isinstance(e.get("environment"), dict) and name in e["environment"]]
        try:
            events.sort(key=lambda e: float(e.get("at", 0.0)))
            for e in events:
                target = e["environment"][name]
                if isinstance(target, bool) or not isinstance(target, (int, float)):
                    return None
                at, ramp = float(e.get("at", 0.0)), float(e.get("ramp", 0.0))
                points += [(at, points[-1][1]), (at + max(ramp, 0.0), float(target) + offset)]
        except (TypeError, ValueError):
            return None
        return points

    @staticmethod
    def _evaluate(points, t: float, before: bool) -> float:
        """Value of a schedule (Results._schedule) at t [s]: the limit from the left when `before`, else from the
        right (a step's new value at its own time)."""
        xs = [p[0] for p in points]
        j = bisect.bisect_left(xs, t) if before else bisect.bisect_right(xs, t)
        if before and j < len(xs) and xs[j] == t:
            return points[j][1]
        if not before and j > 0 and xs[j - 1] == t:
            return points[j - 1][1]
        if j == 0:
            return points[0][1]
        if j == len(xs):
            return points[-1][1]
        (xa, va), (xb, vb) = points[j - 1], points[j]
        return va if va == vb or not np.isfinite(xa) else va + (vb - va) * (t - xa) / (xb - xa)

    def environment_line(self, name: str) -> tuple[np.ndarray, np.ndarray]:
        """Times [s] and values of /environment/NAME as the surroundings were, on timeline_knots(): the stored value
        at every output, and at the timeline's breakpoints between outputs the value the stored case's timeline
        gives there (`environment` of [environment] and of each event), so a step is a vertical jump at its time
        and a ramp starts and ends at its own times, not at the outputs around them. The case's timeline is used
        only when it reproduces every stored output (to 1e-6 of the series' size); otherwise the value at the last
        output before a step is held up to it and lines are straight between outputs elsewhere."""
        time = np.asarray(self.time, float)
        series = self.read(f"/environment/{name}")
        values = np.asarray(series.values, float)
        if time.size < 2 or values.shape != time.shape:
            return time, values
        knots, before = self.timeline_knots()
        points = self._schedule(name, series.units)
        if points is not None:
            expected = np.array([self._evaluate(points, t, False) for t in time])
            size = 1.0 + float(np.nanmax(np.abs(values)))
            if not np.all(np.abs(expected - values) <= 1e-6 * size):
                points = None
        out = np.empty(knots.size)
        index = {t: i for i, t in enumerate(time.tolist())}
        for k, (t, b) in enumerate(zip(knots.tolist(), before.tolist())):
            if not b and t in index:
                out[k] = values[index[t]]
            elif points is not None:
                out[k] = self._evaluate(points, t, b)
            elif b:   # no usable timeline: hold the value drawn last up to the step
                out[k] = out[k - 1]
            else:     # ... and the next output's value from it (a step), or a straight line (a ramp's end)
                i = int(np.searchsorted(time, t))
                out[k] = values[i] if k > 0 and knots[k - 1] == t else np.interp(t, time, values)
        return knots, out

    # ---- where the surroundings act ---------------------------------------------------
    def medium_fluid(self, t: float, before: bool = False) -> str | None:
        """"air" or "water" (water, sea water): the fluid of the medium at t [s] from the stored case ([environment]
        medium, changed by events as steps; the limit from the left when `before`); None without a case."""
        env = self.case.get("environment")
        if not isinstance(env, dict):
            return None
        medium = str(env.get("medium", "air"))
        changes = []
        for e in self.case.get("events", []) or []:
            if isinstance(e, dict) and isinstance(e.get("environment"), dict) and "medium" in e["environment"]:
                try:
                    changes.append((float(e.get("at", 0.0)), str(e["environment"]["medium"])))
                except (TypeError, ValueError):   # a case stored unresolved ("10 min"): not read
                    continue
        for at, new in sorted(changes, key=lambda c: c[0]):
            if at < t or (at == t and not before):
                medium = new
        return "water" if medium in WATER_MEDIA else "air"

    def medium_fluids(self) -> list[str]:
        """Fluids the medium takes during the run ("air", "water"), in that order; [] without a case."""
        if not len(self.time):
            return []
        times = [float(self.time[0])] + [at for at, _ in self.timeline_changes()
                                         if self.time[0] <= at <= self.time[-1]]
        found = {self.medium_fluid(t) for t in times} - {None}
        return [f for f in ("air", "water") if f in found]

    def segment_fluid(self, name: str, medium_fluid: str) -> str:
        """Fluid around segment `name` while the medium is `medium_fluid`: its `surface.immersion` "always" puts
        it in water, "never" in air, "body" (default) in the medium (main README, "The medium and immersion")."""
        surface = self.case_segment(name).get("surface", {})
        immersion = surface.get("immersion", "body") if isinstance(surface, dict) else "body"
        return {"always": "water", "never": "air"}.get(immersion, medium_fluid)

    def forcing_targets(self, kind: str, medium_fluid: str) -> list[str]:
        """Segments (labels, "×N" for copies) on which a kind of forcing acts while the medium is `medium_fluid`,
        after thermorph's surface model (main README, "Environment": radiation, sun and evaporation in air only;
        substrate over a contact_fraction; breathing the air around the respiratory segment unless it is in water):
        "air" and "water": segments in that fluid (convection; "air" also breathing); "wind" and "current": in air
        or water, convection from correlations (a fixed coefficient does not depend on speed); "radiant": in air,
        emissivity above 0, sky_view below 1; "sky": in air, emissivity and sky_view above 0; "sun": in air,
        solar_absorptivity and solar_exposure above 0; "humidity": in air with a wetted_fraction above 0 at some time
        (the segment's key or an event's surface entry), and the breathing
        segment (marked "breathing") in air; "substrate": contact_fraction above 0 at some time (the segment's key or an
        event's surface entry). Missing surface keys take the
        case defaults (sky_view 0.5, solar_absorptivity 0.7, wetted_fraction 0, contact_fraction 0, convection
        [environment] convection or "correlation"; emissivity 0 with a fixed convection coefficient, else above 0:
        main README, "Defaults and their sources")."""
        body, env = self.case.get("body", {}), self.case.get("environment", {})
        breathing = body.get("respiratory_segment") if isinstance(body, dict) else None
        default_convection = env.get("convection", "correlation") if isinstance(env, dict) else "correlation"
        targets = []
        for seg in self.segment_names():
            surface = self.case_segment(seg).get("surface", {})
            surface = surface if isinstance(surface, dict) else {}

            def number(key, default):
                v = surface.get(key, default)
                return float(v) if isinstance(v, (int, float)) and not isinstance(v, bool) else default

            fluid = self.segment_fluid(seg, medium_fluid)
            in_air = fluid == "air"
            convection = surface.get("convection", default_convection)
            correlation = isinstance(convection, str) and convection.strip() == "correlation"
            radiates = number("emissivity", 0.95 if correlation else 0.0) > 0.0
            label = seg if self.segment_count(seg) == 1 else f"{seg} ×{self.segment_count(seg)}"
            acts = {"air": in_air, "water": fluid == "water",
                    "wind": in_air and correlation, "current": fluid == "water" and correlation,
                    "radiant": in_air and radiates and number("sky_view", 0.5) < 1.0,
                    "sky": in_air and radiates and number("sky_view", 0.5) > 0.0,
                    "sun": in_air and number("solar_absorptivity", 0.7) > 0.0 and number("solar_exposure", 1.0) > 0.0,
                    "humidity": in_air and self.largest_contact(seg, number("wetted_fraction", 0.0),
                                                                "wetted_fraction") > 0.0,
                    "substrate": self.largest_contact(seg, number("contact_fraction", 0.0)) > 0.0}.get(kind, True)
            if acts:
                targets.append(label)
            elif kind == "humidity" and in_air and seg == breathing:
                targets.append(f"{label} (breathing)")
        return targets

    def largest_contact(self, name: str, static: float, key: str = "contact_fraction") -> float:
        """Largest substrate contact fraction of segment `name` over the run: its `surface.contact_fraction`
        (`static`) and every `[[events]]` entry's `surface = { NAME or all = { contact_fraction = F } }` (main
        README, "Timelines"), so that a segment in contact only after an event counts as touching the substrate.
        With `key` = "wetted_fraction", the largest wetted fraction the same way (events step or ramp it)."""
        largest = static
        events = self.case.get("events", [])
        for event in events if isinstance(events, list) else []:
            surface = event.get("surface", {}) if isinstance(event, dict) else {}
            for target in (name, "all"):
                entry = surface.get(target, {}) if isinstance(surface, dict) else {}
                value = entry.get(key) if isinstance(entry, dict) else None
                if isinstance(value, (int, float)) and not isinstance(value, bool):
                    largest = max(largest, float(value))
        return largest

    def _contact_schedule(self, name: str):
        """Steps of segment `name`'s contact fraction from the stored case: [(at [s], value)] starting at -inf with
        its static `surface.contact_fraction`, then each `[[events]]` surface entry in time order ("all" before the
        segment's own name within one event, as thermorph applies them); None when the case does not give them
        as numbers."""
        surface = self.case_segment(name).get("surface", {})
        static = surface.get("contact_fraction", 0.0) if isinstance(surface, dict) else 0.0
        if isinstance(static, bool) or not isinstance(static, (int, float)):
            return None
        steps = [(-np.inf, float(static))]
        events = [e for e in self.case.get("events", []) or [] if isinstance(e, dict)]
        try:
            for e in sorted(events, key=lambda e: float(e.get("at", 0.0))):
                entries = e.get("surface", {})
                for key in ("all", name):
                    entry = entries.get(key, {}) if isinstance(entries, dict) else {}
                    value = entry.get("contact_fraction") if isinstance(entry, dict) else None
                    if value is None:
                        continue
                    if isinstance(value, bool) or not isinstance(value, (int, float)):
                        return None
                    steps.append((float(e.get("at", 0.0)), float(value)))
        except (TypeError, ValueError):
            return None
        return steps

    def contact_line(self, name: str) -> tuple[np.ndarray, np.ndarray]:
        """Times [s] (timeline_knots) and segment `name`'s contact fraction [1] there: the stored value at every
        output (Segment.contact_fraction: the series, or the static value in older files), and between outputs
        the stored case's steps (`[[events]] surface`), so that contact starts and ends at the events' own
        times. The case is used only when it reproduces every stored output; otherwise the value of the last
        output is held up to the next."""
        time = np.asarray(self.time, float)
        stored = np.asarray(self.segments([name])[0].contact_fraction().values, float)
        knots, before = self.timeline_knots()
        if time.size < 2 or stored.shape != time.shape:
            return time, stored
        steps = self._contact_schedule(name)

        def scheduled(t, left):
            value = steps[0][1]
            for at, v in steps[1:]:
                if at < t or (at == t and not left):
                    value = v
            return value

        if steps is not None and any(scheduled(t, False) != v for t, v in zip(time.tolist(), stored.tolist())):
            steps = None
        index = {t: i for i, t in enumerate(time.tolist())}
        out = np.empty(knots.size)
        for k, (t, b) in enumerate(zip(knots.tolist(), before.tolist())):
            if not b and t in index:
                out[k] = stored[index[t]]
            elif steps is not None:
                out[k] = scheduled(t, b)
            else:
                out[k] = stored[max(int(np.searchsorted(time, t, side="left")) - 1, 0)]
        return knots, out

    def water_line(self, name: str) -> tuple[np.ndarray, np.ndarray] | None:
        """Times [s] (timeline_knots) and whether segment `name` is in water there (1.0) or in air (0.0), as
        contact_line does for contact: the stored /segments/NAME/in_water at every output, and between outputs the
        stored case's medium steps with the segment's immersion, so that a dip starts and ends at the events' own
        times. The case is used only when it reproduces every stored output; otherwise the value of the last
        output is held up to the next. None in files without the series (before 2026-12-05)."""
        wet = self.segments([name])[0].in_water()
        if wet is None:
            return None
        time = np.asarray(self.time, float)
        stored = wet.astype(float)
        knots, before = self.timeline_knots()
        if time.size < 2 or stored.shape != time.shape:
            return time, stored

        def scheduled(t, left):
            medium = self.medium_fluid(t, left)
            return None if medium is None else float(self.segment_fluid(name, medium) == "water")

        use_case = all(scheduled(t, False) == v for t, v in zip(time.tolist(), stored.tolist()))
        index = {t: i for i, t in enumerate(time.tolist())}
        out = np.empty(knots.size)
        for k, (t, b) in enumerate(zip(knots.tolist(), before.tolist())):
            if not b and t in index:
                out[k] = stored[index[t]]
            elif use_case:
                out[k] = scheduled(t, b)
            else:
                out[k] = stored[max(int(np.searchsorted(time, t, side="left")) - 1, 0)]
        return knots, out

    def solver_stats(self) -> dict:
        """Attributes of the /solver group ({} when absent)."""
        grp = self.file.get("solver")
        if grp is None:
            return {}
        return {k: (v.item() if isinstance(v, np.ndarray) and v.size == 1 else v) for k, v in grp.attrs.items()}
