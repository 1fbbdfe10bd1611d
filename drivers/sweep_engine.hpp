#pragma once
//! Internals shared by the local (threads) and MPI sweep engines: the session on the rank that writes the
//! table, signal handling, and rows packed for messages.
//!
//! Shared state of a sweep — the complete list (anything not named here belongs to one run):
//!  - `SweepPlan` (drivers/sweep.hpp): built once per process (every MPI rank builds the same one from the same
//!    arguments), then read-only; workers read the case text, overrides and column names from it.
//!  - the stop flag and signal (`sweepStopFlag()`, `sweepStopSignal()`, drivers/sweep.cpp): lock-free atomics set
//!    by the SIGINT/SIGTERM handler; workers stop taking runs and running runs abandon at their next output.
//!  - the local queue (`runLocal`, drivers/sweep.cpp): an atomic index into `todo`; finished rows go to a deque
//!    under one mutex + condition variable; only the calling thread drains it into the session.
//!  - the MPI queue (drivers/sweep_mpi.cpp, rank 0): the dispatcher (main thread, the only MPI caller) and one
//!    compute thread share the next-run index and the session under one mutex.
//!  - `SweepSession` (below): rows by run index, the progress journal, warnings, the progress bar; touched only
//!    by the thread that drains results (local) or under the dispatcher's mutex (MPI).
//!  - process-wide, outside the sweep: the udunits2 lock (models/units.cpp) and the correlation-validity warning
//!    log (models/media.cpp, mutex; warnings are issued once per process, so rows keep only their body's own).
//! Each run builds its own Case, Body, network, SUNDIALS context and KLU objects (drivers/sweep.cpp `runOne`).
#include <atomic>
#include <chrono>
#include <memory>
#include <set>
#include <string>
#include <string_view>
#include <vector>

#include "drivers/sweep.hpp"
#include "drivers/sweep_output.hpp"

namespace thermorph {

//! Set by SIGINT/SIGTERM while a sweep runs; running runs are abandoned at their next output.
std::atomic<bool>& sweepStopFlag();
//! The signal that stopped the sweep (0: none).
int sweepStopSignal();

//! Installs the SIGINT/SIGTERM handlers for the sweep and restores the previous ones.
class SweepSignalGuard {
 public:
  SweepSignalGuard();
  ~SweepSignalGuard();
  SweepSignalGuard(const SweepSignalGuard&) = delete;
  SweepSignalGuard& operator=(const SweepSignalGuard&) = delete;

 private:
  struct Saved;
  std::unique_ptr<Saved> saved_;
};

//! The rank that owns the table: reads the progress file, journals rows as they arrive, draws the progress
//! bar, writes the HDF5 + CSV table at the end.
class SweepSession {
 public:
  SweepSession(const SweepPlan& plan, const SweepOptions& options, std::string engine);
  //! Runs without a row yet, in run order.
  std::vector<std::size_t> todo() const;
  //! A finished (ok or failed) row: journaled and flushed at once.
  void add(RunRow&& row);
  //! Redraw the progress bar when due.
  void tick(bool force = false);
  //! Write the table, print the summary; returns the exit code (128 + signal when stopped).
  int finish();

 private:
  const SweepPlan& plan_;
  const SweepOptions& options_;
  std::string engine_, output_;
  SweepJournal journal_;
  std::vector<RunRow> rows_;
  std::size_t before_ = 0, now_ = 0, failedNow_ = 0, total_ = 0;
  std::set<std::string> warnings_;
  std::chrono::steady_clock::time_point start_, lastDraw_;
  bool drawn_ = false, tty_ = false;
};

//! A run's warnings with every number replaced by '#' (a leading minus sign included): the runs of a sweep whose
//! warnings differ only in their numbers share one line of the summary printed on stderr.
std::string warningPattern(std::string_view text);

//! True when started by an MPI launcher (mpirun, mpiexec, srun with PMIx/PMI).
bool launchedUnderMpi();
//! Number of processes the launcher started, from its environment (1 when unknown).
int launcherWorldSize();

//! A row as bytes for a message, and back.
std::string packRow(const RunRow& row);
RunRow unpackRow(std::string_view bytes);

//! The MPI engine (drivers/sweep_mpi.cpp): every rank plans, rank 0 hands out run indices and writes the table.
int runSweepMpi(const SweepOptions& options);
//! The sweep on local threads (also a one-rank MPI world); --list prints the runs instead.
int runSweepLocally(const SweepPlan& plan, const SweepOptions& options);

}  // namespace thermorph
