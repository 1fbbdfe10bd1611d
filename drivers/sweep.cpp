//! Sweep runs: one run reduced to its metrics, local worker threads, the session that journals and writes the
//! table, signal handling and the `sweep` command.
#include "drivers/sweep.hpp"

#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <condition_variable>
#include <csignal>
#include <cstdlib>
#include <cstring>
#include <deque>
#include <filesystem>
#include <map>
#include <set>
#include <mutex>
#include <thread>
#include <unordered_map>

#include <fmt/format.h>

#include "drivers/output_file.hpp"
#include "drivers/stop_signal.hpp"
#include "drivers/sweep_engine.hpp"

namespace thermorph {
namespace {

using Clock = std::chrono::steady_clock;

double seconds(Clock::time_point a, Clock::time_point b) { return std::chrono::duration<double>(b - a).count(); }

//! Thrown by the run observer when the sweep is being stopped.
struct RunAbandoned {};

std::string join(const std::vector<std::string>& parts) { return fmt::format("{}", fmt::join(parts, "; ")); }

std::string clock(double s) {
  if (!(s >= 0.0) || s > 1e7) return "--:--";
  auto t = static_cast<long>(s + 0.5);
  return t >= 3600 ? fmt::format("{}:{:02}:{:02}", t / 3600, t / 60 % 60, t % 60) : fmt::format("{}:{:02}", t / 60, t % 60);
}

}  // namespace

std::string joinedWarnings(const RunRow& row) { return join(row.warnings); }

std::string warningPattern(std::string_view text) {
  // Numbers: a digit, then digits and points, then an optional exponent (1e-5, 2.3E+04).
  std::string out;
  out.reserve(text.size());
  for (std::size_t i = 0; i < text.size();) {
    auto digit = [&](std::size_t k) { return k < text.size() && text[k] >= '0' && text[k] <= '9'; };
    if (!digit(i)) {
      out += text[i++];
      continue;
    }
    while (digit(i) || (i < text.size() && text[i] == '.' && digit(i + 1))) ++i;
    if (i < text.size() && (text[i] == 'e' || text[i] == 'E')) {
      std::size_t k = i + 1;
      if (k < text.size() && (text[k] == '+' || text[k] == '-')) ++k;
      if (digit(k)) {
        i = k;
        while (digit(i)) ++i;
      }
    }
    if (!out.empty() && out.back() == '-') out.pop_back();  // a sign belongs to its number
    out += '#';
  }
  return out;
}

// The sweep's signals are those of every command (drivers/stop_signal.hpp).
std::atomic<bool>& sweepStopFlag() { return stopRequested(); }
int sweepStopSignal() { return stopSignalNumber(); }

struct SweepSignalGuard::Saved {
  StopSignalGuard guard;
};

SweepSignalGuard::SweepSignalGuard() : saved_(std::make_unique<Saved>()) {}
SweepSignalGuard::~SweepSignalGuard() = default;

RunRow runOne(const SweepPlan& plan, std::size_t run, const std::atomic<bool>* stop) {
  RunRow row;
  row.index = run;
  const auto start = Clock::now();
  auto loaded = start, built = start;
  try {
    std::vector<std::string> overrides = plan.keyOverrides(run);
    row.overrides = join(overrides);
    Case c;
    overrides = runOverrides(plan, run, &c);
    row.overrides = join(overrides);
    loaded = Clock::now();
    Body body(std::move(c));  // the run's case is the body's (Body::spec())
    built = Clock::now();
    row.warnings = body.warnings(plan.steady);
    MetricCollector collector(body, plan.window, plan.thresholds, plan.steady);
    RunOptions options;
    options.quiet = true;  // and no results file: options.output stays empty
    options.stop = stop;   // a stop request ends the run at its next step
    options.flowsAtOutputs = plan.steady;  // transient metrics come from temperatures and integrated energies
    options.observer = [&](double t, std::span<const double> temperatures, const RunSummary& summary) {
      if (stop && stop->load(std::memory_order_relaxed)) throw RunAbandoned{};
      collector.observe(t, temperatures, summary);
    };
    RunSummary summary = plan.steady ? runSteady(body, options) : runTransient(body, options);
    // Warnings of this run, per row: the body's (grids, blood flow, command-line values the timeline takes
    // over; a steady row leaves out those about the timeline after t = 0), the run's, and correlations used outside
    // their range.
    std::vector<std::string> warnings = body.warnings(plan.steady);
    for (const std::string& w : summary.warnings)
      if (std::find(warnings.begin(), warnings.end(), w) == warnings.end()) warnings.push_back(w);
    for (const std::string& w : body.environment().warnings())
      if (std::find(warnings.begin(), warnings.end(), w) == warnings.end()) warnings.push_back(w);
    for (const std::string& w : collector.windowWarnings()) warnings.push_back(w);
    row.warnings = std::move(warnings);
    row.steps = plan.steady ? summary.statistics.nonlinearIterations : summary.statistics.steps;
    row.energyBalanceError = summary.energyBalanceError;
    if (summary.stopped) throw RunAbandoned{};
    if (!summary.complete) {
      row.status = RunStatus::Failed;
      row.error = summary.failure;
    } else {
      // Columns by name: a run whose body differs from the base (another segment set) still lands right.
      const std::vector<double> values = collector.values();
      const std::vector<MetricColumn> names = metricColumns(body, plan.thresholds, plan.steady);
      std::unordered_map<std::string_view, std::size_t> where;
      for (std::size_t i = 0; i < names.size(); ++i) where.emplace(names[i].name, i);
      row.metrics.assign(plan.columns.size(), std::nan(""));
      for (std::size_t k = 0; k < plan.columns.size(); ++k)
        if (auto it = where.find(plan.columns[k].name); it != where.end()) row.metrics[k] = values[it->second];
      row.status = RunStatus::Ok;
    }
  } catch (const RunAbandoned&) {
    row.abandoned = true;
  } catch (const CaseError& e) {
    row.status = RunStatus::Failed;
    row.error = e.what();
  } catch (const SolverError& e) {
    row.status = RunStatus::Failed;
    row.error = e.what();
  } catch (const std::exception& e) {
    row.status = RunStatus::Failed;
    row.error = fmt::format("internal error: {}", e.what());
  }
  const auto end = Clock::now();
  if (loaded == start) loaded = end;
  if (built == start) built = end;
  row.loadSeconds = seconds(start, loaded);
  row.buildSeconds = seconds(loaded, built);
  row.solveSeconds = seconds(built, end);
  row.wallSeconds = seconds(start, end);
  if (row.status != RunStatus::Ok) row.metrics.assign(plan.columns.size(), std::nan(""));
  return row;
}

void runLocal(const SweepPlan& plan, std::span<const std::size_t> todo, int jobs, std::atomic<bool>& stop,
              const std::function<void(RunRow&&)>& sink, const std::function<void()>& tick) {
  const std::size_t workers = std::clamp<std::size_t>(static_cast<std::size_t>(std::max(jobs, 1)), 1,
                                                      std::max<std::size_t>(todo.size(), 1));
  std::atomic<std::size_t> next{0};
  std::mutex mutex;
  std::condition_variable ready;
  std::deque<RunRow> finished;
  std::size_t running = workers;
  std::vector<std::thread> threads;
  for (std::size_t w = 0; w < workers; ++w)
    threads.emplace_back([&] {
      while (!stop.load()) {
        const std::size_t k = next.fetch_add(1);
        if (k >= todo.size()) break;
        RunRow row = runOne(plan, todo[k], &stop);
        if (row.abandoned) break;
        std::lock_guard lock(mutex);
        finished.push_back(std::move(row));
        ready.notify_one();
      }
      std::lock_guard lock(mutex);
      --running;
      ready.notify_one();
    });
  std::exception_ptr failure;
  while (true) {
    std::deque<RunRow> batch;
    bool last = false;
    {
      std::unique_lock lock(mutex);
      ready.wait_for(lock, std::chrono::milliseconds(100), [&] { return !finished.empty() || running == 0; });
      batch.swap(finished);
      last = running == 0;
    }
    try {
      for (RunRow& row : batch) sink(std::move(row));
      tick();
    } catch (...) {
      // The journal cannot be written: stop the workers, then report.
      if (!failure) failure = std::current_exception();
      stop.store(true);
    }
    if (last) {
      std::lock_guard lock(mutex);
      if (finished.empty()) break;
    }
  }
  for (std::thread& t : threads) t.join();
  if (failure) std::rethrow_exception(failure);
}

// ---- the session on the writing rank ----------------------------------------------------------------

namespace {
std::string outputPath(const SweepOptions& options) {
  if (!options.output.empty()) return options.output;
  return std::filesystem::path(options.casePath).stem().string() + "_sweep.h5";
}
}  // namespace

SweepSession::SweepSession(const SweepPlan& plan, const SweepOptions& options, std::string engine)
    : plan_(plan),
      options_(options),
      engine_(std::move(engine)),
      output_(outputPath(options)),
      journal_([&] {
        // Checked before any run (drivers/output_file.hpp): the table, its CSV and the progress file.
        std::vector<std::string> inputs;
        for (const InputFile& f : plan.inputs) inputs.push_back(f.path);
        checkOutputPath(output_, inputs, {sweepCsvPath(output_), sweepProgressPath(output_)});
        return sweepProgressPath(output_);
      }(),
               plan, options.resume) {
  rows_.resize(plan.runs);
  for (std::size_t r = 0; r < plan.runs; ++r) rows_[r].index = r;
  for (RunRow& row : journal_.earlierRows()) {
    const std::size_t i = row.index;
    rows_[i] = std::move(row);
    ++before_;
  }
  journal_.earlierRows().clear();
  total_ = plan.runs;
  start_ = lastDraw_ = Clock::now();
  tty_ = isatty(STDERR_FILENO) != 0;
  if (options.resume && !options.quiet)
    fmt::print(options_.log, "sweep: resuming {}: {} of {} runs done earlier\n", journal_.path(), before_, total_);
}

std::vector<std::size_t> SweepSession::todo() const {
  std::vector<std::size_t> out;
  for (std::size_t r = 0; r < rows_.size(); ++r)
    if (rows_[r].status == RunStatus::NotRun) out.push_back(r);
  return out;
}

void SweepSession::add(RunRow&& row) {
  if (row.abandoned || row.index >= rows_.size() || rows_[row.index].status != RunStatus::NotRun) return;
  journal_.append(row);
  if (row.status == RunStatus::Failed) ++failedNow_;
  warnings_.insert(row.warnings.begin(), row.warnings.end());
  ++now_;
  rows_[row.index] = std::move(row);
}

void SweepSession::tick(bool force) {
  if (options_.quiet) return;
  const auto now = Clock::now();
  const double sinceDraw = seconds(lastDraw_, now);
  if (!force && sinceDraw < (tty_ ? 0.2 : 10.0)) return;
  lastDraw_ = now;
  const double elapsed = seconds(start_, now);
  const std::size_t done = before_ + now_;
  const double rate = elapsed > 0.0 ? static_cast<double>(now_) / elapsed : 0.0;
  const double left = rate > 0.0 ? static_cast<double>(total_ - done) / rate : -1.0;
  const int width = 28;
  const int filled = total_ ? static_cast<int>(width * done / total_) : width;
  const std::string bar = std::string(static_cast<std::size_t>(filled), '#') + std::string(static_cast<std::size_t>(width - filled), '.');
  const std::string failed = failedNow_ ? fmt::format(", {} failed", failedNow_) : std::string();
  fmt::print(options_.log, "{}  [{}] {}/{} runs{}  {:.3g} runs/s  {} left   {}", tty_ ? "\r" : "", bar, done, total_, failed,
             rate, clock(left), tty_ ? "" : "\n");
  drawn_ = true;
}

int SweepSession::finish() {
  const double wall = seconds(start_, Clock::now());
  if (drawn_ || (!options_.quiet && tty_)) {
    tick(true);
    if (tty_) fmt::print(options_.log, "\n");
  }
  std::size_t ok = 0, failed = 0;
  for (const RunRow& r : rows_) {
    if (r.status == RunStatus::Ok) ++ok;
    else if (r.status == RunStatus::Failed) ++failed;
  }
  const std::size_t missing = total_ - ok - failed;
  const int signal = sweepStopSignal();
  SweepTableInfo info;
  info.commandLine = options_.commandLine;
  info.runsBefore = before_;
  info.runsNow = now_;
  info.engine = engine_;
  info.wallSeconds = wall;
  info.interrupted = signal != 0;
  info.warnings.assign(warnings_.begin(), warnings_.end());
  writeSweepTable(plan_, rows_, info, output_);
  if (missing == 0) journal_.remove();
  // The runs' warnings on stderr, one line per kind: a warning of several runs that differs only in numbers (a
  // controller's output, an estimated error) is one line with the number of runs that have it and the first such
  // run's text; every row keeps its own. Kinds are single warnings, not a run's set of them (a run that warns of
  // freezing and of a controller's grid error counts in both lines).
  struct Kind {
    std::size_t runs = 0, first = 0;
    std::string text;
    bool numbersDiffer = false;
  };
  std::map<std::string, Kind> kinds;
  std::vector<std::string> order;
  for (const RunRow& r : rows_) {
    std::set<std::string> seen;  // a kind counts once per run
    for (const std::string& w : r.warnings) {
      std::string pattern = warningPattern(w);
      if (!seen.insert(pattern).second) continue;
      auto [it, added] = kinds.try_emplace(std::move(pattern), Kind{0, r.index, w, false});
      if (added) order.push_back(it->first);
      Kind& k = it->second;
      ++k.runs;
      k.numbersDiffer = k.numbersDiffer || w != k.text;
    }
  }
  for (const std::string& pattern : order) {
    const Kind& k = kinds.at(pattern);
    fmt::print(options_.log, "warning ({} of {} runs{}): {}\n", k.runs, total_,
               k.numbersDiffer ? fmt::format("; numbers differ, see the warnings column; run {}", k.first) : "",
               k.text);
  }
  fmt::print(options_.report, "sweep: {} runs ({}): {} ok, {} failed, {} not run; {} done earlier, {} run now in {:.3g} s ({:.3g} runs/s, "
             "{})\n",
             total_, plan_.zip ? std::string("zip") : fmt::format("{}", fmt::join(plan_.shape, " x ")), ok, failed,
             missing, before_, now_, wall, wall > 0 ? static_cast<double>(now_) / wall : 0.0, engine_);
  for (std::size_t r = 0, shown = 0; r < rows_.size() && shown < 5; ++r)
    if (rows_[r].status == RunStatus::Failed) {
      fmt::print(options_.report, "  run {} failed: {}\n", r, rows_[r].error);
      if (++shown == 5 && failed > 5) fmt::print(options_.report, "  ... ({} failed runs in all; see /runs/error)\n", failed);
    }
  fmt::print(options_.report, "Results: {} and {}\n", output_, sweepCsvPath(output_));
  if (signal != 0) {
    fmt::print(options_.log, "sweep stopped by {}: {} runs not run; continue with the same command and --resume\n",
               stopSignalName(), missing);
    return stopExitCode();
  }
  return 0;
}

// ---- rows as messages ---------------------------------------------------------------------------------

namespace {
template <class T>
void put(std::string& out, const T& value) {
  out.append(reinterpret_cast<const char*>(&value), sizeof value);
}
void putText(std::string& out, const std::string& s) {
  put(out, static_cast<std::uint64_t>(s.size()));
  out += s;
}
template <class T>
T get(std::string_view& in) {
  if (in.size() < sizeof(T)) throw std::runtime_error("sweep: a truncated message");
  T value;
  std::memcpy(&value, in.data(), sizeof value);
  in.remove_prefix(sizeof value);
  return value;
}
std::string getText(std::string_view& in) {
  auto n = get<std::uint64_t>(in);
  if (in.size() < n) throw std::runtime_error("sweep: a truncated message");
  std::string s(in.substr(0, n));
  in.remove_prefix(n);
  return s;
}
}  // namespace

std::string packRow(const RunRow& row) {
  std::string out;
  put(out, static_cast<std::uint64_t>(row.index));
  put(out, static_cast<std::int32_t>(row.status));
  put(out, static_cast<std::int32_t>(row.abandoned));
  put(out, row.loadSeconds);
  put(out, row.buildSeconds);
  put(out, row.solveSeconds);
  put(out, row.wallSeconds);
  put(out, static_cast<std::int64_t>(row.steps));
  put(out, row.energyBalanceError);
  put(out, static_cast<std::uint64_t>(row.metrics.size()));
  for (double v : row.metrics) put(out, v);
  putText(out, row.error);
  putText(out, row.overrides);
  put(out, static_cast<std::uint64_t>(row.warnings.size()));
  for (const std::string& w : row.warnings) putText(out, w);
  return out;
}

RunRow unpackRow(std::string_view in) {
  RunRow row;
  row.index = static_cast<std::size_t>(get<std::uint64_t>(in));
  row.status = static_cast<RunStatus>(get<std::int32_t>(in));
  row.abandoned = get<std::int32_t>(in) != 0;
  row.loadSeconds = get<double>(in);
  row.buildSeconds = get<double>(in);
  row.solveSeconds = get<double>(in);
  row.wallSeconds = get<double>(in);
  row.steps = static_cast<long>(get<std::int64_t>(in));
  row.energyBalanceError = get<double>(in);
  row.metrics.resize(static_cast<std::size_t>(get<std::uint64_t>(in)));
  for (double& v : row.metrics) v = get<double>(in);
  row.error = getText(in);
  row.overrides = getText(in);
  row.warnings.resize(static_cast<std::size_t>(get<std::uint64_t>(in)));
  for (std::string& w : row.warnings) w = getText(in);
  return row;
}

int launcherWorldSize() {
  for (const char* name : {"OMPI_COMM_WORLD_SIZE", "PMI_SIZE", "MV2_COMM_WORLD_SIZE"})
    if (const char* value = std::getenv(name)) return std::max(1, std::atoi(value));
  return 1;
}

bool launchedUnderMpi() {
  for (const char* name : {"OMPI_COMM_WORLD_SIZE", "PMIX_RANK", "PMI_RANK", "PMI_SIZE", "MV2_COMM_WORLD_SIZE"})
    if (std::getenv(name)) return true;
  return false;
}

// ---- the command ------------------------------------------------------------------------------------

namespace {

void listRuns(const SweepPlan& plan) {
  for (std::size_t r = 0; r < plan.runs; ++r) {
    std::string line = fmt::format("run {}:", r);
    try {
      for (const std::string& o : runOverrides(plan, r)) {
        auto eq = o.find('=');
        line += fmt::format(" --set {}=\"{}\"", o.substr(0, eq), o.substr(eq + 1));
      }
    } catch (const CaseError& e) {
      line += fmt::format(" (cannot load: {})", e.what());
    }
    fmt::print("{}\n", line);
  }
}

int runLocalSweep(const SweepPlan& plan, const SweepOptions& options) {
  int jobs = options.jobs > 0 ? options.jobs : static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
  SweepSession session(plan, options, fmt::format("threads: {}", jobs));
  const std::vector<std::size_t> todo = session.todo();
  SweepSignalGuard guard;
  runLocal(plan, todo, jobs, sweepStopFlag(), [&](RunRow&& row) { session.add(std::move(row)); },
           [&] { session.tick(); });
  return session.finish();
}

}  // namespace

int runSweepCommand(const SweepOptions& options) {
  // Every rank plans after MPI_Init. Without MPI support, a launcher with one process runs locally.
  if (launchedUnderMpi() && (sweepHasMpi() || launcherWorldSize() > 1)) return runSweepMpi(options);
  SweepPlan plan = makeSweepPlan(options);
  if (options.list) {
    listRuns(plan);
    return 0;
  }
  return runLocalSweep(plan, options);
}

int runSweepLocally(const SweepPlan& plan, const SweepOptions& options) {
  if (options.list) {
    listRuns(plan);
    return 0;
  }
  return runLocalSweep(plan, options);
}

}  // namespace thermorph
