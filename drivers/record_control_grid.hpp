#pragma once
//! Grid error of controller outputs, estimated after the run from the run's own numbers (README "Grid").
//!
//! The automatic grid (models/grid.cpp) bounds the estimated error eps of each segment's heat flows. A controller
//! output u = clamp(bias + g (T_s - set point)) that balances a heat flow carries that error magnified: a grid error
//! eps L in the heat balance L of the controller's scope moves the signal T_s by about
//!     dT_s = eps L / K,   K = sum_j |g_j| dQ/du_j = sum_j |g_j| H_j / |u_j|,
//! the loop's stiffness: every unclamped output j on the same signal, H_j the heat its modulated terms carry
//! (shivering power, the heat of the blood through the shunts or the skin perfusion it scales; each term is linear
//! in u_j, so u_j dQ/du_j = H_j; sweating's: the evaporation of its segments' faces, linear in the wetted fraction
//! w = w_0 + u, so u dQ/du = Q_evaporation u / w, the share sweating adds). The output then moves by |g| dT_s, a
//! relative error of
//!     e_u = |g| eps L / (K max(|u|, 0.05 (upper - lower))).
//! With one output on the signal this is eps L / H: the shivering that balances five times its power carries five
//! times the heat flows' error. The body's own passive stiffness (a warmer body loses more) is left out, so e_u is
//! an upper estimate (measured on the examples: README "Grid"; tests/test_control_grid.cpp against a lumped body
//! solved exactly). eps is the largest estimated error of any segment's heat flows (models/grid.hpp
//! segmentGridError) plus 2.5 times that of the layers the signal reads (their cell means; calibrated in the .cpp); L the heat lost to the surroundings (convection, radiation, evaporation, substrate,
//! respiration, not the blood or conduction between segments) by the scope: the whole body when the signal reads
//! the core segment (core temperature, mean skin), else the segments whose skin the signal reads.
//!
//! In a transient run two things change that picture (measured on cases/cold_feet_demo.toml against its 4x grid,
//! DEVELOPERS.md "Controller outputs' grid error over time"):
//!   * the heat-flow error eps L has to be stored before it moves the signal: from a start at a uniform
//!     temperature the quasi-static shift is capped by what it can have stored, int eps L dt / C, C the heat
//!     capacity of the scope (a run from a steady state, or a steady run, starts with it in full);
//!   * the storage transient: after a start from a uniform temperature (or a step of the surroundings) the cells
//!     near the surface, and the coat's, release their heat late or early; the heat Q_g(t) each segment g has lost
//!     to its surroundings since the start is off by E_g(t) (models/grid.hpp storageTransientError, the
//!     penetration rule at time t, coat included), so the scope's stored heat by sum_g E_g Q_g, and the signal by
//!     that over C.
//! After a steady start the signal starts with its quasi-static shift s_0 and can move from it only by what the
//! change of the heat-flow error stores, int eps |L - L_0| dt / C: the shift is capped by s_0 plus that (found in a
//! new-user trial: a swimmer's shunts were warned of at 140 % at the output on the instant it entered 6 degC water,
//! where the body loses 791 W but no signal has moved yet; 9 % with the cap, a minute later). A step of the timeline
//! between two outputs counts from its own time: the last output's |L - L_0| up to it, the next one's after it.
//! The output's error is |g| (min(dT_s, int eps L dt / C) + sum_g E_g Q_g / C) / max(|u|, floor); the warning
//! names the layer that carries the storage term and the radial cells that would bring it below half the limit.
//!
//! Checked at every output where the output's target is inside its limits (a clamped output carries no grid
//! error of its own); the largest estimate of each controller above max(1 %, run.grid_tolerance) becomes a
//! warning of the run (stored with the others in result files and sweep rows) naming the tolerance that meets it.
#include <span>
#include <string>
#include <vector>

#include "models/body.hpp"
#include "models/grid.hpp"
#include "solver/assembly.hpp"

namespace thermorph {

class ControlGridWatch {
 public:
  //! `steady`: the states observed are steady states (a steady run; also a system in Steady mode).
  ControlGridWatch(const Body& body, const NetworkSystem& system, bool steady = false);
  //! The states observed are steady states (runSteady): the quasi-static shift applies in full, no storage term.
  void setSteady() { steady_ = true; }

  //! True when some controller drives a term (only then are heat flows needed).
  bool active() const { return !controllers_.empty(); }
  //! The run's first output time (observe() calls it too): the start of the stored shift and of the storage term.
  void start(double t);
  //! State y (nodes, controls, ...) at time t [s]; `flows` [groups x channels] [W] as RunSummary::flows.
  void observe(double t, std::span<const double> y, std::span<const double> flows);
  //! The same at an output without flows (a transient sweep's): the watch computes the ones it reads, the channels
  //! to the surroundings (NetworkSystem::channelFlows: the values groupFlows gives them, bit for bit, without the
  //! internal channels' terms and the storage), and of those neither the gain-only channels (gainOnlyChannels) nor,
  //! where flowsNeeded(t) is false, any: the estimates are those of observe(t, y, flows) bit for bit.
  void observe(double t, std::span<const double> y);
  //! Per channel: to the surroundings and booked only by sources of power >= 0 (metabolism, shivering), 1. Their
  //! loss max(0, -flow) is 0 whatever the flow, so observe(t, y) leaves them out of the flows it computes where
  //! every such source's power and modulator are >= 0 at that output. Found at the first observe(t, y) (empty
  //! before).
  const std::vector<char>& gainOnlyChannels() const { return gainOnly_; }
  //! Whether observe(t, y) computes flows at time t: always from a uniform start (the storage term integrates every
  //! output's losses); after a steady start only while some controller is enabled (a disabled one balances nothing,
  //! and the storage term is not formed). Without them the check is the same bit for bit.
  bool flowsNeeded(double t) const;

  //! The largest estimate of one controller over the observed outputs.
  struct Estimate {
    std::string controller;
    bool observed = false;       //!< unclamped at some output with heat to balance
    double time = 0.0;           //!< [s] of the largest estimate
    double output = 0.0;         //!< u there [1]
    double balanced = 0.0;       //!< L, heat lost by its scope [W]
    double carried = 0.0;        //!< H, heat its output carries [W]
    double magnification = 0.0;  //!< e_u / eps [1], quasi-static
    bool capped = false;         //!< the signal's shift was capped by the heat stored (uniform or steady start)
    double gridError = 0.0;      //!< eps [1]
    double error = 0.0;          //!< e_u, estimated relative error of the output [1]
    double storageError = 0.0;   //!< the part of e_u from the storage transient [1]
    std::size_t segment = 0;     //!< the segment whose layer carries most of storageError
    std::size_t layer = 0;       //!< that layer (the coat: the segment's layer count)
    int cells = 0;               //!< its radial cells
    int cellsNeeded = 0;         //!< radial cells that bring storageError below half of limit() (0: not needed)
  };
  const std::vector<Estimate>& estimates() const { return worst_; }
  //! Relative error above which a warning is issued: max(kGridWarnError, run.grid_tolerance).
  double limit() const { return limit_; }
  //! One warning per controller whose estimate exceeds limit().
  std::vector<std::string> warnings() const;

 private:
  struct Term {
    //! Evaporation: sweating's faces of one segment (Network::faceControls), `term` the segment's group.
    enum Kind { Advection, Exchange, Source, Evaporation } kind;
    Index term = 0;      //!< index in its network vector (Evaporation: the group)
    Index part = none;   //!< flow part (advection, exchange; Network::part) or none (source, an advection's inline part)
    int hop = 0;         //!< hop of the advection (0, or 1 for the second of a stream through a node)
  };
  struct Watched {
    Index control = 0;             //!< controller driving the terms
    Index head = 0;                //!< first controller of a chain (its signal and gain)
    std::vector<Term> terms;
    std::vector<char> scope;       //!< per group: in the scope
    std::string scopeName;
    std::size_t loop = 0;          //!< index of its signal group
    double signalError = 0.0;      //!< estimated error of the signal's reading (layer means), magnified
    double capacity = 0.0;         //!< heat capacity of the scope, copies weighted [J/K]
    double stored = 0.0;           //!< int eps L dt / C so far [K]
    double lastSource = -1.0;      //!< eps L at the last observation [W] (-1: none yet)
    // A steady start: the shift it starts with, then only what the change of the heat-flow error can store.
    double startLoss = -1.0;       //!< L at the first observation [W] (-1: none yet)
    double changeStored = 0.0;     //!< int eps |L - L_0| dt / C so far [K]
    double lastChange = -1.0;      //!< eps |L - L_0| at the last observation [W]
    double startShift = -1.0;      //!< quasi-static shift when the output was first unclamped [K] (-1: not yet)
  };
  double effectiveGain(const Watched& w) const;
  //! The controller (its chain's head) is enabled at time t (Controller::enableSchedule).
  bool enabled(const Watched& w, double t) const;
  //! observe() once the flows are there (none: flowsNeeded(t) was false); `modulatorsKnown`: modulators_ holds the
  //! values at (t, y) already.
  void observeFlows(double t, std::span<const double> y, std::span<const double> flows, bool modulatorsKnown = false);

  const Body& body_;
  const NetworkSystem& system_;
  std::vector<Watched> controllers_;
  std::vector<Estimate> worst_;
  std::vector<double> modulators_;
  std::vector<char> external_;   //!< per channel: to the surroundings (not blood, conduction or tucking), 1
  Index evaporation_ = none;     //!< the evaporation channel (sweating's terms), none without one
  std::vector<double> flows_;    //!< observe(t, y)'s flows [groups x channels] [W]
  std::vector<char> gainOnly_;   //!< per channel: to the surroundings, only sources of power >= 0 book to it, 1
  std::vector<char> mask_;       //!< external_ without the gain-only channels
  bool gainChannels_ = false;    //!< some channel is gain-only
  bool gainScanned_ = false;     //!< gainOnly_ and mask_ found (findGainChannels)
  //! The gain-only channels of the network: gainOnly_, mask_, gainChannels_.
  void findGainChannels();
  std::vector<SegmentGridEstimate> estimates_;  //!< the case's (Case::gridEstimates) or a new estimate
  std::vector<double> exchanged_; //!< per group: heat lost to the surroundings since the start, one copy [J]
  std::vector<double> lastLoss_;  //!< per group: that loss at the last observation [W] (-1: none yet)
  double start_ = 0.0, last_ = 0.0;
  bool started_ = false;
  bool steady_ = false;
  double gridError_ = 0.0;
  double tolerance_ = 0.01;
  double limit_ = 0.01;
};

}  // namespace thermorph
