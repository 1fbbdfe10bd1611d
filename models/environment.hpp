#pragma once
//! Surface exchange of exterior faces with the surroundings: the SurfaceModel that models/ gives the solver.
#include <span>
#include <string>
#include <vector>

#include "models/case.hpp"
#include "solver/network.hpp"

namespace thermorph {

//! What the environment needs to know of one exterior face; Body describes every face it creates.
struct FaceDescription {
  Index segment = 0;            //!< segment (network group) index
  Shape shape = Shape::Cylinder;
  bool lateral = true;          //!< outer lateral face (false: an end face of a cylinder or cone)
  double area = 0.0;            //!< [m2]
  double characteristicLength = 0.0;  //!< outer diameter (sphere, cylinder, cone) or plate length [m]
  double volumeLength = 0.0;    //!< cube root of the segment's volume, coat included [m]
};

//! One named environment series for the results file (/environment/NAME).
struct EnvironmentSeries {
  std::string name;
  std::string units;
};

class EnvironmentModel : public SurfaceModel {
 public:
  //! Registers its budget channels in `network` (convection first).
  EnvironmentModel(const Case& c, Network& network);

  //! Describe the next exterior face; faces are added in network face-index order.
  void addFace(const FaceDescription& face);

  void faceHeat(Index face, double faceTemperature, double time, std::span<double> channelHeat,
                std::span<double> channelDerivative) const override;

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

 private:
  double convectionCoefficient(Index face, double faceTemperature, double time, double* derivative) const;

  const Case& case_;
  std::vector<FaceDescription> faces_;
  Index convectionChannel_ = 0;
  std::size_t interval_ = 0;
};

}  // namespace thermorph
