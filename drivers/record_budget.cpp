#include "drivers/record_budget.hpp"

#include <cmath>
#include <numeric>

namespace thermorph {

void energiesAt(const NetworkSystem& system, std::span<const double> y, double initialStored,
                std::span<const double> initialGroupStored, RunSummary& summary) {
  const Index states = system.nodeCount() + system.controlCount(), channels = system.channelCount();
  const Index groups = system.network().groups.size();
  const auto at = [&](Index i) { return y.begin() + static_cast<std::ptrdiff_t>(i); };
  summary.channelEnergy.assign(at(states), at(states + channels));
  summary.storedChange = system.storedHeat(y) - initialStored;
  double gained = std::accumulate(summary.channelEnergy.begin(), summary.channelEnergy.end(), 0.0);
  summary.energyBalanceError = gained - summary.storedChange;
  summary.throughput = std::abs(summary.storedChange);
  for (double e : summary.channelEnergy) summary.throughput += std::abs(e);
  // Per group: energies from the state (zero where the system carries none: steady mode), stored change from T.
  summary.segmentEnergy.assign(groups * channels, 0.0);
  if (system.groupCount() == groups)
    std::copy(at(system.groupEnergyOffset()), at(system.groupEnergyOffset() + groups * channels),
              summary.segmentEnergy.begin());
  summary.segmentStoredChange.assign(groups, 0.0);
  system.groupStoredHeat(y, summary.segmentStoredChange);
  summary.segmentBalanceError.assign(groups, 0.0);
  for (Index g = 0; g < groups; ++g) {
    summary.segmentStoredChange[g] -= g < initialGroupStored.size() ? initialGroupStored[g] : 0.0;
    double sum = 0.0;
    for (Index c = 0; c < channels; ++c) sum += summary.segmentEnergy[g * channels + c];
    summary.segmentBalanceError[g] = sum - summary.segmentStoredChange[g];
  }
}

void BudgetRecorder::compute(double t, std::span<const double> y, double initialStored, RunSummary& summary,
                             std::vector<double>& faceTemperatures, bool flows) const {
  const Index groups = network_.groups.size(), channels = network_.channels.size();
  summary.flows.assign(groups * channels, 0.0);
  summary.storage.assign(groups, 0.0);
  faceTemperatures.assign(network_.faces.size(), 0.0);
  const Index states = system_.nodeCount() + system_.controlCount();
  if (flows) system_.groupFlows(t, y.first(states), summary.flows, summary.storage, faceTemperatures);
  summary.controls.assign(y.begin() + static_cast<std::ptrdiff_t>(system_.nodeCount()),
                          y.begin() + static_cast<std::ptrdiff_t>(states));
  if (initialGroupStored_.empty()) {  // the first output is the initial state
    initialGroupStored_.assign(groups, 0.0);
    system_.groupStoredHeat(y, initialGroupStored_);
  }
  energiesAt(system_, y, initialStored, initialGroupStored_, summary);
  summary.finalTime = t;
}

void BudgetRecorder::create(ResultsFile& f, const std::vector<std::string>& segmentNames) {
  for (const std::string& ch : network_.channels)
    flow_.push_back(f.createSeries("/body/heat_flow/" + ch, {}, "W", "whole-body heat flow by " + ch + ", positive into the body"));
  storage_ = f.createSeries("/body/heat_flow/storage", {}, "W", "whole-body rate of heat storage");
  for (const std::string& ch : network_.channels)
    energy_.push_back(f.createSeries("/body/cumulative_heat/" + ch, {}, "J",
                                     "whole-body heat gained by " + ch + " since the start of the run"));
  balance_ = f.createSeries("/body/energy_balance_error", {}, "J",
                            "heat gained by all channels minus the change of stored heat");
  for (const std::string& name : segmentNames) {
    std::string g = "/segments/" + name;
    segmentFlow_.emplace_back();
    for (const std::string& ch : network_.channels)
      segmentFlow_.back().push_back(f.createSeries(g + "/heat_flow/" + ch, {}, "W",
                                                   "heat flow of one " + name + " by " + ch + ", positive into it"));
    segmentStorage_.push_back(f.createSeries(g + "/heat_flow/storage", {}, "W", "rate of heat storage of one " + name));
    segmentEnergy_.emplace_back();
    for (const std::string& ch : network_.channels)
      segmentEnergy_.back().push_back(f.createSeries(g + "/cumulative_heat/" + ch, {}, "J",
                                                     "heat gained by one " + name + " by " + ch +
                                                         " since the start of the run (integrated by the solver)"));
    segmentEnergy_.back().push_back(f.createSeries(g + "/cumulative_heat/storage", {}, "J",
                                                   "change of the heat stored in one " + name +
                                                       " since the start of the run"));
    segmentBalance_.push_back(f.createSeries(g + "/energy_balance_error", {}, "J",
                                             "heat gained by all channels of one " + name +
                                                 " minus the change of its stored heat"));
  }
}

void BudgetRecorder::bodyFlows(const Network& network, const RunSummary& summary, std::span<double> perChannel,
                               double& storage) {
  const Index groups = network.groups.size(), channels = network.channels.size();
  for (Index c = 0; c < channels; ++c) {
    double total = 0.0;
    for (Index g = 0; g < groups; ++g) total += network.groupWeights[g] * summary.flows[g * channels + c];
    perChannel[c] = total;
  }
  storage = 0.0;
  for (Index g = 0; g < groups; ++g) storage += network.groupWeights[g] * summary.storage[g];
}

void BudgetRecorder::write(ResultsFile& f, const RunSummary& summary) const {
  const Index channels = network_.channels.size();
  bodyFlow_.resize(channels);
  double storage = 0.0;
  bodyFlows(network_, summary, bodyFlow_, storage);
  for (Index c = 0; c < channels; ++c) {
    f.append(flow_[c], {&bodyFlow_[c], 1});
    f.append(energy_[c], {&summary.channelEnergy[c], 1});
  }
  f.append(storage_, {&storage, 1});
  f.append(balance_, {&summary.energyBalanceError, 1});
  for (std::size_t g = 0; g < segmentFlow_.size(); ++g) {
    for (Index c = 0; c < channels; ++c) f.append(segmentFlow_[g][c], {&summary.flows[g * channels + c], 1});
    f.append(segmentStorage_[g], {&summary.storage[g], 1});
    for (Index c = 0; c < channels; ++c)
      f.append(segmentEnergy_[g][c], {&summary.segmentEnergy[g * channels + c], 1});
    f.append(segmentEnergy_[g][channels], {&summary.segmentStoredChange[g], 1});
    f.append(segmentBalance_[g], {&summary.segmentBalanceError[g], 1});
  }
}

}  // namespace thermorph
