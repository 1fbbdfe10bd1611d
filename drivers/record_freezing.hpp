#pragma once
//! Freezing tissue: a warning per segment whose tissue (coat and blood excluded) fell below 0 degC during the run.
//! The model has no latent heat of freezing, so temperatures below 0 degC are outside what it describes.
#include <span>
#include <string>
#include <vector>

#include "models/body.hpp"

namespace thermorph {

//! Watches the tissue nodes of every segment at each output time (and the steady state) and remembers, per
//! segment, the lowest temperature below 0 degC, when it occurred and when tissue first fell below 0 degC.
class FreezeWatch {
 public:
  explicit FreezeWatch(const Body& body);
  //! Temperatures `y` [K] (at least the nodes) at time t [s].
  void observe(double t, std::span<const double> y);
  //! One warning per segment that froze, in segment order: "segment NAME: tissue below 0 degC (freezing) ...".
  std::vector<std::string> warnings() const;

 private:
  struct Segment {
    const SegmentMesh* mesh = nullptr;  //!< its tissue nodes: node(iz, ir) for ir <= skinCell (coat excluded), read when observed
    std::string name;
    bool froze = false;
    double minimum = 0.0;      //!< [K]
    double minimumTime = 0.0;  //!< [s]
    double firstTime = 0.0;    //!< [s]
    std::string where;         //!< cell of the minimum
  };
  std::vector<Segment> segments_;
  const Network& network_;
};

}  // namespace thermorph
