#pragma once
//! The controller-output grid check (drivers/record_control_grid.hpp) at a case's steady state, shared by
//! test_control_grid.cpp and test_sweating_grid.cpp.
#include <catch2/catch.hpp>

#include <string>
#include <vector>

#include "drivers/record_control_grid.hpp"
#include "drivers/simulation.hpp"
#include "test_support.hpp"

namespace thermorph::testing {

struct SteadyWatch {
  RunSummary run;
  bool active = false;  //!< some controller drives a term (ControlGridWatch::active)
  std::vector<ControlGridWatch::Estimate> estimates;
};

//! The case text `toml` (named `source` in messages) solved steady, and the check's estimates observed at that state.
inline SteadyWatch steadyWatch(const std::string& toml, const std::string& source) {
  SteadyWatch r;
  Body body(loadCaseFromString(toml, source));
  r.run = runSteady(body, silentRun());
  REQUIRE(r.run.complete);
  NetworkSystem system(body.network(), NetworkSystem::Mode::Steady);
  ControlGridWatch watch(body, system);
  r.active = watch.active();
  if (!r.active) return r;
  std::vector<double> y = r.run.finalState;
  y.insert(y.end(), r.run.controls.begin(), r.run.controls.end());
  watch.observe(r.run.finalTime, y, r.run.flows);
  r.estimates = watch.estimates();
  return r;
}

}  // namespace thermorph::testing
