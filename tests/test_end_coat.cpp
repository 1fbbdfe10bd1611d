// A coated segment's coat covers its exposed end faces unless surface.end_coat = "off". On the ends the coat is
// a flat layer: the tissue disc loses heat through R = c / (k_c A) (plane wall, Incropera et al. eq. 3.6) in
// series with the film 1 / (h A). Check: with the tissue held isothermal at the blood temperature (very high
// conductivity and perfusion), covering the ends lowers the tissue ends' dry heat loss by exactly what the series
// resistance says, 2 A (T_b - T_a) [h - 1 / (c / k_c + 1 / h)]. The lateral coat's own annular ends sit under the
// same end coat (they lose less covered than bare).
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdio>
#include <numbers>
#include <string>

#include "test_support_body.hpp"

using namespace thermorph;

namespace {

const std::string caseText = testing::isothermalFurredCylinder();

//! Steady dry heat loss (convection; a fixed coefficient has no radiation) through the end faces of the tissue and
//! through those of the coat's annulus [W]: h A (T_face - T_air) per face.
struct EndLoss {
  double tissue = 0.0, coat = 0.0;
};

EndLoss endLoss(const std::vector<std::string>& overrides) {
  Body body(loadCaseFromString(caseText, "end-coat.toml", overrides));
  const Network& n = body.network();
  const std::vector<double> faces = testing::steadyGroupFlows(body).faces;
  const SegmentMesh& m = body.segments()[0];
  EndLoss loss;
  const std::size_t lateral = m.lateralFace[0];
  for (std::size_t f = 0; f < n.faces.size(); ++f) {
    if (f == lateral) continue;
    const double q = 10.0 * n.faces[f].area * (faces[f] - 273.15);
    bool tissue = false;
    for (int ir = 0; ir < 2; ++ir) tissue = tissue || n.faces[f].node == m.node(0, ir);
    (tissue ? loss.tissue : loss.coat) += q;
  }
  return loss;
}

}  // namespace

TEST_CASE("The coat covers the end faces as a flat layer in series, unless end_coat is off", "[environment][coat]") {
  const EndLoss covered = endLoss({});
  const EndLoss bare = endLoss({"segments.trunk.surface.end_coat=\"off\""});
  const double A = std::numbers::pi * 0.02 * 0.02, h = 10.0, c = 0.01, k = 0.04, dT = 37.0;  // fur k: Hammel 1955
  const double expected = 2.0 * A * dT * (h - 1.0 / (c / k + 1.0 / h));
  std::printf("[coat] tissue ends' dry loss, bare %.6g W, covered %.6g W: difference %.6g W, series resistance "
              "%.6g W (rel. error %.1e); coat annulus ends bare %.6g W, covered %.6g W\n",
              bare.tissue, covered.tissue, bare.tissue - covered.tissue, expected,
              std::abs((bare.tissue - covered.tissue) / expected - 1.0), bare.coat, covered.coat);
  CHECK(std::abs((bare.tissue - covered.tissue) / expected - 1.0) < 2e-3);
  CHECK(covered.coat > 0.0);
  CHECK(covered.coat < bare.coat);  // the end coat is in series with the annulus ends' half cells too
}
