#!/usr/bin/python3
"""SciPy reference for the thermorph benchmark: the same 1-D radial finite-volume discretisation integrated by
scipy.integrate.solve_ivp(method=BDF) with a sparse analytic Jacobian.

    scipy_bdf.py run CASE.toml OUT.npz [TOL]  integrate, save final temperatures and statistics
                                              (TOL: rtol = atol = TOL instead of the case's run.rtol, run.atol)
    scipy_bdf.py compare A B                  max |T_A - T_B| at the end (each .npz or thermorph .h5), volumes checked

The case must be one sphere, or one cylinder with one axial cell and insulated ends, with every value a number in
SI units and every tissue fully defined under [tissues.NAME] (the benchmark cases written by thermorph_bench are).
The scheme is that of models/body.cpp: cell-centred control volumes, exact shell volumes, exact shell conduction
resistances from cell centre to face to cell centre (cylinder ln(b/a)/(2 pi k L), sphere (1/a - 1/b)/(4 pi k)),
Pennes (1948) perfusion to a fixed arterial temperature, metabolism P Q10^((T - T_ref)/10), and Newton cooling
of the outer face through the outer half-cell resistance. Only timing is measured here, nothing is asserted.
"""
import math
import sys
import time
import tomllib

import numpy as np
from scipy.integrate import BDF, solve_ivp
import scipy.sparse as sp


class CountingBDF(BDF):
    """SciPy's BDF unchanged, counting accepted steps (solve_ivp does not report them)."""

    accepted = 0  # one call of _step_impl is one accepted step (rejected attempts are retried inside)

    def _step_impl(self):
        result = super()._step_impl()
        CountingBDF.accepted += 1
        return result


class RadialModel:
    """Node capacities [J/K], conductances [W/K] and sources [W] of a 1-D radial case."""

    def __init__(self, case):
        (seg,) = case["segments"]
        self.shape = seg["shape"]
        if self.shape not in ("cylinder", "sphere"):
            raise SystemExit("only a sphere or a cylinder")
        if self.shape == "cylinder" and (seg.get("axial_cells", 1) != 1 or seg["surface"]["ends"] != "insulated"):
            raise SystemExit("cylinder must have one axial cell and insulated ends")
        if "coat" in seg:
            raise SystemExit("no coat")
        tissues = case["tissues"]
        circ = case["circulation"]
        run = case["run"]
        length = seg.get("length", 1.0)

        # Cell boundaries and tissue of each cell, inside out.
        bounds, k, rho, c, qm, omega, q10 = [np.zeros(1)], [], [], [], [], [], []
        r = 0.0
        for layer in seg["layers"]:
            n = layer.get("cells", 1)
            b = r + np.arange(1, n + 1) * (layer["thickness"] / n)
            r += layer["thickness"]
            b[-1] = r
            bounds.append(b)
            t = tissues[layer["tissue"]]
            for name, value in zip((k, rho, c, qm, omega, q10),
                                   ("conductivity", "density", "specific_heat", "metabolic_heat", "perfusion", "q10")):
                name.append(np.full(n, float(t[value])))
        bounds = np.concatenate(bounds)
        k, rho, c, qm, omega, q10 = (np.concatenate(v) for v in (k, rho, c, qm, omega, q10))
        a, b = bounds[:-1], bounds[1:]
        centre = 0.5 * (a + b)

        if self.shape == "sphere":
            volume = 4.0 / 3.0 * np.pi * (b**3 - a**3)
            resistance = lambda r0, r1, kk: (1.0 / r0 - 1.0 / r1) / (4.0 * np.pi * kk)
            area = 4.0 * np.pi * bounds[-1] ** 2
        else:
            volume = np.pi * length * (b * b - a * a)
            resistance = lambda r0, r1, kk: np.log(r1 / r0) / (2.0 * np.pi * kk * length)
            area = 2.0 * np.pi * bounds[-1] * length

        self.volume = volume
        self.capacity = rho * c * volume
        # Centre -> shared face -> next centre.
        self.conductance = 1.0 / (resistance(centre[:-1], b[:-1], k[:-1]) + resistance(b[:-1], centre[1:], k[1:]))
        self.power = qm * volume
        self.q10 = q10
        self.log_q10 = np.log(q10) / 10.0
        self.reference = float(case.get("body", {}).get("q10_reference", 310.15))  # thermorph's default: 37 degC
        blood = float(circ.get("blood_density", 1050.0)) * float(circ.get("blood_specific_heat", 3617.0))
        self.perfusion = omega * blood * volume
        self.arterial = float(circ["fixed_arterial_temperature"])
        # Outer face: half-cell conductance in series with h A (face temperature eliminated exactly).
        half = 1.0 / resistance(centre[-1], b[-1], k[-1])
        h = float(seg.get("surface", {}).get("convection", case["environment"].get("convection", 10.0)))
        hA = h * area
        self.surface = half * hA / (half + hA)
        self.medium = float(case["environment"]["temperature"])
        self.inv_capacity = 1.0 / self.capacity
        self.n = len(volume)
        self.duration = float(run["duration"])
        self.output_interval = float(run["output_interval"])
        self.initial = float(run["initial_temperature"])
        self.rtol = float(run.get("rtol", 1e-6))
        self.atol = float(run.get("atol", 1e-6))

    def rhs(self, t, T):
        """dT/dt [K/s]."""
        flow = self.conductance * (T[1:] - T[:-1])
        q = self.perfusion * (self.arterial - T) + self.power * np.exp((T - self.reference) * self.log_q10)
        q[:-1] += flow
        q[1:] -= flow
        q[-1] += self.surface * (self.medium - T[-1])
        return q * self.inv_capacity

    def jacobian(self, t, T):
        """d(dT/dt)/dT as scipy.sparse CSC (tridiagonal) [1/s]."""
        g = self.conductance
        diagonal = -self.perfusion + self.power * self.log_q10 * np.exp((T - self.reference) * self.log_q10)
        diagonal[:-1] -= g
        diagonal[1:] -= g
        diagonal[-1] -= self.surface
        s = self.inv_capacity
        return sp.diags([g * s[1:], diagonal * s, g * s[:-1]], [-1, 0, 1], format="csc")


def run(case_path, out_path, tolerance=None):
    start_process = time.process_time()
    with open(case_path, "rb") as f:
        model = RadialModel(tomllib.load(f))
    if tolerance is not None:
        model.rtol = model.atol = tolerance
    outputs = np.arange(0.0, model.duration + 0.5 * model.output_interval, model.output_interval)
    y0 = np.full(model.n, model.initial)
    start = time.perf_counter()
    sol = solve_ivp(model.rhs, (0.0, model.duration), y0, method=CountingBDF, t_eval=outputs, rtol=model.rtol,
                    atol=model.atol, jac=model.jacobian)
    wall = time.perf_counter() - start
    if not sol.success:
        raise SystemExit(f"solve_ivp failed: {sol.message}")
    np.savez(out_path, final=sol.y[:, -1], volume=model.volume, nfev=sol.nfev, njev=sol.njev, nlu=sol.nlu,
             steps=CountingBDF.accepted, solve_wall=wall, cpu=time.process_time() - start_process)
    print(f"scipy BDF: {model.n} cells, {CountingBDF.accepted} steps, {sol.nfev} rhs, {sol.njev} Jacobians, "
          f"{sol.nlu} LU, solve_ivp {wall:.{decimals(wall)}f} s wall")


def decimals(seconds):
    """Decimals for 4 significant digits in fixed notation, at most to the microsecond (thermorph's "s wall")."""
    return min(6, max(0, 3 - math.floor(math.log10(max(seconds, 1e-6)))))


def final_temperatures(path):
    """Final node temperatures [K] and cell volumes [m3] from a .npz written here or a thermorph results file."""
    if path.endswith(".npz"):
        ref = np.load(path)
        return ref["final"], ref["volume"]
    import h5py

    with h5py.File(path, "r") as f:
        (name,) = list(f["segments"])
        g = f["segments"][name]
        return g["temperature"][-1].ravel() + 273.15, g["volume"][()].ravel()  # temperatures stored in degC


def compare(a_path, b_path):
    a, va = final_temperatures(a_path)
    b, vb = final_temperatures(b_path)
    dT = np.max(np.abs(a - b))
    dV = np.max(np.abs(va - vb) / vb)
    print(f"max |dT| = {dT:.2e} K, max relative cell-volume difference = {dV:.1e} "
          f"(final T {b.min() - 273.15:.3f} .. {b.max() - 273.15:.3f} degC)")


if __name__ == "__main__":
    if len(sys.argv) in (4, 5) and sys.argv[1] == "run":
        run(sys.argv[2], sys.argv[3], float(sys.argv[4]) if len(sys.argv) == 5 else None)
    elif len(sys.argv) == 4 and sys.argv[1] == "compare":
        compare(sys.argv[2], sys.argv[3])
    else:
        raise SystemExit(__doc__)
