#pragma once
//! Progress of a transient run on stderr: shown once the run has taken a second, at most every 0.25 s.
#include <chrono>

namespace thermorph {

class ProgressReporter {
 public:
  //! `after`: wall seconds before the first line (the default 1: a short run shows none).
  ProgressReporter(double duration, bool quiet, double after = 1.0);
  ~ProgressReporter();  //!< ends the progress line when one was shown
  ProgressReporter(const ProgressReporter&) = delete;
  ProgressReporter& operator=(const ProgressReporter&) = delete;

  bool active() const { return !quiet_; }
  //! True when a report now could be shown (not quiet and the run has taken a second): intermediate times
  //! are worth interpolating for progress only then.
  bool due() const { return !quiet_ && std::chrono::duration<double>(Clock::now() - start_).count() >= after_; }
  //! Simulated time t [s] reached after `steps` solver steps.
  void report(double t, long steps);
  //! Ends the progress line (idempotent).
  void finish();

 private:
  using Clock = std::chrono::steady_clock;
  double duration_, after_;
  bool quiet_, reported_ = false;
  Clock::time_point start_, last_;
};

}  // namespace thermorph
