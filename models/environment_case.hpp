#pragma once
//! Reading and writing the environment, surface and event parts of a case.
#include <toml++/toml.h>

#include "models/case.hpp"

namespace thermorph {

class CaseReader;
class TableView;

//! [environment] of the case root.
EnvironmentSpec readEnvironment(const TableView& root);
//! [segments.surface] of one segment (`segment` is the segment's table view; `shape` its shape).
SurfaceSpec readSurface(const TableView& segment, Shape shape);
//! [[events]] of the case root, sorted by time and checked against the run duration and the `segments` (the
//! segments an event's surface contact names).
std::vector<EventSpec> readEvents(const CaseReader& reader, const TableView& root, const toml::table& rootTable,
                                  double duration, const std::vector<SegmentSpec>& segments);

//! Resolved-case TOML of the same parts.
toml::table environmentToml(const EnvironmentSpec& environment);
toml::table surfaceToml(const SurfaceSpec& surface, Shape shape);
toml::array eventsToml(const std::vector<EventSpec>& events);

}  // namespace thermorph
