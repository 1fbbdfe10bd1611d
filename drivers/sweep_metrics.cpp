#include "drivers/sweep_metrics.hpp"

#include <fnmatch.h>

#include <algorithm>
#include <cmath>
#include <limits>

#include <fmt/format.h>

#include "models/units.hpp"
#include "drivers/option_text.hpp"

namespace thermorph {
namespace {

constexpr double kelvinOffset = 273.15;
constexpr double notANumber = std::numeric_limits<double>::quiet_NaN();
constexpr const char* statistics[] = {"mean", "final", "min", "max"};

std::string removeSpaces(std::string s) {
  s.erase(std::remove_if(s.begin(), s.end(), [](unsigned char ch) { return std::isspace(ch); }), s.end());
  return s;
}

//! Names of the temperature quantities: body core, blood and skin, then each segment's tissue mean.
std::vector<std::string> temperatureNames(const Body& body) {
  std::vector<std::string> names = {"body.core_temperature", "body.blood_temperature", "body.mean_skin_temperature"};
  for (const SegmentMesh& m : body.segments()) names.push_back("segments." + m.name + ".mean_temperature");
  return names;
}

//! The controllers' names for a message ("none" without controllers).
std::string controllerNames(const Body& body) {
  std::vector<std::string> names;
  for (const Controller& c : body.network().controllers) names.push_back(c.name);
  return names.empty() ? std::string("none in this case") : fmt::format("{}", fmt::join(names, ", "));
}

//! Value of the piecewise-linear series through (t0, v0), (t1, v1) at t in [t0, t1]; exact at the ends.
double interpolate(double t0, double v0, double t1, double v1, double t) {
  if (t == t0) return v0;
  if (t == t1) return v1;
  return v0 + (v1 - v0) * (t - t0) / (t1 - t0);
}

}  // namespace

MetricWindow parseMetricWindow(const std::string& text) {
  // One separator, ':' or ',' (report.py writes 10min,1h; a time never holds either).
  const std::size_t colon = text.find(':'), comma = text.find(',');
  const std::size_t at = colon != std::string::npos ? colon : comma;
  const bool single = at != std::string::npos && text.find_first_of(":,", at + 1) == std::string::npos;
  if (!single || at == 0)
    throw CaseError(fmt::format("--window {}: expected START:END (or START,END) with units, e.g. \"30 min:1 h\" (END may "
                                "be empty: the end of the run)",
                                text));
  MetricWindow window;
  try {
    window.start = parseQuantity(text.substr(0, at), "s");
    const std::string end = text.substr(at + 1);
    window.end = end.find_first_not_of(" \t") == std::string::npos ? -1.0 : parseQuantity(end, "s");
  } catch (const UnitError& e) {
    throw CaseError(fmt::format("--window {}: {}", text, e.what()));
  }
  return window;
}

Threshold parseThreshold(const std::string& text) {
  const std::string prefix = "time_to:";
  Threshold th;
  th.text = "time_to." + removeSpaces(text.substr(prefix.size()));
  std::string body = text.substr(prefix.size());
  auto op = body.find_first_of("<>");
  if (op == std::string::npos || op == 0)
    throw CaseError(fmt::format("--metric {}: expected time_to:QUANTITY<VALUE or time_to:QUANTITY>VALUE, e.g. "
                                "\"time_to:body.core_temperature<36 degC\"",
                                text));
  th.quantity = removeSpaces(body.substr(0, op));
  th.below = body[op] == '<';
  try {
    ValueWithUnit v = splitValueUnit(body.substr(op + 1));
    // A bare number is kelvin, as everywhere in a case; the threshold is kept in degC like the metrics.
    th.value = convertUnit(v.value, v.unit.empty() ? "K" : v.unit, "degC");
  } catch (const UnitError& e) {
    throw CaseError(fmt::format("--metric {}: threshold \"{}\": {}", text, body.substr(op + 1), e.what()));
  }
  return th;
}

std::vector<MetricColumn> metricColumns(const Body& body, std::span<const Threshold> thresholds, bool steady) {
  const Network& n = body.network();
  std::vector<MetricColumn> columns;
  const std::string window = steady ? "at the steady state" : "mean over the window";
  for (const std::string& ch : n.channels)
    columns.push_back({"body.heat_flow." + ch, "W",
                       fmt::format("{} heat flow into the whole body (copies counted), {}{}", ch, window,
                                   steady ? "" : ", from the cumulative channel energy")});
  columns.push_back({"body.heat_flow.storage", "W", "rate of heat storage of the whole body, " + window});
  const std::vector<std::string> temps = temperatureNames(body);
  const char* meaning[] = {"core temperature (volume mean of the core segment's innermost layer)",
                           "blood temperature (central pool or pinned arterial supply)",
                           "mean skin temperature (area- and count-weighted outermost tissue layer)"};
  auto addTemperature = [&](std::size_t q, const std::string& what) {
    for (const char* s : statistics)
      columns.push_back({temps[q] + "." + s, "degC",
                         steady ? what + " at the steady state"
                                : fmt::format("{} of the {} over the window", s, what)});
  };
  for (std::size_t q = 0; q < 3; ++q) addTemperature(q, meaning[q]);
  for (std::size_t g = 0; g < body.segments().size(); ++g) {
    const SegmentMesh& m = body.segments()[g];
    const std::string copies = m.weight == 1.0 ? "" : fmt::format(" (one copy of {:g})", m.weight);
    for (const std::string& ch : n.channels)
      columns.push_back({"segments." + m.name + ".heat_flow." + ch, "W",
                         fmt::format("{} heat flow into {}{}, {}{}", ch, m.name, copies, window,
                                     steady ? "" : ", from the segment's cumulative channel energy")});
    columns.push_back({"segments." + m.name + ".heat_flow.storage", "W",
                       fmt::format("rate of heat storage of {}{}, {}{}", m.name, copies, window,
                                   steady ? "" : ", from the change of its stored heat")});
    addTemperature(3 + g, "tissue temperature of " + m.name + " (volume mean, coat excluded)");
  }
  // Controllers: their states as /control/NAME stores them (a multiplier or an open fraction).
  for (const Controller& c : n.controllers)
    for (const char* s : statistics)
      columns.push_back({"controls." + c.name + "." + s, "1",
                         steady ? fmt::format("state of controller {} (as /control/{}) at the steady state", c.name,
                                              c.name)
                                : fmt::format("{} of the state of controller {} (as /control/{}) over the window", s,
                                              c.name, c.name)});
  for (const Threshold& th : thresholds)
    columns.push_back({th.text, "s",
                       fmt::format("first time {} is {} {:g} degC (linear between outputs; NaN: never)", th.quantity,
                                   th.below ? "below" : "above", th.value)});
  return columns;
}

MetricCollector::MetricCollector(const Body& body, MetricWindow window, std::span<const Threshold> thresholds,
                                 bool steady)
    : body_(body), window_(window), thresholds_(thresholds.begin(), thresholds.end()), steady_(steady) {
  const double duration = body.spec().run.duration;
  if (window_.end < 0.0) window_.end = duration;
  if (!steady_) {
    if (!(window_.start >= 0.0 && window_.start < window_.end))
      throw CaseError(fmt::format("--window {:g} s:{:g} s: the start must be >= 0 and before the end", window_.start,
                                  window_.end));
    if (window_.end > duration)
      throw CaseError(fmt::format("--window ends at {:g} s, after the end of the run (run.duration = {:g} s)",
                                  window_.end, duration));
  }
  if (!steady_) {
    // Outputs at k dt (the last at the run's end); the flows jump at a step, so the linear interpolation of the
    // energies between the outputs that bracket it mixes both sides (found in a new-user trial of report.py: a
    // window starting at a 5-min cold front with 2-min outputs put the quadruped's convection 6 % off). An output
    // exactly at the step holds the flows after it, so a step at the bracket's upper output counts too.
    const double dt = body.spec().run.outputInterval;
    for (auto [which, t] : {std::pair<const char*, double>{"start", window_.start}, {"end", window_.end}}) {
      const double k = std::floor(t / dt + 1e-9);
      const double lo = k * dt, hi = std::min(lo + dt, duration);
      if (std::abs(t - lo) <= 1e-9 * dt || t >= duration || t <= 0.0) continue;  // an output time
      for (const EventSpec& e : body.spec().events)
        if (e.ramp == 0.0 && e.at > lo && e.at <= hi) {
          windowWarnings_.push_back(fmt::format(
              "the window {} {:g} s lies between the outputs at {:g} s and {:g} s, across a step of the timeline at "
              "{:g} s: the window's metrics interpolate across the step and mix both sides of it; put the window {} "
              "on an output time (run.output_interval = {:g} s) or make the step an output time",
              which, t, lo, hi, e.at, which, dt));
          break;
        }
    }
  }
  const std::vector<std::string> names = temperatureNames(body);
  for (const Threshold& th : thresholds_) {
    auto it = std::find(names.begin(), names.end(), th.quantity);
    if (it == names.end())
      throw CaseError(fmt::format("--metric {}: unknown quantity \"{}\" (known: {})", th.text, th.quantity,
                                  fmt::join(names, ", ")));
    thresholdQuantity_.push_back(static_cast<std::size_t>(it - names.begin()));
  }
  const Network& n = body.network();
  temperatures_ = names.size();
  segmentFlows_ = body.segments().size() * (n.channels.size() + 1);
  series_.resize(temperatures_ + segmentFlows_ + n.channels.size() + 1 + n.controllers.size());
  crossing_.assign(thresholds_.size(), notANumber);
}

void MetricCollector::sample(std::span<const double> y, const RunSummary& s) {
  const Network& n = body_.network();
  const std::size_t channels = n.channels.size();
  current_.assign(series_.size(), 0.0);
  std::size_t k = 0;
  // Core, blood and skin: the same sums in the same order as the results file (drivers/simulation.cpp), so the
  // metrics reproduce /body/*_temperature bit for bit.
  const SegmentMesh& core = body_.segments()[body_.coreSegment()];
  double sum = 0.0, volume = 0.0;
  for (int iz = 0; iz < core.nz; ++iz)
    for (int ir = 0; ir < core.innermostLayerCells; ++ir) {
      double v = core.volume[static_cast<std::size_t>(iz * core.nr + ir)];
      sum += v * y[core.node(iz, ir)];
      volume += v;
    }
  current_[k++] = sum / volume - kelvinOffset;
  if (body_.poolNode()) current_[k++] = y[*body_.poolNode()] - kelvinOffset;
  else current_[k++] = body_.spec().circulation.fixedArterialTemperature.value_or(notANumber) - kelvinOffset;
  double skin = 0.0, area = 0.0;
  for (const SegmentMesh& m : body_.segments())
    for (int iz = 0; iz < m.nz; ++iz) {
      double a = m.weight * n.faces[m.lateralFace[static_cast<std::size_t>(iz)]].area;
      skin += a * m.skinAt(iz, y);
      area += a;
    }
  current_[k++] = skin / area - kelvinOffset;
  for (const SegmentMesh& m : body_.segments()) {
    // Volume mean over the cells inside the outermost body cell (the coat excluded).
    double weighted = 0.0, cellVolume = 0.0;
    for (int iz = 0; iz < m.nz; ++iz)
      for (int ir = 0; ir <= m.skinCell; ++ir) {
        double v = m.volume[static_cast<std::size_t>(iz * m.nr + ir)];
        weighted += v * y[m.node(iz, ir)];
        cellVolume += v;
      }
    current_[k++] = weighted / cellVolume - kelvinOffset;
  }
  // Segments: rates at a steady state; over a transient window the cumulative energies the integrator carries
  // (their differences over the window are exact for its quadrature, whatever the output spacing).
  for (std::size_t g = 0; g < body_.segments().size(); ++g) {
    for (std::size_t c = 0; c < channels; ++c)
      current_[k++] = steady_ ? s.flows[g * channels + c] : s.segmentEnergy[g * channels + c];
    current_[k++] = steady_ ? s.storage[g] : s.segmentStoredChange[g];
  }
  if (steady_) {
    // Whole-body flows at the steady state: weighted sums over every group, as the results file does.
    for (std::size_t c = 0; c < channels; ++c) {
      double total = 0.0;
      for (std::size_t g = 0; g < n.groups.size(); ++g) total += n.groupWeights[g] * s.flows[g * channels + c];
      current_[k++] = total;
    }
    double storage = 0.0;
    for (std::size_t g = 0; g < n.groups.size(); ++g) storage += n.groupWeights[g] * s.storage[g];
    current_[k++] = storage;
  } else {
    for (std::size_t c = 0; c < channels; ++c) current_[k++] = s.channelEnergy[c];
    current_[k++] = s.storedChange;
  }
  for (std::size_t c = 0; c < n.controllers.size(); ++c)
    current_[k++] = c < s.controls.size() ? s.controls[c] : notANumber;
}

void MetricCollector::reduce(double t0, double t1, std::span<const double> v0, std::span<const double> v1) {
  const double a = window_.start, b = window_.end;
  const double lo = std::max(t0, a), hi = std::min(t1, b);
  if (lo > hi) return;
  for (std::size_t p = 0; p < series_.size(); ++p) {
    Series& s = series_[p];
    const double fLo = interpolate(t0, v0[p], t1, v1[p], lo);
    const double fHi = interpolate(t0, v0[p], t1, v1[p], hi);
    if (hi > lo) s.integral += (hi - lo) * (fLo + fHi) / 2.0;
    if (!s.seen) {
      s.min = s.max = fLo;
      s.seen = true;
    }
    s.min = std::min({s.min, fLo, fHi});
    s.max = std::max({s.max, fLo, fHi});
    if (lo == a && !s.started) {
      s.atStart = fLo;
      s.started = true;
    }
    if (hi == b) {
      s.atEnd = fHi;
      s.ended = true;
    }
  }
}

void MetricCollector::observe(double time, std::span<const double> temperatures, const RunSummary& summary) {
  sample(temperatures, summary);
  if (!steady_) {
    if (first_) reduce(time, time, current_, current_);
    else reduce(previousTime_, time, previous_, current_);
    for (std::size_t i = 0; i < thresholds_.size(); ++i) {
      if (!std::isnan(crossing_[i])) continue;
      const Threshold& th = thresholds_[i];
      const std::size_t q = thresholdQuantity_[i];
      auto reached = [&](double v) { return th.below ? v < th.value : v > th.value; };
      if (!reached(current_[q])) continue;
      if (first_ || reached(previous_[q])) crossing_[i] = first_ ? time : previousTime_;
      else
        crossing_[i] = previousTime_ + (th.value - previous_[q]) / (current_[q] - previous_[q]) * (time - previousTime_);
    }
  }
  previous_.swap(current_);
  previousTime_ = time;
  first_ = false;
}

std::vector<double> MetricCollector::values() const {
  const Network& n = body_.network();
  const std::size_t channels = n.channels.size();
  const std::vector<double>& last = previous_;  // the latest sample
  std::vector<double> out;
  const double span = window_.end - window_.start;
  auto mean = [&](std::size_t p) { return steady_ ? last[p] : series_[p].integral / span; };
  auto difference = [&](std::size_t p) {
    return steady_ ? last[p] : (series_[p].atEnd - series_[p].atStart) / span;
  };
  const std::size_t body = temperatures_ + segmentFlows_;
  for (std::size_t c = 0; c <= channels; ++c) out.push_back(difference(body + c));
  auto statistics4 = [&](std::size_t q) {  // mean, final, min, max (a temperature or a controller state)
    if (steady_) {
      out.insert(out.end(), 4, last[q]);
      return;
    }
    const Series& s = series_[q];
    out.push_back(mean(q));
    out.push_back(s.atEnd);
    out.push_back(s.min);
    out.push_back(s.max);
  };
  for (std::size_t q = 0; q < 3; ++q) statistics4(q);
  for (std::size_t g = 0; g < body_.segments().size(); ++g) {
    for (std::size_t c = 0; c <= channels; ++c) out.push_back(difference(temperatures_ + g * (channels + 1) + c));
    statistics4(3 + g);
  }
  for (std::size_t c = 0; c < n.controllers.size(); ++c) statistics4(body + channels + 1 + c);
  for (double t : crossing_) out.push_back(t);
  return out;
}

MetricChoice chooseMetrics(const Body& body, std::span<const std::string> metrics, MetricWindow window, bool steady) {
  MetricChoice out;
  std::vector<std::string> selectors;
  for (const std::string& m : metrics) {
    if (m.rfind("time_to:", 0) == 0) out.thresholds.push_back(parseThreshold(m));
    else selectors.push_back(option_text::trim(m));
  }
  MetricCollector check(body, window, out.thresholds, steady);  // window and thresholds valid
  std::vector<MetricColumn> all = metricColumns(body, out.thresholds, steady);
  std::vector<bool> keep(all.size(), selectors.empty());
  for (const std::string& sel : selectors) {
    const std::string below = sel + ".*";
    bool any = false;
    for (std::size_t c = 0; c < all.size(); ++c)
      if (fnmatch(sel.c_str(), all[c].name.c_str(), 0) == 0 || fnmatch(below.c_str(), all[c].name.c_str(), 0) == 0) {
        keep[c] = true;
        any = true;
      }
    if (!any)
      throw CaseError(fmt::format("--metric {}: matches no metric; metrics are body.heat_flow.CHANNEL, "
                                  "body.core_temperature.STAT, body.blood_temperature.STAT, "
                                  "body.mean_skin_temperature.STAT, segments.NAME.heat_flow.CHANNEL, "
                                  "segments.NAME.mean_temperature.STAT, controls.CONTROLLER.STAT (STAT: mean, final, min, "
                                  "max; CHANNEL: {}, storage; CONTROLLER: {}), a prefix of these or a pattern with *, and time_to:QUANTITY<VALUE",
                                  sel, fmt::join(body.network().channels, ", "), controllerNames(body)));
  }
  for (std::size_t c = 0; c < all.size(); ++c)
    if (keep[c] || c >= all.size() - out.thresholds.size()) out.columns.push_back(all[c]);
  return out;
}

}  // namespace thermorph
