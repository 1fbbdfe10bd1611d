#pragma once
//! Observed data (logger series) for fits: a CSV file whose columns map to model outputs, and the sampler that
//! reads the same quantities from a run at the observation times.
#include <cstddef>
#include <functional>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "models/body.hpp"
#include "drivers/simulation.hpp"

namespace thermorph {

//! A model output an observed column is compared with.
struct ObservedQuantity {
  enum class Kind { Core, Blood, MeanSkin, MetabolicRate, BodyFlow, SegmentMean, SegmentFlow, SegmentLocal, SegmentSurface };
  Kind kind = Kind::Core;
  std::string name;               //!< as written in the header, e.g. "segments.ears.heat_flow.convection"
  std::string segment;            //!< segment name (segment kinds)
  std::string channel;            //!< budget channel, or "storage" (flow kinds)
  std::string layer;              //!< tissue name, layer index or "coat" (SegmentLocal)
  double position = 0.5;          //!< along the segment's length, 0-1 (SegmentLocal; SegmentSurface: < 0 for the mean)
  bool temperature = true;        //!< degC; else a heat flow in W
};

//! One observed column: times [s] and values in the model's unit (degC or W); NaN where missing.
struct ObservedSeries {
  std::string file;
  int column = 0;                 //!< 1-based column in the file
  ObservedQuantity quantity;
  std::string fileUnit;           //!< unit written in the header
  std::vector<double> times;      //!< [s] since the start of the run, only rows with a value
  std::vector<double> values;     //!< [degC] or [W]
  std::vector<double> sd;         //!< measurement standard deviation in the same unit (1 when not given)
  bool sdGiven = false;
  std::string unit() const { return quantity.temperature ? "degC" : "W"; }
};

struct ObservedData {
  std::vector<ObservedSeries> series;
  std::size_t observations() const;
};

//! Options of the reader.
struct ObservedOptions {
  //! ISO 8601 date-time of t = 0 of the run ("2026-06-01T06:00"), needed for a `datetime` time column.
  std::string startTime;
  //! How messages name the start time's option (the Python module: data_start=).
  std::string startOption = "--data-start";
};

//! Observed data as a table of text cells, wherever it came from (a CSV file, a pandas DataFrame in the Python
//! module): the header (`time [UNIT]` or `datetime` first, then `NAME [UNIT]` and `NAME.sd [UNIT]` columns) and the
//! rows, each with as many cells as the header. Numbers are read with strtod; blank, `NA` and `nan` are missing.
struct ObservedTable {
  static constexpr std::size_t header_row = static_cast<std::size_t>(-1);
  static constexpr std::size_t no_column = static_cast<std::size_t>(-1);
  std::string source;                          //!< names the data in messages and ObservedSeries::file
  std::vector<std::string> header;
  std::vector<std::vector<std::string>> rows;
  std::vector<int> columnNumbers;              //!< ObservedSeries::column of each table column (default: index + 1)
  std::string headerPlace;                     //!< said after "no data rows after the header" (a file: " (line N)")
  //! Where a cell is, for messages ("FILE:LINE: column C"); row header_row: the header; column no_column: the row.
  std::function<std::string(std::size_t row, std::size_t column)> where;
};

//! Parse a model-output name ("body.core_temperature", "segments.leg.temperature.muscle@0.5", ...). Throws
//! CaseError naming `where` for an unknown output.
ObservedQuantity parseObservedQuantity(const std::string& name, const std::string& where);

//! Read one observed-data CSV file. Format (like a weather file): `#` comment lines; a header whose first
//! column is `time [UNIT]` (any time unit) or `datetime` (ISO 8601, with ObservedOptions::startTime); then one
//! column per output, `NAME [UNIT]`, optionally followed anywhere by `NAME.sd [UNIT]` (per-row standard
//! deviation; a blank sd cell uses the column's last given one). Blank, `NA` or `nan` cells are missing.
//! Throws CaseError (exit 2) naming file, line and column: unknown output, unit of the wrong kind, bad
//! number, times not increasing, a column with no value.
ObservedData readObservedCsv(const std::string& path, const ObservedOptions& options = {});
//! The same checks and conversions on a table (readObservedCsv reads the file into one).
ObservedData readObservedTable(const ObservedTable& table, const ObservedOptions& options = {});

//! Check the series against a built body: segments, channels and layers exist, every time lies within the run
//! [0, run.duration]. Throws CaseError naming the file, column and key.
void checkObserved(const ObservedData& data, const Body& body);

//! Samples the observed quantities at every output of a run and at the observation times between outputs (when
//! the run is given them, RunOptions::observerTimes = timesBetweenOutputs), so that every prediction is the
//! model at its observation's time; a time that was not sampled is interpolated linearly between its neighbours.
class ObservationSampler {
 public:
  ObservationSampler(const ObservedData& data, const Body& body);
  //! Every observation time of `data` inside (0, run.duration) that is not an output time (within 1e-9 s
  //! relative), sorted, once: the times a run must also give the observer for exact predictions. Before
  //! 2026-12-05 the model was interpolated linearly between outputs there: a tail's surface observed 1 min after a
  //! step from a 16 degC burrow into -4 degC wind, with outputs every 2 min, was predicted 5.6 K (14 SD) off.
  static std::vector<double> timesBetweenOutputs(const ObservedData& data, const RunSpec& run);
  const ObservedData& data() const { return data_; }
  //! The run observer.
  void observe(double time, std::span<const double> temperatures, const RunSummary& summary);
  //! Model values at every observation, series after series, in ObservedSeries order.
  std::vector<double> predictions() const;
  //! Model values of series `s` at every output (for the figure), and the output times.
  const std::vector<double>& outputTimes() const { return times_; }
  std::vector<double> outputSeries(std::size_t s) const;

 private:
  double value(std::size_t s, double time, std::span<const double> y, const RunSummary& summary) const;
  const ObservedData& data_;
  const Body& body_;
  struct Binding {
    std::size_t segment = 0;
    std::size_t channel = 0;      // channels.size(): storage
    std::vector<std::size_t> nodes;   // SegmentLocal: nodes; SegmentSurface: lateral faces
    std::vector<double> weights;      // volumes; face areas
  };
  std::vector<Binding> bindings_;
  std::vector<double> times_;
  std::vector<std::vector<double>> samples_;  // [output][series]
};

}  // namespace thermorph
