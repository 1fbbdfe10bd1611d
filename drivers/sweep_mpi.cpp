//! MPI sweeps: rank 0 hands out run indices one at a time (dynamic load balancing: a rank asks for the next run
//! when it returns a result) and writes the same table as a local sweep; it also computes on one thread.
#ifdef THERMORPH_HAVE_MPI
// The C API only: Open MPI and MPICH otherwise pull in their deprecated C++ bindings (link errors).
#define OMPI_SKIP_MPICXX 1
#define MPICH_SKIP_MPICXX 1
#include <mpi.h>

#include <chrono>
#include <cstdint>
#include <mutex>
#include <optional>
#include <thread>
#include <deque>
#include <memory>

#include <fmt/format.h>

#include "drivers/sweep_engine.hpp"

namespace thermorph {
namespace {

enum Tag : int {
  tagResult = 1,  //!< worker -> 0: a packed row (empty: ready for the first run)
  tagWork = 2,    //!< 0 -> worker: the run index (uint64)
  tagStop = 3,    //!< 0 -> worker: no more runs
};

//! MPI_Init_thread (FUNNELED: only the main thread calls MPI) and MPI_Finalize.
class MpiRuntime {
 public:
  MpiRuntime() {
    int provided = 0;
    MPI_Init_thread(nullptr, nullptr, MPI_THREAD_FUNNELED, &provided);
    MPI_Comm_rank(MPI_COMM_WORLD, &rank);
    MPI_Comm_size(MPI_COMM_WORLD, &size);
  }
  ~MpiRuntime() { MPI_Finalize(); }
  MpiRuntime(const MpiRuntime&) = delete;
  MpiRuntime& operator=(const MpiRuntime&) = delete;
  int rank = 0, size = 1;
};

//! Every rank but 0: ask, run, return the row with the next request, until told to stop.
int worker(const SweepPlan& plan) {
  std::string message;  // empty: ready
  while (true) {
    MPI_Send(message.data(), static_cast<int>(message.size()), MPI_BYTE, 0, tagResult, MPI_COMM_WORLD);
    MPI_Status status;
    MPI_Probe(0, MPI_ANY_TAG, MPI_COMM_WORLD, &status);
    std::uint64_t index = 0;
    MPI_Recv(&index, status.MPI_TAG == tagWork ? 1 : 0, MPI_UINT64_T, 0, status.MPI_TAG, MPI_COMM_WORLD,
             MPI_STATUS_IGNORE);
    if (status.MPI_TAG != tagWork) return 0;
    message = packRow(runOne(plan, static_cast<std::size_t>(index), &sweepStopFlag()));
  }
}

//! Rank 0: the dispatcher in the main thread, one compute thread beside it, the session writing the table.
int master(const SweepPlan& plan, const SweepOptions& options, int ranks) {
  // The session opens the progress file; a refusal (an interrupted sweep without --resume) stops every rank.
  std::unique_ptr<SweepSession> owned;
  int refused = 0;
  try {
    owned = std::make_unique<SweepSession>(plan, options, fmt::format("MPI: {} ranks", ranks));
  } catch (const CaseError& e) {
    fmt::print(stderr, "error: {}\n", e.what());
    refused = 2;
  }
  MPI_Bcast(&refused, 1, MPI_INT, 0, MPI_COMM_WORLD);
  if (refused) return refused;
  SweepSession& session = *owned;
  const std::vector<std::size_t> todo = session.todo();
  std::atomic<bool>& stop = sweepStopFlag();
  std::mutex mutex;
  std::size_t next = 0;
  auto take = [&]() -> std::optional<std::size_t> {
    std::lock_guard lock(mutex);
    if (stop.load() || next >= todo.size()) return std::nullopt;
    return todo[next++];
  };
  std::deque<RunRow> local;
  bool computing = true;
  std::thread compute([&] {
    while (auto k = take()) {
      RunRow row = runOne(plan, *k, &stop);
      if (row.abandoned) break;
      std::lock_guard lock(mutex);
      local.push_back(std::move(row));
    }
    std::lock_guard lock(mutex);
    computing = false;
  });

  std::exception_ptr failure;
  auto add = [&](RunRow&& row) {
    try {
      session.add(std::move(row));
    } catch (...) {
      if (!failure) failure = std::current_exception();
      stop.store(true);
    }
  };
  int active = ranks - 1;
  std::string buffer;
  while (true) {
    bool busy = false;
    int flag = 0;
    MPI_Status status;
    MPI_Iprobe(MPI_ANY_SOURCE, tagResult, MPI_COMM_WORLD, &flag, &status);
    if (flag) {
      busy = true;
      int bytes = 0;
      MPI_Get_count(&status, MPI_BYTE, &bytes);
      buffer.resize(static_cast<std::size_t>(bytes));
      MPI_Recv(buffer.data(), bytes, MPI_BYTE, status.MPI_SOURCE, tagResult, MPI_COMM_WORLD, MPI_STATUS_IGNORE);
      if (bytes > 0) {
        RunRow row = unpackRow(buffer);
        if (row.abandoned) stop.store(true);  // that rank was signalled: stop the sweep
        else add(std::move(row));
      }
      if (auto k = take()) {
        std::uint64_t index = *k;
        MPI_Send(&index, 1, MPI_UINT64_T, status.MPI_SOURCE, tagWork, MPI_COMM_WORLD);
      } else {
        MPI_Send(nullptr, 0, MPI_UINT64_T, status.MPI_SOURCE, tagStop, MPI_COMM_WORLD);
        --active;
      }
    }
    std::deque<RunRow> batch;
    bool stillComputing = false;
    {
      std::lock_guard lock(mutex);
      batch.swap(local);
      stillComputing = computing;
    }
    for (RunRow& row : batch) add(std::move(row));
    if (!batch.empty()) busy = true;
    if (active == 0 && !stillComputing && batch.empty()) {
      std::lock_guard lock(mutex);
      if (local.empty()) break;
    }
    try {
      session.tick();
    } catch (...) {
    }
    // Poll often: a worker waits for its next run at most this long (0.1 ms against runs of ~10 ms).
    if (!busy) std::this_thread::sleep_for(std::chrono::microseconds(100));
  }
  compute.join();
  if (failure) std::rethrow_exception(failure);
  return session.finish();
}

}  // namespace

bool sweepHasMpi() { return true; }

int runSweepMpi(const SweepOptions& options) {
  MpiRuntime mpi;
  // Every rank reads the case and builds the same plan; all agree on input errors before any work.
  SweepPlan plan;
  std::string error;
  int code = 0;
  try {
    plan = makeSweepPlan(options);
  } catch (const CaseError& e) {
    error = e.what();
    code = 2;
  } catch (const std::exception& e) {
    error = e.what();
    code = 3;
  }
  int worst = 0, rootCode = code;
  MPI_Allreduce(&code, &worst, 1, MPI_INT, MPI_MAX, MPI_COMM_WORLD);
  MPI_Bcast(&rootCode, 1, MPI_INT, 0, MPI_COMM_WORLD);
  if (worst != 0) {
    // Rank 0 reports; another rank only when its error is its own (e.g. the case file missing on its node).
    if (code != 0 && (mpi.rank == 0 || rootCode == 0))
      fmt::print(stderr, "error{}: {}\n", mpi.rank == 0 ? "" : fmt::format(" (rank {})", mpi.rank), error);
    return worst;
  }
  if (mpi.size == 1 || options.list) return mpi.rank == 0 ? runSweepLocally(plan, options) : 0;

  SweepSignalGuard guard;
  if (mpi.rank != 0) {
    int refused = 0;
    MPI_Bcast(&refused, 1, MPI_INT, 0, MPI_COMM_WORLD);
    return refused ? 0 : worker(plan);
  }
  try {
    return master(plan, options, mpi.size);
  } catch (const std::exception& e) {
    // Workers may be waiting for work: end the whole job.
    fmt::print(stderr, "error: {}\n", e.what());
    MPI_Abort(MPI_COMM_WORLD, 3);
    return 3;
  }
}

}  // namespace thermorph
#endif
