#pragma once
//! Grid refinement study of one case: the case at 1x, 2x, 4x, ... its cells (axial and radial cells of every
//! segment, layers and coats multiplied), observed order of convergence and Richardson-extrapolated values of the
//! heat budget and key temperatures (Roache 1998, "Verification and Validation in Computational Science and
//! Engineering", ch. 5: p = ln((f1 - f2) / (f2 - f3)) / ln 2, f* = f3 + (f3 - f2) / (2^p - 1)).
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "models/case.hpp"
#include "solver/integrator.hpp"

namespace thermorph {

struct RefineOptions {
  std::string casePath;
  std::vector<std::string> overrides;  //!< --set
  int levels = 3;                      //!< grids 1x, 2x, ..., 2^(levels-1) x
  bool steady = false;                 //!< steady states instead of transient runs
  std::string duration;                //!< overrides run.duration (text with a unit), "" : the case's
  std::vector<std::string> metrics;    //!< selectors as in sweep --metric; default: budget and key temperatures
  std::string window;                  //!< "START:END"; default the whole run
  //! Each finer level's steady start (or steady state) from the coarser level's mapped onto its cells (Newton
  //! alone, RunOptions::steadyGuess); false (`--cold-start`): every level from the case's initial temperature.
  bool warmStart = true;
};

//! One reported quantity over the levels.
struct RefineRow {
  std::string name, units;
  std::vector<double> values;  //!< per level
  double order = 0.0;          //!< observed order from the finest three levels (NaN: not monotone)
  double extrapolated = 0.0;   //!< Richardson value (NaN when the order is undefined)
  double coarseVsFinest = 0.0; //!< level 1 minus the finest level (W or K)
  //! |coarseVsFinest| / |finest| for flows; / |finest - reference| for temperatures; for storage (NAME ending in
  //! heat_flow.storage) / the largest |finest| of the same body or segment's channel heat flows (storageStem)
  double relative = 0.0;
};

//! "body.heat_flow." for "body.heat_flow.storage", "segments.X.heat_flow." for a segment's storage; "" otherwise.
std::string storageStem(const std::string& name);

struct RefineResult {
  std::vector<double> factors;   //!< 1, 2, 4, ...
  std::vector<long> cells;       //!< tissue cells of the body per level
  std::vector<double> seconds;   //!< wall time per level
  //! Per level: whether it has a steady start (or is a steady state), whether it was found from the coarser level's
  //! (warm), and its solver counters (RunSummary::steadyStatistics).
  std::vector<char> hasSteadyStart, steadyWarm;
  std::vector<SolverStatistics> steadyStatistics;
  std::vector<RefineRow> rows;
  std::vector<std::string> warnings;  //!< of the 1x grid
  double referenceTemperature = 0.0;  //!< [degC] the medium at t = 0 (temperatures' relative differences)
};

//! The case with every cell count multiplied by `factor` (axial cells of non-spheres, layer and coat cells).
Case refinedCase(const Case& c, int factor);
//! The inverse: every cell count divided by `factor` (RunSpec::appliedRefinement divided too), so that
//! refinedCase(coarsenedCase(c, k), k) has c's grid; nullopt when a count is not a multiple of `factor`.
std::optional<Case> coarsenedCase(const Case& c, int factor);

class Body;

//! A steady state of `coarse` [nodes + controls] on the cells of `fine`, the same case on a grid refined by an integer
//! factor (refinedCase: every axial and layer cell count multiplied, the same grading mapping): each fine tissue cell
//! takes the value of the coarse cell of the same segment and layer that contains its centre (the cell edges of
//! axialCellEdges and LayerSpec::cellEdges on k n cells hold those on n, so fine cell j of a run of k n lies in coarse
//! cell j / k); each fine blood node the coarse one of its kind in the axial cell containing its centre (the nearest
//! axial cell with one, where that has none); the central pool and the controller states their coarse values. Empty
//! when the two bodies do not match that way (other segments, layers or controllers).
std::vector<double> mapSteadyState(const Body& coarse, std::span<const double> state, const Body& fine);

//! Run the study. Throws CaseError on bad input, SolverError when a level fails.
RefineResult runRefinement(const RefineOptions& options);

//! The table for a person (with the caution) and as CSV.
std::string refineTable(const RefineResult& result);
std::string refineCsv(const RefineResult& result);

}  // namespace thermorph
