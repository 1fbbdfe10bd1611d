#pragma once
//! A spare block for large temporaries that recur within a run: the budget's per-node rates at each output
//! (NetworkSystem::flowsByGroup), a band factorisation's border column (NewtonSolver::factor), a results chunk's
//! filter buffers (ResultsFile::writeChunks). A process that maps every block of 128 KiB or more on its own
//! (cli/main.cpp's M_MMAP_THRESHOLD, for the peak of a run at 10^5 nodes) faulted each of them in afresh at every
//! use: at 20 000 nodes 8 400 page faults in 61 outputs and 29 factorisations, 7 % of the process's CPU. A lease
//! takes this thread's spare block when it is large enough, else a new one; given back, the larger of the two is kept
//! as the spare. The uses never overlap in time, so the spare is one block of the largest of them (at 10^5 nodes the
//! rates' 0.8 MB, which the others fit in: the peak is unchanged), until releaseScratch().
#include <cstddef>
#include <memory>

namespace thermorph {

//! A block of at least `bytes` bytes, uninitialised, aligned as new[] (doubles), for as long as the lease lives.
class ScratchLease {
 public:
  explicit ScratchLease(std::size_t bytes);
  ~ScratchLease();
  ScratchLease(const ScratchLease&) = delete;
  ScratchLease& operator=(const ScratchLease&) = delete;
  template <class T>
  T* as() const {
    return reinterpret_cast<T*>(block_.get());
  }

 private:
  std::unique_ptr<std::byte[]> block_;
  std::size_t bytes_ = 0;  //!< the block's size (at least the bytes asked for)
};

//! Frees this thread's spare block (a run's end: the spare is not kept beside what the end of a run allocates).
void releaseScratch();

}  // namespace thermorph
