#include "models/environment_case.hpp"

#include "models/case_reader.hpp"

namespace thermorph {

EnvironmentSpec readEnvironment(const TableView& root) {
  TableView env = root.child("environment");
  EnvironmentSpec e;
  e.temperature = env.quantity("temperature");
  e.convectionCoefficient = env.quantity("convection");
  return e;
}

SurfaceSpec readSurface(const TableView& segment, Shape shape) {
  TableView surface = segment.child("surface");
  SurfaceSpec s;
  s.ends = surface.choice("ends") == "insulated" ? EndCondition::Insulated : EndCondition::Exposed;
  if (shape == Shape::Sphere && surface.has("ends")) surface.fail("ends", "a sphere has no end faces");
  s.convectionCoefficient = surface.optionalQuantity("convection");
  return s;
}

std::vector<EventSpec> readEvents(const CaseReader&, const TableView&, const toml::table&, double) { return {}; }

toml::table environmentToml(const EnvironmentSpec& e) {
  return toml::table{{"temperature", e.temperature}, {"convection", e.convectionCoefficient}};
}

toml::table surfaceToml(const SurfaceSpec& s, Shape shape) {
  toml::table surface;
  if (shape != Shape::Sphere) surface.insert("ends", s.ends == EndCondition::Insulated ? "insulated" : "exposed");
  if (s.convectionCoefficient) surface.insert("convection", *s.convectionCoefficient);
  return surface;
}

toml::array eventsToml(const std::vector<EventSpec>&) { return {}; }

}  // namespace thermorph
