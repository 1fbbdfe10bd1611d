#pragma once
//! Runs a discretised body: transient (CVODE) or steady (KINSOL), recording results and the heat budget.
#include <atomic>
#include <cstdio>
#include <functional>
#include <span>
#include <string>
#include <vector>

#include "models/body.hpp"
#include "solver/integrator.hpp"

namespace thermorph {

struct RunSummary;

//! Called at every output time with the time [s], the node temperatures [K] and the summary filled for that
//! time (flows, storage, channel energies). Sweeps compute their metrics from it.
using OutputObserver = std::function<void(double time, std::span<const double> temperatures, const RunSummary&)>;

struct RunOptions {
  std::string output;        //!< HDF5 path ("" : no file)
  std::string commandLine;   //!< stored with the results
  bool quiet = false;        //!< no progress on stderr
  double progressAfter = 1.0;  //!< [s] of wall time before progress lines start (tests: 0, progress from the start)
  LinearSolverKind linearSolver = LinearSolverKind::Klu;
  OutputObserver observer;   //!< optional
  //! Optional stop request (drivers/stop_signal.hpp: set by SIGINT/SIGTERM): polled between outputs and within
  //! them; the run then ends as incomplete with `stopped` set, keeping its outputs so far.
  const std::atomic<bool>* stop = nullptr;
  //! Heat flows by group and channel at every output (RunSummary::flows and storage: a face solve of the whole
  //! surface per output, 3-7 % of a run). A caller without a results file that reads only temperatures, controls
  //! and energies (a transient sweep's metrics) sets false: flows and storage then stay zero. A results file
  //! always gets them.
  bool flowsAtOutputs = true;
  //! Times between outputs at which only the observer is called (a fit's observation times; sorted, inside the
  //! run, none an output time): the model there by CVODE's interpolation, with the steps of a run without them
  //! (Integrator::firstStepToward), not by linear interpolation between outputs. Nothing is written for them.
  std::vector<double> observerTimes;
  //! A warm start of the steady start (`initial = "steady"`) or of runSteady's state [nodes + controls]: the steady
  //! state is first sought by Newton (KINSOL) from it, without the pseudo-time relaxation; when Newton fails or lands
  //! far from it (warmSteadyState), the usual relaxation from the case's initial temperature. Empty: the usual.
  //! `thermorph refine` passes the coarser level's steady state mapped onto the finer cells (drivers/refine.hpp).
  //! A run without a steady start ignores it.
  std::vector<double> steadyGuess;
  //! A run on a refined grid (run.grid_refinement = N > 1, Case::run.appliedRefinement) without steadyGuess finds its
  //! steady start (or runSteady's state) as `thermorph refine` finds a finer level's: the unrefined grid's steady
  //! state first (relaxation and KINSOL on about N^2 times fewer cells), mapped onto the run's cells as the start of
  //! Newton, with the same safeguards and fallback (coarseSteadyGuess, warmSteadyState). False (`--cold-start`):
  //! the relaxation from the case's initial temperature, as on an unrefined grid.
  bool coarseSteadyStart = true;
  //! Keep the steady state found in RunSummary::steadyState (refine's next level; off: a large run's steady start
  //! is not held through its integration).
  bool keepSteadyState = false;
};

struct RunSummary {
  bool complete = true;
  bool stopped = false;          //!< incomplete because RunOptions::stop was set
  std::string outputPath;        //!< file written
  std::string failure;           //!< solver failure message when incomplete
  double finalTime = 0.0;        //!< [s]
  SolverStatistics statistics;
  std::vector<double> flows;     //!< final heat flows [groups x channels] [W], unweighted
  std::vector<double> storage;   //!< final storage per group [W]
  std::vector<double> channelEnergy;  //!< cumulative heat per channel over the run [J], weighted
  double storedChange = 0.0;     //!< change of stored heat over the run [J]
  double energyBalanceError = 0.0;    //!< sum of channel energies minus stored change [J]
  double throughput = 0.0;       //!< gross heat exchanged, for the relative error [J]
  //! Cumulative heat per group and channel since the start [groups x channels] [J], one copy of the group
  //! (unweighted, as `flows`), integrated by CVODE with the state (NetworkSystem group energies).
  std::vector<double> segmentEnergy;
  std::vector<double> segmentStoredChange;  //!< change of the stored heat of one copy of each group [J]
  std::vector<double> segmentBalanceError;  //!< per group: sum of its channel energies minus its stored change [J]
  std::vector<double> finalState;     //!< node temperatures [K]
  std::vector<double> controls;       //!< controller states at the last output [1]
  std::vector<std::string> warnings;     //!< every warning of the run: body, environment, then runWarnings
  std::vector<std::string> runWarnings;  //!< found while running (tissue below 0 degC), also in `warnings`
  //! The steady start (or runSteady's state) found [nodes + controls] with RunOptions::keepSteadyState; empty
  //! otherwise, without a steady start, or when stopped in it.
  std::vector<double> steadyState;
  //! After a steady start (`initial = "steady"`): core, blood and mean skin temperatures at t = 0 [K] (blood NaN
  //! without a blood pool), printed with the final ones; empty otherwise.
  std::vector<double> startTemperatures;
  //! The steady start's solver counters (relaxation steps, then Newton iterations, right-hand sides and Jacobians of
  //! relaxation and KINSOL together); runSteady's are `statistics`.
  SolverStatistics steadyStatistics;
  //! The steady state was found by Newton from RunOptions::steadyGuess or, on a refined grid, from the coarser
  //! grid's steady state (coarseSteadyGuess)
  bool steadyWarm = false;
  //! A refined run's unrefined steady solve (RunOptions::coarseSteadyStart, coarseSteadyGuess): its counters
  //! (relaxation steps, Newton iterations, right-hand sides, Jacobians); zero when none was solved.
  SolverStatistics coarseStatistics;
  //! The timeline's steps the run reached (EnvironmentModel::breakpoints: events, ends of ramps, weather rows; the
  //! integrator stops exactly at each and restarts) [s], with a results file or an observer; empty otherwise and
  //! for a steady state. The energies there, exact (the state at the stop, not interpolated between outputs):
  std::vector<double> stepTimes;
  std::vector<double> stepChannelEnergy;   //!< [step x channel] whole-body heat gained since t = 0 [J], weighted
  std::vector<double> stepSegmentEnergy;   //!< [step x group x channel] one copy of each group [J], as segmentEnergy
  std::vector<double> stepSegmentStoredChange;  //!< [step x group] change of the heat stored in one copy [J]
};

//! Integrate the case from its initial state for run.duration; output every run.output_interval.
RunSummary runTransient(const Body& body, const RunOptions& options);
//! Steady state of the case (KINSOL), written with one time point.
RunSummary runSteady(const Body& body, const RunOptions& options);
//! The steady state (node temperatures and controller states) of the surroundings and physiology at t = 0 from
//! `guess` [nodes + controls], as runSteady and a run with `initial = "steady"` find it: pseudo-time relaxation,
//! then KINSOL. Throws SolverError when it fails.
//! With `warm` given (RunOptions::steadyGuess), Newton from it first; `*warmUsed` says whether its root was kept.
std::vector<double> steadyState(const Body& body, std::span<const double> guess, SolverStatistics* statistics = nullptr,
                                std::span<const double> warm = {}, bool* warmUsed = nullptr);
//! The warm start of a refined run (RunOptions::coarseSteadyStart): for a body whose counts carry a refinement N > 1
//! (Case::run.appliedRefinement), the steady state of its unrefined grid (coarsenedCase; relaxation, then KINSOL, as
//! any steady start) mapped onto `body`'s cells (mapSteadyState) [nodes + controls]. Directly from 1x, not through
//! the grids between: the Newton iterations from 1x at 4x are those from 2x (measured on the four steady-start
//! examples and the snowbird: 3-4 either way), so a 2x solve on the way costs without gaining. Empty for N = 1, when
//! a count does not divide by N, when the unrefined solve fails or when `stop` is set; never throws for a solver
//! failure. The unrefined grid's range warnings are not the run's and are discarded (ValidityLogIsolation).
//! `statistics`: that solve's counters.
std::vector<double> coarseSteadyGuess(const Body& body, SolverStatistics* statistics = nullptr,
                                      const std::atomic<bool>* stop = nullptr);
//! Largest change of any node temperature [K], and of the heat-capacity-weighted mean temperature [K], between a warm
//! guess and the root Newton found from it, beyond which the root is not kept (the relaxation from the case's guess
//! decides instead). A coarser level's steady state on the finer cells lies within the grid error of the finer one's:
//! measured on `thermorph refine --steady` of the four steady-start examples at 1x -> 2x and 2x -> 4x, nodes at most
//! 6.3 K (the wading bird) and the mean at most 0.021 K; the refine benchmark's swimmer (tests/bench/studies) 17.6 K
//! and 0.0017 K (cell values carried across steep surface gradients in 6 degC water). Another root of the steady
//! equations (a runaway branch of Q10 metabolism, which the relaxation exists to avoid) moves the whole body.
inline constexpr double kWarmStartNodeChange = 50.0;
inline constexpr double kWarmStartMeanChange = 1.0;
//! Per-segment heat budget table, whole-body totals and the energy-balance error.
void printBudget(const Body& body, const RunSummary& summary, std::FILE* out);

}  // namespace thermorph
