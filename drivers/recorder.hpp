#pragma once
//! The run loop's recording, split by what is recorded. Recorder (recorder.cpp) opens the results file, writes
//! the run's metadata and solver statistics, and calls the parts in turn at every output time:
//!   BudgetRecorder       heat flows, storage, cumulative heat, energy balance (record_budget.cpp); also fills
//!                        the RunSummary, with or without a file
//!   EnvironmentRecorder  surroundings series, controller states, convection coefficients, events
//!                        (record_environment.cpp)
//!   FieldRecorder        temperature fields, surface and blood temperatures, core/blood/skin means, meshes
//!                        (record_fields.cpp)
//! Progress on stderr is ProgressReporter (progress.hpp).
#include <cstdint>
#include <memory>
#include <span>
#include <string>
#include <vector>

#include "drivers/record_budget.hpp"
#include "drivers/record_control_grid.hpp"
#include "drivers/record_environment.hpp"
#include "drivers/record_fields.hpp"
#include "drivers/record_tissue_limits.hpp"
#include "drivers/results.hpp"
#include "drivers/simulation.hpp"

namespace thermorph {

//! Writes outputs as they come: one time point per call.
class Recorder {
 public:
  //! `expectedPoints`: the number of time points the run will record (0: not known), which lets the file leave
  //! small series uncompressed (ResultsFile::expectPoints).
  Recorder(const Body& body, const NetworkSystem& system, const RunOptions& options, std::uint64_t expectedPoints = 0);

  //! Record time t with full state y (nodes, controls, then channel energies); fills `summary`.
  void record(double t, std::span<const double> y, double initialStored, RunSummary& summary);
  //! Only the observer at time t (RunOptions::observerTimes): `scratch` gets the flows and energies there; nothing
  //! is written or checked (freezing, controller grid), so the run's results are those of a run without it.
  void observe(double t, std::span<const double> y, double initialStored, RunSummary& scratch);
  //! The cumulative energies at a step of the timeline (time t, the state where the integrator stopped before it
  //! restarts), kept for RunSummary::step* and the results' /steps group, written at finish(); nothing without a
  //! results file or an observer.
  void recordStep(double t, std::span<const double> y, double initialStored);
  //! Solver statistics and completeness, then commit (a partial run goes to the incomplete path).
  void finish(RunSummary& summary, bool steady);
  void setIncompletePath(std::string p) { incompletePath_ = std::move(p); }
  //! A warning found by the driver (a steady start with an exhausted heat defence), stored with the run's others.
  void addRunWarning(std::string w) { driverWarnings_.push_back(std::move(w)); }
  //! The states recorded are steady states (runSteady): the controller-output check takes its shift in full.
  void steadyState() { controlGrid_.setSteady(); }

 private:
  const Body& body_;
  const NetworkSystem& system_;
  OutputObserver observer_;
  bool flows_ = true;  //!< RunOptions::flowsAtOutputs, or a results file
  std::unique_ptr<ResultsFile> file_;
  std::size_t time_ = 0;
  BudgetRecorder budget_;
  std::unique_ptr<EnvironmentRecorder> environment_;
  std::unique_ptr<FieldRecorder> fields_;
  TissueLimitWatch tissueLimits_;         //!< tissue below 0 degC or above 45 degC: warnings of the run (record_tissue_limits.hpp)
  ControlGridWatch controlGrid_;          //!< controller outputs' grid error (record_control_grid.hpp)
  std::vector<double> faceTemperatures_;  //!< [K], from the budget, used by the other parts
  std::string incompletePath_;
  std::vector<std::string> driverWarnings_;
  RunSummary steps_;  //!< recordStep's energies (stepTimes, stepChannelEnergy, ...), moved into the summary at finish
};

//! `dir/name.incomplete.ext` for `dir/name.ext`: where a partial run is written.
std::string incompleteName(const std::string& output);

}  // namespace thermorph
