#pragma once
//! Temperatures over the run: whole-body means (core, blood, mean skin) and, per segment, the mesh, the
//! temperature field, the surface temperature and the arterial/venous blood temperatures.
#include <cstddef>
#include <span>
#include <vector>

#include "drivers/results.hpp"
#include "models/body.hpp"

namespace thermorph {

//! Whole-body mean temperatures of a state [K]: core (volume mean of the innermost layer of the core segment),
//! blood (central pool, or the pinned arterial supply), mean skin (outermost tissue layer, weighted by exposed
//! area and copies). The recorder and the Python module (python/) both use it.
struct BodyTemperatures {
  double core = 0.0, blood = 0.0, skin = 0.0;
};
BodyTemperatures bodyTemperatures(const Body& body, std::span<const double> y);

class FieldRecorder {
 public:
  //! Creates /body/*_temperature and /segments/<name>/{radius, axial, layer, volume, temperature, ...}.
  FieldRecorder(ResultsFile& f, const Body& body);
  //! Appends state y (node temperatures [K] first) with the lateral face temperatures [K].
  void write(ResultsFile& f, std::span<const double> y, std::span<const double> faceTemperatures);

 private:
  struct Segment {
    std::size_t temperature = 0, surface = 0, arterial = 0, venous = 0;
  };
  void writeBodyTemperatures(ResultsFile& f, std::span<const double> y);

  const Body& body_;
  std::size_t core_ = 0, blood_ = 0, skin_ = 0;
  std::vector<Segment> segments_;
  std::vector<double> buffer_;
};

}  // namespace thermorph
