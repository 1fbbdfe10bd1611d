#pragma once
//! Internals shared by the local (threads) and MPI sweep engines: the session on the rank that writes the
//! table, signal handling, and rows packed for messages.
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
