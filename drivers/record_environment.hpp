#pragma once
//! Surroundings and controls over the run: environment series, controller states, mean convection coefficient,
//! substrate contact fraction and fluid (in water or air) per segment, and the labelled events (for shading in
//! figures).
#include <cstddef>
#include <span>
#include <utility>
#include <vector>

#include "drivers/results.hpp"
#include "models/body.hpp"

namespace thermorph {

class EnvironmentRecorder {
 public:
  //! Creates /environment/*, /control/*, /segments/*/convection_coefficient, contact_fraction, in_water (tucked_fraction of tucked segments,
  //! wetted_fraction of segments whose wetting events change or that sweat) and
  //! writes /events.
  EnvironmentRecorder(ResultsFile& f, const Body& body);
  //! Appends time t; `controls` from the summary, `faceTemperatures` [K] from the budget.
  void write(ResultsFile& f, double t, std::span<const double> controls, std::span<const double> faceTemperatures);

 private:
  const Body& body_;
  std::vector<std::size_t> environment_, control_, convection_, contact_, inWater_;
  std::vector<std::pair<Index, std::size_t>> tucked_;  //!< (tucked segment, its /segments/NAME/tucked_fraction)
  std::vector<std::pair<Index, std::size_t>> wetted_;  //!< (segment wetted by events or sweating, its /segments/NAME/wetted_fraction)
  std::vector<double> values_;
};

}  // namespace thermorph
