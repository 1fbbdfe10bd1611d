#include "models/environment.hpp"

namespace thermorph {

EnvironmentModel::EnvironmentModel(const Case& c, Network& network) : case_(c) {
  convectionChannel_ = network.channel("convection");
}

void EnvironmentModel::addFace(const FaceDescription& face) { faces_.push_back(face); }

double EnvironmentModel::convectionCoefficient(Index face, double, double, double* derivative) const {
  const SegmentSpec& s = case_.segments[faces_[face].segment];
  if (derivative) *derivative = 0.0;
  return s.surface.convectionCoefficient.value_or(case_.environment.convectionCoefficient);
}

void EnvironmentModel::faceHeat(Index face, double faceTemperature, double time, std::span<double> channelHeat,
                                std::span<double> channelDerivative) const {
  // Newton cooling: q = h A (T_medium - T_s), positive into the body.
  const FaceDescription& f = faces_[face];
  double dh = 0.0;
  double h = convectionCoefficient(face, faceTemperature, time, &dh);
  double difference = case_.environment.temperature - faceTemperature;
  channelHeat[convectionChannel_] += h * f.area * difference;
  channelDerivative[convectionChannel_] += f.area * (dh * difference - h);
}

std::vector<double> EnvironmentModel::breakpoints() const { return {}; }

void EnvironmentModel::setInterval(std::size_t interval) { interval_ = interval; }

std::vector<EnvironmentSeries> EnvironmentModel::series() const { return {{"temperature", "degC"}}; }

void EnvironmentModel::seriesValues(double, std::span<double> values) const {
  values[0] = case_.environment.temperature - 273.15;
}

double EnvironmentModel::meanConvectionCoefficient(Index segment, double time,
                                                   std::span<const double> faceTemperatures) const {
  double hA = 0.0, area = 0.0;
  for (Index f = 0; f < faces_.size(); ++f) {
    if (faces_[f].segment != segment) continue;
    hA += convectionCoefficient(f, faceTemperatures[f], time, nullptr) * faces_[f].area;
    area += faces_[f].area;
  }
  return area > 0.0 ? hA / area : 0.0;
}

}  // namespace thermorph
