#include "drivers/record_environment.hpp"

#include <algorithm>

#include <fmt/format.h>

namespace thermorph {
namespace {

//! /events: start, end [s] and label of every labelled event, for shading in figures.
void writeEvents(ResultsFile& f, const Case& c) {
  // Labelled events only: weather-file rows and unlabelled changes are not intervals to shade.
  std::vector<double> start, end;
  std::vector<std::string> labels;
  for (const EventSpec& e : c.events) {
    if (e.label.empty()) continue;
    start.push_back(e.at);
    end.push_back(std::min(e.at + e.span, c.run.duration));
    labels.push_back(e.label);
  }
  if (labels.empty()) return;
  // The labels are the events' coordinate (netCDF dimension `label`).
  f.writeStringArray("/events/label", labels);
  f.makeCoordinate("/events/label");
  f.writeArray("/events/start", start, {start.size()}, "s", "start of the event since the start of the run");
  f.writeArray("/events/end", end, {end.size()}, "s", "end of the event since the start of the run");
  f.attachDimensions("/events/start", {"label"});
  f.attachDimensions("/events/end", {"label"});
}

}  // namespace

EnvironmentRecorder::EnvironmentRecorder(ResultsFile& f, const Body& body) : body_(body) {
  writeEvents(f, body.spec());
  for (const Controller& c : body.network().controllers) {
    control_.push_back(f.createSeries("/control/" + c.name, {}, "1", "state of controller " + c.name));
    f.setAttribute("/control/" + c.name, "definition",
                   fmt::format("controller state (multiplier or open fraction), limits {:g} to {:g}", c.lower, c.upper));
  }
  for (const EnvironmentSeries& e : body.environment().series()) {
    std::string words = e.name;
    std::replace(words.begin(), words.end(), '_', ' ');
    environment_.push_back(f.createSeries("/environment/" + e.name, {}, e.units, words));
  }
  for (const SegmentMesh& m : body.segments())
    convection_.push_back(f.createSeries("/segments/" + m.name + "/convection_coefficient", {}, "W m-2 K-1",
                                         "mean convection coefficient over the exposed surface"));
  for (const SegmentMesh& m : body.segments()) {
    contact_.push_back(f.createSeries("/segments/" + m.name + "/contact_fraction", {}, "1",
                                      "share of the surface touching the substrate"));
    f.setAttribute("/segments/" + m.name + "/contact_fraction", "definition",
                   "surface.contact_fraction, stepped by [[events]] surface entries; the value of the interval "
                   "that follows an output at a step");
    inWater_.push_back(f.createSeries("/segments/" + m.name + "/in_water", {}, "1",
                                      "1 while the segment is in water, 0 while in air"));
    f.setAttribute("/segments/" + m.name + "/in_water", "definition",
                   "fluid around the segment: the medium (changed by events) unless surface.immersion is always "
                   "(water) or never (air); the value of the interval that follows an output at a step");
  }
  // Segments whose wetted fraction an event changes or that sweat only (a file of a case without such events or
  // [control.sweating] is unchanged).
  for (Index g = 0; g < body.segments().size(); ++g) {
    const bool sweats = body.sweatingControl() != none && body.environment().sweats(g);
    if (!body.environment().wetChanges(g) && !sweats) continue;
    const std::string path = "/segments/" + body.segments()[g].name + "/wetted_fraction";
    wetted_.emplace_back(g, f.createSeries(path, {}, "1", "share of the exposed surface that is wet"));
    f.setAttribute(path, "definition",
                   sweats ? "surface.wetted_fraction (stepped or ramped by [[events]] surface entries) plus "
                            "sweating's state /control/sweating, at most control.sweating.max"
                          : "surface.wetted_fraction, stepped or ramped by [[events]] surface entries; after a step at "
                            "an output, the value that follows it");
  }
  // Tucked segments only (a file of a case without tucking is unchanged).
  for (const Body::Tucking& t : body.tucking()) {
    const std::string path = "/segments/" + body.segments()[t.guest].name + "/tucked_fraction";
    tucked_.emplace_back(t.guest, f.createSeries(path, {}, "1", "share of the lateral surface tucked into " +
                                                                    body.segments()[t.host].name));
    f.setAttribute(path, "definition",
                   "surface.tucked_fraction, stepped by [[events]] surface entries; the value of the interval that "
                   "follows an output at a step");
  }
}

void EnvironmentRecorder::write(ResultsFile& f, double t, std::span<const double> controls,
                                std::span<const double> faceTemperatures) {
  for (std::size_t k = 0; k < control_.size(); ++k) f.append(control_[k], {&controls[k], 1});
  values_.resize(environment_.size());
  body_.environment().seriesValues(t, values_);
  for (std::size_t e = 0; e < environment_.size(); ++e) f.append(environment_[e], {&values_[e], 1});
  for (Index g = 0; g < convection_.size(); ++g) {
    double h = body_.environment().meanConvectionCoefficient(g, t, faceTemperatures);
    f.append(convection_[g], {&h, 1});
    const double contact = body_.environment().contactFraction(g);
    const double wet = body_.environment().immersed(g, t) ? 1.0 : 0.0;
    f.append(contact_[g], {&contact, 1});
    f.append(inWater_[g], {&wet, 1});
  }
  for (auto [g, series] : wetted_) {
    const double wetted = body_.wettedFraction(g, t, controls);
    f.append(series, {&wetted, 1});
  }
  for (auto [g, series] : tucked_) {
    const double tucked = body_.environment().tuckedFraction(g);
    f.append(series, {&tucked, 1});
  }
}

}  // namespace thermorph
