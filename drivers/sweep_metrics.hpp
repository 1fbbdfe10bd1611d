#pragma once
//! Metrics of one run for sweeps, computed from the run observer at every output (no results file).
#include <span>
#include <string>
#include <vector>

#include "models/body.hpp"
#include "drivers/simulation.hpp"

namespace thermorph {

//! One column of the sweep table.
struct MetricColumn {
  std::string name;        //!< "body.heat_flow.convection", "segments.NAME.mean_temperature.max", ...
  std::string units;       //!< "W", "degC", "s"
  std::string definition;  //!< one line for the table's attributes
};

//! Averaging window [s]; `end` < 0: the end of the run.
struct MetricWindow {
  double start = 0.0;
  double end = -1.0;
};

//! `--window` text: "START:END" or "START,END" (report.py's form), each a time with a unit, END may be empty (the
//! end of the run). CaseError naming the option otherwise.
MetricWindow parseMetricWindow(const std::string& text);

//! "time_to:QUANTITY<VALUE": first time a temperature quantity crosses a threshold.
struct Threshold {
  std::string text;      //!< as given, spaces removed (the column name)
  std::string quantity;  //!< "body.core_temperature", "segments.NAME.mean_temperature", ...
  bool below = true;     //!< '<' : first time below the value; '>' : above
  double value = 0.0;    //!< [degC]
};

//! Parse "time_to:body.core_temperature<36 degC". Throws CaseError.
Threshold parseThreshold(const std::string& text);

//! Every metric column a run of `body` reports (before selection), in a fixed order.
std::vector<MetricColumn> metricColumns(const Body& body, std::span<const Threshold> thresholds, bool steady);

//! The `--metric` arguments of a sweep, sensitivity or uncertainty analysis against the base body: the thresholds
//! (`time_to:...`) and the columns kept, in metricColumns() order; no selector keeps every column, thresholds are
//! always kept. CaseError for a selector that matches no column, a bad threshold or window.
struct MetricChoice {
  std::vector<Threshold> thresholds;
  std::vector<MetricColumn> columns;
};
MetricChoice chooseMetrics(const Body& body, std::span<const std::string> metrics, MetricWindow window, bool steady);

//! Follows one run output by output and reduces it to the values of metricColumns().
//!
//! Over the window [a, b]: a body or segment channel's mean heat flow is (E(b) - E(a)) / (b - a) from the
//! cumulative channel energies the integrator carries (exact for its quadrature, so they converge with the
//! integrator whatever the output spacing); a storage mean is the change of stored heat over the window / (b - a);
//! every temperature's mean uses the trapezoid rule over the outputs; min and max are over the outputs in the window;
//! "final" is the value at b. Values between outputs are interpolated linearly. Thresholds are checked over the
//! whole run, with linear interpolation between outputs.
class MetricCollector {
 public:
  MetricCollector(const Body& body, MetricWindow window, std::span<const Threshold> thresholds, bool steady);
  //! The run observer: time [s], node temperatures [K], summary at that output.
  void observe(double time, std::span<const double> temperatures, const RunSummary& summary);
  //! Values in metricColumns() order; NaN where undefined (a threshold never reached).
  std::vector<double> values() const;
  //! Window ends that lie between two outputs bracketing a step of the timeline (an event without a ramp): the
  //! metrics interpolate across the step there, mixing both sides of it. One warning per such end; none at a
  //! steady state.
  const std::vector<std::string>& windowWarnings() const { return windowWarnings_; }

 private:
  struct Series {  // streaming reduction of one quantity over the window
    double integral = 0.0, min = 0.0, max = 0.0, atStart = 0.0, atEnd = 0.0;
    bool seen = false, started = false, ended = false;
  };
  void sample(std::span<const double> temperatures, const RunSummary& summary);
  void reduce(double t0, double t1, std::span<const double> v0, std::span<const double> v1);

  const Body& body_;
  MetricWindow window_;
  std::vector<Threshold> thresholds_;
  std::vector<std::size_t> thresholdQuantity_;
  bool steady_;
  std::size_t temperatures_ = 0;  // probes: temperatures, then segment flows, then body energies
  std::size_t segmentFlows_ = 0;
  std::vector<double> previous_, current_;
  double previousTime_ = 0.0;
  bool first_ = true;
  std::vector<Series> series_;
  std::vector<double> crossing_;
  std::vector<double> steadyBodyFlows_;
  std::vector<std::string> windowWarnings_;
};

}  // namespace thermorph
