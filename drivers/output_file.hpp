#pragma once
//! Output files in one place, for run, steady and sweep: the output path is checked before any work (its folder
//! exists and takes new files, it is not an input, it is a regular file or new, its name fits the file system),
//! and every file is written under a short hidden temporary name beside it and renamed into place on success.
//! The temporary file is removed on every other exit path: an exception, a stop by SIGINT/SIGTERM, and the
//! immediate stop of a second signal (drivers/stop_signal.hpp).
#include <cstdio>
#include <stdexcept>
#include <string>
#include <vector>

namespace thermorph {

class Body;
struct Case;

//! A results file cannot be written (disk full, file-size limit, I/O error): exit 3 like a solver failure.
class OutputError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

//! Check `output` and the files derived from it (`derived`: NAME.incomplete.h5, the sweep's CSV and progress
//! file) before any computing. `inputs` are the files the command reads (case, weather file); `option` names the
//! command-line option in messages. Throws CaseError (exit 2) naming the path and the reason.
void checkOutputPath(const std::string& output, const std::vector<std::string>& inputs,
                     const std::vector<std::string>& derived = {}, const std::string& option = "-o");

//! The paths of the files a case read (the case file, its weather file): outputs may not be these.
std::vector<std::string> inputPaths(const Case& c);

//! NAME.incomplete.EXT beside NAME.EXT: where a run that did not finish leaves its partial results.
std::string incompleteOutputPath(const std::string& output);

//! A temporary file beside `finalPath` with a short hidden name (.thermorph-PID-N.tmp, whatever the length of
//! the final name). The caller creates and writes it; it is removed when this object goes away unless committed,
//! and by the immediate stop of a second signal.
class TemporaryFile {
 public:
  explicit TemporaryFile(const std::string& finalPath);
  ~TemporaryFile();
  TemporaryFile(const TemporaryFile&) = delete;
  TemporaryFile& operator=(const TemporaryFile&) = delete;

  const std::string& path() const { return path_; }
  //! Rename to `target` (atomic on one file system); throws OutputError naming `target` and the reason.
  void commit(const std::string& target);
  //! Remove the file now.
  void discard();

 private:
  std::string path_;
  int slot_ = -1;
  bool done_ = false;
};

//! A warning when the results of a transient run of `body` would exceed about 1 GB before compression (many
//! outputs of a large body), with the projected size; empty otherwise.
std::string projectedOutputWarning(const Body& body);

//! Call first in main, before any HDF5 call: HDF5 then skips its clean-up at exit. A file whose close failed (disk
//! full) stays half-open inside HDF5 1.10, and that clean-up crashed on it (SIGSEGV after the error message);
//! every file thermorph writes is closed explicitly, so nothing is lost.
void skipHdf5CleanupAtExit();

//! " (No space left on device)"-style reason for the last failed write, from errno; empty when errno does not
//! name a write failure.
std::string writeFailureReason();

}  // namespace thermorph
