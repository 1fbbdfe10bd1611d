#pragma once
//! The thermal network: the one seam between models/ (which builds it) and solver/ (which integrates it).
//!
//! A node has a heat capacity and a temperature (a state). Heat flows into node i [W]:
//!   conductance  G (T_j - T_i)                       between two nodes
//!   advection    F (T_from - T_to) into `to`           blood carrying heat downstream, F = mdot c [W/K]
//!   exchange     G (T_b - T_i)                        to a prescribed boundary temperature T_b
//!   source       P_ref Q10^((T_i - T_ref)/10)        volumetric heat (metabolism)
//!   surface      q(T_s, t), through a half-cell conductance to the face temperature T_s
//! Every term except conductances names a budget channel; every node a group (a body segment).
//! A group may stand for several identical copies (groupWeights): advection flows are per copy of the
//! receiving node; a conductance between groups of different weight carries its flow once per copy of the
//! more numerous group. Stored heat and budgets are weighted, so energy is conserved exactly.
#include <cstddef>
#include <span>
#include <string>
#include <vector>

namespace thermorph {

using Index = std::size_t;

struct NetworkNode {
  double capacity = 0.0;  //!< heat capacity [J/K]
  Index group = 0;        //!< owning group (segment)
  std::string label;      //!< human-readable position, e.g. "arm: axial 3, radial 7 (skin)"
};

//! Conduction between two nodes [W/K].
struct Conductance {
  Index a = 0, b = 0;
  double conductance = 0.0;
  Index channel = 0;  //!< budget channel when a and b belong to different groups
};

//! Heat carried by a fluid stream from `from` into `to`: F (T_from - T_to) [W/K].
struct Advection {
  Index from = 0, to = 0;
  double flowCapacity = 0.0;  //!< mass flow times specific heat [W/K]
  Index channel = 0;
};

//! Exchange with a prescribed boundary temperature: G (T_b - T_i).
struct BoundaryExchange {
  Index node = 0;
  double conductance = 0.0;  //!< [W/K]
  double temperature = 0.0;  //!< [K]
  Index channel = 0;
};

//! Temperature-dependent heat source P_ref Q10^((T - T_ref)/10) [W].
struct HeatSource {
  Index node = 0;
  double power = 0.0;                 //!< at the reference temperature [W]
  double q10 = 1.0;                   //!< [1]
  double referenceTemperature = 0.0;  //!< [K]
  Index channel = 0;
};

//! One exterior face: node -> (half-cell conductance) -> face at T_s -> environment.
struct SurfaceFace {
  Index node = 0;
  double halfConductance = 0.0;  //!< node-to-face conductance [W/K]
  double area = 0.0;             //!< face area [m2]
};

//! Heat exchange of exterior faces with the surroundings; implemented by models/.
class SurfaceModel {
 public:
  virtual ~SurfaceModel() = default;
  //! Heat flow into the body through face `face` at face temperature `faceTemperature` [K] and time t [s]:
  //! adds each channel's flow [W] to `channelHeat` and its derivative with respect to the face temperature
  //! [W/K] to `channelDerivative` (both of length: number of channels).
  virtual void faceHeat(Index face, double faceTemperature, double time, std::span<double> channelHeat,
                        std::span<double> channelDerivative) const = 0;
};

struct Network {
  std::vector<NetworkNode> nodes;
  std::vector<Conductance> conductances;
  std::vector<Advection> advections;
  std::vector<BoundaryExchange> exchanges;
  std::vector<HeatSource> sources;
  std::vector<SurfaceFace> faces;
  std::vector<std::string> groups;    //!< group names (segments)
  std::vector<double> groupWeights;   //!< multiplicity of each group in the budget (1 unless mirrored)
  std::vector<std::string> channels;  //!< budget channel names
  const SurfaceModel* surface = nullptr;

  Index addNode(double capacity, Index group, std::string label) {
    nodes.push_back({capacity, group, std::move(label)});
    return nodes.size() - 1;
  }
  Index channel(const std::string& name) {
    for (Index i = 0; i < channels.size(); ++i)
      if (channels[i] == name) return i;
    channels.push_back(name);
    return channels.size() - 1;
  }
};

}  // namespace thermorph
