#pragma once
//! Surface exchange of exterior faces with the surroundings: the SurfaceModel that models/ gives the solver.
//! Channels (W, positive into the body): convection, radiation (long-wave), solar, evaporation (cutaneous),
//! substrate (contact conduction). Environment values change along the [[events]] timeline.
#include <array>
#include <span>
#include <string>
#include <limits>
#include <vector>

#include "models/case.hpp"
#include "models/convection.hpp"
#include "models/media.hpp"
#include "network/network.hpp"

namespace thermorph {

//! How a face meets the substrate (`surface.contact_fraction` f_c > 0).
enum class FaceContact : unsigned char {
  Shared,     //!< f_c of the face touches the substrate at the face's own surface, the rest is exposed (bare segments)
  Column,     //!< the whole face touches the substrate: a coat's contact column from the outermost tissue cell
  Elsewhere,  //!< (1 - f_c) of the face is exposed; its contact share is a Column face of its own
  None,       //!< the whole face is exposed, none of it touches the substrate (end faces of coated segments)
};

//! What the environment needs to know of one exterior face; Body describes every face it creates.
struct FaceDescription {
  Index segment = 0;            //!< segment (network group) index
  Shape shape = Shape::Cylinder;
  bool lateral = true;          //!< outer lateral face (false: an end face of a cylinder or cone)
  double area = 0.0;            //!< [m2]
  double characteristicLength = 0.0;  //!< outer diameter (sphere, cylinder, cone) or plate length [m]
  double volumeLength = 0.0;    //!< cube root of the segment's volume, coat included [m] (0: computed here)
  FaceContact contact = FaceContact::Shared;
};

//! One named environment series for the results file (/environment/NAME).
struct EnvironmentSeries {
  std::string name;
  std::string units;
};

//! The fluid around one face at one time.
struct FaceFluid {
  Medium medium = Medium::Air;
  double temperature = 0.0;  //!< [K]
  double speed = 0.0;        //!< [m/s]
};

class EnvironmentModel : public SurfaceModel {
 public:
  //! Registers its budget channels in `network`: convection, radiation, solar, evaporation, substrate.
  EnvironmentModel(const Case& c, Network& network);

  //! Describe the next exterior face; faces are added in network face-index order.
  void addFace(const FaceDescription& face);
  //! The description of exterior face f.
  const FaceDescription& face(Index f) const { return faces_[f]; }

  //! Heat into the body through one face [W] per channel and its derivative with the face temperature [W/K]:
  //!   convection  h A_e (T_f - T_s), h from correlations at the film temperature or fixed;
  //!   radiation   eps sigma A_e [F_sky (T_sky^4 - T_s^4) + (1 - F_sky)(T_r^4 - T_s^4)] (air only);
  //!   solar       alpha S exposure A on lateral faces (air only; end faces are parallel to the beam);
  //!   evaporation -w h_m [rho_v,sat(T_s) - RH rho_v,sat(T_a)] L_v A_e (air only; Chilton-Colburn analogy; w the
  //!               wetted fraction at time t, wettedFraction);
  //!   substrate   h_sub f_c A (T_sub - T_s);
  //! with A_e = (1 - f_c - f_t - f_h) A the exposed area, f_c the contact fraction of the current interval
  //! (contactFraction; FaceContact::Shared), f_t the tucked fraction (tuckedFraction) and f_h the share its tucked
  //! guests cover (coveredByGuests; f_t and f_h on lateral faces only, 0 on end faces); the sun falls on
  //! (1 - f_t - f_h) A of a lateral face. A Column face, built for the largest contact of the run
  //! (maxContactFraction), has only the substrate term over f_c / f_max of its area, an Elsewhere face
  //! A_e = (1 - f_c - f_t - f_h) A and no substrate term, a None face A_e = A and no substrate term.
  void faceHeat(Index face, double faceTemperature, double time, std::span<double> channelHeat,
                std::span<double> channelDerivative) const override;
  //! A face of a segment that sweats ([control.sweating]): as faceHeat with the wetted fraction
  //! sweatingWettedFraction(segment, time, u), and d q_evaporation / d u into controlDerivative.
  void controlledFaceHeat(Index face, double faceTemperature, double time, double control,
                          std::span<double> channelHeat, std::span<double> channelDerivative,
                          std::span<double> controlDerivative) const override;
  //! Reports (budgets, mean coefficients at outputs) read the per-face coefficient cache but do not write it.
  void setReporting(bool reporting) const override { reporting_ = reporting; }
  //! convection, radiation, solar, evaporation and substrate: the only channels exchange() adds to.
  std::vector<Index> faceChannels() const override;

  //! Times in (0, duration) where the surroundings change discontinuously (steps, ramp ends, series rows) [s].
  std::vector<double> breakpoints() const;
  //! The integrator is in interval k: after breakpoints()[k-1], before breakpoints()[k].
  void setInterval(std::size_t interval);

  //! Series stored under /environment and their values at time t (same order).
  std::vector<EnvironmentSeries> series() const;
  void seriesValues(double time, std::span<double> values) const;

  //! Area-weighted mean convection coefficient of a segment's faces at time t for the given face
  //! temperatures (all faces of the network) [W/(m2 K)].
  double meanConvectionCoefficient(Index segment, double time, std::span<const double> faceTemperatures) const;

  //! Whether a segment with this immersion is in water while the medium is `medium` (inline: it is read in every
  //! face evaluation, DEVELOPERS.md "Per-run CPU in sweeps, sixteenth round").
  static bool inWater(Immersion immersion, SurroundingMedium medium) {
    return immersion == Immersion::Always || (immersion == Immersion::Body && medium != SurroundingMedium::Air);
  }
  //! Long-wave emissivity of a segment, its default resolved: a fixed convection coefficient (the segment's or the
  //! environment's) stands for the whole exchange unless an emissivity is given [1].
  static double segmentEmissivity(const SegmentSpec& s, const EnvironmentSpec& environment);

  //! True when the segment is in water at t = 0 (the medium of the first interval, an event at 0 included).
  //! The body chooses a coat's wet conductivity from this once; it does not follow later changes of medium.
  bool immersed(Index segment) const;
  //! True when the segment is in water at time t in the current interval (the medium steps only at
  //! breakpoints, so it is constant within an interval).
  bool immersed(Index segment, double time) const;
  //! Share of a segment's surface touching the substrate in the current interval: its surface.contact_fraction
  //! until the first [[events]] entry that changes it (events[].surface) [1].
  double contactFraction(Index segment) const { return contact_[segment]; }
  //! The largest contact fraction of a segment over the run (the body is built for it; intervals scale it) [1].
  double maxContactFraction(Index segment) const { return maxContact_[segment]; }
  //! Some [[events]] entry sets the segment's contact (it may change during the run).
  bool contactChanges(Index segment) const { return contactEvents_[segment] != 0; }
  //! Share of a segment's lateral surface tucked into its host (surface.tucked_into) in the current interval: its
  //! surface.tucked_fraction until the first [[events]] entry that changes it [1].
  double tuckedFraction(Index segment) const { return tucked_[segment]; }
  //! The largest tucked fraction of a segment over the run (0: never tucked, no coupling is built) [1].
  double maxTuckedFraction(Index segment) const { return maxTucked_[segment]; }
  //! Some [[events]] entry sets the segment's tucking.
  bool tuckChanges(Index segment) const { return tuckEvents_[segment] != 0; }
  //! Share of a segment's exposed surface that is wet at time t in the current interval: its surface.wetted_fraction
  //! until the first [[events]] entry that changes it, then linear in time over an event's ramp [1].
  double wettedFraction(Index segment, double time) const {
    return wetSlope_[segment] == 0.0 ? wetOffset_[segment] : wetOffset_[segment] + wetSlope_[segment] * time;
  }
  //! Some [[events]] entry sets the segment's wetted fraction (it may change during the run).
  bool wetChanges(Index segment) const { return wetEvents_[segment] != 0; }
  //! The segment sweats ([control.sweating] and its `segments`, models/case.hpp sweatingSegments).
  bool sweats(Index segment) const { return sweats_[segment] != 0; }
  //! The wetted fraction of a segment that sweats, with sweating's state u ([control.sweating]): its own wetted
  //! fraction w_0 = wettedFraction(segment, time) plus u, at most max (control.sweating.max); a skin wetted beyond
  //! max by its own keeps w_0, and u below 0 adds nothing: w_0 + clamp(u, 0, max(0, max - w_0)). `slope`: dw/du
  //! (1 inside, 0 where clamped; 1 at u = 0 exactly).
  double sweatingWettedFraction(Index segment, double time, double u, double* slope = nullptr) const;
  //! The largest share of a segment's surface covered, contact plus tucking, over the run's intervals (a coated
  //! segment's coat rings are built for the rest) [1]; the largest contact fraction when nothing is tucked.
  double maxCoveredFraction(Index segment) const { return maxCovered_[segment]; }
  //! Tucking on a host: `guest` (tucked into `host`) covers tuckedFraction(guest) times `ratio` of the host's lateral
  //! surface (ratio = A_guest n_guest / (n_host A_host), the lateral areas per copy less the children's footprints),
  //! spread over the host's lateral faces in proportion to their areas. Body sets it once built (Body::addTucking).
  void coverHost(Index guest, Index host, double ratio);
  //! Share of a segment's lateral surface that its tucked guests cover in the current interval (0 for a segment that
  //! is no host): sum over its guests of tuckedFraction(guest) times their ratio [1].
  double coveredByGuests(Index segment) const { return hostCovered_[segment]; }
  //! The medium around segments with immersion "body" in the current interval.
  SurroundingMedium medium() const { return medium_; }
  //! The fluid around a segment's faces at time t in the current interval.
  FaceFluid fluid(Index segment, double time) const;
  //! Long-wave emissivity used for a segment, defaults resolved [1].
  double emissivity(Index segment) const;
  //! Value of an environment variable at time t in the current interval [SI] (inline, as inWater).
  double value(EnvironmentVariable variable, double time) const {
    const auto i = static_cast<std::size_t>(variable);
    return offset_[i] + slope_[i] * time;
  }
  //! Correlations used outside their validity range, each reported once (collected while running).
  std::vector<std::string> warnings() const;
  //! Range checks of the faces whose last convection evaluation lay outside a correlation's range while range checks
  //! did not log (a ValidityLogScope(false): the steady start's trial states), again at that face temperature (within
  //! 0.1 K of the face's latest evaluated state: the cache's reach) and the fluid at `time`, now logging; the cache is
  //! not changed.
  void confirmRanges(double time) const;

 private:
  ConvectionInput convectionInput(Index face, double faceTemperature, const FaceFluid& fl) const;
  //! A segment's surface with every default resolved.
  struct SegmentSurface {
    Immersion immersion = Immersion::Body;
    bool fixedConvection = false;
    double convectionCoefficient = 0.0;  //!< when fixed [W/(m2 K)]
    double emissivity = 0.0;
    double volumeLength = 0.0;  //!< V^(1/3), coat included [m]
    double width = 0.0;         //!< plate width [m]
  };
  //! Convection coefficient [W/(m2 K)] of a face and its slope with the face temperature [W/(m2 K2)].
  double convectionCoefficient(Index face, double faceTemperature, double time, double* derivative) const;
  //! The same with the face's fluid at that time already known (faceHeat: fluid() once per face instead of twice).
  double convectionCoefficient(Index face, double faceTemperature, const FaceFluid& fl, double* derivative) const;
  void collectWarnings() const;

  const Case& case_;
  std::vector<FaceDescription> faces_;
  std::vector<SegmentSurface> surfaces_;
  std::vector<double> breakpoints_;
  Index convectionChannel_ = 0, radiationChannel_ = 0, solarChannel_ = 0, evaporationChannel_ = 0,
        substrateChannel_ = 0;
  std::size_t interval_ = 0;
  //! Medium of the current interval and of the first one (t = 0).
  SurroundingMedium medium_ = SurroundingMedium::Air, initialMedium_ = SurroundingMedium::Air;
  //! In the current interval every variable is linear in time: offset + slope t [SI, SI/s].
  std::array<double, kEnvironmentVariables> offset_{}, slope_{};
  //! Per segment: contact fraction of the current interval, its largest value over the run, set by some event.
  std::vector<double> contact_, maxContact_;
  std::vector<char> contactEvents_;
  //! Per segment: tucked fraction of the current interval, its largest over the run, set by some event; the largest
  //! contact plus tucked fraction of any interval.
  std::vector<double> tucked_, maxTucked_, maxCovered_;
  std::vector<char> tuckEvents_;
  //! Per segment: the share of its lateral surface its guests cover in the current interval; the tuckings on hosts.
  std::vector<double> hostCovered_;
  struct HostCover {
    Index guest = 0, host = 0;
    double ratio = 0.0;  //!< A_guest n_guest / (n_host A_host) [1]
  };
  std::vector<HostCover> hostCovers_;
  //! Per segment: the wetted fraction of the current interval, offset + slope t [1, 1/s]; set by some event.
  std::vector<double> wetOffset_, wetSlope_;
  std::vector<char> wetEvents_;
  std::vector<char> sweats_;  //!< per segment: it sweats ([control.sweating])
  //! faceHeat and controlledFaceHeat: `control` the state of sweating's controller (nullptr: the face's own w_0).
  void exchange(Index face, double faceTemperature, double time, const double* control, std::span<double> channelHeat,
                std::span<double> channelDerivative, std::span<double> controlDerivative) const;
  mutable std::vector<std::string> warnings_;
  //! Last correlation result per face and the fluid it was for: the face Newton solve ends with a call a few nK
  //! from its last iterate, and the next right-hand side starts from the same face temperature.
  //! `curvature` bounds |d2h/dT_s2| by the change of dh/dT_s between the last two evaluations for the same fluid
  //! (infinite when unknown): it sets how far from its face temperature the first-order expansion may be used.
  struct CachedCoefficient {
    double faceTemperature = -1.0, fluidTemperature = -1.0, speed = 0.0, h = 0.0, dh = 0.0;
    double curvature = std::numeric_limits<double>::infinity();
    Medium medium = Medium::Air;
    //! that evaluation's inputs were outside a correlation's or table's validity range while range checks did not
    //! log (ValidityLogScope(false)): confirmRanges checks them again
    bool unlogged = false;
  };
  mutable std::vector<CachedCoefficient> cache_;
  //! Per face: std::pow of its free-convection length, 3 (ConvectionInput::freeLengthCubed), 0 until first asked.
  mutable std::vector<double> freeLengthCubed_;
  mutable bool reporting_ = false;
};

}  // namespace thermorph
