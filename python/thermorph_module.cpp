//! The Python module `thermorph` (pybind11): runs a case, a steady state, a sweep, a fit, a sensitivity analysis or an
//! uncertainty propagation in-process through the same drivers as the command line (runTransient, runSteady,
//! makeSweepPlan/runLocal, the fit steps, runSensitivityCommand, runUncertaintyCommand) and returns NumPy arrays.
//!
//!   import thermorph
//!   r = thermorph.run("cases/limb_cooling.toml", set=["environment.temperature=5 degC"])
//!   r["time"], r["core_temperature"], r["segments"]["forelimb"]["temperature"], r["heat_flow"]["convection"]
//!
//! Model estimates for research only; not veterinary or medical advice (models/caution.hpp, thermorph.CAUTION).
#include <pybind11/numpy.h>
#include <pybind11/pybind11.h>
#include <pybind11/stl.h>

#include <atomic>
#include <cctype>
#include <cmath>
#include <filesystem>
#include <map>
#include <optional>
#include <set>
#include <sstream>

#include <fmt/format.h>
#include <toml++/toml.h>

#include <cstdio>
#include <cstdlib>

#include <hdf5.h>

#include "drivers/fit.hpp"
#include "drivers/h5_append.hpp"
#include "drivers/sensitivity.hpp"
#include "drivers/uncertainty.hpp"
#include "drivers/record_budget.hpp"
#include "drivers/record_fields.hpp"
#include "drivers/simulation.hpp"
#include "drivers/sweep.hpp"
#include "drivers/sweep_engine.hpp"
#include "models/body.hpp"
#include "models/case.hpp"
#include "models/caution.hpp"

namespace py = pybind11;
using namespace thermorph;

namespace {

constexpr double kelvinOffset = 273.15;

// ---- case from a path, a TOML string or a dict ------------------------------------------------------------

toml::table toTable(const py::dict& d);

//! A Python value as a TOML node (numbers, strings, booleans, lists, dicts).
std::unique_ptr<toml::node> toNode(const py::handle& v) {
  if (py::isinstance<py::bool_>(v)) return std::make_unique<toml::value<bool>>(v.cast<bool>());
  if (py::isinstance<py::int_>(v)) return std::make_unique<toml::value<int64_t>>(v.cast<int64_t>());
  if (py::isinstance<py::float_>(v)) return std::make_unique<toml::value<double>>(v.cast<double>());
  if (py::isinstance<py::str>(v)) return std::make_unique<toml::value<std::string>>(v.cast<std::string>());
  if (py::isinstance<py::dict>(v)) return std::make_unique<toml::table>(toTable(v.cast<py::dict>()));
  if (py::isinstance<py::list>(v) || py::isinstance<py::tuple>(v)) {
    auto array = std::make_unique<toml::array>();
    for (const py::handle& item : v) {
      std::unique_ptr<toml::node> n = toNode(item);
      if (n->is_table()) array->push_back(std::move(*n->as_table()));
      else if (n->is_array()) array->push_back(std::move(*n->as_array()));
      else n->visit([&](auto& x) { array->push_back(x); });
    }
    return array;
  }
  throw py::type_error("case dict: unsupported value " + py::repr(v).cast<std::string>());
}

toml::table toTable(const py::dict& d) {
  toml::table t;
  for (const auto& [k, v] : d) {
    std::unique_ptr<toml::node> n = toNode(v);
    const std::string key = py::str(k).cast<std::string>();
    if (n->is_table()) t.insert(key, std::move(*n->as_table()));
    else if (n->is_array()) t.insert(key, std::move(*n->as_array()));
    else n->visit([&](auto& x) { t.insert(key, x); });
  }
  return t;
}

//! Names of a case given as a dict or as TOML text in messages, warnings and the results' provenance (the folder
//! `base` before it: relative files are read from the case's folder).
constexpr const char* kDictCase = "<case dict>";
constexpr const char* kTextCase = "<case text>";

//! The source name of a case given as a dict or text: `base`/NAME.
std::string sourceName(const std::string& base, const char* name) {
  return (std::filesystem::path(base) / name).string();
}

//! A message about a case given as a dict or as text, which names it by its source name "BASE/<case dict>" (the
//! folder for relative files), as "<case dict>" or "<case text>". A dict's lines and columns are those of the TOML
//! text the dict was written to, which the user never sees, so they go ("<case dict>: environment.air_temperature
//! has no effect: ..."; the key path follows in every message); a text's are its own and stay.
std::string caseMessage(std::string message, const std::string& source, const char* name, bool keepPosition) {
  for (std::size_t at = 0; (at = message.find(source, at)) != std::string::npos;) {
    std::size_t end = at + source.size();
    for (int part = 0; part < 2 && !keepPosition; ++part) {  // ":LINE" and ":COLUMN", when both are there
      std::size_t digits = end + 1;
      while (digits < message.size() && std::isdigit(static_cast<unsigned char>(message[digits]))) ++digits;
      if (end < message.size() && message[end] == ':' && digits > end + 1) end = digits;
      else break;
    }
    message.replace(at, end - at, name);
    at += std::char_traits<char>::length(name);
  }
  return message;
}

//! Where a case given to the module comes from, and how its messages are to be named.
struct CaseSource {
  std::string path;    //!< the file, or the source name of a dict or text case
  std::string text;    //!< the TOML text of a dict or text case
  bool file = false;
  bool dict = false;
  std::string message(const std::string& m) const {
    return file ? m : caseMessage(m, path, dict ? kDictCase : kTextCase, !dict);
  }
};

//! A TOML path, a TOML string or a dict (a dict or string reads relative files from `base`). A string is named
//! "<case text>" with its own lines and columns; a dict "<case dict>" with key paths only (caseMessage).
CaseSource caseSource(const py::object& spec, const std::string& base) {
  if (py::isinstance<py::dict>(spec)) {
    std::ostringstream text;
    text << toTable(spec.cast<py::dict>());
    return {sourceName(base, kDictCase), text.str(), false, true};
  }
  const std::string s = py::str(spec).cast<std::string>();
  // A path: an os.PathLike, or one line that is a file or holds no "=" (no TOML text of a case), so that a missing
  // file reads "PATH: cannot open the case file" and not a TOML syntax error at line 1.
  const bool pathLike = py::isinstance(spec, py::module_::import("os").attr("PathLike"));
  if (pathLike || (s.find('\n') == std::string::npos &&
                   (std::filesystem::is_regular_file(s) || s.find('=') == std::string::npos)))
    return {s, "", true, false};
  return {sourceName(base, kTextCase), s, false, false};
}

//! A case given to the module, and how its messages are to be named.
struct LoadedCase {
  Case c;
  CaseSource from;
  std::string message(const std::string& m) const { return from.message(m); }
};

LoadedCase loadAny(const py::object& spec, const std::vector<std::string>& overrides, const std::string& base) {
  CaseSource from = caseSource(spec, base);
  if (from.file) return {loadCase(from.path, overrides), from};
  try {
    return {loadCaseFromString(from.text, from.path, overrides), from};
  } catch (const CaseError& e) {
    throw CaseError(from.message(e.what()));
  }
}

py::array_t<double> array(const std::vector<double>& values, std::vector<py::ssize_t> shape) {
  py::array_t<double> out(shape);
  std::copy(values.begin(), values.end(), out.mutable_data());
  return out;
}

// ---- one run -------------------------------------------------------------------------------------------

//! Collects the arrays at every output through the run loop's observer.
struct Collector {
  const Body& body;
  std::vector<double> time, core, blood, skin, storage;
  std::vector<std::vector<double>> flows;         //!< [channel][t], whole body
  std::vector<std::vector<double>> energy;        //!< [channel][t]
  std::vector<std::vector<double>> fields;        //!< [segment][t * nz * nr] degC
  std::vector<std::vector<double>> segmentFlows;  //!< [segment * channels + c][t], one copy
  std::vector<std::vector<double>> contact, inWater;  //!< [segment][t]: the interval's contact fraction, 1 in water
  std::vector<std::vector<double>> wetted, tucked;    //!< [segment][t]: wetted fraction at t, the interval's tucked one
  std::vector<double> scratch;

  explicit Collector(const Body& b) : body(b) {
    const std::size_t channels = b.network().channels.size(), segments = b.segments().size();
    flows.resize(channels);
    energy.resize(channels);
    fields.resize(segments);
    segmentFlows.resize(segments * (channels + 1));
    contact.resize(segments);
    inWater.resize(segments);
    wetted.resize(segments);
    tucked.resize(segments);
  }

  void operator()(double t, std::span<const double> y, const RunSummary& s) {
    const Network& n = body.network();
    const std::size_t channels = n.channels.size();
    time.push_back(t);
    const BodyTemperatures b = bodyTemperatures(body, y);
    core.push_back(b.core - kelvinOffset);
    blood.push_back(b.blood - kelvinOffset);
    skin.push_back(b.skin - kelvinOffset);
    scratch.resize(channels);
    double store = 0.0;
    BudgetRecorder::bodyFlows(n, s, scratch, store);
    for (std::size_t c = 0; c < channels; ++c) {
      flows[c].push_back(scratch[c]);
      energy[c].push_back(s.channelEnergy[c]);
    }
    storage.push_back(store);
    for (std::size_t g = 0; g < body.segments().size(); ++g) {
      const SegmentMesh& m = body.segments()[g];
      for (std::size_t i = 0; i < static_cast<std::size_t>(m.nz * m.nr); ++i)
        fields[g].push_back(y[m.offset + i] - kelvinOffset);
      for (std::size_t c = 0; c < channels; ++c) segmentFlows[g * (channels + 1) + c].push_back(s.flows[g * channels + c]);
      segmentFlows[g * (channels + 1) + channels].push_back(s.storage[g]);
      // As the results file stores them (drivers/record_environment.cpp): the current interval's values.
      contact[g].push_back(body.environment().contactFraction(g));
      inWater[g].push_back(body.environment().immersed(g, t) ? 1.0 : 0.0);
      wetted[g].push_back(body.wettedFraction(g, t, s.controls));  // sweating's included
      tucked[g].push_back(body.environment().tuckedFraction(g));
    }
  }

  py::dict result(const RunSummary& s) const {
    const Network& n = body.network();
    const std::size_t channels = n.channels.size();
    const auto nt = static_cast<py::ssize_t>(time.size());
    py::dict r;
    r["time"] = array(time, {nt});
    r["core_temperature"] = array(core, {nt});
    r["blood_temperature"] = array(blood, {nt});
    r["mean_skin_temperature"] = array(skin, {nt});
    py::dict hf, ce;
    for (std::size_t c = 0; c < channels; ++c) {
      hf[py::str(n.channels[c])] = array(flows[c], {nt});
      ce[py::str(n.channels[c])] = array(energy[c], {nt});
    }
    hf["storage"] = array(storage, {nt});
    r["heat_flow"] = hf;
    r["cumulative_heat"] = ce;
    py::dict segs;
    for (std::size_t g = 0; g < body.segments().size(); ++g) {
      const SegmentMesh& m = body.segments()[g];
      py::dict d;
      d["temperature"] = array(fields[g], {nt, m.nz, m.nr});
      d["radius"] = array(m.radius, {static_cast<py::ssize_t>(m.radius.size())});
      d["axial"] = array(m.axial, {static_cast<py::ssize_t>(m.axial.size())});
      d["count"] = m.weight;
      d["contact_fraction"] = array(contact[g], {nt});
      d["in_water"] = array(inWater[g], {nt});
      d["wetted_fraction"] = array(wetted[g], {nt});   // every segment (the file: those events wet or that sweat)
      d["tucked_fraction"] = array(tucked[g], {nt});   // every segment (the file: tucked ones)
      py::dict f;
      for (std::size_t c = 0; c < channels; ++c) f[py::str(n.channels[c])] = array(segmentFlows[g * (channels + 1) + c], {nt});
      f["storage"] = array(segmentFlows[g * (channels + 1) + channels], {nt});
      d["heat_flow"] = f;
      segs[py::str(m.name)] = d;
    }
    r["segments"] = segs;
    // The timeline's steps (the results file's /steps): the times where the integrator stopped and restarted, and
    // the cumulative energies there, exact (not interpolated between outputs).
    const auto ns = static_cast<py::ssize_t>(s.stepTimes.size());
    const std::size_t groupCount = n.groups.size();
    py::dict steps, stepBody;
    steps["time"] = array(s.stepTimes, {ns});
    std::vector<double> v(s.stepTimes.size());
    for (std::size_t c = 0; c < channels; ++c) {
      for (std::size_t k = 0; k < v.size(); ++k) v[k] = s.stepChannelEnergy[k * channels + c];
      stepBody[py::str(n.channels[c])] = array(v, {ns});
    }
    steps["cumulative_heat"] = stepBody;
    py::dict stepSegments;
    for (std::size_t g = 0; g < body.segments().size(); ++g) {
      py::dict e;
      for (std::size_t c = 0; c < channels; ++c) {
        for (std::size_t k = 0; k < v.size(); ++k) v[k] = s.stepSegmentEnergy[(k * groupCount + g) * channels + c];
        e[py::str(n.channels[c])] = array(v, {ns});
      }
      for (std::size_t k = 0; k < v.size(); ++k) v[k] = s.stepSegmentStoredChange[k * groupCount + g];
      e["storage"] = array(v, {ns});
      stepSegments[py::str(body.segments()[g].name)] = py::dict(py::arg("cumulative_heat") = e);
    }
    steps["segments"] = stepSegments;
    r["steps"] = steps;
    // The budget at the last output, as printed by the command line (W, positive into the body; J over the run).
    py::dict budget;
    py::list groups;
    for (const std::string& g : n.groups) groups.append(g);
    budget["groups"] = groups;
    py::list chans;
    for (const std::string& c : n.channels) chans.append(c);
    budget["channels"] = chans;
    budget["flows"] = array(s.flows, {static_cast<py::ssize_t>(n.groups.size()), static_cast<py::ssize_t>(channels)});
    budget["storage"] = array(s.storage, {static_cast<py::ssize_t>(s.storage.size())});
    budget["weights"] = array(n.groupWeights, {static_cast<py::ssize_t>(n.groupWeights.size())});
    budget["channel_energy"] = array(s.channelEnergy, {static_cast<py::ssize_t>(s.channelEnergy.size())});
    budget["stored_change"] = s.storedChange;
    budget["energy_balance_error"] = s.energyBalanceError;
    budget["throughput"] = s.throughput;
    r["budget"] = budget;
    r["units"] = py::dict(py::arg("time") = "s", py::arg("temperature") = "degC", py::arg("heat_flow") = "W",
                          py::arg("cumulative_heat") = "J", py::arg("radius") = "m", py::arg("axial") = "m");
    r["complete"] = s.complete;
    r["failure"] = s.failure;
    r["warnings"] = s.warnings;
    r["title"] = body.spec().title;
    r["output"] = s.outputPath;
    r["caution"] = caution;
    py::dict stats;
    stats["steps"] = s.statistics.steps;
    stats["rhs_evaluations"] = s.statistics.rhsEvaluations;
    stats["wall_seconds"] = s.statistics.wallSeconds;
    r["statistics"] = stats;
    return r;
  }
};

//! thermorph.ThermorphWarning (a UserWarning), created when the module is imported.
PyObject* thermorphWarning = nullptr;

//! Raises the result's warnings (r["warnings"]: texts, or a list of texts per run) as Python warnings of category
//! thermorph.ThermorphWarning, one per kind (texts that differ only in numbers: sweep.cpp's warningPattern, as the
//! command line prints them), so that a notebook shows what the command line prints on stderr; the dict keeps every
//! text. A filter that turns them into errors ("error") raises the first. Returns r.
py::dict warned(py::dict r) {
  if (!r.contains("warnings") || thermorphWarning == nullptr) return r;
  std::vector<std::string> texts;
  for (const py::handle item : r["warnings"]) {
    if (py::isinstance<py::str>(item)) texts.push_back(item.cast<std::string>());
    else
      for (const py::handle w : item) texts.push_back(w.cast<std::string>());
  }
  std::vector<std::string> order;
  std::map<std::string, std::pair<std::string, std::set<std::string>>> kinds;
  for (const std::string& w : texts) {
    std::string pattern = warningPattern(w);
    auto [it, added] = kinds.try_emplace(pattern, w, std::set<std::string>{});
    if (added) order.push_back(pattern);
    it->second.second.insert(w);
  }
  for (const std::string& pattern : order) {
    const auto& [first, distinct] = kinds.at(pattern);
    const std::string text =
        distinct.size() == 1 ? first
                             : fmt::format("{} (and {} more of this kind whose numbers differ: the result's 'warnings')",
                                           first, distinct.size() - 1);
    if (PyErr_WarnEx(thermorphWarning, text.c_str(), 1) < 0) throw py::error_already_set();
  }
  return r;
}

py::dict runCase(const py::object& spec, const std::vector<std::string>& overrides, bool steady,
                 const std::string& output, const std::string& base, bool coldStart) {
  const LoadedCase loaded = loadAny(spec, overrides, base);
  std::optional<Body> built;
  try {
    built.emplace(loaded.c);
  } catch (const CaseError& e) {
    throw CaseError(loaded.message(e.what()));
  }
  const Body& body = *built;
  Collector collector(body);
  RunOptions options;
  options.output = output;
  options.commandLine = "python: thermorph." + std::string(steady ? "steady" : "run");
  options.quiet = true;
  options.coarseSteadyStart = !coldStart;   // `thermorph run/steady --cold-start` (cli/main.cpp)
  options.observer = [&](double t, std::span<const double> y, const RunSummary& s) { collector(t, y, s); };
  RunSummary summary;
  {
    py::gil_scoped_release release;
    summary = steady ? runSteady(body, options) : runTransient(body, options);
  }
  if (!summary.complete) throw SolverError(loaded.message(summary.failure));
  for (std::string& w : summary.warnings) w = loaded.message(w);
  return warned(collector.result(summary));
}

// ---- sweep ---------------------------------------------------------------------------------------------

py::dict runSweep(const py::object& spec, const std::vector<std::string>& vary, const std::vector<std::string>& set,
                  const std::vector<std::string>& scale, const std::vector<std::string>& metrics, bool zip, bool steady,
                  const std::string& window, int jobs, const std::string& base) {
  const CaseSource from = caseSource(spec, base);
  SweepOptions o;
  o.casePath = from.path;
  o.caseText = from.text;
  o.vary = vary;
  o.overrides = set;
  o.scale = scale;
  o.metrics = metrics;
  o.zip = zip;
  o.steady = steady;
  o.window = window;
  o.jobs = jobs;
  o.quiet = true;
  SweepPlan plan;
  try {
    plan = makeSweepPlan(o);
  } catch (const CaseError& e) {
    throw CaseError(from.message(e.what()));
  }
  std::vector<RunRow> rows(plan.runs);
  {
    py::gil_scoped_release release;
    std::vector<std::size_t> todo(plan.runs);
    for (std::size_t r = 0; r < plan.runs; ++r) todo[r] = r;
    std::atomic<bool> stop{false};
    runLocal(plan, todo, jobs > 0 ? jobs : 1, stop, [&](RunRow&& row) { rows[row.index] = std::move(row); }, [] {});
  }
  const auto n = static_cast<py::ssize_t>(plan.runs);
  py::dict r, params, units, values;
  for (std::size_t a = 0; a < plan.axes.size(); ++a) {
    const SweepAxis& axis = plan.axes[a];
    std::vector<double> numbers(plan.runs);
    py::list words;
    for (std::size_t run = 0; run < plan.runs; ++run) {
      std::size_t v = plan.valueIndices(run)[a];
      numbers[run] = axis.numbers[v];
      words.append(axis.texts[v]);
    }
    params[py::str(axis.key)] = axis.units.empty() ? py::object(words) : py::object(array(numbers, {n}));
    units[py::str(axis.key)] = axis.units;
  }
  for (std::size_t c = 0; c < plan.columns.size(); ++c) {
    std::vector<double> v(plan.runs, std::nan(""));
    for (std::size_t run = 0; run < plan.runs; ++run)
      if (rows[run].status == RunStatus::Ok) v[run] = rows[run].metrics[c];
    values[py::str(plan.columns[c].name)] = array(v, {n});
    units[py::str(plan.columns[c].name)] = plan.columns[c].units;
  }
  py::list status, errors, warnings;
  for (RunRow& row : rows) {
    status.append(row.status == RunStatus::Ok ? "ok" : row.status == RunStatus::Failed ? "failed" : "not run");
    errors.append(from.message(row.error));
    for (std::string& w : row.warnings) w = from.message(w);
    warnings.append(py::cast(row.warnings));  // a list per run (the results file joins them with "; ")
  }
  r["parameters"] = params;
  r["metrics"] = values;
  r["units"] = units;
  r["status"] = status;
  r["errors"] = errors;
  r["warnings"] = warnings;
  r["caution"] = caution;
  return warned(r);
}

// ---- fit -----------------------------------------------------------------------------------------------

//! A str or a list of str (a single --free, --set, ... given as one string).
std::vector<std::string> strings(const py::object& o, const char* what) {
  std::vector<std::string> out;
  if (o.is_none()) return out;
  if (py::isinstance<py::str>(o)) return {o.cast<std::string>()};
  try {
    for (const py::handle& item : o) out.push_back(py::str(item).cast<std::string>());
  } catch (const py::error_already_set&) {
    throw py::type_error(std::string(what) + ": expected a string or a list of strings");
  }
  return out;
}

//! An ISO 8601 text of a date-time given as text, datetime.datetime or pandas.Timestamp (aware ones in UTC).
std::string isoText(const py::handle& v) {
  if (py::isinstance<py::str>(v)) return v.cast<std::string>();
  if (py::hasattr(v, "isoformat")) {
    py::object t = py::reinterpret_borrow<py::object>(v);
    if (py::hasattr(t, "tzinfo") && !t.attr("tzinfo").is_none()) {
      py::object utc = py::module_::import("datetime").attr("timezone").attr("utc");
      t = t.attr("astimezone")(utc).attr("replace")(py::arg("tzinfo") = py::none());
    }
    return t.attr("isoformat")().cast<std::string>();
  }
  return py::str(v).cast<std::string>();
}

//! What a column of a table holds.
enum class ColumnKind { Values, DateTimes, Durations };

//! The cells of one column as text, as a CSV file would give them: numbers to 17 digits ("nan" where missing),
//! datetime64 and datetime objects as ISO 8601 (aware ones in UTC), timedelta64 as seconds, None, NaN and NaT
//! as missing.
std::vector<std::string> columnCells(const py::handle& column, ColumnKind& kind) {
  py::module_ np = py::module_::import("numpy");
  py::object values = py::reinterpret_borrow<py::object>(column);
  // A pandas column of time-zone-aware date-times: in UTC, then naive.
  if (py::hasattr(values, "dt") && py::hasattr(values, "dtype") && py::hasattr(values.attr("dtype"), "tz") &&
      !values.attr("dtype").attr("tz").is_none())
    values = values.attr("dt").attr("tz_convert")("UTC").attr("dt").attr("tz_localize")(py::none());
  py::array a = np.attr("asarray")(values);
  if (a.ndim() != 1) throw CaseError("a column with " + std::to_string(a.ndim()) + " dimensions; expected one value per row");
  const char dtype = a.dtype().kind();
  std::vector<std::string> out;
  kind = ColumnKind::Values;
  if (dtype == 'm') {  // durations (pandas Timedelta): seconds, NaT -> NaN
    kind = ColumnKind::Durations;
    a = a.attr("astype")("timedelta64[ns]").attr("__truediv__")(np.attr("timedelta64")(1, "s"));
  }
  if (dtype == 'M') {
    kind = ColumnKind::DateTimes;
    py::list texts = np.attr("datetime_as_string")(a.attr("astype")("datetime64[us]"), py::arg("unit") = "us").attr("tolist")();
    for (const py::handle& t : texts) {
      std::string text = t.cast<std::string>();
      out.push_back(text == "NaT" ? std::string() : text);
    }
    return out;
  }
  if (dtype == 'f' || dtype == 'i' || dtype == 'u' || dtype == 'b' || dtype == 'm') {
    py::array_t<double, py::array::forcecast> d(a);
    for (py::ssize_t i = 0; i < d.size(); ++i)
      out.push_back(std::isnan(d.at(i)) ? std::string("nan") : fmt::format("{:.17g}", d.at(i)));
    return out;
  }
  // Objects: numbers, text, date-times; missing: None, NaN and pandas' NA and NaT (pandas.isna, when installed).
  py::object isna = py::none();
  try {
    isna = py::module_::import("pandas").attr("isna");
  } catch (const py::error_already_set&) {
  }
  bool anyDate = false;
  for (const py::handle& v : a.attr("tolist")()) {
    if (v.is_none() || (py::isinstance<py::float_>(v) && std::isnan(v.cast<double>())) ||
        (!isna.is_none() && !py::isinstance<py::str>(v) && py::isinstance<py::bool_>(isna(v)) && isna(v).cast<bool>())) {
      out.emplace_back();
    } else if (py::isinstance<py::int_>(v) || py::isinstance<py::float_>(v)) {
      out.push_back(fmt::format("{:.17g}", v.cast<double>()));
    } else if (!py::isinstance<py::str>(v) && py::hasattr(v, "isoformat")) {
      anyDate = true;
      const std::string text = py::str(v).cast<std::string>();
      out.push_back(text == "NaT" ? std::string() : isoText(v));
    } else {
      out.push_back(py::str(v).cast<std::string>());
    }
  }
  if (anyDate) kind = ColumnKind::DateTimes;
  return out;
}

//! Observed data given as a pandas DataFrame or a dict of arrays, read as a CSV file is (drivers/observed.cpp):
//! columns named as in the file's header (`NAME [UNIT]`, `NAME.sd [UNIT]`); the time in a column `time [UNIT]`
//! (a bare `time`: seconds; durations, timedelta64: their own unit), or date-times in a column `datetime` or
//! `time` or the DataFrame's index, with data_start. Messages name the table, the row (0-based) and the column's
//! label.
ObservedData observedFromTable(const py::handle& table, const std::string& source, const ObservedOptions& options) {
  const bool frame = py::hasattr(table, "columns") && py::hasattr(table, "index");
  std::vector<std::string> labels;
  std::vector<py::object> columns;
  if (frame) {
    for (const py::handle& c : table.attr("columns")) {
      labels.push_back(py::str(c).cast<std::string>());
      columns.push_back(table.attr("__getitem__")(c));
    }
  } else {
    for (const auto& [k, v] : table.cast<py::dict>()) {
      labels.push_back(py::str(k).cast<std::string>());
      columns.push_back(py::reinterpret_borrow<py::object>(v));
    }
  }
  auto baseName = [](const std::string& label) {
    std::string name = label.substr(0, label.find('['));
    name.erase(name.find_last_not_of(" \t") + 1);
    name.erase(0, std::min(name.size(), name.find_first_not_of(" \t")));
    return name;
  };
  // The time: a column, else the DataFrame's index.
  std::size_t timeColumn = labels.size();
  for (std::size_t c = 0; c < labels.size() && timeColumn == labels.size(); ++c)
    if (baseName(labels[c]) == "time" || baseName(labels[c]) == "datetime") timeColumn = c;
  ObservedTable t;
  t.source = source;
  std::vector<std::vector<std::string>> cells;
  std::string timeLabel;
  ColumnKind timeKind = ColumnKind::Values;
  std::vector<std::size_t> order;  // table column -> labels index (labels.size(): the index)
  if (timeColumn < labels.size()) {
    timeLabel = labels[timeColumn];
    cells.push_back(columnCells(columns[timeColumn], timeKind));
  } else {
    const py::object index = frame ? py::object(table.attr("index")) : py::object();
    if (frame) {
      const std::string name = index.attr("name").is_none() ? "" : py::str(index.attr("name")).cast<std::string>();
      ColumnKind kind = ColumnKind::Values;
      std::vector<std::string> c = columnCells(index, kind);
      if (kind != ColumnKind::Values || baseName(name) == "time" || baseName(name) == "datetime") {
        timeLabel = !name.empty() ? name : kind == ColumnKind::DateTimes ? "datetime" : "time";
        timeKind = kind;
        cells.push_back(std::move(c));
      }
    }
    if (cells.empty())
      throw CaseError(fmt::format("{}: no time column; expected a column \"time [UNIT]\" (e.g. \"time [h]\"; a bare \"time\" "
                                  "is in seconds) or \"datetime\" (date-times, with data_start=){}; columns: {}",
                                  source, frame ? ", or a DatetimeIndex or TimedeltaIndex" : "", fmt::join(labels, ", ")));
  }
  order.push_back(timeColumn);
  const std::string timeName = baseName(timeLabel);
  t.header.push_back(timeKind == ColumnKind::DateTimes || (timeName == "datetime" && timeKind == ColumnKind::Values)
                         ? "datetime"
                     : timeKind == ColumnKind::Durations || timeLabel.find('[') == std::string::npos ? "time [s]"
                                                                                                     : timeLabel);
  t.columnNumbers.push_back(timeColumn < labels.size() ? static_cast<int>(timeColumn + 1) : 0);
  for (std::size_t c = 0; c < labels.size(); ++c) {
    if (c == timeColumn) continue;
    ColumnKind kind = ColumnKind::Values;
    try {
      cells.push_back(columnCells(columns[c], kind));
    } catch (const CaseError& e) {
      throw CaseError(fmt::format("{}: column \"{}\": {}", source, labels[c], e.what()));
    }
    if (kind != ColumnKind::Values)
      throw CaseError(fmt::format("{}: column \"{}\" holds {}; a series holds numbers in the unit its label gives "
                                  "(only the time column, \"time\" or \"datetime\", or the index may hold these)",
                                  source, labels[c], kind == ColumnKind::Durations ? "durations" : "date-times"));
    t.header.push_back(labels[c]);
    t.columnNumbers.push_back(static_cast<int>(c + 1));
    order.push_back(c);
  }
  const std::size_t rows = cells.front().size();
  for (std::size_t c = 1; c < cells.size(); ++c)
    if (cells[c].size() != rows)
      throw CaseError(fmt::format("{}: column \"{}\" has {} values; the time has {}", source, t.header[c], cells[c].size(), rows));
  t.rows.assign(rows, std::vector<std::string>(cells.size()));
  for (std::size_t c = 0; c < cells.size(); ++c)
    for (std::size_t i = 0; i < rows; ++i) t.rows[i][c] = std::move(cells[c][i]);
  const std::string timeShown = timeLabel.empty() ? std::string("index") : timeLabel;
  t.where = [&](std::size_t row, std::size_t column) {
    const std::string label = column == ObservedTable::no_column ? std::string()
                              : order[column] < labels.size()   ? labels[order[column]]
                                                                : timeShown;
    if (row == ObservedTable::header_row) return fmt::format("{}: column \"{}\"", source, label);
    if (column == ObservedTable::no_column) return fmt::format("{}: row {} (0-based)", source, row);
    return fmt::format("{}: row {} (0-based), column \"{}\"", source, row, label);
  };
  return readObservedTable(t, options);
}

py::array_t<double> matrix(const std::vector<double>& values, std::size_t p) {
  return array(values, {static_cast<py::ssize_t>(p), static_cast<py::ssize_t>(p)});
}

py::dict runFitPython(const py::object& spec, const py::object& data, const py::object& freeKeys, const py::object& set,
                      const py::object& start, const py::object& prior, const py::object& dataStart, int multiStart,
                      int maxIterations, const std::string& gradient, double step, double rtol, double convergedSe,
                      int gridCheckRefinement, int jobs, const std::string& output, const std::string& base, bool progress,
                      bool coldStart) {
  const CaseSource from = caseSource(spec, base);
  FitOptions o;
  o.casePath = from.path;
  o.caseText = from.text;
  o.overrides = strings(set, "set");
  o.free = strings(freeKeys, "free");
  o.starts = strings(start, "start");
  o.priors = strings(prior, "prior");
  o.dataStart = dataStart.is_none() ? std::string() : isoText(dataStart);
  o.multiStart = multiStart;
  o.maxIterations = maxIterations;
  o.gradient = gradient;
  o.step = step;
  o.rtol = rtol;
  o.stepTolerance = convergedSe;
  o.gridCheck = gridCheckRefinement;
  o.jobs = jobs;
  o.output = output;
  o.quiet = !progress;
  o.coldStart = coldStart;   // `thermorph fit --cold-start` (cli/fit_cli.cpp)
  o.commandLine = "python: thermorph.fit";
  ObservedOptions readOptions;
  readOptions.startTime = o.dataStart;
  readOptions.startOption = "data_start=";
  // The data: a CSV path, a DataFrame or dict of arrays, or a list of these (the series in the order given).
  std::vector<py::object> items;
  const bool many = py::isinstance<py::list>(data) || py::isinstance<py::tuple>(data);
  if (many)
    for (const py::handle& d : data) items.push_back(py::reinterpret_borrow<py::object>(d));
  else
    items.push_back(data);
  const py::object pathLike = py::module_::import("os").attr("PathLike");
  for (std::size_t k = 0; k < items.size(); ++k) {
    const py::object& d = items[k];
    ObservedData read;
    if (py::isinstance<py::str>(d) || py::isinstance(d, pathLike)) {
      read = readObservedCsv(py::str(d).cast<std::string>(), readOptions);
    } else if (py::isinstance<py::dict>(d) || (py::hasattr(d, "columns") && py::hasattr(d, "index"))) {
      const std::string name = py::isinstance<py::dict>(d) ? "<data dict" : "<DataFrame";
      read = observedFromTable(d, items.size() > 1 ? fmt::format("{} {}>", name, k + 1) : name + ">", readOptions);
    } else {
      throw py::type_error("fit: data must be a CSV path, a pandas DataFrame, a dict of arrays or a list of these, not " +
                           py::repr(d).cast<std::string>());
    }
    for (ObservedSeries& s : read.series) o.observed.series.push_back(std::move(s));
  }
  std::vector<std::string> inputWarnings;
  FitProblem pb;
  try {
    pb = makeFitProblem(o, inputWarnings);
  } catch (const CaseError& e) {
    throw CaseError(from.message(e.what()));
  }
  FitOutcome outcome;
  try {
    py::gil_scoped_release release;
    outcome = fitAndCheck(pb, o.gridCheck);
  } catch (const CaseError& e) {
    throw CaseError(from.message(e.what()));
  } catch (const SolverError& e) {
    throw SolverError(from.message(e.what()));
  }
  const FitResult& r = outcome.result;
  if (!r.converged) {
    std::string message = "fit: the fit did not converge: " + r.message;
    if (!output.empty()) message += "; iteration history kept in " + writeIncompleteFit(pb, r, o, output) + " (marked incomplete)";
    throw SolverError(from.message(message));
  }
  const Case fitted = fittedCase(pb, r);
  Body body(fitted);
  Collector collector(body);
  FittedRun run;
  {
    py::gil_scoped_release release;
    run = runFitted(pb, outcome, o, body, output,
                    [&](double t, std::span<const double> y, const RunSummary& s) { collector(t, y, s); });
  }
  if (!run.summary.complete) throw SolverError(from.message("fit: the fitted run failed: " + run.summary.failure));
  for (std::string& w : run.summary.warnings) w = from.message(w);

  const std::size_t p = pb.parameters.size();
  py::dict out;
  py::list names;
  py::dict values, se, lower, upper, units, logScale, startValues, lowerBounds, upperBounds, methods;
  for (std::size_t j = 0; j < p; ++j) {
    const FitParameter& fp = pb.parameters[j];
    const py::str key(fp.key);
    names.append(key);
    values[key] = r.values[j];
    se[key] = r.standardErrors[j];
    lower[key] = r.lower95[j];
    upper[key] = r.upper95[j];
    units[key] = fp.unit.empty() ? "1" : fp.unit;
    logScale[key] = fp.log;
    startValues[key] = fp.start;
    lowerBounds[key] = fp.lower;
    upperBounds[key] = fp.upper;
    methods[key] = j < r.gradientMethods.size() ? r.gradientMethods[j] : std::string();
  }
  out["parameters"] = names;
  out["values"] = values;
  out["standard_errors"] = se;
  out["lower_95"] = lower;
  out["upper_95"] = upper;
  out["units"] = units;
  out["log_scale"] = logScale;
  out["start"] = startValues;
  out["lower_bound"] = lowerBounds;
  out["upper_bound"] = upperBounds;
  out["gradient_method"] = methods;
  out["covariance"] = matrix(r.covariance, p);
  out["correlation"] = matrix(r.correlation, p);
  out["jacobian"] = array(r.jacobian, {static_cast<py::ssize_t>(p ? r.jacobian.size() / p : 0), static_cast<py::ssize_t>(p)});
  // Per series: the observations, the fitted model there, the residuals (model - observed) and RMSE.
  const std::vector<std::string> seriesNames = fitSeriesNames(pb.data);
  py::dict series, rmse;
  std::size_t offset = 0;
  for (std::size_t s = 0; s < pb.data.series.size(); ++s) {
    const ObservedSeries& os = pb.data.series[s];
    const std::size_t m = os.values.size();
    auto slice = [&](const std::vector<double>& v) {
      return array(std::vector<double>(v.begin() + static_cast<std::ptrdiff_t>(offset),
                                       v.begin() + static_cast<std::ptrdiff_t>(offset + m)),
                   {static_cast<py::ssize_t>(m)});
    };
    py::dict d;
    d["time"] = array(os.times, {static_cast<py::ssize_t>(m)});
    d["observed"] = array(os.values, {static_cast<py::ssize_t>(m)});
    d["sd"] = array(os.sd, {static_cast<py::ssize_t>(m)});
    d["predicted"] = slice(r.predictions);
    d["residual"] = slice(r.residuals);
    d["weighted_residual"] = slice(r.weightedResiduals);
    d["rmse"] = r.rmse[s];
    d["unit"] = os.unit();
    d["source"] = os.file;
    d["model_time"] = array(run.modelTimes, {static_cast<py::ssize_t>(run.modelTimes.size())});
    d["model"] = array(run.modelSeries[s], {static_cast<py::ssize_t>(run.modelSeries[s].size())});
    series[py::str(seriesNames[s])] = d;
    rmse[py::str(seriesNames[s])] = r.rmse[s];
    offset += m;
  }
  out["series"] = series;
  out["rmse"] = rmse;
  out["n"] = r.n;
  out["dof"] = r.n - p;
  out["ssr"] = r.ssr;
  out["s2"] = r.sigma2;
  out["aic"] = r.aic;
  out["bic"] = r.bic;
  out["t_quantile"] = r.tQuantile;
  std::vector<std::string> warnings = inputWarnings;
  for (const std::string& w : r.warnings) warnings.push_back(from.message(w));
  out["warnings"] = warnings;
  out["converged"] = r.converged;
  out["message"] = r.message;
  long iterations = 0;
  for (const FitIteration& it : r.history) iterations += it.iteration > 0 ? 1 : 0;
  out["iterations"] = iterations;
  out["model_runs"] = r.runs;
  out["wall_seconds"] = r.wallSeconds;
  out["grid_nodes"] = r.gridNodes;
  const FitGridCheck& g = outcome.grid;
  py::dict grid;
  grid["refinement"] = g.refinement;
  grid["ok"] = g.ok;
  grid["error"] = g.error;
  grid["nodes"] = g.nodes;
  if (g.ok) {
    py::dict shift, shiftSe, bias, biasSe, biasRelative;
    for (std::size_t j = 0; j < p; ++j) {
      const py::str key(pb.parameters[j].key);
      shift[key] = g.shift[j];
      shiftSe[key] = g.shiftSe[j];
      bias[key] = g.bias[j];
      biasSe[key] = g.biasSe[j];
      biasRelative[key] = g.biasRelative[j];
    }
    grid["shift"] = shift;
    grid["shift_se"] = shiftSe;
    grid["bias"] = bias;
    grid["bias_se"] = biasSe;
    grid["bias_relative"] = biasRelative;
  }
  out["grid_check"] = grid;
  py::dict fittedRun = collector.result(run.summary);
  fittedRun["output"] = run.results;  // the run wrote OUTPUT.fitting.h5, renamed to OUTPUT with /fit
  out["run"] = fittedRun;
  out["output"] = run.results;
  out["fitted_case"] = run.fittedCase;
  std::string report = from.message(fitReport(pb, r, g));
  for (const std::string& w : warnings) report += "warning: " + w + "\n";
  out["report"] = report + fmt::format("Caution: {}\n", caution);
  out["caution"] = caution;
  return warned(out);
}

// ---- sensitivity and uncertainty -----------------------------------------------------------------------

//! A memory stream for a driver's report or log (what the command line prints on stdout or stderr).
class TextStream {
 public:
  TextStream() : file_(open_memstream(&buffer_, &size_)) {
    if (!file_) throw std::runtime_error("cannot open a memory stream");
  }
  ~TextStream() {
    if (file_) std::fclose(file_);
    std::free(buffer_);
  }
  TextStream(const TextStream&) = delete;
  TextStream& operator=(const TextStream&) = delete;
  std::FILE* file() const { return file_; }
  //! The text written so far (closes the stream).
  std::string text() {
    if (file_) std::fclose(file_);
    file_ = nullptr;
    return buffer_ ? std::string(buffer_, size_) : std::string();
  }

 private:
  char* buffer_ = nullptr;
  std::size_t size_ = 0;
  std::FILE* file_ = nullptr;
};

//! An HDF5 handle closed on scope exit.
struct H5Handle {
  hid_t id;
  herr_t (*close)(hid_t);
  ~H5Handle() {
    if (id >= 0) close(id);
  }
};

//! The datasets of a results group as the file holds them: numbers as NumPy arrays of the dataset's shape, text
//! as lists of str, subgroups as dicts; the group's attributes (text or numbers) in "attributes".
py::dict readGroup(const std::string& file, const std::string& group) {
  H5Handle f{H5Fopen(file.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT), H5Fclose};
  if (f.id < 0) throw std::runtime_error(file + ": cannot open");
  H5Handle g{H5Gopen2(f.id, group.c_str(), H5P_DEFAULT), H5Gclose};
  if (g.id < 0) throw std::runtime_error(file + ": no group " + group);
  py::dict out, attributes;
  for (const std::string& name : h5List(file, group)) {
    const std::string path = group + "/" + name;
    H5O_info_t info;
    if (H5Oget_info_by_name2(g.id, name.c_str(), &info, H5O_INFO_BASIC, H5P_DEFAULT) < 0) continue;
    if (info.type == H5O_TYPE_GROUP) {
      out[py::str(name)] = readGroup(file, path);
      continue;
    }
    if (info.type != H5O_TYPE_DATASET) continue;
    H5Handle d{H5Dopen2(g.id, name.c_str(), H5P_DEFAULT), H5Dclose};
    H5Handle type{H5Dget_type(d.id), H5Tclose};
    if (H5Tget_class(type.id) == H5T_STRING) {
      out[py::str(name)] = h5ReadStrings(file, path);
      continue;
    }
    H5Handle space{H5Dget_space(d.id), H5Sclose};
    const int rank = H5Sget_simple_extent_ndims(space.id);
    std::vector<hsize_t> dims(static_cast<std::size_t>(std::max(rank, 0)));
    H5Sget_simple_extent_dims(space.id, dims.data(), nullptr);
    std::vector<py::ssize_t> shape(dims.begin(), dims.end());
    py::array_t<double> a(shape);
    if (a.size() > 0 && H5Dread(d.id, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, a.mutable_data()) < 0)
      throw std::runtime_error(file + ": cannot read " + path);
    out[py::str(name)] = a;
  }
  const int count = H5Aget_num_attrs(g.id);
  for (int i = 0; i < count; ++i) {
    H5Handle a{H5Aopen_by_idx(g.id, ".", H5_INDEX_NAME, H5_ITER_INC, static_cast<hsize_t>(i), H5P_DEFAULT, H5P_DEFAULT),
               H5Aclose};
    std::string name(static_cast<std::size_t>(H5Aget_name(a.id, 0, nullptr)), '\0');
    H5Aget_name(a.id, name.size() + 1, name.data());
    H5Handle type{H5Aget_type(a.id), H5Tclose};
    if (H5Tget_class(type.id) == H5T_STRING) {
      attributes[py::str(name)] = h5ReadStringAttribute(file, group, name);
    } else {
      double v = std::nan("");
      H5Aread(a.id, H5T_NATIVE_DOUBLE, &v);
      attributes[py::str(name)] = v;
    }
  }
  out["attributes"] = attributes;
  return out;
}

//! Where a driver writes: the caller's output=, or (none given) a fresh folder under the system's temporary folder,
//! removed afterwards, whose name is taken out of the report (the files are gone when the call returns).
struct DriverOutput {
  std::filesystem::path scratch;
  std::string path;
  //! `stem`: the case file's stem, or "case" for a case given as text or a dict (the scratch file's name).
  DriverOutput(const std::string& output, const std::string& stem, const std::string& suffix) : path(output) {
    if (!output.empty()) return;
    std::string pattern = (std::filesystem::temp_directory_path() / "thermorph-XXXXXX").string();
    if (!mkdtemp(pattern.data())) throw std::runtime_error("cannot create a temporary folder");
    scratch = pattern;
    path = (scratch / (stem + suffix)).string();
  }
  ~DriverOutput() {
    std::error_code ignored;
    if (!scratch.empty()) std::filesystem::remove_all(scratch, ignored);
  }
  DriverOutput(const DriverOutput&) = delete;
  DriverOutput& operator=(const DriverOutput&) = delete;
  //! A file name as the caller sees it ("" for a scratch file).
  std::string shown(const std::string& file) const { return scratch.empty() ? file : std::string(); }
  //! The report without the scratch folder's name.
  std::string report(std::string text) const {
    if (scratch.empty()) return text;
    const std::string folder = scratch.string() + "/";
    for (std::size_t at; (at = text.find(folder)) != std::string::npos;) text.erase(at, folder.size());
    return text;
  }
};

//! The stem of a driver's default output name: the case file's, "case" for a text or dict.
std::string caseStem(const CaseSource& from) {
  return from.file ? std::filesystem::path(from.path).stem().string() : std::string("case");
}

//! The lines a driver logged that begin with "warning", without "warning: ".
std::vector<std::string> loggedWarnings(const std::string& log) {
  std::vector<std::string> out;
  std::istringstream in(log);
  for (std::string line; std::getline(in, line);)
    if (line.starts_with("warning: ")) out.push_back(line.substr(9));
    else if (line.starts_with("warning")) out.push_back(line);
  return out;
}

//! Run a driver on its options with the report and log in memory; the exit code as the command line's: 2 is a
//! CaseError (thrown by the driver), 3 a failure (SolverError with the driver's error), 130/143 stopped. Messages
//! and the log name a case given as text or a dict as the module's other functions do (CaseSource::message).
template <class Options>
void runDriver(Options& o, int (*command)(const Options&), TextStream& report, TextStream& log, std::string& logText,
               const CaseSource& from) {
  o.casePath = from.path;
  o.caseText = from.text;
  o.report = report.file();
  o.log = log.file();
  o.quiet = true;
  int code = 0;
  try {
    py::gil_scoped_release release;
    code = command(o);
  } catch (const CaseError& e) {
    throw CaseError(from.message(e.what()));
  }
  std::fflush(report.file());
  logText = from.message(log.text());
  if (code == 0) return;
  std::string error;
  std::istringstream in(logText);
  for (std::string line; std::getline(in, line);)
    if (line.starts_with("error: ")) error = line.substr(7);
  if (code == 130 || code == 143) throw SolverError("stopped by a signal" + (error.empty() ? "" : ": " + error));
  throw SolverError(error.empty() ? fmt::format("the command failed (exit {})", code) : error);
}

py::dict runSensitivityPython(const py::object& spec, const py::object& params, const std::string& method,
                              std::size_t samples, const py::object& metrics, bool steady, const std::string& window,
                              int jobs, std::uint64_t seed, std::size_t bootstrap, const std::string& output,
                              const py::object& set, std::size_t levels, const std::string& gradient, double step,
                              const std::string& base) {
  const CaseSource from = caseSource(spec, base);
  SensitivityOptions o;
  o.params = strings(params, "params");
  o.method = method;
  o.samples = samples;
  o.metrics = strings(metrics, "metrics");
  o.steady = steady;
  o.window = window;
  o.jobs = jobs;
  o.seed = seed;
  o.bootstrap = bootstrap;
  o.overrides = strings(set, "set");
  o.levels = levels;
  o.gradient = gradient;
  o.step = step;
  o.commandLine = "python: thermorph.sensitivity";
  if (gradient != "auto" && gradient != "fd") throw CaseError(fmt::format("--gradient {}: expected auto or fd", gradient));
  const DriverOutput out(output, caseStem(from), "_" + method + ".h5");
  o.output = out.path;
  TextStream report, log;
  std::string logText;
  runDriver(o, &runSensitivityCommand, report, log, logText, from);
  py::dict r = readGroup(o.output, "/sensitivity");
  const std::string runsTable = h5ReadStringAttribute(o.output, "/sensitivity", "runs_table");
  py::dict runs, values;
  for (const std::string& name : h5List(runsTable, "/metrics"))
    if (h5ReadStringAttribute(runsTable, "/metrics/" + name, "CLASS") != "DIMENSION_SCALE") {
      const std::vector<double> v = h5ReadDoubles(runsTable, "/metrics/" + name);
      values[py::str(name)] = array(v, {static_cast<py::ssize_t>(v.size())});
    }
  runs["metrics"] = values;
  runs["status"] = h5ReadStrings(runsTable, "/runs/status");
  runs["errors"] = h5ReadStrings(runsTable, "/runs/error");
  // The runs' warnings and their distinct ones (the runs table's /provenance/warnings; the command line prints one
  // line per kind).
  std::vector<std::string> runWarnings = h5ReadStrings(runsTable, "/runs/warnings");
  for (std::string& w : runWarnings) w = from.message(w);
  runs["warnings"] = runWarnings;
  r["runs"] = runs;
  std::vector<std::string> warnings = h5ReadStrings(runsTable, "/provenance/warnings");
  for (std::string& w : warnings) w = from.message(w);
  r["warnings"] = warnings;
  r["log"] = logText;
  r["output"] = out.shown(o.output);
  r["runs_table"] = out.shown(runsTable);
  r["attributes"].cast<py::dict>()["runs_table"] = out.shown(runsTable);
  r["report"] = out.report(from.message(report.text()));
  r["caution"] = caution;
  return warned(r);
}

py::dict runUncertaintyPython(const py::object& spec, const py::object& params, const py::object& fromFit,
                              std::size_t samples, const std::string& design, const py::object& series,
                              const py::object& metrics, const std::string& window, std::uint64_t seed, int jobs,
                              const std::string& output, const py::object& set, const std::string& base) {
  const CaseSource from = caseSource(spec, base);
  UncertaintyOptions o;
  o.params = strings(params, "params");
  o.fromFit = fromFit.is_none() ? std::string() : py::str(py::module_::import("os").attr("fspath")(fromFit)).cast<std::string>();
  o.samples = samples;
  o.design = design;
  o.series = strings(series, "series");
  o.metrics = strings(metrics, "metrics");  // --metric: selectors, patterns and time_to thresholds
  o.window = window;
  o.seed = seed;
  o.jobs = jobs;
  o.overrides = strings(set, "set");
  o.commandLine = "python: thermorph.uncertainty";
  const DriverOutput out(output, caseStem(from), "_uncertainty.h5");
  o.output = out.path;
  TextStream report, log;
  std::string logText;
  runDriver(o, &runUncertaintyCommand, report, log, logText, from);
  py::dict r = readGroup(o.output, "/uncertainty");
  // The command line's warnings (also in the file's /uncertainty attribute "warnings").
  r["warnings"] = loggedWarnings(logText);
  r["log"] = logText;
  r["output"] = out.shown(o.output);
  r["report"] = out.report(from.message(report.text()));
  r["caution"] = caution;
  return warned(r);
}

}  // namespace

PYBIND11_MODULE(thermorph, m) {
  m.doc() = "thermorph: tissue temperatures and heat budgets of animal bodies built from linked segments, run "
            "in-process with the command line's own drivers. Model estimates for research; not veterinary or "
            "medical advice.";
  m.attr("__version__") = THERMORPH_VERSION;
  m.attr("CAUTION") = caution;
  py::register_exception<CaseError>(m, "CaseError", PyExc_ValueError);
  py::register_exception<SolverError>(m, "SolverError", PyExc_RuntimeError);
  thermorphWarning = PyErr_NewExceptionWithDoc(
      "thermorph.ThermorphWarning",
      "A warning of a thermorph run (grid, validity ranges, keys with no effect, hot or freezing tissue, ...): every "
      "function raises its result's warnings so, one per kind, as the command line prints them on stderr; the "
      "result's 'warnings' keeps every text. Silence with warnings.simplefilter('ignore', thermorph.ThermorphWarning).",
      PyExc_UserWarning, nullptr);
  if (thermorphWarning == nullptr) throw py::error_already_set();
  m.add_object("ThermorphWarning", py::handle(thermorphWarning));
  m.def(
      "run",
      [](const py::object& spec, const std::vector<std::string>& set, const std::string& output,
         const std::string& base, bool coldStart) { return runCase(spec, set, false, output, base, coldStart); },
      py::arg("case"), py::arg("set") = std::vector<std::string>{}, py::arg("output") = "", py::arg("base") = ".",
      py::arg("cold_start") = false,
      "Integrate a case (TOML path, TOML text or dict) with --set-style overrides (\"KEY=VALUE\"); returns a dict "
      "of NumPy arrays: time [s], core/blood/mean_skin_temperature [degC], heat_flow and cumulative_heat by "
      "channel [W, J], segments[NAME] (temperature [nt, nz, nr] degC, radius, axial [m], heat_flow, contact_fraction, in_water, wetted_fraction, tucked_fraction), steps "
      "(the timeline's steps: time [s] and cumulative_heat by channel [J] there, whole body and segments[NAME], one copy; "
      "the results file's /steps), budget (flows at the last output, energies), warnings. `output` also writes the HDF5 results file; `base` is "
      "the folder for files a TOML string or dict names (weather files). `cold_start=True`: as `thermorph run --cold-start`, "
      "a refined grid's (run.grid_refinement > 1) steady start by the relaxation from initial_temperature instead of by "
      "Newton from the unrefined grid's steady state (the default; the same state to KINSOL's tolerance).");
  m.def(
      "steady",
      [](const py::object& spec, const std::vector<std::string>& set, const std::string& output,
         const std::string& base, bool coldStart) { return runCase(spec, set, true, output, base, coldStart); },
      py::arg("case"), py::arg("set") = std::vector<std::string>{}, py::arg("output") = "", py::arg("base") = ".",
      py::arg("cold_start") = false,
      "Steady state of a case (KINSOL); the same dict as run() with one time point. `cold_start=True`: as "
      "`thermorph steady --cold-start` (see run()).");
  m.def("sweep", &runSweep, py::arg("case"), py::arg("vary") = std::vector<std::string>{},
        py::arg("set") = std::vector<std::string>{}, py::arg("scale") = std::vector<std::string>{},
        py::arg("metrics") = std::vector<std::string>{}, py::arg("zip") = false, py::arg("steady") = false,
        py::arg("window") = "", py::arg("jobs") = 1, py::arg("base") = ".",
        "Sweep a case (TOML path, TOML text or dict, as run() takes it; `base`: the folder for files a text or dict "
        "names) over --vary KEY=SPEC axes (and --scale); returns parameters and metrics per run as "
        "NumPy arrays (NaN for failed runs), with units, status, errors and each run's warnings (a list of strings per "
        "run; the results file's /runs/warnings joins them with \"; \").");
  m.def("fit", &runFitPython, py::arg("case"), py::arg("data"), py::arg("free"), py::arg("set") = py::none(),
        py::arg("start") = py::none(), py::arg("prior") = py::none(), py::arg("data_start") = py::none(),
        py::arg("multi_start") = 1, py::arg("max_iterations") = 50, py::arg("gradient") = "auto", py::arg("step") = 1e-4,
        py::arg("rtol") = 1e-7, py::arg("converged_se") = 0.01, py::arg("grid_check") = 2, py::arg("jobs") = 0,
        py::arg("output") = "", py::arg("base") = ".", py::arg("progress") = false, py::arg("cold_start") = false,
        "Fit case keys to observed series, as `thermorph fit` does (the same drivers: Ceres least squares, "
        "covariance s^2 (J^T J)^-1, t intervals, the grid check). `case`: TOML path, text or dict; `data`: an "
        "observed-data CSV path, a pandas DataFrame or dict of arrays with columns named as the CSV's header "
        "(\"time [h]\" or a bare \"time\" in seconds, or date-times in \"datetime\" or the index with data_start; "
        "\"NAME [UNIT]\", optional \"NAME.sd [UNIT]\"; NaN or None missing), or a list of these; `free`: "
        "\"KEY=LOWER:UPPER\" or \"KEY=LOWER:UPPER:log\" (a string or a list), `start` \"KEY=VALUE\", `prior` "
        "\"KEY=MEAN:SD\". Returns a dict: parameters, values, standard_errors, lower_95, upper_95, units, log_scale, "
        "covariance, correlation, series (time, observed, sd, predicted, residual, rmse, model per series), rmse, "
        "n, dof, ssr, s2, aic, bic, warnings (a list, as the command line warns), grid_check, run (the fitted run, "
        "as run() returns it), report (the command line's report with the caution), caution. `output=\"fit.h5\"` "
        "also writes the fitted run with /fit and STEM_fitted.toml beside it. `cold_start=True`: as `thermorph fit "
        "--cold-start` (refined runs' steady starts, the grid check's too, by the relaxation). Bad input raises CaseError; a fit "
        "that does not converge raises SolverError (its history in STEM.incomplete.h5 when output is given).");
  {
    namespace h = sensitivity_help;
    m.def("sensitivity", &runSensitivityPython, py::arg("case"), py::arg("params"), py::arg("method") = "sobol",
          py::arg("samples") = 0, py::arg("metrics") = py::none(), py::arg("steady") = false, py::arg("window") = "",
          py::arg("jobs") = 1, py::arg("seed") = 1, py::arg("bootstrap") = 1000, py::arg("output") = "",
          py::arg("set") = py::none(), py::arg("levels") = 4, py::arg("gradient") = "auto", py::arg("step") = 1e-3,
          py::arg("base") = ".",
          fmt::format("{}, as `thermorph sensitivity` does (the same driver; its options by the same names):\n"
                      "case: a case: TOML path, TOML text or dict, as run() and fit() take it\nparams (--param): {}\nmethod (--method): {}\nsamples (-N): {}; 0: the "
                      "default\nmetrics (--metric): {}\nsteady (--steady): {}\nwindow (--window): {}\njobs (-j): {}; "
                      "default here 1\nseed (--seed): {}\nbootstrap (--bootstrap): {}\nset (--set): {}\nlevels "
                      "(--levels): {}\ngradient (--gradient): {}\nstep (--step): {}\noutput (-o): {}; \"\": no file\nbase: the folder "
                      "for files a TOML text or dict names (weather files)\n"
                      "Returns the results file's /sensitivity group as a dict (NumPy arrays of the file's shapes: "
                      "first, total, first_low ... [metric, parameter] for sobol; mu, mu_star, sigma for morris; "
                      "derivative, normalised for local; parameters, metrics, units, design), its attributes, runs "
                      "(metrics per run, status, errors), warnings, report (the command line's, with the caution) "
                      "and caution. Bad input raises CaseError with the command line's message.",
                      h::command, h::param, h::method, h::samples, h::metric, h::steady, h::window, h::jobs, h::seed,
                      h::bootstrap, h::set, h::levels, h::gradient, h::step, h::output)
              .c_str());
  }
  {
    namespace h = uncertainty_help;
    m.def("uncertainty", &runUncertaintyPython, py::arg("case"), py::arg("params") = py::none(),
          py::arg("from_fit") = py::none(), py::arg("samples") = 200, py::arg("design") = "lhs",
          py::arg("series") = py::none(), py::arg("metrics") = py::none(), py::arg("window") = "",
          py::arg("seed") = 1, py::arg("jobs") = 1, py::arg("output") = "", py::arg("set") = py::none(),
          py::arg("base") = ".",
          fmt::format("{}, as `thermorph uncertainty` does (the same driver; its options by the same names):\n"
                      "case: a case: TOML path, TOML text or dict, as run() and fit() take it\nparams (--param): {}\nfrom_fit (--from-fit): {}\nsamples "
                      "(--samples): {}\ndesign (--design): {}\nseries (--series): {}\nmetrics (--metric): {}\n"
                      "window (--window): {}\nseed (--seed): {}\njobs (-j): {}; "
                      "default here 1\nset (--set): {}\noutput (-o): {}; \"\": no file\nbase: the folder for files a "
                      "TOML text or dict names (weather files)\n"
                      "Returns the results file's /uncertainty group as a dict (NumPy arrays: samples [sample, "
                      "parameter], run_ok, metric_values [sample, metric], metric_quantiles [metric, probability], "
                      "metric_mean, metric_sd, metric_base, metric_reached, time, series[NAME] q05 ... q95, mean, base), "
                      "its attributes, "
                      "warnings (the command line's), report (with the caution) and caution. Bad input raises "
                      "CaseError with the command line's message.",
                      h::command, h::param, h::fromFit, h::samples, h::design, h::series, h::metric, h::window,
                      h::seed, h::jobs, h::set, h::output)
              .c_str());
  }
}
