#pragma once
//! Parameter sweeps: grids of case overrides and size series, run on local threads or MPI ranks, reduced to
//! one table of metrics per run (HDF5 + CSV), resumable after an interruption.
#include <atomic>
#include <cstdio>
#include <cstdint>
#include <functional>
#include <span>
#include <string>
#include <vector>

#include "models/body.hpp"
#include "models/case.hpp"
#include "models/case_schema.hpp"
#include "drivers/sweep_metrics.hpp"

namespace thermorph {

//! One swept quantity: a case key (or a size-series target) and its values.
struct SweepAxis {
  std::string key;                 //!< case key path ("segments.NAME.length"), or "scale.NAME" / "scale.body"
  bool scale = false;              //!< a geometric size factor of a segment or of the whole body
  std::string target;              //!< scale: segment name or "body"
  std::string spec;                //!< as given on the command line
  std::vector<std::string> texts;  //!< values as passed to the case loader (scale: the factor)
  std::vector<double> numbers;     //!< the same values as numbers in `units` (NaN: not a number)
  std::string units;               //!< unit of `numbers`; "1" for factors, "" for words
};

//! The sweep command line.
struct SweepOptions {
  std::string casePath;
  std::string caseText;                //!< the case as TOML text ("": read casePath; the Python module's dicts)
  std::vector<std::string> overrides;  //!< --set KEY=VALUE, applied to every run first
  std::vector<std::string> vary;       //!< --vary KEY=SPEC
  std::vector<std::string> scale;      //!< --scale SEGMENT=SPEC or body=SPEC
  bool zip = false;                    //!< vary every axis together instead of a full grid
  std::vector<std::string> metrics;    //!< column selectors (prefix or glob) and time_to:QUANTITY<VALUE
  std::string window;                  //!< "START:END" with units, e.g. "30 min:1 h"; "" : the whole run
  bool steady = false;                 //!< steady state (KINSOL) instead of the transient run
  int jobs = 0;                        //!< worker threads; 0: all cores
  std::string output;                  //!< result table (HDF5); the CSV goes beside it
  bool resume = false;                 //!< continue an interrupted sweep from its progress file
  bool quiet = false;                  //!< no progress bar
  bool list = false;                   //!< print the runs and their overrides, run nothing
  std::string commandLine;
  std::FILE* report = stdout;          //!< the summary a person reads (the Python module: a memory stream)
  std::FILE* log = stderr;             //!< warnings and progress
};

//! Everything needed to run any run of the sweep, built identically on every rank.
struct SweepPlan {
  std::string casePath;
  std::string caseText;                //!< the case file, read once
  std::vector<std::string> overrides;  //!< --set
  std::vector<SweepAxis> axes;         //!< --vary axes in order, then --scale axes
  bool zip = false;
  std::vector<std::size_t> shape;      //!< values per grid dimension (zip: one dimension)
  std::size_t runs = 0;
  bool steady = false;
  MetricWindow window;
  std::vector<Threshold> thresholds;
  std::vector<MetricColumn> columns;   //!< the selected metrics, in table order
  std::string title;
  std::string resolvedCase;            //!< resolved base case (TOML), stored with the table
  std::vector<InputFile> inputs;       //!< the base case's text and the files it reads, with SHA-256 (provenance)
  std::uint64_t fingerprint = 0;       //!< of the case text and every run's definition and columns

  //! Index of each axis's value in run `run` (the last axis varies fastest).
  std::vector<std::size_t> valueIndices(std::size_t run) const;
  //! --set, then the --vary values of run `run` (size-series overrides need the case: see runCase).
  std::vector<std::string> keyOverrides(std::size_t run) const;
};

//! Values of a SPEC: "2 cm:12 cm:11" (linear), "log:1 mL/min:100 mL/min:5" (geometric) or "a,b,c" (a list).
//! Throws CaseError naming `what` for a malformed spec.
std::vector<std::string> expandSpec(const std::string& spec, const std::string& what);

//! Overrides that scale segment `target` (or every segment and the body's mass and blood volume, for
//! "body") of the resolved case `c` geometrically by `factor`: every length, radius, width, thickness, layer
//! and coat thickness. Values in SI with 17 digits.
std::vector<std::string> scaleOverrides(const Case& c, const std::string& target, double factor);

//! Build the plan: read the case, expand the axes, check the base case and select the metric columns.
//! Throws CaseError for bad input.
SweepPlan makeSweepPlan(const SweepOptions& options);

//! Every override of run `run`, size series included (loads the case once more when there is a --scale).
//! With `runCase`, also the run's case: loaded once, or twice when a size factor other than 1 applies.
std::vector<std::string> runOverrides(const SweepPlan& plan, std::size_t run, Case* runCase = nullptr);

enum class RunStatus { NotRun = 0, Ok = 1, Failed = 2 };

//! One row of the result table.
struct RunRow {
  std::size_t index = 0;
  RunStatus status = RunStatus::NotRun;
  bool abandoned = false;          //!< stopped by a signal: not a result, redone on resume
  std::string error;               //!< CaseError or SolverError message of a failed run
  std::string overrides;           //!< every override of the run, "; "-separated
  std::vector<std::string> warnings;  //!< the run's warnings, each whole (written "; "-separated: joinedWarnings)
  std::vector<double> metrics;     //!< [plan.columns]
  double loadSeconds = 0.0, buildSeconds = 0.0, solveSeconds = 0.0, wallSeconds = 0.0;  //!< [s]
  long steps = 0;                  //!< integrator steps (steady: nonlinear iterations)
  double energyBalanceError = 0.0; //!< [J]
};

//! A row's warnings as the table writes them (/runs/warnings, the CSV column, Python's t["warnings"]): "; "-separated.
std::string joinedWarnings(const RunRow& row);


//! Run `run` of the plan in this thread. A CaseError or SolverError gives a Failed row; `stop` (may be
//! null) abandons the run at its next output.
RunRow runOne(const SweepPlan& plan, std::size_t run, const std::atomic<bool>* stop);

//! Run `todo` on `jobs` threads; `sink` gets every finished row on the calling thread as rows complete;
//! `tick` is called on the calling thread a few times a second. Returns when all are done or `stop` is set
//! (running runs are then abandoned); sets `stop` itself when `sink` throws, then rethrows.
void runLocal(const SweepPlan& plan, std::span<const std::size_t> todo, int jobs, std::atomic<bool>& stop,
              const std::function<void(RunRow&&)>& sink, const std::function<void()>& tick);

//! The `sweep` command: plan, run (local threads, or MPI ranks under mpirun), write the table. Returns the
//! process exit code (0, 2 bad input, 130/143 stopped by SIGINT/SIGTERM).
int runSweepCommand(const SweepOptions& options);

//! True when this executable was built with MPI support.
bool sweepHasMpi();

//! The schema entry of a key path as `--set` addresses it ("segments.NAME.layers.1.thickness" ->
//! "segments[].layers[].thickness"); nullptr for an unknown key. Shared by sweeps and fits.
const Param* schemaEntry(const std::string& key);

}  // namespace thermorph
