// Links the installed solver library: loads a case from text, finds its steady state, checks a limit.
// A body with no heat source (no metabolism, no blood flow) settles at the temperature of its surroundings
// (common practice, no source: with no source term the steady heat equation's solution is uniform).
#include <cmath>
#include <cstdio>

#include "drivers/simulation.hpp"
#include "models/body.hpp"
#include "models/case.hpp"

int main() {
  const char* text = R"toml(title = "consumer"
[run]
duration = "1 h"
output_interval = "1 h"
[body]
activity = 0                     # no metabolic heat
[tissues.muscle]
perfusion = "0 mL/(100 g min)"
[[segments]]
name = "ball"
shape = "sphere"
layers = [{ tissue = "muscle", thickness = "3 cm", cells = 4 }]
surface = { convection = "10 W/(m2 K)" }
[environment]
temperature = "12 degC"
)toml";
  thermorph::Case c = thermorph::loadCaseFromString(text, "consumer.toml");
  thermorph::Body body(c);
  thermorph::RunOptions options;
  options.quiet = true;
  thermorph::RunSummary s = thermorph::runSteady(body, options);
  double worst = 0.0;
  for (double t : s.finalState) worst = std::max(worst, std::abs(t - 285.15));
  std::printf("consumer: steady state of a source-free body, max |T - T_air| = %.3g K\n", worst);
  return s.complete && worst < 1e-6 ? 0 : 1;
}
