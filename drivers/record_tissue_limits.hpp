#pragma once
//! Tissue outside the temperatures the model describes: a warning per segment whose tissue (coat and blood
//! excluded) fell below 0 degC (the model has no latent heat of freezing) or rose above 45 degC (the model has no
//! heat injury, keeps tissue properties constant and extrapolates its Q10 law of metabolism) during the run.
#include <span>
#include <string>
#include <vector>

#include "models/body.hpp"

namespace thermorph {

//! Tissue above this temperature [degC] is warned of (TissueLimitWatch). 45 degC: a choice (common practice, no
//! source), two kelvin above the 43 degC breakpoint of Sapareto & Dewey's (1984) thermal dose, above which the time
//! to a given heat injury halves with every kelvin (R = 0.5): at 45 degC a minute counts as four minutes at 43.
inline constexpr double kHotTissueCelsius = 45.0;

//! Watches the tissue nodes of every segment at each output time (and the steady state) and remembers, per
//! segment and per limit, the extreme temperature beyond it, when it occurred and when tissue first passed it.
class TissueLimitWatch {
 public:
  explicit TissueLimitWatch(const Body& body);
  //! Temperatures `y` [K] (at least the nodes) at time t [s].
  void observe(double t, std::span<const double> y);
  //! One warning per segment and limit passed, in segment order, freezing first: "segment NAME: tissue below
  //! 0 degC (freezing) ..." and "segment NAME: tissue above 45 degC (hyperthermia) ...".
  std::vector<std::string> warnings() const;

 private:
  struct Excursion {
    bool passed = false;
    double extreme = 0.0;      //!< lowest (cold) or highest (hot) temperature beyond the limit [K]
    double extremeTime = 0.0;  //!< [s]
    double firstTime = 0.0;    //!< [s]
    Index where = 0;           //!< node of the extreme (its label made only for the warning)
    //! Remembers temperature T of `node` at time t if it is beyond the limit (`beyond`) and more extreme.
    void see(bool beyond, bool moreExtreme, double T, double t, Index node);
  };
  struct Segment {
    const SegmentMesh* mesh = nullptr;  //!< its tissue nodes: node(iz, ir) for ir <= skinCell (coat excluded), read when observed
    std::string name;
    Excursion cold, hot;
  };
  std::vector<Segment> segments_;
  const Network& network_;
};

}  // namespace thermorph
