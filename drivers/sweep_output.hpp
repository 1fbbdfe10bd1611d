#pragma once
//! Sweep results on disk: the append-only progress file (resume) and the final table (HDF5 + CSV).
#include <cstdio>
#include <span>
#include <string>
#include <vector>

#include "drivers/sweep.hpp"

namespace thermorph {

//! OUT.progress beside OUT.h5.
std::string sweepProgressPath(const std::string& output);
//! OUT.csv beside OUT.h5.
std::string sweepCsvPath(const std::string& output);

//! Append-only progress file: a header with the plan's fingerprint, then one line per finished run (ok or
//! failed), flushed as each run completes. A line cut short by a kill is ignored on resume. The file is locked
//! (flock) while the journal lives: a second sweep on the same output is refused (CaseError).
class SweepJournal {
 public:
  //! Start a new progress file at `path`, or with `resume` read the rows of an earlier session (same
  //! fingerprint, else CaseError) and continue it. Without `resume` an existing file is an error (CaseError):
  //! it holds the work of an interrupted sweep.
  SweepJournal(std::string path, const SweepPlan& plan, bool resume);
  ~SweepJournal();
  SweepJournal(const SweepJournal&) = delete;
  SweepJournal& operator=(const SweepJournal&) = delete;

  //! Rows read from an earlier session.
  std::vector<RunRow>& earlierRows() { return earlier_; }
  //! Record one finished run and flush it to the file.
  void append(const RunRow& row);
  //! Close and delete the file (the table now holds every row).
  void remove();
  const std::string& path() const { return path_; }

 private:
  std::string path_;
  std::size_t columns_ = 0;
  std::FILE* file_ = nullptr;
  std::vector<RunRow> earlier_;
};

//! Facts about the session stored with the table.
struct SweepTableInfo {
  std::string commandLine;
  std::size_t runsBefore = 0;  //!< rows read from the progress file
  std::size_t runsNow = 0;     //!< rows computed in this session
  std::string engine;          //!< "threads: 2" or "MPI: 4 ranks"
  double wallSeconds = 0.0;    //!< of this session
  bool interrupted = false;
  std::vector<std::string> warnings;  //!< distinct warnings of the runs of this session
};

//! Write the table: `rows` holds one row per run of the plan, indexed by run (NotRun where missing). HDF5 and
//! CSV are written under temporary names and renamed, so a crash never leaves a half-written table.
void writeSweepTable(const SweepPlan& plan, std::span<const RunRow> rows, const SweepTableInfo& info,
                     const std::string& output);

}  // namespace thermorph
