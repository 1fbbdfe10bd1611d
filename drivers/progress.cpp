#include "drivers/progress.hpp"

#include <cstdio>

namespace thermorph {

ProgressReporter::ProgressReporter(double duration, bool quiet, double after)
    : duration_(duration), after_(after), quiet_(quiet), start_(Clock::now()), last_(start_) {}

ProgressReporter::~ProgressReporter() { finish(); }

void ProgressReporter::report(double t, long steps) {
  auto now = Clock::now();
  if (quiet_ || std::chrono::duration<double>(now - start_).count() < after_ ||
      std::chrono::duration<double>(now - last_).count() < 0.25)
    return;
  double wall = std::chrono::duration<double>(now - start_).count();
  std::fprintf(stderr, "\r  t = %.0f / %.0f s (%3.0f%%)  %ld steps  %.3g simulated s per wall s   ", t, duration_,
               100.0 * t / duration_, steps, t / wall);
  last_ = now;
  reported_ = true;
}

void ProgressReporter::finish() {
  if (reported_) std::fprintf(stderr, "\n");
  reported_ = false;
}

}  // namespace thermorph
