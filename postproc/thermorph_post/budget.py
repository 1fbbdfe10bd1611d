"""Heat budget over a time window: mean heat flow by channel for segments, the blood pool and the whole body.

Shared by report.py and figures.py. Heat flows are positive into the body [W].

- Segment rows: from /segments/NAME/cumulative_heat (integrated by the solver
  with the state, like the whole body's), (E(t1) − E(t0)) / (t1 − t0) with E
  at window ends as the whole body's (cumulative_at); all copies of a segment counted
  (one copy is stored, `count` multiplies). Files without them: trapezoidal
  rule on the stored flows, linearly interpolated at window ends between
  outputs. (The trapezoid credits an output on the instant of a step of the
  timeline with half an interval of the new flows: an invented diving bird
  hauled out at a window's end got 0.17 W of sun while in water.)
- Whole body: from /body/cumulative_heat (the integrator's own channel energies,
  so exact to its tolerance): (E(t1) − E(t0)) / (t1 − t0). E is stored at the
  outputs and at the timeline's steps (/steps); between them (cumulative_at) by
  the cubic Hermite polynomial through E and its derivative, the stored flow,
  at two outputs, the quadratic through both energies and the output's flow
  between an output and a step, a straight line between two steps: never
  across a step, where the flows jump. Storage = sum of the channel
  energies minus the change of /body/energy_balance_error (whose definition is
  gains − change in stored heat). Without cumulative energies: trapezoid.
- Blood pool: whole-body flows minus the sum over all segments (exact when
  both are; trapezoid otherwise),
  shown when it is not zero and the file has whole-body `blood` flows (a body
  with a central blood pool).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from thermorph_post.results import ENVIRONMENT_CHANNELS, Results, ordered_channels, time_average


@dataclass
class Row:
    """One row of the budget: mean heat flow per channel over the window [W] (all copies)."""
    label: str
    kind: str                 # "segment", "others", "pool", "body"
    means: dict[str, float] = field(default_factory=dict)
    method: str = "trapezoid"  # "trapezoid", "cumulative", "difference"

    def total(self, channels) -> float:
        """Sum over `channels` [W]."""
        return float(sum(self.means.get(c, 0.0) for c in channels))


@dataclass
class WindowBudget:
    """Rows for a window [t0, t1] [s]; `channels` in display order, storage last."""
    t0: float
    t1: float
    channels: list[str]
    segments: list[Row]
    others: Row | None
    pool: Row | None
    body: Row
    body_trapezoid: Row

    def rows(self) -> list[Row]:
        """Segment rows, then 'other segments' and 'blood pool' when present, then the whole body."""
        return self.segments + [r for r in (self.others, self.pool) if r is not None] + [self.body]

    def parts_sum(self) -> dict[str, float]:
        """Sum over segment, others and pool rows per channel [W] (compare with the whole-body row)."""
        parts = self.segments + [r for r in (self.others, self.pool) if r is not None]
        return {c: float(sum(r.means.get(c, 0.0) for r in parts)) for c in self.channels}


def hermite_cumulative(time, energy, flow, t: float) -> float:
    """Cumulative energy at time t [J] from samples E(time) [J] and dE/dt = flow [W].

    Cubic Hermite interpolation on the output interval holding t (exact for
    energies up to cubic in time); the stored value when t is an output time.
    Across a step of the timeline between the outputs this mixes both sides of
    it: cumulative_at uses the energies stored at the steps instead.
    """
    return cumulative_at(time, energy, flow, t).value


def step_index(steps, t: float) -> int | None:
    """Index of time t in `steps` (Results.step_times), None when t is none of them. Times that come from the case
    (window ends, event times) and the run's own breakpoints are the same numbers up to the last digit of a sum
    (at + ramp): matched to 1e-9 s relative."""
    if steps is None or len(steps) == 0:
        return None
    steps = np.asarray(steps, dtype=float)
    k = int(np.argmin(np.abs(steps - t)))
    return k if abs(steps[k] - t) <= 1e-9 * max(1.0, abs(t)) else None


@dataclass
class Piece:
    """Where a time t lies among the knots of the cumulative energies (outputs and the timeline's steps, /steps)
    and how E(t) is found there: "output" or "step" (stored, exact); "hermite" (between two outputs with no step
    between them: the cubic through E and the flow at both, error (t−a)²(b−t)² max|E''''|/24); "quadratic" (an
    output and a step: E and the flow at the output, E at the step, error (t−a)²(b−t) max|E'''|/6 with a the
    output's side doubled); "linear" (two steps with no output between them, or a step and an output that is also
    a step, whose stored flow is the one after it: E at both, error (t−a)(b−t) max|E''|/2, which the file cannot
    estimate)."""
    how: str
    a: float
    b: float
    a_step: bool = False
    b_step: bool = False


def locate(time, t: float, steps=None) -> Piece:
    """The Piece of the knots holding t: outputs `time` and step times `steps` (None: a file without /steps, where
    the steps are not knots and the cubic runs across them)."""
    time = np.asarray(time, dtype=float)
    i = int(np.searchsorted(time, t, side="right")) - 1
    if i < 0 or t <= time[0]:
        return Piece("output", float(time[0]), float(time[0]))
    if i >= len(time) - 1 or t == time[i]:
        j = min(i, len(time) - 1)
        return Piece("output", float(time[j]), float(time[j]))
    if step_index(steps, t) is not None:
        return Piece("step", t, t, True, True)
    a, b = float(time[i]), float(time[i + 1])
    inside = [] if steps is None else [float(s) for s in np.asarray(steps, float) if a < s < b]
    a_step = step_index(steps, a) is not None  # an output on a step: its flow is the one after the step (fine on a)
    b_step = step_index(steps, b) is not None  # ... which is no derivative from the left on b
    for s in inside:
        if s < t:
            a, a_step = s, True
        elif s > t:
            b, b_step = s, True
            break
    left_flow = not (a_step and a not in time.tolist())   # a is an output: its flow is the right derivative
    right_flow = not b_step
    how = "hermite" if left_flow and right_flow else "quadratic" if left_flow or right_flow else "linear"
    return Piece(how, a, b, a_step, b_step)


@dataclass
class Interpolated:
    """E(t) [J], the Piece it comes from, and `spread` [J]: |E(t) − the next lower-order interpolant| (quadratic: the
    straight line through the two energies; hermite: the quadratic through E and the flow at the left output and
    E at the right), the correction the flows made, which bounds the error when the flows are resolved at the
    knots' spacing; 0 where exact, nan for "linear" (no flow to compare with)."""
    value: float
    piece: Piece
    spread: float


def cumulative_at(time, energy, flow, t: float, steps=None, at_steps=None) -> Interpolated:
    """Cumulative energy at time t [J] from E at the outputs `time` [J], dE/dt = `flow` [W] there and E at the
    timeline's steps (`steps` [s], `at_steps` [J], /steps; None for files without it): the stored value at an output
    or a step, else the interpolant of locate() on the piece holding t."""
    time = np.asarray(time, dtype=float)
    use_steps = steps if at_steps is not None else None
    piece = locate(time, t, use_steps)
    values = time.tolist()

    def knot(x: float) -> tuple[float, float | None]:
        """E and its derivative (None when the stored flow is no derivative on that side) at a knot."""
        if x in values:
            i = values.index(x)
            return float(energy[i]), float(flow[i])
        return float(at_steps[step_index(use_steps, x)]), None

    if piece.how in ("output", "step"):
        return Interpolated(knot(piece.a)[0], piece, 0.0)
    (ea, da), (eb, db) = knot(piece.a), knot(piece.b)
    h = piece.b - piece.a
    s = (t - piece.a) / h
    line = ea + s * (eb - ea)
    if piece.how == "linear":
        return Interpolated(line, piece, float("nan"))
    if piece.how == "quadratic" and (piece.a_step and piece.a not in values):
        # the flow at b (the right end) only: E = eb - db h (1-s) + c (1-s)^2, through ea at s = 0
        c = ea - eb + db * h
        quad = eb - db * h * (1 - s) + c * (1 - s) ** 2
        return Interpolated(quad, piece, abs(quad - line))
    c = eb - ea - da * h
    quad = ea + da * h * s + c * s ** 2      # E and the flow at a, E at b
    if piece.how == "quadratic":
        return Interpolated(quad, piece, abs(quad - line))
    h00, h10 = 2 * s**3 - 3 * s**2 + 1, s**3 - 2 * s**2 + s
    h01, h11 = -2 * s**3 + 3 * s**2, s**3 - s**2
    cubic = h00 * ea + h10 * h * da + h01 * eb + h11 * h * db
    return Interpolated(float(cubic), piece, abs(cubic - quad))


def _mean(time, values, t0, t1) -> float:
    """Trapezoidal mean over [t0, t1], or the interpolated value when t0 == t1 [units of values]."""
    return float(time_average(time, values, t0, t1))


def heat_lost_to_environment(res: Results, seg, t0: float, t1: float) -> float:
    """Mean heat lost to the surroundings by all copies of a segment over the window [W] (≥ 0 means loss)."""
    total = 0.0
    for c in ENVIRONMENT_CHANNELS:
        flow = seg.heat_flow(c)
        if flow is not None:
            total -= seg.count * _mean(res.time, flow, t0, t1)
    return total


def rank_segments(res: Results, segs, t0: float, t1: float):
    """Segments sorted by mean heat lost to the surroundings over the window, largest first."""
    return sorted(segs, key=lambda s: -heat_lost_to_environment(res, s, t0, t1))


def window_budget(res: Results, t0: float, t1: float, segments=None) -> WindowBudget:
    """Mean heat flows over [t0, t1] [s] for the named segments (default all), the rest, the pool and the body."""
    all_segs = res.segments()
    chosen = res.segments(segments) if segments is not None else all_segs
    chosen_names = {s.name for s in chosen}
    channels = ordered_channels(set(res.body_channels()) | {c for s in all_segs for c in s.heat_flow_channels()})
    time = res.time
    steps = res.step_times()

    def seg_row(seg) -> Row:
        exact = _energy_changes(time, channels, seg.cumulative_heat, seg.heat_flow, t0, t1, steps,
                                seg.step_cumulative_heat)
        if exact is not None:
            return Row(seg.label, "segment", {c: seg.count * (d / (t1 - t0)) for c, d in exact.items()}, "cumulative")
        means = {}
        for c in channels:
            flow = seg.heat_flow(c)
            means[c] = seg.count * _mean(time, flow, t0, t1) if flow is not None else 0.0
        return Row(seg.label, "segment", means)

    seg_rows = {s.name: seg_row(s) for s in all_segs}
    rest = [s for s in all_segs if s.name not in chosen_names]
    others = None
    if rest:
        others = Row(f"other segments ({len(rest)})", "others",
                     {c: sum(seg_rows[s.name].means[c] for s in rest) for c in channels})

    body_trap = Row("whole body", "body", {}, "trapezoid")
    for c in channels:
        flow = res.body_heat_flow(c)
        body_trap.means[c] = _mean(time, flow, t0, t1) if flow is not None else 0.0

    body = _body_from_cumulative(res, channels, t0, t1) or body_trap
    # Blood pool (and anything else outside the segments): whole body minus the segments, exact when both rows are
    # (the pool's flows are then as exact as theirs), the trapezoid of both otherwise.
    exact = body.method == "cumulative" and all(r.method == "cumulative" for r in seg_rows.values())
    whole = body if exact else body_trap
    pool_means = {c: whole.means[c] - sum(r.means[c] for r in seg_rows.values()) for c in channels}
    scale = max([abs(v) for v in whole.means.values()] + [1e-300])
    pool = None
    # Only a file with whole-body blood flows can show a pool (it exchanges heat only with the blood).
    if res.segment_names() and res.body_heat_flow("blood") is not None and \
            max(abs(v) for v in pool_means.values()) > 1e-9 * scale:
        pool = Row("blood pool", "pool", pool_means, "difference")
    return WindowBudget(t0, t1, channels, [seg_rows[s.name] for s in chosen], others, pool, body, body_trap)


def _energy_changes(time, channels, cumulative, flow, t0: float, t1: float, steps=None,
                    at_steps=lambda c: None) -> dict[str, float] | None:
    """Energy gained over [t0, t1] per channel from cumulative energies, E(t1) − E(t0) [J], E between outputs by
    cumulative_at (exact at the timeline's steps `steps` where `at_steps(c)` gives E there, /steps); None for a point
    window or when a channel's energy or flow is missing. `cumulative(c)`, `flow(c)`, `at_steps(c)`: arrays or
    None; storage's flow is its rate of storage."""
    if t1 <= t0 or len(time) < 2:
        return None
    changes = {}
    for c in channels:
        energy, rate = cumulative(c), flow(c)
        if energy is None or rate is None:
            return None
        stored = at_steps(c)
        changes[c] = (cumulative_at(time, energy, rate, t1, steps, stored).value
                      - cumulative_at(time, energy, rate, t0, steps, stored).value)
    return changes


def _body_from_cumulative(res: Results, channels, t0: float, t1: float) -> Row | None:
    """Whole-body means from /body/cumulative_heat, or None when they are missing or the window is a point."""
    changes = _energy_changes(res.time, [c for c in channels if c != "storage"], res.cumulative_heat,
                              res.body_heat_flow, t0, t1, res.step_times(), res.step_cumulative_heat)
    if changes is None:
        return None
    means = {c: delta / (t1 - t0) for c, delta in changes.items()}
    gained = 0.0
    for delta in changes.values():
        gained += delta
    err = res.optional("/body/energy_balance_error")
    if "storage" in channels:
        d_err = 0.0
        if err is not None:
            d_err = float(np.interp(t1, res.time, err.values) - np.interp(t0, res.time, err.values))
        means["storage"] = (gained - d_err) / (t1 - t0)
    return Row("whole body", "body", means, "cumulative")
