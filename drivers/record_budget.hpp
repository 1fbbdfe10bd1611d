#pragma once
//! Heat budget of one output time: per-group flows and storage, cumulative channel heat, energy-balance error.
#include <cstddef>
#include <span>
#include <vector>

#include "drivers/results.hpp"
#include "drivers/simulation.hpp"
#include "solver/assembly.hpp"

namespace thermorph {

//! Channel energies (whole body and per group), stored-heat changes and energy-balance errors of the state y
//! (nodes, controls, channel energies, group energies) into `summary`; flows and storage rates untouched.
//! `initialStored`, `initialGroupStored`: storedHeat() and groupStoredHeat() of the initial state.
void energiesAt(const NetworkSystem& system, std::span<const double> y, double initialStored,
                std::span<const double> initialGroupStored, RunSummary& summary);

class BudgetRecorder {
 public:
  BudgetRecorder(const Network& network, const NetworkSystem& system) : network_(network), system_(system) {}

  //! Flows, storage, controls, channel energies and the balance error at time t into `summary`; the lateral
  //! face temperatures [K] into `faceTemperatures` (the other recorders use them). Without `flows`, the flows,
  //! storage and face temperatures are left at zero (no face solve of the whole surface).
  void compute(double t, std::span<const double> y, double initialStored, RunSummary& summary,
               std::vector<double>& faceTemperatures, bool flows = true) const;
  //! Whole-body heat flow per channel [W] (copies weighted) and storage [W] of a filled summary.
  //! The energies of state y into `summary` (energiesAt with the initial group stored heat of the first output;
  //! flows untouched): the run loop's record at a step of the timeline (Recorder::recordStep).
  void energies(std::span<const double> y, double initialStored, RunSummary& summary) const {
    energiesAt(system_, y, initialStored, initialGroupStored_, summary);
  }
  static void bodyFlows(const Network& network, const RunSummary& summary, std::span<double> perChannel,
                        double& storage);
  //! /body/heat_flow, /body/cumulative_heat, /body/energy_balance_error, /segments/*/heat_flow,
  //! /segments/*/cumulative_heat and /segments/*/energy_balance_error.
  void create(ResultsFile& f, const std::vector<std::string>& segmentNames);
  void write(ResultsFile& f, const RunSummary& summary) const;

 private:
  const Network& network_;
  const NetworkSystem& system_;
  std::size_t storage_ = 0, balance_ = 0;
  std::vector<std::size_t> flow_, energy_;
  std::vector<std::vector<std::size_t>> segmentFlow_;  //!< [group][channel]
  std::vector<std::size_t> segmentStorage_;
  std::vector<std::vector<std::size_t>> segmentEnergy_;  //!< [group][channel + 1]: channels, then storage
  std::vector<std::size_t> segmentBalance_;
  mutable std::vector<double> initialGroupStored_;  //!< groupStoredHeat() at the first output
  mutable std::vector<double> bodyFlow_;  //!< [channel] scratch
};

}  // namespace thermorph
