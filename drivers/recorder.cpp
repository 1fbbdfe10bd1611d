#include "drivers/recorder.hpp"

#include <ctime>
#include <filesystem>

#include "drivers/output_file.hpp"
#include "drivers/provenance.hpp"
#include "models/case.hpp"
#include "models/caution.hpp"

namespace thermorph {
namespace {

std::string nowIso() {
  std::time_t t = std::time(nullptr);
  char buffer[32];
  std::tm utc{};
  gmtime_r(&t, &utc);  // thread safe (sweeps)
  std::strftime(buffer, sizeof buffer, "%Y-%m-%dT%H:%M:%SZ", &utc);
  return buffer;
}

//! Root attributes (tool, command line, case, caution) and whole-body constants.
void writeMetadata(ResultsFile& f, const Body& body, const RunOptions& options) {
  f.setAttribute("/", "tool_version", std::string(THERMORPH_VERSION));
  f.setAttribute("/", "command_line", options.commandLine);
  f.setAttribute("/", "case", resolvedCaseToml(body.spec()));
  f.setAttribute("/", "title", body.spec().title);
  f.setAttribute("/", "created", nowIso());
  f.setAttribute("/", "caution", std::string(caution));
  f.setAttribute("/", "complete", 0L);
}

void writeBodyConstants(ResultsFile& f, const Body& body) {
  f.setAttribute("/body", "mass", body.bodyMass());
  f.setAttribute("/body", "blood_volume", body.bloodVolume());
  f.setAttribute("/body", "blood_flow", body.totalBloodFlow());
  f.setAttribute("/body", "cardiac_output", body.cardiacOutput());
  f.setAttribute("/body", "basal_metabolic_rate", body.basalMetabolicRate());
}

std::vector<std::string> segmentNames(const Body& body) {
  std::vector<std::string> names;
  for (const SegmentMesh& m : body.segments()) names.push_back(m.name);
  return names;
}

//! /steps (postproc/README.md, "Results layout"): the times of the timeline's steps the run reached, `step_time`
//! [ns] (a netCDF coordinate, copied into each group that holds values, as /time is), and the cumulative energies
//! there: /steps/body/cumulative_heat/CHANNEL [ns] (whole body) and /steps/segments/NAME/cumulative_heat/CHANNEL
//! and `storage` [ns] (one copy), the values of /body and /segments/NAME/cumulative_heat at those times. Written
//! for a transient run, empty (ns = 0) when the timeline has no step.
void writeSteps(ResultsFile& f, const Body& body, const RunSummary& s) {
  const Network& n = body.network();
  const std::size_t ns = s.stepTimes.size(), channels = n.channels.size(), groups = n.groups.size();
  const std::vector<std::uint64_t> shape{ns};
  const double none = 0.0;  // HDF5 refuses a null buffer even for no values
  auto write = [&](const std::string& path, const std::vector<double>& v, const std::string& units,
                   const std::string& longName) {
    f.writeArray(path, std::span<const double>(v.empty() ? &none : v.data(), v.size()), shape, units, longName);
  };
  auto coordinate = [&](const std::string& group) {
    write(group + "/step_time", s.stepTimes, "s",
          "time of a step of the timeline (an event, the end of a ramp, a weather row), where the integrator stops "
          "and restarts");
    f.makeCoordinate(group + "/step_time");
  };
  auto series = [&](const std::string& path, const std::vector<double>& v, const std::string& longName) {
    write(path, v, "J", longName);
    f.attachDimensions(path, {"step_time"});
  };
  std::vector<double> v(ns);
  coordinate("/steps");
  coordinate("/steps/body/cumulative_heat");
  for (std::size_t c = 0; c < channels; ++c) {
    for (std::size_t k = 0; k < ns; ++k) v[k] = s.stepChannelEnergy[k * channels + c];
    series("/steps/body/cumulative_heat/" + n.channels[c], v,
           "whole-body heat gained by " + n.channels[c] + " since the start of the run, at each step of the timeline");
  }
  for (std::size_t g = 0; g < body.segments().size(); ++g) {
    const std::string& name = body.segments()[g].name;
    const std::string group = "/steps/segments/" + name + "/cumulative_heat";
    coordinate(group);
    for (std::size_t c = 0; c < channels; ++c) {
      for (std::size_t k = 0; k < ns; ++k) v[k] = s.stepSegmentEnergy[(k * groups + g) * channels + c];
      series(group + "/" + n.channels[c], v,
             "heat gained by one " + name + " by " + n.channels[c] +
                 " since the start of the run, at each step of the timeline (integrated by the solver)");
    }
    for (std::size_t k = 0; k < ns; ++k) v[k] = s.stepSegmentStoredChange[k * groups + g];
    series(group + "/storage", v,
           "change of the heat stored in one " + name + " since the start of the run, at each step of the timeline");
  }
}

}  // namespace

Recorder::Recorder(const Body& body, const NetworkSystem& system, const RunOptions& options,
                   std::uint64_t expectedPoints)
    : body_(body),
      system_(system),
      observer_(options.observer),
      flows_(options.flowsAtOutputs || !options.output.empty()),
      budget_(body.network(), system),
      tissueLimits_(body),
      controlGrid_(body, system) {
  if (options.output.empty()) return;
  file_ = std::make_unique<ResultsFile>(options.output);
  ResultsFile& f = *file_;
  f.expectPoints(expectedPoints);
  writeMetadata(f, body, options);
  writeProvenance(f, body.spec().inputs);
  time_ = f.createTime("s", "time since the start of the run");
  budget_.create(f, segmentNames(body));
  fields_ = std::make_unique<FieldRecorder>(f, body);
  writeBodyConstants(f, body);
  environment_ = std::make_unique<EnvironmentRecorder>(f, body);
}

void Recorder::record(double t, std::span<const double> y, double initialStored, RunSummary& summary) {
  std::vector<double>& faces = faceTemperatures_;
  budget_.compute(t, y, initialStored, summary, faces, flows_);
  tissueLimits_.observe(t, y);
  if (controlGrid_.active()) {
    controlGrid_.start(t);
    // The check needs each output's heat lost to the surroundings, so that a sweep row warns as `run` of the same
    // case does (a sweep checked its last output only before 2026-12-05 and missed the trial forager's shivering,
    // 4.7 % at 13 min of 120). Without flows at outputs (a transient sweep, whose metrics need none) the watch
    // computes the channels it reads only (DEVELOPERS.md "Controller outputs' grid error").
    if (flows_) controlGrid_.observe(t, y, summary.flows);
    else controlGrid_.observe(t, y);
  }
  if (observer_) observer_(t, y.first(system_.nodeCount()), summary);
  if (!file_) return;
  ResultsFile& f = *file_;
  f.append(time_, {&t, 1});
  budget_.write(f, summary);
  environment_->write(f, t, summary.controls, faces);
  fields_->write(f, y, faces);
}

void Recorder::observe(double t, std::span<const double> y, double initialStored, RunSummary& scratch) {
  if (!observer_) return;
  budget_.compute(t, y, initialStored, scratch, faceTemperatures_, flows_);  // record() recomputes them
  observer_(t, y.first(system_.nodeCount()), scratch);
}

void Recorder::recordStep(double t, std::span<const double> y, double initialStored) {
  if (!file_ && !observer_) return;
  RunSummary& s = steps_;
  RunSummary at;
  budget_.energies(y, initialStored, at);
  s.stepTimes.push_back(t);
  s.stepChannelEnergy.insert(s.stepChannelEnergy.end(), at.channelEnergy.begin(), at.channelEnergy.end());
  s.stepSegmentEnergy.insert(s.stepSegmentEnergy.end(), at.segmentEnergy.begin(), at.segmentEnergy.end());
  s.stepSegmentStoredChange.insert(s.stepSegmentStoredChange.end(), at.segmentStoredChange.begin(),
                                   at.segmentStoredChange.end());
}

void Recorder::finish(RunSummary& summary, bool steady) {
  summary.stepTimes = std::move(steps_.stepTimes);
  summary.stepChannelEnergy = std::move(steps_.stepChannelEnergy);
  summary.stepSegmentEnergy = std::move(steps_.stepSegmentEnergy);
  summary.stepSegmentStoredChange = std::move(steps_.stepSegmentStoredChange);
  // Every warning of the run: the body's (at build) and the environment's (validity ranges, while running).
  // A steady solve uses the t = 0 conditions: the warnings about the timeline after t = 0 are left out.
  summary.warnings = body_.warnings(steady);
  for (const std::string& w : body_.environment().warnings()) summary.warnings.push_back(w);
  // Found while running (tissue below 0 degC or above 45 degC): stored with the others, in result files and sweep rows.
  summary.runWarnings = driverWarnings_;
  for (std::string& w : tissueLimits_.warnings()) summary.runWarnings.push_back(std::move(w));
  // Controller outputs whose estimated grid error exceeds 1 % (record_control_grid.hpp).
  if (summary.complete)
    for (std::string& w : controlGrid_.warnings()) summary.runWarnings.push_back(std::move(w));
  for (const std::string& w : summary.runWarnings) summary.warnings.push_back(w);
  if (!file_) return;
  ResultsFile& f = *file_;
  const SolverStatistics& s = summary.statistics;
  f.setAttribute("/solver", "method", std::string(steady ? "KINSOL Newton, KLU" : "CVODE BDF, Newton, KLU"));
  f.setAttribute("/solver", "steps", s.steps);
  f.setAttribute("/solver", "rhs_evaluations", s.rhsEvaluations);
  f.setAttribute("/solver", "jacobian_evaluations", s.jacobianEvaluations);
  f.setAttribute("/solver", "nonlinear_iterations", s.nonlinearIterations);
  f.setAttribute("/solver", "error_test_failures", s.errorTestFailures);
  f.setAttribute("/solver", "wall_seconds", s.wallSeconds);
  f.setAttribute("/solver", "state_size", static_cast<long>(system_.size()));
  f.setAttribute("/solver", "jacobian_nonzeros", s.jacobianNonzeros);
  f.setAttribute("/solver", "factor_nonzeros", s.factorNonzeros);
  if (!steady) writeSteps(f, body_, summary);
  writeWarnings(f, summary.warnings);
  f.setAttribute("/", "complete", summary.complete ? 1L : 0L);
  if (!summary.complete) f.setAttribute("/", "failure", summary.failure);
  // Never clobber an earlier complete result with a partial one.
  summary.outputPath = summary.complete ? f.commit() : f.commit(incompletePath_);
}

std::string incompleteName(const std::string& output) { return incompleteOutputPath(output); }

}  // namespace thermorph
