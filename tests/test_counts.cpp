// Counts multiply down the segment tree: legs with count 2 carrying feet with count 2 make four feet.
// Check by geometry, not by the code's own product of counts: the same body written out segment by segment
// (two legs, each with two feet, every count 1) must have the same steady heat budget. The written-out body
// never multiplies anything, so the counted body's whole-body flows and its foot loss times four (the hand count
// of feet) must equal the written-out body's totals and the sum over its four feet. Common practice, no source:
// identical parallel copies carry identical flows (symmetry).
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdio>
#include <string>

#include "test_support_body.hpp"

using namespace thermorph;

namespace {

const std::string common = R"toml(
[environment]
temperature = "5 degC"
convection = "10 W/(m2 K)"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "20 cm"
axial_cells = 4
layers = [{ tissue = "viscera", thickness = "2 cm", cells = 2 }, { tissue = "muscle", thickness = "1 cm", cells = 1 }]
)toml";

std::string leg(const std::string& name, int count) {
  return "[[segments]]\nname = \"" + name + "\"\nparent = \"trunk\"\ncount = " + std::to_string(count) +
         "\nattach_position = 0.2\nshape = \"cylinder\"\nlength = \"10 cm\"\naxial_cells = 3\n"
         "layers = [{ tissue = \"muscle\", thickness = \"1 cm\", cells = 2 }]\n";
}

std::string foot(const std::string& name, const std::string& parent, int count) {
  return "[[segments]]\nname = \"" + name + "\"\nparent = \"" + parent + "\"\ncount = " + std::to_string(count) +
         "\nattach_position = 1.0\nshape = \"cylinder\"\nlength = \"4 cm\"\naxial_cells = 2\n"
         "layers = [{ tissue = \"muscle\", thickness = \"0.5 cm\", cells = 1 }]\n";
}

struct Budget {
  std::vector<double> flows;  //!< [groups x channels] per copy
  const Network* network = nullptr;
  std::unique_ptr<Body> body;
  double total(const std::string& channel) const {
    return testing::bodyChannelTotal(*network, flows, testing::channelIndex(*network, channel));
  }
  double group(const std::string& segment, const std::string& channel) const {
    Index g = testing::segmentIndex(*body, segment);
    return flows[g * network->channels.size() + testing::channelIndex(*network, channel)];
  }
};

Budget steadyBudget(const std::string& text) {
  Budget b;
  b.body = std::make_unique<Body>(loadCaseFromString(text, "counts.toml", {}));
  b.network = &b.body->network();
  const std::vector<double> t = testing::steadyTemperatures(*b.body);
  NetworkSystem system(*b.network, NetworkSystem::Mode::Steady);
  b.flows.resize(b.network->groups.size() * b.network->channels.size());
  std::vector<double> storage(b.network->groups.size()), faces(b.network->faces.size());
  system.groupFlows(0.0, t, b.flows, storage, faces);
  return b;
}

}  // namespace

TEST_CASE("Counts multiply down the tree: two legs with two feet each equal four feet written out", "[wholebody][count]") {
  const Budget counted = steadyBudget(common + leg("legs", 2) + foot("feet", "legs", 2));
  const Budget written = steadyBudget(common + leg("legA", 1) + leg("legB", 1) + foot("footA1", "legA", 1) +
                                      foot("footA2", "legA", 1) + foot("footB1", "legB", 1) + foot("footB2", "legB", 1));
  // The effective count of the feet (own 2 x the legs' 2).
  CHECK(counted.body->segments()[testing::segmentIndex(*counted.body, "feet")].weight == 4.0);
  CHECK(counted.body->segments()[testing::segmentIndex(*counted.body, "legs")].weight == 2.0);

  const double feetWritten = written.group("footA1", "convection") + written.group("footA2", "convection") +
                             written.group("footB1", "convection") + written.group("footB2", "convection");
  const double feetCounted = 4.0 * counted.group("feet", "convection");  // four feet, counted by hand
  std::printf("[count] convection of the four feet: counted %.10g W, written out %.10g W (rel. %.1e); whole body "
              "%.10g vs %.10g W; metabolism %.10g vs %.10g W; blood flow %.6g vs %.6g mL/min\n",
              feetCounted, feetWritten, std::abs(feetCounted / feetWritten - 1.0), counted.total("convection"),
              written.total("convection"), counted.total("metabolism"), written.total("metabolism"),
              counted.body->totalBloodFlow() * 6e7, written.body->totalBloodFlow() * 6e7);
  CHECK(feetCounted < 0.0);
  CHECK(std::abs(feetCounted / feetWritten - 1.0) < 1e-8);
  CHECK(std::abs(counted.total("convection") / written.total("convection") - 1.0) < 1e-8);
  CHECK(std::abs(counted.total("metabolism") / written.total("metabolism") - 1.0) < 1e-8);
  CHECK(std::abs(counted.body->totalBloodFlow() / written.body->totalBloodFlow() - 1.0) < 1e-12);
  CHECK(std::abs(counted.body->bodyMass() / written.body->bodyMass() - 1.0) < 1e-12);
  // And per leg: the counted legs' loss x 2 equals the two written-out legs.
  const double legsWritten = written.group("legA", "convection") + written.group("legB", "convection");
  CHECK(std::abs(2.0 * counted.group("legs", "convection") / legsWritten - 1.0) < 1e-8);
}
