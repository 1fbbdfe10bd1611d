#include "models/environment.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>

#include "models/convection.hpp"
#include "models/surface_physics.hpp"

namespace thermorph {

namespace {

using V = EnvironmentVariable;
using std::numbers::pi;

constexpr std::size_t index(V v) { return static_cast<std::size_t>(v); }

//! Long-wave emissivity of bare skin [1] (Steketee 1973, Phys. Med. Biol. 18:686).
constexpr double kSkinEmissivity = 0.98;
//! Long-wave emissivity of fur and feathers [1]: the low end of 0.95-0.98 (from memory).
constexpr double kCoatEmissivity = 0.95;

//! Volume of a segment, coat included [m3]: exact for the shape (sphere, cylinder, frustum, slab).
double outerVolume(const SegmentSpec& s) {
  const double coat = s.coat ? s.coat->thickness : 0.0;
  const double r = s.tissueRadius() + coat;
  switch (s.shape) {
    case Shape::Sphere: return 4.0 / 3.0 * pi * r * r * r;
    case Shape::Cylinder: return pi * r * r * s.length;
    case Shape::Cone: {
      const double r0 = s.radiusProximal + coat, r1 = s.radiusDistal + coat;
      return pi * s.length / 3.0 * (r0 * r0 + r0 * r1 + r1 * r1);
    }
    case Shape::Plate: return 2.0 * r * s.width * s.length;
  }
  return 0.0;
}

Medium waterMedium(SurroundingMedium m) { return m == SurroundingMedium::SeaWater ? Medium::SeaWater : Medium::FreshWater; }

//! Property group of the heat-mass transfer analogy h_m / h_c = 1 / (rho c_p Le^{2/3}) [m3 K/J] of dry air at
//! `filmTemperature` and standard pressure (Incropera et al. ch. 6; as cutaneousEvaporation's film form), with its
//! exact derivative (dual numbers); also the specific heat and Lewis number at the film temperature, equal bit for
//! bit to fluidProperties(...).specificHeat and lewisNumberVapourInAir(...).
struct AnalogyGroup {
  Dual group;
  double specificHeat = 0.0, lewisNumber = 0.0;
};
AnalogyGroup analogyGroup(Dual film) {
  const FluidPropertiesDual air = fluidPropertiesDual(Medium::Air, film);
  const Dual density = kStandardPressure / (kGasConstantDryAir * film);
  // lewisNumberVapourInAir and vapourDiffusivityInAir (models/surface_physics.cpp, models/media.cpp) at 1 atm.
  const Dual alpha = air.conductivity / (density * air.specificHeat);
  const Dual diffusivity = 0.26e-4 * pow(film / 298.0, 1.5) * (kStandardPressure / kStandardPressure);
  const Dual lewis = alpha / diffusivity;
  return {1.0 / (density * air.specificHeat * pow(lewis, 2.0 / 3.0)), air.specificHeat.v, lewis.v};
}

}  // namespace

EnvironmentModel::EnvironmentModel(const Case& c, Network& network) : case_(c) {
  convectionChannel_ = network.channel("convection");
  radiationChannel_ = network.channel("radiation");
  solarChannel_ = network.channel("solar");
  evaporationChannel_ = network.channel("evaporation");
  substrateChannel_ = network.channel("substrate");
  resetValidityWarnings();  // a new case: report each range violation again

  const EnvironmentSpec& env = case_.environment;
  for (const SegmentSpec& s : case_.segments) {
    SegmentSurface surface;
    surface.immersion = s.surface.immersion;
    const ConvectionSetting convection = s.surface.convection.value_or(env.convection);
    surface.fixedConvection = convection.fixed;
    surface.convectionCoefficient = convection.coefficient;
    surface.emissivity = segmentEmissivity(s, env);
    surface.volumeLength = std::cbrt(outerVolume(s));
    surface.width = s.width;
    surfaces_.push_back(surface);
    maxContact_.push_back(s.surface.contactFraction);
  }
  contactEvents_.assign(case_.segments.size(), 0);
  for (const EventSpec& e : case_.events)
    for (const ContactTarget& t : e.contact)
      for (Index g = 0; g < case_.segments.size(); ++g)
        if (targetsSegment(t.segment, case_.segments[g].name)) {
          maxContact_[g] = std::max(maxContact_[g], t.contactFraction);
          contactEvents_[g] = 1;
        }
  tuckEvents_.assign(case_.segments.size(), 0);
  for (const SegmentSpec& s : case_.segments) maxTucked_.push_back(s.surface.tuckedFraction);
  for (const EventSpec& e : case_.events)
    for (const TuckTarget& t : e.tuck)
      for (Index g = 0; g < case_.segments.size(); ++g)
        if (t.segment == case_.segments[g].name) {
          maxTucked_[g] = std::max(maxTucked_[g], t.tuckedFraction);
          tuckEvents_[g] = 1;
        }
  maxCovered_ = maxContact_;
  wetEvents_.assign(case_.segments.size(), 0);
  for (const EventSpec& e : case_.events)
    for (const WetTarget& w : e.wet)
      for (Index g = 0; g < case_.segments.size(); ++g)
        if (targetsSegment(w.segment, case_.segments[g].name)) wetEvents_[g] = 1;
  sweats_ = sweatingSegments(case_);

  for (const EventSpec& e : case_.events)
    for (double t : {e.at, e.at + e.ramp})
      if (t > 0.0 && t < case_.run.duration) breakpoints_.push_back(t);
  std::sort(breakpoints_.begin(), breakpoints_.end());
  breakpoints_.erase(std::unique(breakpoints_.begin(), breakpoints_.end()), breakpoints_.end());
  // Contact plus tucking of every interval (only where something is tucked: otherwise the largest contact).
  for (Index g = 0; g < case_.segments.size(); ++g)
    if (maxTucked_[g] > 0.0)
      for (std::size_t k = 0; k <= breakpoints_.size(); ++k) {
        setInterval(k);
        maxCovered_[g] = std::max(maxCovered_[g], contact_[g] + tucked_[g]);
      }
  setInterval(0);
  initialMedium_ = medium_;
}

void EnvironmentModel::addFace(const FaceDescription& face) {
  faces_.push_back(face);
  cache_.emplace_back();
  freeLengthCubed_.push_back(0.0);
  if (!(faces_.back().volumeLength > 0.0)) faces_.back().volumeLength = surfaces_.at(face.segment).volumeLength;
}

std::vector<double> EnvironmentModel::breakpoints() const { return breakpoints_; }

void EnvironmentModel::setInterval(std::size_t interval) {
  // Interval k lies between breakpoints k-1 and k. An event has started in interval k when k >= the number of
  // breakpoints at or before its start, and its ramp is complete likewise for its end (when that is in the run).
  interval_ = interval;
  const EnvironmentSpec& env = case_.environment;
  medium_ = env.medium;
  contact_.resize(case_.segments.size());
  for (Index g = 0; g < case_.segments.size(); ++g) contact_[g] = case_.segments[g].surface.contactFraction;
  tucked_.resize(case_.segments.size());
  for (Index g = 0; g < case_.segments.size(); ++g) tucked_[g] = case_.segments[g].surface.tuckedFraction;
  hostCovered_.assign(case_.segments.size(), 0.0);
  wetOffset_.resize(case_.segments.size());
  wetSlope_.assign(case_.segments.size(), 0.0);
  for (Index g = 0; g < case_.segments.size(); ++g) wetOffset_[g] = case_.segments[g].surface.wettedFraction;
  for (std::size_t v = 0; v < kEnvironmentVariables; ++v) {
    offset_[v] = env.value(static_cast<V>(v));
    slope_[v] = 0.0;
  }
  auto breakpointsUpTo = [&](double t) {
    return static_cast<std::size_t>(std::upper_bound(breakpoints_.begin(), breakpoints_.end(), t) - breakpoints_.begin());
  };
  for (const EventSpec& e : case_.events) {
    if (interval < breakpointsUpTo(e.at)) continue;
    const double end = e.at + e.ramp;
    const bool complete = e.ramp == 0.0 || (end < case_.run.duration && interval >= breakpointsUpTo(end));
    if (e.medium) medium_ = *e.medium;  // always a step (the reader rejects a ramp)
    for (const ContactTarget& t : e.contact)  // steps ("all" before named segments: the reader's order)
      for (Index g = 0; g < case_.segments.size(); ++g)
        if (targetsSegment(t.segment, case_.segments[g].name)) contact_[g] = t.contactFraction;
    for (const TuckTarget& t : e.tuck)  // steps of named segments
      for (Index g = 0; g < case_.segments.size(); ++g)
        if (t.segment == case_.segments[g].name) tucked_[g] = t.tuckedFraction;
    // Linear from the value at `at` to the target at `at + ramp` (as the environment's values below).
    auto track = [&](double target, double& offset, double& slope) {
      if (complete) {
        offset = target;
        slope = 0.0;
      } else {
        const double start = offset + slope * e.at;
        slope = (target - start) / e.ramp;
        offset = start - slope * e.at;
      }
    };
    for (const WetTarget& w : e.wet)  // "all" before named segments: the reader's order
      for (Index g = 0; g < case_.segments.size(); ++g)
        if (targetsSegment(w.segment, case_.segments[g].name)) track(w.wettedFraction, wetOffset_[g], wetSlope_[g]);
    for (const EnvironmentValue& target : e.environment) {
      const std::size_t v = index(target.variable);
      track(target.value, offset_[v], slope_[v]);
    }
  }
  for (const HostCover& c : hostCovers_) hostCovered_[c.host] += tucked_[c.guest] * c.ratio;
}

void EnvironmentModel::coverHost(Index guest, Index host, double ratio) {
  hostCovers_.push_back({guest, host, ratio});
  setInterval(interval_);
}

double EnvironmentModel::segmentEmissivity(const SegmentSpec& s, const EnvironmentSpec& environment) {
  // A fixed coefficient stands for the whole surface exchange (Newton cooling, as in validation problems):
  // radiation only when an emissivity is given.
  const bool fixed = s.surface.convection.value_or(environment.convection).fixed;
  return s.surface.emissivity.value_or(fixed ? 0.0 : s.coat ? kCoatEmissivity : kSkinEmissivity);
}

bool EnvironmentModel::immersed(Index segment) const { return inWater(surfaces_.at(segment).immersion, initialMedium_); }

bool EnvironmentModel::immersed(Index segment, double /*time*/) const {
  return inWater(surfaces_.at(segment).immersion, medium_);
}

double EnvironmentModel::emissivity(Index segment) const { return surfaces_.at(segment).emissivity; }

FaceFluid EnvironmentModel::fluid(Index segment, double time) const {
  const EnvironmentSpec& env = case_.environment;
  const bool mediumIsAir = medium_ == SurroundingMedium::Air;
  if (inWater(surfaces_[segment].immersion, medium_)) {
    if (mediumIsAir)
      return {waterMedium(env.immersionWater), value(V::WaterTemperature, time), value(V::WaterSpeed, time)};
    return {waterMedium(medium_), value(V::Temperature, time), value(V::Speed, time)};
  }
  if (mediumIsAir) return {Medium::Air, value(V::Temperature, time), value(V::Speed, time)};
  return {Medium::Air, value(V::AirTemperature, time), value(V::AirSpeed, time)};
}

double EnvironmentModel::convectionCoefficient(Index face, double faceTemperature, double time,
                                               double* derivative) const {
  const FaceDescription& f = faces_[face];
  if (surfaces_[f.segment].fixedConvection) {
    if (derivative) *derivative = 0.0;
    return surfaces_[f.segment].convectionCoefficient;
  }
  return convectionCoefficient(face, faceTemperature, fluid(f.segment, time), derivative);
}

double EnvironmentModel::convectionCoefficient(Index face, double faceTemperature, const FaceFluid& fl,
                                               double* derivative) const {
  const FaceDescription& f = faces_[face];
  const SegmentSurface& surface = surfaces_[f.segment];
  if (derivative) *derivative = 0.0;
  if (surface.fixedConvection) return surface.convectionCoefficient;

  // Near the last evaluation the first-order expansion h + h' dT is used: within 1e-6 K (exact to ~1e-14
  // relative), or up to 0.1 K while the expansion's error bound 1/2 |h''| dT^2 (|h''| from the last two
  // evaluations, times a safety factor of 10) stays below 1e-10 h, 10^4 below the integrator's default rtol
  // (20-45 % fewer correlation evaluations in the example studies). The coefficient depends on time only through
  // the fluid (medium, temperature, speed): an unchanged fluid reuses it. dh/dT_s returned is the expansion's own
  // derivative, so the Jacobian stays exact for the function evaluated.
  CachedCoefficient& cached = cache_[face];
  const double shift = faceTemperature - cached.faceTemperature;
  const bool sameFluid =
      cached.fluidTemperature == fl.temperature && cached.speed == fl.speed && cached.medium == fl.medium;
  if (sameFluid && (std::abs(shift) < 1e-6 || (std::abs(shift) < 0.1 && 5.0 * cached.curvature * shift * shift <=
                                                                             1e-10 * std::abs(cached.h)))) {
    if (derivative) *derivative = cached.dh;
    return cached.h + cached.dh * shift;
  }

  const ConvectionResult r = convectionCoefficientTabulated(convectionInput(face, faceTemperature, fl));
  if (r.outsideValidity) collectWarnings();
  const double curvature = sameFluid && shift != 0.0 ? std::abs(r.dh_dTs - cached.dh) / std::abs(shift)
                                                     : std::numeric_limits<double>::infinity();
  if (!reporting_)
    cached = {faceTemperature, fl.temperature, fl.speed, r.h, r.dh_dTs, curvature, fl.medium,
              r.outsideValidity && !validityLogging()};
  if (derivative) *derivative = r.dh_dTs;
  return r.h;
}

ConvectionInput EnvironmentModel::convectionInput(Index face, double faceTemperature, const FaceFluid& fl) const {
  const FaceDescription& f = faces_[face];
  const SegmentSpec& s = case_.segments[f.segment];
  ConvectionInput in;
  in.medium = fl.medium;
  in.geometry = f.shape == Shape::Sphere ? Geometry::Sphere : f.shape == Shape::Plate ? Geometry::Plate
                                                                                      : Geometry::Cylinder;
  in.choice = s.surface.correlation == ConvectionCorrelation::Mitchell ? CorrelationChoice::Mitchell
                                                                        : CorrelationChoice::Standard;
  in.surfaceTemperature = faceTemperature;
  in.fluidTemperature = fl.temperature;
  in.speed = fl.speed;
  in.length = f.characteristicLength;
  in.volumeLength = f.volumeLength;
  in.verticalPlate = s.surface.orientation == PlateOrientation::Vertical;
  in.width = surfaces_[f.segment].width;
  if (!(freeLengthCubed_[face] > 0.0)) freeLengthCubed_[face] = std::pow(freeConvectionLength(in), 3);
  in.freeLengthCubed = freeLengthCubed_[face];
  return in;
}

void EnvironmentModel::confirmRanges(double time) const {
  for (Index face = 0; face < faces_.size(); ++face) {
    CachedCoefficient& cached = cache_[face];
    if (!cached.unlogged) continue;
    cached.unlogged = false;
    const FaceFluid fl = fluid(faces_[face].segment, time);
    if (convectionCoefficientTabulated(convectionInput(face, cached.faceTemperature, fl)).outsideValidity)
      collectWarnings();
  }
}

std::vector<Index> EnvironmentModel::faceChannels() const {
  std::vector<Index> channels{convectionChannel_, radiationChannel_, solarChannel_, evaporationChannel_,
                              substrateChannel_};
  std::sort(channels.begin(), channels.end());
  channels.erase(std::unique(channels.begin(), channels.end()), channels.end());
  return channels;
}

void EnvironmentModel::faceHeat(Index face, double Ts, double time, std::span<double> channelHeat,
                                std::span<double> channelDerivative) const {
  exchange(face, Ts, time, nullptr, channelHeat, channelDerivative, {});
}

void EnvironmentModel::controlledFaceHeat(Index face, double Ts, double time, double control,
                                          std::span<double> channelHeat, std::span<double> channelDerivative,
                                          std::span<double> controlDerivative) const {
  exchange(face, Ts, time, &control, channelHeat, channelDerivative, controlDerivative);
}

double EnvironmentModel::sweatingWettedFraction(Index segment, double time, double u, double* slope) const {
  const double own = wettedFraction(segment, time);
  const double room = std::max(0.0, case_.control.sweating.upper - own);
  if (slope) *slope = u >= 0.0 && u < room ? 1.0 : 0.0;
  return own + std::clamp(u, 0.0, room);
}

void EnvironmentModel::exchange(Index face, double Ts, double time, const double* control,
                                std::span<double> channelHeat, std::span<double> channelDerivative,
                                std::span<double> controlDerivative) const {
  const FaceDescription& f = faces_[face];
  const SegmentSurface& surface = surfaces_[f.segment];
  const SurfaceSpec& spec = case_.segments[f.segment].surface;
  const double hSubstrate = case_.environment.substrateConductance.value_or(0.0);
  const double contact = contact_[f.segment];  // f_c of the current interval
  if (f.contact == FaceContact::Column) {
    // A coat's contact column (Body::addLateralFace), built for the run's largest contact f_max: the whole face
    // touches the substrate, q = h_sub A (T_sub - T_s), over f_c / f_max of its area in this interval (exactly the
    // built area when the contact never changes: f_c / f_c = 1).
    const double area = f.area * (contact / maxContact_[f.segment]);
    channelHeat[substrateChannel_] += hSubstrate * area * (value(V::SubstrateTemperature, time) - Ts);
    channelDerivative[substrateChannel_] -= hSubstrate * area;
    return;
  }
  const FaceFluid fl = fluid(f.segment, time);
  // The tucked share f_t of a lateral face lies against its host (Body's tucking conductances), and the share f_h
  // that its own tucked guests cover lies against them: no exchange here.
  const double tucked = f.lateral ? tucked_[f.segment] + hostCovered_[f.segment] : 0.0;
  const double exposed = f.contact == FaceContact::None ? f.area : (1.0 - contact - tucked) * f.area;  // A_e [m2]

  // Convection, Newton's law: q = h A_e (T_f - T_s), dq/dT_s = A_e (h' (T_f - T_s) - h).
  double dh = 0.0;
  const double h = convectionCoefficient(face, Ts, fl, &dh);
  const double difference = fl.temperature - Ts;
  channelHeat[convectionChannel_] += h * exposed * difference;
  channelDerivative[convectionChannel_] += exposed * (dh * difference - h);

  if (!inWater(surface.immersion, medium_)) {
    // Long-wave radiation (Stefan-Boltzmann), the exposed surface seeing sky over sky_view and the
    // surroundings at the mean radiant temperature over the rest. Water is opaque to long-wave radiation.
    if (surface.emissivity > 0.0) {
      const double eps = surface.emissivity * exposed;
      const SurfaceFlux sky = longwaveRadiation(eps * spec.skyView, Ts, value(V::SkyTemperature, time));
      const SurfaceFlux rest = longwaveRadiation(eps * (1.0 - spec.skyView), Ts, value(V::RadiantTemperature, time));
      channelHeat[radiationChannel_] += sky.flux + rest.flux;
      channelDerivative[radiationChannel_] += sky.dFlux_dTs + rest.dFlux_dTs;
    }
    // Absorbed solar radiation on the lateral faces: alpha S (shadow / lateral area) A, which sums to alpha S times
    // the shadow of the shape for a beam normal to its axis or face. End faces lie parallel to that beam and
    // take none.
    if (f.lateral)
      channelHeat[solarChannel_] +=
          spec.solarAbsorptivity * value(V::SolarIrradiance, time) * spec.solarExposure * f.area * (1.0 - tucked);

    // Cutaneous evaporation by the heat-mass transfer analogy with air properties at the film temperature;
    // the slope includes h(T_s) and the film properties' dependence on T_s (through T_film = (T_s + T_a)/2).
    // A segment that sweats: w_0 plus sweating's state (sweatingWettedFraction); the flux is linear in w, so
    // d q / d u = (dw/du) q / w, from the flux at w = 1 when w is 0.
    double dwdu = 0.0;
    const double wetted = control ? sweatingWettedFraction(f.segment, time, *control, &dwdu)
                                  : wettedFraction(f.segment, time);
    if (wetted > 0.0 || dwdu > 0.0) {
      const double film = 0.5 * (Ts + fl.temperature);
      const AnalogyGroup group = analogyGroup(Dual{film, 1.0});
      EvaporationInput in;
      in.convectionCoefficient = h;
      in.surfaceTemperature = Ts;
      in.airTemperature = fl.temperature;
      in.relativeHumidity = value(V::RelativeHumidity, time);
      in.wettedFraction = wetted > 0.0 ? wetted : 1.0;
      in.airDensity = kStandardPressure / (kGasConstantDryAir * film);
      in.airSpecificHeat = group.specificHeat;
      in.lewisNumber = group.lewisNumber;
      const EvaporationFlux e = cutaneousEvaporation(in);
      const double dLogGroup = group.group.d / group.group.v;  // d ln(group) / d T_film [1/K]
      if (dwdu > 0.0) controlDerivative[evaporationChannel_] += dwdu * exposed * e.flux / in.wettedFraction;
      if (wetted > 0.0) {
        channelHeat[evaporationChannel_] += e.flux * exposed;
        channelDerivative[evaporationChannel_] += exposed * (e.dFlux_dTs + e.dFlux_dh * dh + e.flux * 0.5 * dLogGroup);
      }
    }
  }

  // Conduction to the substrate over the contact area: q = h_sub f_c A (T_sub - T_s).
  if (contact > 0.0 && f.contact == FaceContact::Shared) {
    const double conductance = hSubstrate * contact * f.area;
    channelHeat[substrateChannel_] += conductance * (value(V::SubstrateTemperature, time) - Ts);
    channelDerivative[substrateChannel_] -= conductance;
  }
}

namespace {

//! One /environment series: its variable, dataset name and units.
struct SeriesInfo {
  V variable;
  const char* name;
  const char* units;
};
constexpr SeriesInfo kSeries[] = {
    {V::Temperature, "temperature", "degC"},
    {V::Speed, "speed", "m s-1"},
    {V::WaterTemperature, "water_temperature", "degC"},
    {V::WaterSpeed, "water_speed", "m s-1"},
    {V::AirTemperature, "air_temperature", "degC"},
    {V::AirSpeed, "air_speed", "m s-1"},
    {V::RelativeHumidity, "relative_humidity", "1"},
    {V::RadiantTemperature, "radiant_temperature", "degC"},
    {V::SkyTemperature, "sky_temperature", "degC"},
    {V::SolarIrradiance, "solar_irradiance", "W m-2"},
    {V::SubstrateTemperature, "substrate_temperature", "degC"},
};

//! The other fluid's values are stored only when some segment is in it at some time: water_* when the medium is
//! ever air and a segment is always in water, air_* when it is ever water and a segment never is.
bool seriesUsed(const SeriesInfo& s, const EnvironmentSpec& env, bool anyAlways, bool anyNever) {
  const bool water = s.variable == V::WaterTemperature || s.variable == V::WaterSpeed;
  const bool air = s.variable == V::AirTemperature || s.variable == V::AirSpeed;
  if (water) return env.everAir() && anyAlways;
  if (air) return env.everWater() && anyNever;
  return true;
}

}  // namespace

std::vector<EnvironmentSeries> EnvironmentModel::series() const {
  bool anyAlways = false, anyNever = false;
  for (const SegmentSurface& s : surfaces_) {
    anyAlways = anyAlways || s.immersion == Immersion::Always;
    anyNever = anyNever || s.immersion == Immersion::Never;
  }
  std::vector<EnvironmentSeries> out;
  for (const SeriesInfo& s : kSeries)
    if (seriesUsed(s, case_.environment, anyAlways, anyNever)) out.push_back({s.name, s.units});
  return out;
}

void EnvironmentModel::seriesValues(double time, std::span<double> values) const {
  const std::vector<EnvironmentSeries> used = series();
  std::size_t k = 0;
  for (const SeriesInfo& s : kSeries) {
    if (k == used.size() || used[k].name != s.name) continue;
    const double v = value(s.variable, time);
    values[k++] = std::string_view(s.units) == "degC" ? v - kZeroCelsius : v;
  }
}

double EnvironmentModel::meanConvectionCoefficient(Index segment, double time,
                                                   std::span<const double> faceTemperatures) const {
  double hA = 0.0, area = 0.0;
  const bool reporting = reporting_;
  reporting_ = true;  // a report: the cache is read, not written
  for (Index f = 0; f < faces_.size(); ++f) {
    if (faces_[f].segment != segment || faces_[f].contact == FaceContact::Column) continue;
    hA += convectionCoefficient(f, faceTemperatures[f], time, nullptr) * faces_[f].area;
    area += faces_[f].area;
  }
  reporting_ = reporting;
  return area > 0.0 ? hA / area : 0.0;
}

void EnvironmentModel::collectWarnings() const {
  for (std::string& w : takeValidityWarnings()) warnings_.push_back(std::move(w));
}

std::vector<std::string> EnvironmentModel::warnings() const {
  collectWarnings();
  return warnings_;
}

}  // namespace thermorph
