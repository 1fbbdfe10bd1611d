#pragma once
//! Shared helpers of the validation tests: cases from TOML text, transient and steady runs, radial fields,
//! root bracketing, Jacobian lookup and convergence orders.
#include <cmath>
#include <cstdio>
#include <functional>
#include <memory>
#include <span>
#include <string>
#include <vector>

#include "models/body.hpp"
#include "models/case.hpp"
#include "solver/assembly.hpp"
#include "solver/integrator.hpp"
#include "drivers/simulation.hpp"

namespace thermorph::testing {

//! A number as TOML text with full double precision (bare numbers are SI in a case file).
inline std::string num(double value) {
  char buffer[40];
  std::snprintf(buffer, sizeof buffer, "%.17g", value);
  return buffer;
}

//! Load a case from TOML text and discretise it.
inline std::unique_ptr<Body> bodyFromToml(const std::string& toml) {
  return std::make_unique<Body>(loadCaseFromString(toml, "test-case"));
}

//! Initial transient state: every node at run.initial_temperature, channel energies zero [K, J].
inline std::vector<double> initialState(const Body& body, const NetworkSystem& system) {
  std::vector<double> y(system.size(), 0.0);
  for (Index i = 0; i < system.nodeCount(); ++i) y[i] = body.spec().run.initialTemperature;
  return y;
}

//! Integrate the case from its uniform initial temperature with run.rtol and run.atol; node temperatures at
//! each of `times` [K] ([times.size()][nodes]).
inline std::vector<std::vector<double>> temperaturesAt(const Body& body, std::span<const double> times) {
  NetworkSystem system(body.network(), NetworkSystem::Mode::Transient);
  std::vector<double> y = initialState(body, system);
  IntegratorOptions options;
  options.rtol = body.spec().run.rtol;
  options.atol.assign(system.size(), body.spec().run.atol);
  // Channel energies are quadratures of the flows: kept out of the error test, as runTransient does.
  for (Index i = system.nodeCount(); i < system.size(); ++i) options.atol[i] = 1e30;
  Integrator integrator(system, y, 0.0, options);
  std::vector<std::vector<double>> out;
  for (double t : times) {
    integrator.advanceTo(t);
    auto s = integrator.state();
    out.emplace_back(s.begin(), s.begin() + static_cast<std::ptrdiff_t>(system.nodeCount()));
  }
  return out;
}

//! Steady node temperatures by KINSOL from the uniform initial temperature [K].
inline std::vector<double> steadyTemperatures(const Body& body) {
  NetworkSystem system(body.network(), NetworkSystem::Mode::Steady);
  std::vector<double> guess(system.size(), body.spec().run.initialTemperature);
  return solveSteadyState(system, guess, 0.0);
}

//! Radial temperature field of one axial cell of a segment, inside out [K] ([nr]).
inline std::vector<double> radialField(const Body& body, std::span<const double> temperatures, std::size_t segment,
                                       int iz = 0) {
  const SegmentMesh& m = body.segments().at(segment);
  std::vector<double> field;
  for (int ir = 0; ir < m.nr; ++ir) field.push_back(temperatures[m.node(iz, ir)]);
  return field;
}

//! Root of f in [a, b] by bisection (f(a) and f(b) of opposite sign) to the resolution of doubles.
inline double bisect(const std::function<double(double)>& f, double a, double b) {
  double fa = f(a);
  for (int i = 0; i < 200; ++i) {
    double c = 0.5 * (a + b);
    if (c <= a || c >= b) break;
    double fc = f(c);
    if ((fc < 0.0) == (fa < 0.0)) {
      a = c;
      fa = fc;
    } else {
      b = c;
    }
  }
  return 0.5 * (a + b);
}

//! The first `count` positive roots of f: sign changes on a grid of spacing `step` from `start`, then bisection.
inline std::vector<double> positiveRoots(const std::function<double(double)>& f, int count, double start = 1e-9,
                                         double step = 1e-2) {
  std::vector<double> roots;
  double a = start, fa = f(a);
  while (static_cast<int>(roots.size()) < count) {
    double b = a + step, fb = f(b);
    if ((fa < 0.0) != (fb < 0.0)) roots.push_back(bisect(f, a, b));
    a = b;
    fa = fb;
  }
  return roots;
}

//! Value of Jacobian entry (row, col) from values in pattern order; 0 outside the pattern.
inline double jacobianEntry(const SparsePattern& pattern, std::span<const double> values, Index row, Index col) {
  for (Index p = pattern.columnStart[col]; p < pattern.columnStart[col + 1]; ++p)
    if (pattern.rowIndex[p] == row) return values[p];
  return 0.0;
}

//! True when (row, col) is in the sparsity pattern.
inline bool inPattern(const SparsePattern& pattern, Index row, Index col) {
  for (Index p = pattern.columnStart[col]; p < pattern.columnStart[col + 1]; ++p)
    if (pattern.rowIndex[p] == row) return true;
  return false;
}

//! Where the Jacobian can be nonzero, row-major [size x size]: the pattern and the junctions' rank-one terms
//! (NetworkSystem::junctionTerms: every row of u with every column of v).
inline std::vector<char> jacobianStructure(const NetworkSystem& system) {
  const Index n = system.size();
  const SparsePattern& p = system.pattern();
  std::vector<char> s(n * n, 0);
  for (Index col = 0; col < n; ++col)
    for (Index k = p.columnStart[col]; k < p.columnStart[col + 1]; ++k) s[p.rowIndex[k] * n + col] = 1;
  for (const RankOneTerm& t : system.junctionTerms())
    for (auto [row, u] : t.u)
      for (auto [col, v] : t.v) s[row * n + col] = 1;
  return s;
}

//! Observed order of convergence between grids refined by two [1].
inline double observedOrder(double coarseError, double fineError) { return std::log2(coarseError / fineError); }

//! Run options that write no file and print no progress.
inline RunOptions silentRun() {
  RunOptions options;
  options.output = "";
  options.quiet = true;
  return options;
}

//! A [tissues.clamp] table: a tissue of conductivity `k` [W/(m K)] perfused at 1 1/s, without metabolism, that holds
//! itself at the fixed arterial temperature (copperPinOnClamp).
inline std::string clampTissue(const std::string& k) {
  return "[tissues.clamp]\nconductivity = " + k +
         "\ndensity = 1000\nspecific_heat = 4000\nmetabolic_heat = 0\nperfusion = 1\nq10 = 1\n";
}

//! The reservoir segment of copperPinOnClamp: a sphere of radius 10 cm of the clamp tissue in one cell, no exchange
//! with the surroundings.
inline std::string clampReservoir() {
  return "[[segments]]\nname = \"reservoir\"\nshape = \"sphere\"\nlayers = [{ tissue = \"clamp\", thickness = 0.1, "
         "cells = 1 }]\nsurface = { convection = 0 }\n";
}

//! The case text of a copper pin (k = 398 W/(m K); Incropera et al. 2007, Table A.1) on a clamp held at 30 degC by
//! its perfusion from fixed arterial blood, from [circulation] to the pin's `shape = "cylinder"` line; the caller
//! gives the title and [run] before it and the pin's length, cells, layers and surroundings after it.
inline std::string copperPinOnClamp() {
  return "[circulation]\nfixed_arterial_temperature = \"30 degC\"\n" + clampTissue("0.5") + R"toml([tissues.copper]
conductivity = 398
density = 8933
specific_heat = 385
metabolic_heat = 0
perfusion = 0
q10 = 1
)toml" + clampReservoir() + R"toml([[segments]]
name = "pin"
parent = "reservoir"
shape = "cylinder"
)toml";
}

//! The case text of a furred cylinder whose tissue is held isothermal at 37 degC (conductivity 1000 W/(m K) and
//! perfusion 1 1/s from fixed arterial blood, no metabolism): 2 cm of tissue in two cells, 1 cm of fur in four,
//! 10 cm long, one axial cell, in 0 degC air with a fixed 10 W/(m2 K). `segmentKeys` and `environmentKeys` are TOML
//! lines added to the segment and to [environment].
inline std::string isothermalFurredCylinder(const std::string& segmentKeys = "", const std::string& environmentKeys = "") {
  return R"toml([circulation]
fixed_arterial_temperature = "37 degC"
[tissues.core]
conductivity = 1000
density = 1000
specific_heat = 3600
metabolic_heat = 0
perfusion = "1 1/s"
q10 = 1
[environment]
temperature = "0 degC"
convection = "10 W/(m2 K)"
)toml" + environmentKeys + R"toml(
[[segments]]
name = "trunk"
shape = "cylinder"
length = "10 cm"
axial_cells = 1
layers = [{ tissue = "core", thickness = "2 cm", cells = 2 }]
coat = { material = "fur", thickness = "1 cm", cells = 4 }
)toml" + segmentKeys + "\n";
}

// A bare cylinder (radius 1.2 cm, length 10 cm, one axial cell, insulated ends: one exterior face of area
// 2 pi r L) with a wet skin in the sun, arterial blood pinned at 37 degC. It starts in sea water at 4 degC
// (current 0.5 m/s), surfaces at 10 min into air at 15 degC (wind 1 m/s) and dives again at 20 min.
inline const std::string divingLeg = R"toml(
[run]
duration = "30 min"
output_interval = "5 min"
[circulation]
fixed_arterial_temperature = "37 degC"
[[segments]]
name = "leg"
shape = "cylinder"
length = "10 cm"
axial_cells = 1
layers = [{ tissue = "muscle", thickness = "1 cm", cells = 3 }, { tissue = "skin", thickness = "0.2 cm", cells = 1 }]
surface = { ends = "insulated", wetted_fraction = 0.5 }
[environment]
medium = "sea_water"
temperature = "4 degC"
speed = "0.5 m/s"
solar_irradiance = "300 W/m2"
relative_humidity = 0.6
[[events]]
at = "10 min"
label = "surface"
environment = { medium = "air", temperature = "15 degC", speed = "1 m/s" }
[[events]]
at = "20 min"
label = "dive 2"
environment = { medium = "sea_water", temperature = "4 degC", speed = "0.5 m/s" }
)toml";

}  // namespace thermorph::testing
