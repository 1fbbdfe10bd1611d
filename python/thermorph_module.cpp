//! The Python module `thermorph` (pybind11): runs a case, a steady state or a sweep in-process through the same
//! drivers as the command line (runTransient, runSteady, makeSweepPlan/runLocal) and returns NumPy arrays.
//!
//!   import thermorph
//!   r = thermorph.run("cases/limb_cooling.toml", set=["environment.temperature=5 degC"])
//!   r["time"], r["core_temperature"], r["segments"]["forelimb"]["temperature"], r["heat_flow"]["convection"]
//!
//! Model estimates for research; not veterinary or medical advice.
#include <pybind11/numpy.h>
#include <pybind11/pybind11.h>
#include <pybind11/stl.h>

#include <atomic>
#include <cctype>
#include <filesystem>
#include <optional>
#include <sstream>

#include <toml++/toml.h>

#include "drivers/record_budget.hpp"
#include "drivers/record_fields.hpp"
#include "drivers/simulation.hpp"
#include "drivers/sweep.hpp"
#include "models/body.hpp"
#include "models/case.hpp"

namespace py = pybind11;
using namespace thermorph;

namespace {

constexpr double kelvinOffset = 273.15;
const char* caution =
    "Model estimates for research; not veterinary or medical advice. Follow local regulations, animal-welfare "
    "rules and licensed veterinary or medical practice.";

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

//! A case given to the module, and how its messages are to be named.
struct LoadedCase {
  Case c;
  std::string source;  //!< the source name of a dict or text case (messages are rewritten), empty for a file
  bool dict = false;
  std::string message(const std::string& m) const {
    return source.empty() ? m : caseMessage(m, source, dict ? kDictCase : kTextCase, !dict);
  }
};

//! A Case from a TOML path, a TOML string or a dict (a dict or string reads relative files from `base`). A string
//! is named "<case text>" with its own lines and columns; a dict "<case dict>" with key paths only (caseMessage).
LoadedCase loadAny(const py::object& spec, const std::vector<std::string>& overrides, const std::string& base) {
  if (py::isinstance<py::dict>(spec)) {
    std::ostringstream text;
    text << toTable(spec.cast<py::dict>());
    const std::string source = sourceName(base, kDictCase);
    try {
      return {loadCaseFromString(text.str(), source, overrides), source, true};
    } catch (const CaseError& e) {
      throw CaseError(caseMessage(e.what(), source, kDictCase, false));
    }
  }
  const std::string s = py::str(spec).cast<std::string>();
  if (s.find('\n') == std::string::npos && std::filesystem::is_regular_file(s)) return {loadCase(s, overrides), "", false};
  const std::string source = sourceName(base, kTextCase);
  try {
    return {loadCaseFromString(s, source, overrides), source, false};
  } catch (const CaseError& e) {
    throw CaseError(caseMessage(e.what(), source, kTextCase, true));
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
  std::vector<double> scratch;

  explicit Collector(const Body& b) : body(b) {
    const std::size_t channels = b.network().channels.size(), segments = b.segments().size();
    flows.resize(channels);
    energy.resize(channels);
    fields.resize(segments);
    segmentFlows.resize(segments * (channels + 1));
    contact.resize(segments);
    inWater.resize(segments);
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
      py::dict f;
      for (std::size_t c = 0; c < channels; ++c) f[py::str(n.channels[c])] = array(segmentFlows[g * (channels + 1) + c], {nt});
      f["storage"] = array(segmentFlows[g * (channels + 1) + channels], {nt});
      d["heat_flow"] = f;
      segs[py::str(m.name)] = d;
    }
    r["segments"] = segs;
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

py::dict runCase(const py::object& spec, const std::vector<std::string>& overrides, bool steady,
                 const std::string& output, const std::string& base) {
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
  options.observer = [&](double t, std::span<const double> y, const RunSummary& s) { collector(t, y, s); };
  RunSummary summary;
  {
    py::gil_scoped_release release;
    summary = steady ? runSteady(body, options) : runTransient(body, options);
  }
  if (!summary.complete) throw SolverError(loaded.message(summary.failure));
  for (std::string& w : summary.warnings) w = loaded.message(w);
  return collector.result(summary);
}

// ---- sweep ---------------------------------------------------------------------------------------------

py::dict runSweep(const std::string& casePath, const std::vector<std::string>& vary, const std::vector<std::string>& set,
                  const std::vector<std::string>& scale, const std::vector<std::string>& metrics, bool zip, bool steady,
                  const std::string& window, int jobs) {
  SweepOptions o;
  o.casePath = casePath;
  o.vary = vary;
  o.overrides = set;
  o.scale = scale;
  o.metrics = metrics;
  o.zip = zip;
  o.steady = steady;
  o.window = window;
  o.jobs = jobs;
  o.quiet = true;
  SweepPlan plan = makeSweepPlan(o);
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
  for (const RunRow& row : rows) {
    status.append(row.status == RunStatus::Ok ? "ok" : row.status == RunStatus::Failed ? "failed" : "not run");
    errors.append(row.error);
    warnings.append(py::cast(row.warnings));  // a list per run (the results file joins them with "; ")
  }
  r["parameters"] = params;
  r["metrics"] = values;
  r["units"] = units;
  r["status"] = status;
  r["errors"] = errors;
  r["warnings"] = warnings;
  r["caution"] = caution;
  return r;
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
  m.def(
      "run",
      [](const py::object& spec, const std::vector<std::string>& set, const std::string& output,
         const std::string& base) { return runCase(spec, set, false, output, base); },
      py::arg("case"), py::arg("set") = std::vector<std::string>{}, py::arg("output") = "", py::arg("base") = ".",
      "Integrate a case (TOML path, TOML text or dict) with --set-style overrides (\"KEY=VALUE\"); returns a dict "
      "of NumPy arrays: time [s], core/blood/mean_skin_temperature [degC], heat_flow and cumulative_heat by "
      "channel [W, J], segments[NAME] (temperature [nt, nz, nr] degC, radius, axial [m], heat_flow, contact_fraction, in_water), budget "
      "(flows at the last output, energies), warnings. `output` also writes the HDF5 results file; `base` is "
      "the folder for files a TOML string or dict names (weather files).");
  m.def(
      "steady",
      [](const py::object& spec, const std::vector<std::string>& set, const std::string& output,
         const std::string& base) { return runCase(spec, set, true, output, base); },
      py::arg("case"), py::arg("set") = std::vector<std::string>{}, py::arg("output") = "", py::arg("base") = ".",
      "Steady state of a case (KINSOL); the same dict as run() with one time point.");
  m.def("sweep", &runSweep, py::arg("case"), py::arg("vary") = std::vector<std::string>{},
        py::arg("set") = std::vector<std::string>{}, py::arg("scale") = std::vector<std::string>{},
        py::arg("metrics") = std::vector<std::string>{}, py::arg("zip") = false, py::arg("steady") = false,
        py::arg("window") = "", py::arg("jobs") = 1,
        "Sweep a case file over --vary KEY=SPEC axes (and --scale); returns parameters and metrics per run as "
        "NumPy arrays (NaN for failed runs), with units, status, errors and each run's warnings (a list of strings per "
        "run; the results file's /runs/warnings joins them with \"; \").");
}
