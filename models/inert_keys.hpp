#pragma once
//! Case keys that have no effect in the case as written: the air's values when every segment is in water for the
//! whole run, the water's when none ever is, the parameters of a controller that is off throughout, surface keys of
//! a segment in water throughout, and the like. The loader warns of those the user gave (Case::given); the resolved
//! case leaves out those the user did not give (so that re-running it does not warn of them); sweeps, fits,
//! sensitivity and uncertainty runs refuse a parameter with no effect (exit 2).
#include <array>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "models/case.hpp"

namespace thermorph {

class InertKeys {
 public:
  //! Works from the loaded case only (the same answers for a case and its resolved text). `steady`: each run's steady
  //! state is asked for (a steady sweep), not a transient run, so the [run] keys of the integration over time have no
  //! effect either. They are refused as its parameters, never warned of: a case serves `run` and `steady` alike, and
  //! the loader does not know the command.
  explicit InertKeys(const Case& c, bool steady = false);

  //! Why `path` (a key path as --set writes it; events and weather columns as "events.N.environment.KEY" and
  //! "environment.weather.KEY") has no effect in the case, or nullopt when it may have one.
  std::optional<std::string> reason(const std::string& path) const;
  //! Why an environment variable has no effect anywhere in the run ([environment], [[events]], weather rows).
  const std::optional<std::string>& variable(EnvironmentVariable v) const {
    return variables_[static_cast<std::size_t>(v)];
  }
  //! One warning per inert key the case gives: "FILE:LINE:COLUMN: KEY has no effect: WHY" (an environment value
  //! given by several [[events]] entries or weather rows once, naming the first and how many).
  std::vector<std::string> warnings() const;

 private:
  void environment();
  void surfaces();
  void controllers();
  void vasomotor();
  void metabolism();
  void grids();
  void others();
  //! A controller of the vasomotor form (body-wide or local) whose gains leave some of its keys without effect.
  void vasomotorGains(const std::string& name, const std::string& table, double gain, double shuntGain, bool shunts,
                      bool enabled, const std::string& noShunts);
  //! The controller is off at some time of the run (`enabled` = off, or an [[events]] entry switches it off).
  bool everOff(const std::string& controller, bool enabled) const;
  void add(const std::string& path, std::string why) { reasons_.emplace(path, std::move(why)); }
  //! The entry of `path` or of the nearest table above it, or reasons_.end().
  std::map<std::string, std::string>::const_iterator find(const std::string& path) const;

  const Case& case_;
  bool steady_ = false;
  std::array<std::optional<std::string>, kEnvironmentVariables> variables_;
  std::map<std::string, std::string> reasons_;  //!< key path -> why (keys outside [[events]] and weather rows)
  //! controller name -> why its set point has no effect (off throughout, or outputs independent of the signal): the
  //! [[events]] entries' set_point of that controller
  std::map<std::string, std::string> setPointInert_;
  std::vector<bool> neverInAir_, everInWater_;  //!< per segment
  std::vector<double> emissivity_;              //!< per segment, defaults resolved (EnvironmentModel::emissivity)
};

}  // namespace thermorph
