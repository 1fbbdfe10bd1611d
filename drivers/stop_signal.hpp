#pragma once
//! SIGINT and SIGTERM, handled the same way by run, steady and sweep: the first signal asks the command to stop
//! at its next step (a flag the run loop and the sweep workers poll); the command then writes what it has
//! (NAME.incomplete.h5, or the sweep table with `not run` rows) and exits 128 + signal (130, 143). A second
//! signal stops at once, after removing the temporary files registered here. SIGXFSZ (a file-size limit) is
//! ignored while a guard is alive, so a write past the limit fails with EFBIG like a full disk instead of killing
//! the process with its temporary file left behind.
#include <atomic>
#include <memory>

namespace thermorph {

//! Set by the first SIGINT/SIGTERM while a StopSignalGuard is alive.
std::atomic<bool>& stopRequested();
//! The signal that set stopRequested() (0: none).
int stopSignalNumber();
//! Exit code of a command stopped by stopSignalNumber(): 128 + signal.
int stopExitCode();
//! "SIGINT", "SIGTERM" (or "a signal").
const char* stopSignalName();

//! Installs the handlers (and clears the flag); the destructor restores the previous handlers.
class StopSignalGuard {
 public:
  StopSignalGuard();
  ~StopSignalGuard();
  StopSignalGuard(const StopSignalGuard&) = delete;
  StopSignalGuard& operator=(const StopSignalGuard&) = delete;

 private:
  struct Saved;
  std::unique_ptr<Saved> saved_;
};

//! Ignore SIGXFSZ for the whole process (call first in main): a write past a file-size limit then fails with EFBIG
//! and is reported like a full disk, wherever it happens.
void ignoreFileSizeSignal();

//! Temporary files removed by the immediate stop (second signal). Returns a slot for unregisterTemporary, or -1
//! when the table is full or the path too long (the file is then still removed on every ordinary exit path).
int registerTemporary(const char* path);
void unregisterTemporary(int slot);

}  // namespace thermorph
