#pragma once
//! Assembles a thermal network into heat rates, dT/dt and a sparse CSC Jacobian through an index map built once.
#include <span>
#include <vector>

#include "solver/network.hpp"

namespace thermorph {

//! Compressed sparse column pattern with the value slot of every network term.
struct SparsePattern {
  Index size = 0;
  std::vector<Index> columnStart;  //!< [size + 1]
  std::vector<Index> rowIndex;     //!< [nonzeros]
  Index nonzeros() const { return rowIndex.size(); }
};

//! Right-hand side and Jacobian of a network.
//! Transient mode: state = node temperatures [K] then one cumulative energy per channel [J];
//!   rhs = dT/dt = Q_i / C_i and dE_c/dt = sum of channel-c flows (weighted by group multiplicity).
//! Steady mode: state = node temperatures; residual = Q_i [W] (net heat into each node).
class NetworkSystem {
 public:
  enum class Mode { Transient, Steady };
  NetworkSystem(const Network& network, Mode mode);

  Index size() const { return pattern_.size; }
  Index nodeCount() const { return nodes_; }
  Index channelCount() const { return channels_; }
  const SparsePattern& pattern() const { return pattern_; }
  const Network& network() const { return network_; }

  //! Time derivative (transient) or net heat residual (steady) [size].
  void evaluate(double time, std::span<const double> state, std::span<double> out) const;
  //! Jacobian values in the order of pattern().rowIndex [nonzeros].
  void jacobian(double time, std::span<const double> state, std::span<double> values) const;

  //! Heat flow by group and channel at the current state [W], row-major [groups x channels], unweighted,
  //! plus storage per group sum C dT/dt [W] [groups]. Face temperatures [faces] are filled too.
  void groupFlows(double time, std::span<const double> state, std::span<double> flows, std::span<double> storage,
                  std::span<double> faceTemperatures) const;

  //! Stored heat sum w C T of the nodes (weighted by group multiplicity) [J].
  double storedHeat(std::span<const double> state) const;

 private:
  struct FaceSolution {
    double temperature;  //!< face temperature [K]
    double dTsdTn;       //!< d(face temperature)/d(node temperature) [1]
  };
  FaceSolution solveFace(Index face, double time, double nodeTemperature, std::span<double> channelHeat,
                         std::span<double> channelDerivative) const;
  Index slot(Index row, Index col) const;

  const Network& network_;
  Mode mode_;
  Index nodes_ = 0, channels_ = 0;
  SparsePattern pattern_;
  std::vector<double> rowScale_;   //!< 1/C for node rows (transient), 1 otherwise
  std::vector<double> nodeWeight_; //!< group multiplicity of each node
  std::vector<double> q10Rate_;            //!< per source ln(Q10)/10 [1/K]
  std::vector<double> conductanceFactor_;  //!< per conductance: factors on the flow into a and into b
  // Value slots of every term, in the order of the network's vectors.
  std::vector<Index> conductanceSlots_;   //!< 4 per conductance: aa, ab, bb, ba
  std::vector<Index> advectionSlots_;     //!< 2 per advection: (to,to), (to,from)
  std::vector<Index> exchangeSlots_, sourceSlots_, faceSlots_;
  std::vector<Index> accumulatorSlots_;   //!< per term with a channel, the (accumulator, node) slots
  mutable std::vector<double> faceGuess_;  //!< last face temperatures, Newton start values
  mutable std::vector<double> scratchHeat_, scratchDerivative_;
};

}  // namespace thermorph
