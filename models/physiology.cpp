#include "models/physiology.hpp"

#include <algorithm>

#include "models/surface_physics.hpp"

namespace thermorph {

PhysiologyModel::PhysiologyModel(const Case& c, const EnvironmentModel& environment, double basalRate,
                                 Index respiratorySegment)
    : case_(c), environment_(environment), basalRate_(basalRate), respiratorySegment_(respiratorySegment) {
  auto track = [](double v) { return Track{v, v, 0.0}; };
  for (const SegmentSpec& s : c.segments) {
    skin_.push_back(track(s.vasomotor.skinPerfusion));
    shunt_.push_back(track(s.vasomotor.shunt));
    superficial_.push_back(track(s.vasomotor.superficialReturn));
  }
  activity_ = track(c.body.activity);
  hypometabolism_ = track(1.0);
  bradycardia_ = track(1.0);
  panting_ = track(1.0);
  const ControllerSpec* specs[3] = {&c.control.vasomotor, &c.control.shivering, &c.control.panting};
  for (std::size_t k = 0; k < 3; ++k) {
    enabled_.push_back(track(specs[k]->enabled ? 1.0 : 0.0));
    setPoint_.push_back(track(specs[k]->setPoint));
  }
  for (const LocalControllerSpec& l : c.control.local) {
    enabled_.push_back(track(l.enabled ? 1.0 : 0.0));
    setPoint_.push_back(track(l.setPoint));
  }
  // [control.sweating] after the local controllers: 3 + local.size() (sweatingController()).
  enabled_.push_back(track(c.control.sweating.enabled ? 1.0 : 0.0));
  setPoint_.push_back(track(c.control.sweating.setPoint));
  breakpoints_ = environment.breakpoints();
  setInterval(0);
}

Index PhysiologyModel::add(const Schedule& schedule) {
  schedules_.push_back(schedule);
  return schedules_.size() - 1;
}

void PhysiologyModel::moveTrack(Track& track, double target, const EventSpec& e, bool complete) {
  if (complete) {
    track.offset = target;
    track.slope = 0.0;
  } else {
    // Linear from the value at `at` to the target at `at + ramp`.
    const double start = track.at(e.at);
    track.slope = (target - start) / e.ramp;
    track.offset = start - track.slope * e.at;
  }
}

void PhysiologyModel::setInterval(std::size_t interval) {
  // Interval k lies between breakpoints k-1 and k: an event has started once k counts the breakpoints at or
  // before its start; its ramp is complete once k counts those at or before its end.
  auto reset = [](Track& t) {
    t.offset = t.initial;
    t.slope = 0.0;
  };
  for (auto* group : {&skin_, &shunt_, &superficial_})
    for (Track& t : *group) reset(t);
  for (Track* t : {&activity_, &hypometabolism_, &bradycardia_, &panting_}) reset(*t);
  for (std::size_t k = 0; k < enabled_.size(); ++k) {
    reset(enabled_[k]);
    reset(setPoint_[k]);
  }
  auto upTo = [&](double t) {
    return static_cast<std::size_t>(std::upper_bound(breakpoints_.begin(), breakpoints_.end(), t) - breakpoints_.begin());
  };
  for (const EventSpec& e : case_.events) {
    if (interval < upTo(e.at)) continue;
    const double end = e.at + e.ramp;
    const bool complete = e.ramp == 0.0 || (end < case_.run.duration && interval >= upTo(end));
    for (const VasomotorTarget& v : e.vasomotor)
      for (std::size_t g = 0; g < case_.segments.size(); ++g) {
        if (!targetsSegment(v.segment, case_.segments[g].name)) continue;
        if (v.skinPerfusion) moveTrack(skin_[g], *v.skinPerfusion, e, complete);
        if (v.shunt) moveTrack(shunt_[g], *v.shunt, e, complete);
        if (v.superficialReturn) moveTrack(superficial_[g], *v.superficialReturn, e, complete);
      }
    if (e.activity) moveTrack(activity_, *e.activity, e, complete);
    if (e.hypometabolism) moveTrack(hypometabolism_, *e.hypometabolism, e, complete);
    if (e.bradycardia) moveTrack(bradycardia_, *e.bradycardia, e, complete);
    if (e.panting) moveTrack(panting_, *e.panting, e, complete);
    for (const ControlTarget& c : e.control) {
      std::size_t k = c.controller == "vasomotor" ? 0 : c.controller == "shivering" ? 1 : 2;
      if (c.controller == "sweating") k = sweatingController(case_);
      else if (c.controller != "vasomotor" && c.controller != "shivering" && c.controller != "panting")
        for (std::size_t i = 0; i < case_.control.local.size(); ++i)
          if (case_.control.local[i].name == c.controller) k = 3 + i;
      // Switching is a step even within a ramped event.
      if (c.enabled) moveTrack(enabled_[k], *c.enabled ? 1.0 : 0.0, e, true);
      if (c.setPoint) moveTrack(setPoint_[k], *c.setPoint, e, complete);
    }
  }
}

double PhysiologyModel::respiratoryLoss(double time, double pantingMultiplier) const {
  // No breathing without a respiratory segment, or while it is under water (a breath hold).
  if (respiratorySegment_ == none || environment_.immersed(respiratorySegment_, time)) return 0.0;
  // Inspired air: the air around the animal (the medium of the current interval, or the air above water).
  const bool air = environment_.medium() == SurroundingMedium::Air;
  const double inspired = environment_.value(air ? EnvironmentVariable::Temperature : EnvironmentVariable::AirTemperature, time);
  const double humidity = environment_.value(EnvironmentVariable::RelativeHumidity, time);
  const double metabolic = basalRate_ * activity_.at(time) * hypometabolism_.at(time);
  return respiratoryHeatLoss(metabolic, kVentilationPerWatt, case_.body.exhaledTemperature, inspired, humidity,
                             panting_.at(time) * pantingMultiplier)
      .total;
}

double PhysiologyModel::value(Index schedule, double time) const {
  const Schedule& s = schedules_[schedule];
  auto perfusion = [&] {
    double v = s.skin ? skin_[s.segment].at(time) : 1.0;
    return s.brain ? v : v * bradycardia_.at(time);
  };
  switch (s.kind) {
    case Kind::Perfusion: return perfusion();
    case Kind::PerfusionSuperficial: return perfusion() * superficial_[s.segment].at(time);
    case Kind::Shunt: return shunt_[s.segment].at(time);
    case Kind::Metabolism: return activity_.at(time) * hypometabolism_.at(time);
    case Kind::Respiration: return respiratoryLoss(time, 1.0);
    case Kind::ControlEnabled: return enabled_[s.controller].at(time);
    case Kind::ControlSetPoint: return setPoint_[s.controller].at(time);
  }
  return 1.0;
}

}  // namespace thermorph
