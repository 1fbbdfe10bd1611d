#include "drivers/sweep_output.hpp"
#include "drivers/provenance.hpp"

#include <hdf5.h>
#include <hdf5_hl.h>
#include <fcntl.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cmath>
#include <cstdlib>
#include <cstring>
#include <ctime>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <map>
#include <sstream>
#include <stdexcept>

#include <fmt/format.h>

#include "models/caution.hpp"
#include "drivers/h5_append.hpp"
#include "drivers/output_file.hpp"

namespace thermorph {
namespace {

constexpr const char* journalMagic = "# thermorph sweep progress 1";
constexpr std::size_t fixedFields = 8;  // index, status, load, build, solve, wall, steps, balance
constexpr std::size_t textFields = 3;   // overrides, warnings, error

const char* statusName(RunStatus s) {
  switch (s) {
    case RunStatus::Ok: return "ok";
    case RunStatus::Failed: return "failed";
    case RunStatus::NotRun: return "not run";
  }
  return "?";
}

std::string replaceExtension(const std::string& output, const std::string& extension) {
  std::filesystem::path p(output);
  return (p.parent_path() / (p.stem().string() + extension)).string();
}

//! Tabs, newlines and backslashes escaped so a message stays one field of one line.
std::string escape(const std::string& s) {
  std::string out;
  for (char ch : s) {
    if (ch == '\\') out += "\\\\";
    else if (ch == '\t') out += "\\t";
    else if (ch == '\n') out += "\\n";
    else if (ch == '\r') out += "\\r";
    else out += ch;
  }
  return out;
}

std::string unescape(const std::string& s) {
  std::string out;
  for (std::size_t i = 0; i < s.size(); ++i) {
    if (s[i] != '\\' || i + 1 == s.size()) {
      out += s[i];
      continue;
    }
    char next = s[++i];
    out += next == 't' ? '\t' : next == 'n' ? '\n' : next == 'r' ? '\r' : next;
  }
  return out;
}

std::vector<std::string> splitTabs(const std::string& line) {
  std::vector<std::string> fields;
  std::size_t start = 0;
  while (true) {
    std::size_t tab = line.find('\t', start);
    fields.push_back(line.substr(start, tab == std::string::npos ? std::string::npos : tab - start));
    if (tab == std::string::npos) break;
    start = tab + 1;
  }
  return fields;
}

//! Exact round trip: shortest decimal that reads back to the same double ("nan", "inf" included).
std::string number(double v) { return fmt::format("{}", v); }

bool parseNumber(const std::string& text, double& value) {
  if (text.empty()) return false;
  char* end = nullptr;
  errno = 0;
  value = std::strtod(text.c_str(), &end);
  return end == text.c_str() + text.size();
}

std::string header(const SweepPlan& plan) {
  return fmt::format("{} fingerprint={:016x} runs={} columns={}", journalMagic, plan.fingerprint, plan.runs,
                     plan.columns.size());
}

//! One journal line, or false when it is cut short or malformed.
bool parseRow(const std::string& line, std::size_t columns, std::size_t runs, RunRow& row) {
  std::vector<std::string> f = splitTabs(line);
  if (f.size() != fixedFields + columns + textFields) return false;
  double index = 0, steps = 0;
  if (!parseNumber(f[0], index) || index < 0 || index >= static_cast<double>(runs)) return false;
  row.index = static_cast<std::size_t>(index);
  if (f[1] == "ok") row.status = RunStatus::Ok;
  else if (f[1] == "failed") row.status = RunStatus::Failed;
  else return false;
  if (!parseNumber(f[2], row.loadSeconds) || !parseNumber(f[3], row.buildSeconds) ||
      !parseNumber(f[4], row.solveSeconds) || !parseNumber(f[5], row.wallSeconds) || !parseNumber(f[6], steps) ||
      !parseNumber(f[7], row.energyBalanceError))
    return false;
  row.steps = static_cast<long>(steps);
  row.metrics.resize(columns);
  for (std::size_t c = 0; c < columns; ++c)
    if (!parseNumber(f[fixedFields + c], row.metrics[c])) return false;
  row.overrides = unescape(f[fixedFields + columns]);
  // One warning per line inside the field (no warning spans lines; the journal escapes the line breaks).
  row.warnings.clear();
  const std::string warnings = unescape(f[fixedFields + columns + 1]);
  for (std::size_t start = 0; start < warnings.size();) {
    const std::size_t end = std::min(warnings.find('\n', start), warnings.size());
    row.warnings.push_back(warnings.substr(start, end - start));
    start = end + 1;
  }
  row.error = unescape(f[fixedFields + columns + 2]);
  return true;
}

std::string formatRow(const RunRow& row) {
  std::string line = fmt::format("{}\t{}\t{}\t{}\t{}\t{}\t{}\t{}", row.index, statusName(row.status),
                                 number(row.loadSeconds), number(row.buildSeconds), number(row.solveSeconds),
                                 number(row.wallSeconds), row.steps, number(row.energyBalanceError));
  for (double v : row.metrics) fmt::format_to(std::back_inserter(line), "\t{}", v);
  fmt::format_to(std::back_inserter(line), "\t{}\t{}\t{}\n", escape(row.overrides),
                 escape(fmt::format("{}", fmt::join(row.warnings, "\n"))),
                 escape(row.error));
  return line;
}

// ---- HDF5 ----------------------------------------------------------------------------------------

//! Owns one HDF5 identifier.
class H5 {
 public:
  H5(hid_t id, herr_t (*close)(hid_t), const std::string& what) : id_(id), close_(close) {
    if (id < 0) throw std::runtime_error("HDF5: cannot " + what);
  }
  ~H5() {
    if (id_ >= 0) close_(id_);
  }
  H5(H5&& other) noexcept : id_(other.id_), close_(other.close_) { other.id_ = -1; }
  H5(const H5&) = delete;
  H5& operator=(const H5&) = delete;
  H5& operator=(H5&&) = delete;
  operator hid_t() const { return id_; }

 private:
  hid_t id_;
  herr_t (*close_)(hid_t);
};

void check(herr_t status, const std::string& what) {
  if (status < 0) {
    const std::string reason = writeFailureReason();
    throw OutputError("HDF5: cannot " + what + (reason.empty() ? "" : ": " + reason));
  }
}

H5 textType() {
  // Variable-length UTF-8: text (str) in h5py, not bytes.
  H5 type(H5Tcopy(H5T_C_S1), H5Tclose, "copy a string type");
  H5Tset_size(type, H5T_VARIABLE);
  H5Tset_cset(type, H5T_CSET_UTF8);
  return type;
}

void attribute(hid_t object, const std::string& name, const std::string& value) {
  H5 type = textType();
  H5 space(H5Screate(H5S_SCALAR), H5Sclose, "create a scalar space");
  H5 attr(H5Acreate2(object, name.c_str(), type, space, H5P_DEFAULT, H5P_DEFAULT), H5Aclose, "create attribute " + name);
  const char* text = value.c_str();
  check(H5Awrite(attr, type, &text), "write attribute " + name);
}

void attribute(hid_t object, const std::string& name, long value) {
  H5 space(H5Screate(H5S_SCALAR), H5Sclose, "create a scalar space");
  H5 attr(H5Acreate2(object, name.c_str(), H5T_NATIVE_LONG, space, H5P_DEFAULT, H5P_DEFAULT), H5Aclose,
          "create attribute " + name);
  check(H5Awrite(attr, H5T_NATIVE_LONG, &value), "write attribute " + name);
}

void attribute(hid_t object, const std::string& name, double value) {
  H5 space(H5Screate(H5S_SCALAR), H5Sclose, "create a scalar space");
  H5 attr(H5Acreate2(object, name.c_str(), H5T_NATIVE_DOUBLE, space, H5P_DEFAULT, H5P_DEFAULT), H5Aclose,
          "create attribute " + name);
  check(H5Awrite(attr, H5T_NATIVE_DOUBLE, &value), "write attribute " + name);
}

void attribute(hid_t object, const std::string& name, const std::vector<std::string>& values) {
  H5 type = textType();
  hsize_t n = values.size();
  H5 space(H5Screate_simple(1, &n, nullptr), H5Sclose, "create a space");
  H5 attr(H5Acreate2(object, name.c_str(), type, space, H5P_DEFAULT, H5P_DEFAULT), H5Aclose, "create attribute " + name);
  std::vector<const char*> pointers;
  for (const std::string& s : values) pointers.push_back(s.c_str());
  if (n > 0) check(H5Awrite(attr, type, pointers.data()), "write attribute " + name);
}

//! A 1-D dataset of `count` values of `memoryType` from `data`; returned open for attributes.
H5 dataset(hid_t group, const std::string& name, hid_t fileType, hid_t memoryType, const void* data, std::size_t count) {
  hsize_t n = count;
  H5 space(H5Screate_simple(1, &n, nullptr), H5Sclose, "create a space");
  H5 ds(H5Dcreate2(group, name.c_str(), fileType, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT), H5Dclose,
        "create dataset " + name);
  if (count > 0) check(H5Dwrite(ds, memoryType, H5S_ALL, H5S_ALL, H5P_DEFAULT, data), "write dataset " + name);
  return ds;
}

void doubles(hid_t group, const std::string& name, const std::vector<double>& values, const std::string& units,
             const std::string& definition = "") {
  H5 ds = dataset(group, name, H5T_IEEE_F64LE, H5T_NATIVE_DOUBLE, values.data(), values.size());
  attribute(ds, "units", units);
  if (!definition.empty()) {
    attribute(ds, "definition", definition);
    attribute(ds, "long_name", definition);  // CF
  }
}

void longs(hid_t group, const std::string& name, const std::vector<long>& values, const std::string& units) {
  H5 ds = dataset(group, name, H5T_STD_I64LE, H5T_NATIVE_LONG, values.data(), values.size());
  attribute(ds, "units", units);
}

H5 texts(hid_t group, const std::string& name, const std::vector<std::string>& values) {
  H5 type = textType();
  std::vector<const char*> pointers;
  for (const std::string& s : values) pointers.push_back(s.c_str());
  return dataset(group, name, type, type, pointers.data(), pointers.size());
}

//! netCDF-4 coordinate of a table group: `run` (run index 0..n-1) made an HDF5 dimension scale, attached to
//! every other dataset of the group, so netCDF readers (xarray) see one named dimension `run` per group.
void attachRunCoordinate(hid_t group, std::size_t n) {
  std::vector<long> index(n);
  for (std::size_t r = 0; r < n; ++r) index[r] = static_cast<long>(r);
  H5 run = dataset(group, "run", H5T_STD_I64LE, H5T_NATIVE_LONG, index.data(), n);
  attribute(run, "units", std::string("1"));
  attribute(run, "long_name", std::string("run index (row of the sweep table)"));
  check(H5DSset_scale(run, "run"), "make run a dimension scale");
  H5G_info_t info;
  check(H5Gget_info(group, &info), "list a group");
  // All at once: one REFERENCE_LIST write on `run` instead of a rewrite per column (drivers/h5_append.hpp).
  std::vector<H5> columns;
  std::vector<ScaleAttachment> list;
  columns.reserve(info.nlinks);
  for (hsize_t i = 0; i < info.nlinks; ++i) {
    char name[1024];
    if (H5Lget_name_by_idx(group, ".", H5_INDEX_NAME, H5_ITER_INC, i, name, sizeof name, H5P_DEFAULT) < 0) continue;
    if (std::string(name) == "run") continue;
    columns.emplace_back(H5Dopen2(group, name, H5P_DEFAULT), H5Dclose, std::string("open ") + name);
    list.push_back({columns.back(), run, 0});
  }
  attachScales(list);
}

std::string nowIso() {
  std::time_t t = std::time(nullptr);
  std::tm utc{};
  gmtime_r(&t, &utc);
  char buffer[32];
  std::strftime(buffer, sizeof buffer, "%Y-%m-%dT%H:%M:%SZ", &utc);
  return buffer;
}


void writeHdf5(const SweepPlan& plan, std::span<const RunRow> rows, const SweepTableInfo& info,
               const std::string& path) {
  const std::size_t n = rows.size();
  std::size_t ok = 0, failed = 0;
  for (const RunRow& r : rows) {
    if (r.status == RunStatus::Ok) ++ok;
    else if (r.status == RunStatus::Failed) ++failed;
  }
  H5Eset_auto2(H5E_DEFAULT, nullptr, nullptr);
  hid_t fileId = H5Fcreate(path.c_str(), H5F_ACC_TRUNC, H5P_DEFAULT, H5P_DEFAULT);
  if (fileId < 0) check(-1, "create " + path);
  // Closed explicitly at the end, where a failure (disk full) is reported; an exception closes it unchecked.
  struct Closer {
    hid_t id;
    ~Closer() {
      if (id >= 0) H5Fclose(id);
    }
  } closer{fileId};
  const hid_t file = fileId;
  {
    H5 root(H5Gopen2(file, "/", H5P_DEFAULT), H5Gclose, "open /");
    attribute(root, "kind", std::string("thermorph sweep"));
    attribute(root, "tool_version", std::string(THERMORPH_VERSION));
    attribute(root, "command_line", info.commandLine);
    attribute(root, "case", plan.resolvedCase);
    attribute(root, "case_file", plan.casePath);
    attribute(root, "title", plan.title);
    attribute(root, "created", nowIso());
    attribute(root, "caution", std::string(caution));
    attribute(root, "fingerprint", fmt::format("{:016x}", plan.fingerprint));
    attribute(root, "runs", static_cast<long>(n));
    attribute(root, "runs_ok", static_cast<long>(ok));
    attribute(root, "runs_failed", static_cast<long>(failed));
    attribute(root, "runs_not_run", static_cast<long>(n - ok - failed));
    attribute(root, "complete", ok + failed == n ? 1L : 0L);
    attribute(root, "runs_earlier_sessions", static_cast<long>(info.runsBefore));
    attribute(root, "runs_this_session", static_cast<long>(info.runsNow));
    attribute(root, "engine", info.engine);
    attribute(root, "wall_seconds", info.wallSeconds);
    attribute(root, "interrupted", info.interrupted ? 1L : 0L);
    attribute(root, "mode", std::string(plan.steady ? "steady" : "transient"));
    attribute(root, "window", plan.steady ? std::string("steady state")
                                          : fmt::format("{} s to {}", plan.window.start,
                                                        plan.window.end < 0 ? std::string("the end of the run")
                                                                            : fmt::format("{} s", plan.window.end)));
    std::vector<std::string> dims, overrides;
    for (const SweepAxis& a : plan.axes) dims.push_back(a.key);
    attribute(root, "parameters", dims);
    attribute(root, "grid", plan.zip ? fmt::format("zip of {} values", plan.runs)
                                     : fmt::format("{}", fmt::join(plan.shape, " x ")));
    attribute(root, "set", plan.overrides);
    // At most 1 000 distinct warnings in the attribute (an attribute holds 64 kB); every run's own in /runs/warnings.
    std::vector<std::string> warnings(info.warnings.begin(),
                                      info.warnings.begin() + static_cast<std::ptrdiff_t>(std::min<std::size_t>(
                                                                  info.warnings.size(), 1000)));
    if (info.warnings.size() > warnings.size())
      warnings.push_back(fmt::format("... and {} more (see /runs/warnings)", info.warnings.size() - warnings.size()));
    attribute(root, "warnings", warnings);
  }
  {
    // Provenance, as in result files (drivers/provenance.hpp).
    H5 group(H5Gcreate2(file, "provenance", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT), H5Gclose, "create /provenance");
    attribute(group, "source_revision", sourceRevision());
    attribute(group, "source_commit", sourceCommit());
    std::vector<std::string> roles, paths, hashes;
    for (const InputFile& i : plan.inputs) {
      roles.push_back(i.role);
      paths.push_back(i.path);
      hashes.push_back(i.sha256);
      if (i.role == "case") attribute(group, "case_sha256", i.sha256);
    }
    attribute(group, "input_roles", roles);
    attribute(group, "input_paths", paths);
    attribute(group, "input_sha256", hashes);
    H5 warnings = texts(group, "warnings", info.warnings);
    attribute(warnings, "long_name", std::string("distinct warnings of the runs of this session"));
    check(H5DSset_scale(warnings, "warnings"), "make /provenance/warnings a dimension scale");
  }
  {
    H5 group(H5Gcreate2(file, "parameters", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT), H5Gclose, "create /parameters");
    for (std::size_t a = 0; a < plan.axes.size(); ++a) {
      const SweepAxis& axis = plan.axes[a];
      std::vector<double> numbers(n);
      std::vector<std::string> words(n);
      bool numeric = !axis.units.empty();
      for (std::size_t r = 0; r < n; ++r) {
        std::size_t v = plan.valueIndices(r)[a];
        numbers[r] = axis.numbers[v];
        words[r] = axis.texts[v];
      }
      if (numeric) {
        H5 ds = dataset(group, axis.key, H5T_IEEE_F64LE, H5T_NATIVE_DOUBLE, numbers.data(), n);
        attribute(ds, "units", axis.units);
        attribute(ds, "spec", axis.spec);
        attribute(ds, "axis", static_cast<long>(a));
      } else {
        H5 ds = texts(group, axis.key, words);
        attribute(ds, "units", std::string(""));
        attribute(ds, "spec", axis.spec);
        attribute(ds, "axis", static_cast<long>(a));
      }
    }
    attachRunCoordinate(group, n);
  }
  {
    // The values of each axis as given, in a dataset: an attribute holds at most 64 kB (about 4 000 texts).
    H5 group(H5Gcreate2(file, "parameter_values", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT), H5Gclose,
             "create /parameter_values");
    for (const SweepAxis& axis : plan.axes) {
      H5 ds = texts(group, axis.key, axis.texts);
      attribute(ds, "units", axis.units);
    }
  }
  {
    H5 group(H5Gcreate2(file, "metrics", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT), H5Gclose, "create /metrics");
    const double missing = std::nan("");
    for (std::size_t c = 0; c < plan.columns.size(); ++c) {
      std::vector<double> v(n);
      for (std::size_t r = 0; r < n; ++r) v[r] = rows[r].status == RunStatus::Ok ? rows[r].metrics[c] : missing;
      doubles(group, plan.columns[c].name, v, plan.columns[c].units, plan.columns[c].definition);
    }
    attachRunCoordinate(group, n);
  }
  {
    H5 group(H5Gcreate2(file, "runs", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT), H5Gclose, "create /runs");
    std::vector<long> index(n), steps(n);
    std::vector<std::string> status(n), error(n), overrides(n), warnings(n);
    std::vector<double> load(n), build(n), solve(n), wall(n), balance(n);
    for (std::size_t r = 0; r < n; ++r) {
      const RunRow& row = rows[r];
      index[r] = static_cast<long>(r);
      status[r] = statusName(row.status);
      error[r] = row.error;
      overrides[r] = row.overrides;
      warnings[r] = joinedWarnings(row);
      load[r] = row.loadSeconds;
      build[r] = row.buildSeconds;
      solve[r] = row.solveSeconds;
      wall[r] = row.wallSeconds;
      steps[r] = row.steps;
      balance[r] = row.status == RunStatus::Ok ? row.energyBalanceError : std::nan("");
    }
    longs(group, "index", index, "1");
    texts(group, "status", status);
    texts(group, "error", error);
    texts(group, "overrides", overrides);
    texts(group, "warnings", warnings);
    doubles(group, "load_seconds", load, "s", "reading the case and applying the overrides (wall time)");
    doubles(group, "build_seconds", build, "s", "building the body and its thermal network (wall time)");
    doubles(group, "solve_seconds", solve, "s", "integration (or steady solve) with the metric observer (wall time)");
    doubles(group, "wall_seconds", wall, "s", "whole run (wall time)");
    longs(group, "steps", steps, "1");
    doubles(group, "energy_balance_error", balance, "J", "cumulative gains minus the change in stored heat");
    attachRunCoordinate(group, n);
  }
  closer.id = -1;
  check(H5Fclose(file), "finish " + path);
}

//! RFC 4180 quoting where needed.
std::string csvField(const std::string& s) {
  if (s.find_first_of(",\"\n\r") == std::string::npos) return s;
  std::string out = "\"";
  for (char ch : s) out += ch == '"' ? std::string("\"\"") : std::string(1, ch);
  return out + "\"";
}

void writeCsv(const SweepPlan& plan, std::span<const RunRow> rows, const std::string& path) {
  std::ofstream out(path, std::ios::binary);
  if (!out) throw OutputError("cannot write " + path);
  out << "run,status";
  for (const SweepAxis& a : plan.axes) out << "," << csvField(a.units.empty() ? a.key : a.key + " [" + a.units + "]");
  for (const MetricColumn& c : plan.columns) out << "," << csvField(c.name + " [" + c.units + "]");
  out << ",warnings,error\n";
  for (std::size_t r = 0; r < rows.size(); ++r) {
    const RunRow& row = rows[r];
    out << r << "," << statusName(row.status);
    std::vector<std::size_t> v = plan.valueIndices(r);
    for (std::size_t a = 0; a < plan.axes.size(); ++a) {
      const SweepAxis& axis = plan.axes[a];
      out << "," << (axis.units.empty() ? csvField(axis.texts[v[a]]) : number(axis.numbers[v[a]]));
    }
    for (std::size_t c = 0; c < plan.columns.size(); ++c)
      out << "," << (row.status == RunStatus::Ok ? number(row.metrics[c]) : std::string());
    out << "," << csvField(joinedWarnings(row)) << "," << csvField(row.error) << "\n";
  }
  out.close();
  if (!out) {
    const std::string reason = writeFailureReason();
    throw OutputError("cannot write " + path + (reason.empty() ? "" : ": " + reason));
  }
}

}  // namespace

std::string sweepProgressPath(const std::string& output) { return replaceExtension(output, ".progress"); }
std::string sweepCsvPath(const std::string& output) { return replaceExtension(output, ".csv"); }

namespace {

//! A file descriptor closed on scope exit unless released.
struct Descriptor {
  int fd = -1;
  ~Descriptor() {
    if (fd >= 0) ::close(fd);
  }
};

//! Open `path` (created when missing) and lock it for this process alone. The lock is on the file at `path` now:
//! when another process renamed a new file over it meanwhile, the new one is locked instead. Throws CaseError
//! when another sweep holds the lock.
int openLocked(const std::string& path) {
  for (int attempt = 0; attempt < 5; ++attempt) {
    Descriptor d{::open(path.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0644)};
    if (d.fd < 0)
      throw CaseError(fmt::format("cannot open the progress file {}: {}", path, std::strerror(errno)));
    if (::flock(d.fd, LOCK_EX | LOCK_NB) != 0) {
      if (errno == EWOULDBLOCK)
        throw CaseError(fmt::format("{} is locked by another sweep writing the same output; wait for it to finish "
                                    "(then --resume if it was interrupted), or give another -o",
                                    path));
      throw CaseError(fmt::format("cannot lock the progress file {}: {}", path, std::strerror(errno)));
    }
    struct stat open {}, named {};
    if (::fstat(d.fd, &open) == 0 && ::stat(path.c_str(), &named) == 0 && open.st_dev == named.st_dev &&
        open.st_ino == named.st_ino) {
      const int fd = d.fd;
      d.fd = -1;
      return fd;
    }
  }
  throw CaseError(fmt::format("cannot lock the progress file {}: it keeps being replaced by another process", path));
}

std::string readAll(int fd) {
  std::string text;
  char buffer[65536];
  for (ssize_t n; (n = ::read(fd, buffer, sizeof buffer)) != 0;) {
    if (n < 0) {
      if (errno == EINTR) continue;
      throw CaseError(fmt::format("cannot read the progress file: {}", std::strerror(errno)));
    }
    text.append(buffer, static_cast<std::size_t>(n));
  }
  return text;
}

}  // namespace

SweepJournal::SweepJournal(std::string path, const SweepPlan& plan, bool resume)
    : path_(std::move(path)), columns_(plan.columns.size()) {
  // One sweep per progress file: an exclusive lock, held until this journal goes away (two identical sweeps
  // started together would otherwise both run and write the same table).
  Descriptor locked{openLocked(path_)};
  const std::string text = readAll(locked.fd);
  const bool exists = !text.empty();  // an empty file: just created here, or by a sweep that never wrote to it
  if (exists && !resume)
    throw CaseError(fmt::format("{} holds the finished runs of an interrupted sweep: continue it with --resume, or "
                                "delete it to start again",
                                path_));
  if (exists) {
    std::size_t end = text.find('\n');
    std::string first = text.substr(0, end);
    if (first != header(plan))
      throw CaseError(fmt::format("{} was written by a different sweep (the case file, --set, --vary, --scale, "
                                  "--window, --steady or --metric differ): rerun with the same arguments, or delete it",
                                  path_));
    std::map<std::size_t, RunRow> byIndex;
    while (end != std::string::npos) {
      std::size_t next = text.find('\n', end + 1);
      if (next == std::string::npos) break;  // a line without its newline was cut short by a kill
      RunRow row;
      if (parseRow(text.substr(end + 1, next - end - 1), columns_, plan.runs, row)) byIndex[row.index] = row;
      end = next;
    }
    for (auto& [index, row] : byIndex) earlier_.push_back(std::move(row));
  }
  // (Re)write the file with the header and the valid rows only (a new file, locked before it replaces the old
  // one), then append to it.
  TemporaryFile temporary(path_);
  std::FILE* out = std::fopen(temporary.path().c_str(), "wbe");
  if (!out) throw CaseError(fmt::format("cannot write the progress file {}: {}", path_, std::strerror(errno)));
  std::string content = header(plan) + "\n";
  for (const RunRow& row : earlier_) content += formatRow(row);
  if (std::fwrite(content.data(), 1, content.size(), out) != content.size() || std::fflush(out) != 0 ||
      ::flock(fileno(out), LOCK_EX | LOCK_NB) != 0) {
    const std::string reason = std::strerror(errno);
    std::fclose(out);
    throw OutputError(fmt::format("cannot write the progress file {}: {}", path_, reason));
  }
  try {
    temporary.commit(path_);
  } catch (...) {
    std::fclose(out);
    throw;
  }
  file_ = out;  // holds the lock now; the old file's lock goes with `locked`
}

SweepJournal::~SweepJournal() {
  if (file_) std::fclose(file_);
}

void SweepJournal::append(const RunRow& row) {
  const std::string line = formatRow(row);
  // One write per line, flushed at once: a kill leaves whole lines and at most one cut-short last line.
  if (std::fwrite(line.data(), 1, line.size(), file_) != line.size() || std::fflush(file_) != 0)
    throw std::runtime_error(fmt::format("cannot write the progress file {}", path_));
}

void SweepJournal::remove() {
  std::filesystem::remove(path_);  // before the lock goes with the file
  if (file_) std::fclose(file_);
  file_ = nullptr;
}

void writeSweepTable(const SweepPlan& plan, std::span<const RunRow> rows, const SweepTableInfo& info,
                     const std::string& output) {
  const std::string csv = sweepCsvPath(output);
  TemporaryFile h5Temporary(output), csvTemporary(csv);  // removed on every path but the renames below
  try {
    writeHdf5(plan, rows, info, h5Temporary.path());
    writeCsv(plan, rows, csvTemporary.path());
  } catch (const std::exception& e) {
    throw OutputError(fmt::format("cannot write the sweep table {}: {}; {} is unchanged and the finished runs are in "
                                  "{} (the same command with --resume writes the table)",
                                  output, e.what(), output, sweepProgressPath(output)));
  }
  h5Temporary.commit(output);
  csvTemporary.commit(csv);
}

}  // namespace thermorph
