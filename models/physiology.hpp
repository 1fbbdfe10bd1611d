#pragma once
//! Physiological state over time: vasomotor, metabolic, circulatory and respiratory multipliers and controller
//! switches from the case and its [[events]] (steps or linear ramps), as schedules for the network's modulators.
#include <array>
#include <string>
#include <vector>

#include "models/case.hpp"
#include "models/environment.hpp"
#include "network/network.hpp"

namespace thermorph {

class PhysiologyModel : public ScheduleModel {
 public:
  enum class Kind {
    Perfusion,             //!< tissue perfusion factor of a layer: skin multiplier (skin) x bradycardia (not brain)
    PerfusionSuperficial,  //!< the same x superficial return
    Shunt,                 //!< open fraction of a segment's shunts
    Metabolism,            //!< activity x hypometabolism
    Respiration,           //!< respiratory heat loss of the whole body [W] (ventilation at the metabolic rate)
    ControlEnabled,        //!< 1 on, 0 off
    ControlSetPoint,       //!< [K]
  };
  struct Schedule {
    Kind kind;
    Index segment = 0;
    bool skin = false;
    bool brain = false;  //!< spared by bradycardia (brain by default; see [circulation] bradycardia_tissues)
    Index controller = 0;  //!< 0 vasomotor, 1 shivering, 2 panting, 3 + i: case.control.local[i], then sweating
  };
  //! The controller index of [control.sweating] (Schedule::controller): after the local controllers.
  static Index sweatingController(const Case& c) { return 3 + c.control.local.size(); }

  //! `respiratorySegment`: the segment that breathes (none: no respiration).
  PhysiologyModel(const Case& c, const EnvironmentModel& environment, double basalRate, Index respiratorySegment);

  Index add(const Schedule& schedule);
  double value(Index schedule, double time) const override;
  //! Same interval convention as EnvironmentModel (breakpoints of the shared [[events]] list).
  void setInterval(std::size_t interval);

  //! Respiratory heat loss at time t with ventilation multiplier `panting` [W] (positive = lost).
  double respiratoryLoss(double time, double pantingMultiplier) const;

 private:
  //! A piecewise-linear track: value = offset + slope t in the current interval.
  struct Track {
    double initial = 1.0, offset = 1.0, slope = 0.0;
    double at(double t) const { return offset + slope * t; }
  };
  void moveTrack(Track& track, double target, const EventSpec& e, bool complete);

  const Case& case_;
  const EnvironmentModel& environment_;
  double basalRate_;
  Index respiratorySegment_;
  std::vector<Schedule> schedules_;
  std::vector<Track> skin_, shunt_, superficial_;  //!< per segment
  Track activity_, hypometabolism_, bradycardia_, panting_;
  std::vector<Track> enabled_, setPoint_;  //!< per controller (see Schedule::controller)
  std::vector<double> breakpoints_;
};

}  // namespace thermorph
