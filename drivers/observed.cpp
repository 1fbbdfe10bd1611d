//! Observed-data CSV files and the sampler that reads the same quantities from a run.
#include "drivers/observed.hpp"

#include <algorithm>
#include <cmath>
#include <ctime>
#include <fstream>
#include <limits>
#include <map>
#include <sstream>

#include <fmt/format.h>

#include "models/units.hpp"

namespace thermorph {
namespace {

constexpr double kelvinOffset = 273.15;
constexpr double nan = std::numeric_limits<double>::quiet_NaN();

std::string trim(const std::string& s) {
  std::size_t b = s.find_first_not_of(" \t\r\n\""), e = s.find_last_not_of(" \t\r\n\"");
  return b == std::string::npos ? std::string() : s.substr(b, e - b + 1);
}

std::vector<std::string> splitCsv(const std::string& line) {
  std::vector<std::string> out;
  std::stringstream ss(line);
  for (std::string cell; std::getline(ss, cell, ',');) out.push_back(trim(cell));
  if (!line.empty() && line.back() == ',') out.emplace_back();
  return out;
}

std::vector<std::string> splitDots(const std::string& s) {
  std::vector<std::string> out;
  std::stringstream ss(s);
  for (std::string part; std::getline(ss, part, '.');) out.push_back(part);
  return out;
}

//! "NAME [UNIT]" -> {NAME, UNIT}; no brackets: {NAME, ""}.
std::pair<std::string, std::string> nameUnit(const std::string& header) {
  auto open = header.find('[');
  if (open == std::string::npos) return {trim(header), ""};
  auto close = header.find(']', open);
  std::string unit = header.substr(open + 1, close == std::string::npos ? std::string::npos : close - open - 1);
  return {trim(header.substr(0, open)), trim(unit)};
}

//! Seconds since the epoch of "YYYY-MM-DDTHH:MM[:SS]" (UTC; a trailing Z is allowed); NaN when malformed.
double isoSeconds(const std::string& text) {
  std::tm tm{};
  int year = 0, month = 0, day = 0, hour = 0, minute = 0;
  double second = 0.0;
  char separator = 0;
  int n = std::sscanf(text.c_str(), "%d-%d-%d%c%d:%d:%lf", &year, &month, &day, &separator, &hour, &minute, &second);
  if (n < 6 || (separator != 'T' && separator != ' ') || month < 1 || month > 12 || day < 1 || day > 31 ||
      hour < 0 || hour > 23 || minute < 0 || minute > 59 || second < 0.0 || second >= 61.0)
    return nan;
  tm.tm_year = year - 1900;
  tm.tm_mon = month - 1;
  tm.tm_mday = day;
  tm.tm_hour = hour;
  tm.tm_min = minute;
  return static_cast<double>(timegm(&tm)) + second;
}

bool missing(const std::string& cell) {
  std::string lower = cell;
  std::transform(lower.begin(), lower.end(), lower.begin(), ::tolower);
  return lower.empty() || lower == "na" || lower == "nan";
}

const char* knownOutputs =
    "body.core_temperature, body.blood_temperature, body.mean_skin_temperature, body.metabolic_rate, "
    "body.heat_flow.CHANNEL, segments.NAME.mean_temperature, segments.NAME.heat_flow.CHANNEL, "
    "segments.NAME.temperature.LAYER@POSITION (LAYER: tissue name, layer index or coat; POSITION 0-1 along the "
    "length), segments.NAME.surface_temperature (area-weighted mean of the outer lateral surface) and "
    "segments.NAME.surface_temperature@POSITION";

}  // namespace

std::size_t ObservedData::observations() const {
  std::size_t n = 0;
  for (const ObservedSeries& s : series) n += s.values.size();
  return n;
}

ObservedQuantity parseObservedQuantity(const std::string& name, const std::string& where) {
  ObservedQuantity q;
  q.name = name;
  auto unknown = [&](const std::string& why) {
    return CaseError(fmt::format("{}: unknown output \"{}\"{}; known outputs: {}", where, name,
                                 why.empty() ? "" : " (" + why + ")", knownOutputs));
  };
  std::string base = name, at;
  if (auto p = name.find('@'); p != std::string::npos) {
    base = name.substr(0, p);
    at = name.substr(p + 1);
  }
  std::vector<std::string> parts = splitDots(base);
  using K = ObservedQuantity::Kind;
  if (parts.size() >= 2 && parts[0] == "body" && at.empty()) {
    if (parts.size() == 2 && parts[1] == "core_temperature") q.kind = K::Core;
    else if (parts.size() == 2 && parts[1] == "blood_temperature") q.kind = K::Blood;
    else if (parts.size() == 2 && parts[1] == "mean_skin_temperature") q.kind = K::MeanSkin;
    else if (parts.size() == 2 && parts[1] == "metabolic_rate") {
      q.kind = K::MetabolicRate;
      q.temperature = false;
    } else if (parts.size() == 3 && parts[1] == "heat_flow") {
      q.kind = K::BodyFlow;
      q.channel = parts[2];
      q.temperature = false;
    } else {
      throw unknown("");
    }
    return q;
  }
  if (parts.size() >= 3 && parts[0] == "segments") {
    q.segment = parts[1];
    if (parts.size() == 3 && parts[2] == "mean_temperature" && at.empty()) {
      q.kind = K::SegmentMean;
      return q;
    }
    if (parts.size() == 4 && parts[2] == "heat_flow" && at.empty()) {
      q.kind = K::SegmentFlow;
      q.channel = parts[3];
      q.temperature = false;
      return q;
    }
    if (parts.size() == 4 && parts[2] == "temperature") {
      if (at.empty()) throw unknown("a local temperature needs @POSITION, 0-1 along the length, e.g. @0.5");
      q.kind = K::SegmentLocal;
      q.layer = parts[3];
      char* end = nullptr;
      q.position = std::strtod(at.c_str(), &end);
      if (end == at.c_str() || *end != '\0' || !(q.position >= 0.0 && q.position <= 1.0))
        throw unknown(fmt::format("position \"{}\" is not a number from 0 to 1", at));
      return q;
    }
    if (parts.size() == 3 && parts[2] == "surface_temperature") {
      // The outer lateral surface (the coat's, if any): the area-weighted mean over the segment, or at @POSITION
      // (linear between the faces of the two axial cells whose centres bracket it).
      q.kind = K::SegmentSurface;
      q.position = -1.0;
      if (!at.empty()) {
        char* end = nullptr;
        q.position = std::strtod(at.c_str(), &end);
        if (end == at.c_str() || *end != '\0' || !(q.position >= 0.0 && q.position <= 1.0))
          throw unknown(fmt::format("position \"{}\" is not a number from 0 to 1", at));
      }
      return q;
    }
  }
  throw unknown("");
}

ObservedData readObservedCsv(const std::string& path, const ObservedOptions& options) {
  std::ifstream in(path);
  if (!in) throw CaseError(fmt::format("{}: cannot open the observed-data file", path));
  ObservedTable table;
  table.source = path;
  std::string line;
  int lineNumber = 0;
  int headerLine = 0;
  std::vector<int> lines;  // line of each row
  while (std::getline(in, line)) {
    ++lineNumber;
    std::string t = trim(line);
    if (t.empty() || t[0] == '#') continue;
    if (headerLine == 0) {
      table.header = splitCsv(line);
      headerLine = lineNumber;
    } else {
      table.rows.push_back(splitCsv(line));
      lines.push_back(lineNumber);
    }
  }
  if (table.header.empty())
    throw CaseError(fmt::format("{}: no header line (expected e.g. \"time [h], body.core_temperature [degC]\")", path));
  table.headerPlace = fmt::format(" (line {})", headerLine);
  table.where = [&](std::size_t row, std::size_t column) {
    const int ln = row == ObservedTable::header_row ? headerLine : lines[row];
    return column == ObservedTable::no_column ? fmt::format("{}:{}", path, ln)
                                              : fmt::format("{}:{}: column {}", path, ln, column + 1);
  };
  return readObservedTable(table, options);
}

ObservedData readObservedTable(const ObservedTable& table, const ObservedOptions& options) {
  ObservedData data;
  const std::string& path = table.source;
  const std::vector<std::string>& header = table.header;
  if (header.empty()) throw CaseError(fmt::format("{}: no columns (expected e.g. \"time [h]\", \"body.core_temperature [degC]\")", path));
  constexpr std::size_t headerLine = ObservedTable::header_row;
  auto at = [&](std::size_t row, std::size_t column) { return table.where(row, column); };
  auto columnNumber = [&](std::size_t c) {
    return c < table.columnNumbers.size() ? table.columnNumbers[c] : static_cast<int>(c + 1);
  };

  // The time column.
  auto [timeName, timeUnit] = nameUnit(header[0]);
  const bool iso = timeName == "datetime";
  if (timeName != "time" && !iso)
    throw CaseError(fmt::format("{}: the first column is \"{}\"; expected \"time [UNIT]\" (e.g. time [h]) or \"datetime\" "
                                "(ISO 8601)",
                                at(headerLine, 0), header[0]));
  double startEpoch = 0.0;
  if (iso) {
    if (options.startTime.empty())
      throw CaseError(fmt::format("{}: a datetime column needs the date-time of the run's start ({}, e.g. "
                                  "2026-06-01T06:00)",
                                  at(headerLine, 0), options.startOption));
    startEpoch = isoSeconds(options.startTime);
    if (std::isnan(startEpoch))
      throw CaseError(fmt::format("{} {}: not an ISO 8601 date-time (YYYY-MM-DDTHH:MM[:SS])", options.startOption,
                                  options.startTime));
  } else if (timeUnit.empty() || !unitConvertible(timeUnit, "s")) {
    throw CaseError(fmt::format("{}: \"{}\": the time needs a time unit in brackets, e.g. time [h]", at(headerLine, 0),
                                header[0]));
  }

  // Value columns and their sd columns.
  struct Column {
    std::size_t series = 0;
    bool sd = false;
    std::string unit;
  };
  std::vector<Column> columns(header.size());
  std::map<std::string, std::size_t> byName;
  std::vector<std::pair<std::size_t, std::string>> sdColumns;
  for (std::size_t c = 1; c < header.size(); ++c) {
    auto [name, unit] = nameUnit(header[c]);
    if (name.empty()) throw CaseError(fmt::format("{}: an empty column name", at(headerLine, c)));
    if (name.size() > 3 && name.ends_with(".sd")) {
      sdColumns.emplace_back(c, name.substr(0, name.size() - 3));
      columns[c].sd = true;
      columns[c].unit = unit;
      continue;
    }
    if (byName.count(name)) throw CaseError(fmt::format("{}: \"{}\" appears twice", at(headerLine, c), name));
    ObservedSeries s;
    s.file = path;
    s.column = columnNumber(c);
    s.quantity = parseObservedQuantity(name, at(headerLine, c));
    s.fileUnit = unit;
    const char* si = s.quantity.temperature ? "K" : "W";
    if (unit.empty() || !unitConvertible(unit, si))
      throw CaseError(fmt::format("{}: \"{}\": unit \"{}\" is not a {} (expected e.g. {})", at(headerLine, c), header[c],
                                  unit, s.quantity.temperature ? "temperature" : "power",
                                  s.quantity.temperature ? "[degC] or [K]" : "[W] or [mW]"));
    byName[name] = data.series.size();
    columns[c].series = data.series.size();
    columns[c].unit = unit;
    data.series.push_back(std::move(s));
  }
  for (auto& [c, name] : sdColumns) {
    auto it = byName.find(name);
    if (it == byName.end())
      throw CaseError(fmt::format("{}: \"{}\" is the standard deviation of \"{}\", which is not a column", at(headerLine, c),
                                  header[c], name));
    const char* si = data.series[it->second].quantity.temperature ? "K" : "W";
    if (columns[c].unit.empty() || !unitConvertible(columns[c].unit, si))
      throw CaseError(fmt::format("{}: \"{}\": unit \"{}\" is not a {}", at(headerLine, c), header[c], columns[c].unit,
                                  data.series[it->second].quantity.temperature ? "temperature difference" : "power"));
    columns[c].series = it->second;
    data.series[it->second].sdGiven = true;
  }
  if (data.series.empty()) throw CaseError(fmt::format("{}: no data columns after the time", at(headerLine, 0)));

  auto toModel = [](double v, const std::string& unit, bool temperature) {
    return temperature ? convertUnit(v, unit, "degC") : convertUnit(v, unit, "W");
  };
  auto differenceToModel = [](double v, const std::string& unit, bool temperature) {
    return temperature ? convertUnit(v, unit, "degC") - convertUnit(0.0, unit, "degC") : convertUnit(v, unit, "W");
  };
  std::vector<double> lastSd(data.series.size(), 1.0);
  double previousTime = -std::numeric_limits<double>::infinity();
  bool anyRow = false;
  for (std::size_t row = 0; row < table.rows.size(); ++row) {
    const std::vector<std::string>& cells = table.rows[row];
    if (cells.size() != header.size())
      throw CaseError(fmt::format("{}: {} cells; the header has {}", at(row, ObservedTable::no_column), cells.size(),
                                  header.size()));
    double time = nan;
    if (iso) {
      double epoch = isoSeconds(cells[0]);
      if (std::isnan(epoch))
        throw CaseError(fmt::format("{}: \"{}\" is not an ISO 8601 date-time", at(row, 0), cells[0]));
      time = epoch - startEpoch;
    } else {
      char* end = nullptr;
      double v = std::strtod(cells[0].c_str(), &end);
      if (cells[0].empty() || *end != '\0' || !std::isfinite(v))
        throw CaseError(fmt::format("{}: \"{}\" is not a number", at(row, 0), cells[0]));
      time = convertUnit(v, timeUnit, "s");
    }
    if (!(time > previousTime))
      throw CaseError(fmt::format("{}: time {:g} s is not after the previous row's", at(row, 0), time));
    previousTime = time;
    anyRow = true;
    // sd cells first (they apply to this row's values).
    for (auto& [c, name] : sdColumns) {
      if (missing(cells[c])) continue;
      char* end = nullptr;
      double v = std::strtod(cells[c].c_str(), &end);
      if (*end != '\0' || !(v > 0.0) || !std::isfinite(v))
        throw CaseError(fmt::format("{}: standard deviation \"{}\" must be a positive number", at(row, c), cells[c]));
      const ObservedSeries& s = data.series[columns[c].series];
      lastSd[columns[c].series] = differenceToModel(v, columns[c].unit, s.quantity.temperature);
    }
    for (std::size_t c = 1; c < header.size(); ++c) {
      if (columns[c].sd || missing(cells[c])) continue;
      char* end = nullptr;
      double v = std::strtod(cells[c].c_str(), &end);
      if (*end != '\0' || !std::isfinite(v))
        throw CaseError(fmt::format("{}: \"{}\" is not a number (leave the cell blank or write NA when missing)",
                                    at(row, c), cells[c]));
      ObservedSeries& s = data.series[columns[c].series];
      s.times.push_back(time);
      s.values.push_back(toModel(v, columns[c].unit, s.quantity.temperature));
      s.sd.push_back(lastSd[columns[c].series]);
    }
  }
  if (!anyRow) throw CaseError(fmt::format("{}: no data rows after the header{}", path, table.headerPlace));
  for (const ObservedSeries& s : data.series)
    if (s.values.empty())
      throw CaseError(fmt::format("{}: column {} \"{}\": every value is missing", path, s.column, s.quantity.name));
  return data;
}

void checkObserved(const ObservedData& data, const Body& body) {
  const Network& n = body.network();
  const double duration = body.spec().run.duration;
  for (const ObservedSeries& s : data.series) {
    const ObservedQuantity& q = s.quantity;
    const std::string where = fmt::format("{}: column {} \"{}\"", s.file, s.column, q.name);
    std::vector<std::string> names;
    const SegmentMesh* mesh = nullptr;
    for (const SegmentMesh& m : body.segments()) {
      names.push_back(m.name);
      if (m.name == q.segment) mesh = &m;
    }
    if (!q.segment.empty() && !mesh)
      throw CaseError(fmt::format("{}: no segment \"{}\" in the case (segments: {})", where, q.segment, fmt::join(names, ", ")));
    if (!q.channel.empty() && q.channel != "storage" &&
        std::find(n.channels.begin(), n.channels.end(), q.channel) == n.channels.end())
      throw CaseError(fmt::format("{}: no heat-flow channel \"{}\" in this case (channels: {}, storage)", where, q.channel,
                                  fmt::join(n.channels, ", ")));
    if (q.kind == ObservedQuantity::Kind::SegmentLocal) {
      bool ok = q.layer == "coat" && std::any_of(body.spec().segments.begin(), body.spec().segments.end(),
                                                 [&](const SegmentSpec& sp) { return sp.name == q.segment && sp.coat; });
      if (!ok)
        for (std::size_t l = 0; l < mesh->layerNames.size(); ++l)
          if (mesh->layerNames[l] == q.layer || fmt::format("{}", l) == q.layer) ok = true;
      if (!ok)
        throw CaseError(fmt::format("{}: segment {} has no layer \"{}\" (layers, inside out: {})", where, q.segment, q.layer,
                                    fmt::join(mesh->layerNames, ", ")));
    }
    for (std::size_t i = 0; i < s.times.size(); ++i)
      if (s.times[i] < 0.0 || s.times[i] > duration * (1.0 + 1e-12))
        throw CaseError(fmt::format("{}: an observation at t = {:g} s lies outside the run (0 to run.duration = {:g} s)",
                                    where, s.times[i], duration));
  }
}

namespace {

//! The axial cells a, b whose centres bracket the position z [m] and the linear-interpolation weight of b; clamped
//! to the end cells' centres. A value interpolated between two cell means converges at second order in the cell
//! size; the mean of the cell nearest z converges only at first order where the field has a gradient (the
//! nearest centre lies up to half a cell from z and moves when the grid is refined: on the example fit's ear,
//! at the edge of the shunts' distal half, 0.4 K at 2x and 1.05 K at 4x, where the interpolated value moved by
//! 0.02 K; cases/quadruped_fit.md, "Grid check").
struct AxialPoint {
  int a = 0, b = 0;
  double wb = 0.0;
};
AxialPoint axialPoint(const SegmentMesh& m, double z) {
  if (m.nz <= 1 || z <= m.axial.front()) return {0, 0, 0.0};
  if (z >= m.axial.back()) return {m.nz - 1, m.nz - 1, 0.0};
  int k = 0;
  while (k + 2 < m.nz && m.axial[static_cast<std::size_t>(k + 1)] < z) ++k;
  const double za = m.axial[static_cast<std::size_t>(k)], zb = m.axial[static_cast<std::size_t>(k + 1)];
  return {k, k + 1, (z - za) / (zb - za)};
}

double segmentLength(const Body& body, const SegmentMesh& m) {
  for (const SegmentSpec& sp : body.spec().segments)
    if (sp.name == m.name && sp.length > 0.0) return sp.length;
  return m.axial.empty() ? 0.0 : m.axial.back() + m.axial.front();  // uniform cells
}

}  // namespace

ObservationSampler::ObservationSampler(const ObservedData& data, const Body& body) : data_(data), body_(body) {
  checkObserved(data, body);
  const Network& n = body.network();
  for (const ObservedSeries& s : data.series) {
    Binding b;
    const ObservedQuantity& q = s.quantity;
    for (std::size_t g = 0; g < body.segments().size(); ++g)
      if (body.segments()[g].name == q.segment) b.segment = g;
    if (!q.channel.empty()) {
      b.channel = n.channels.size();
      for (std::size_t c = 0; c < n.channels.size(); ++c)
        if (n.channels[c] == q.channel) b.channel = c;
    }
    if (q.kind == ObservedQuantity::Kind::SegmentSurface) {
      const SegmentMesh& m = body.segments()[b.segment];
      if (q.position < 0.0) {
        for (int iz = 0; iz < m.nz; ++iz) {
          const Index face = m.lateralFace[static_cast<std::size_t>(iz)];
          b.nodes.push_back(face);
          b.weights.push_back(n.faces[face].area);
        }
      } else {
        // Linear between the surfaces of the two cells whose centres bracket the position (axialPoint).
        const AxialPoint at = axialPoint(m, q.position * segmentLength(body, m));
        b.nodes.push_back(m.lateralFace[static_cast<std::size_t>(at.a)]);
        b.weights.push_back(1.0 - at.wb);
        if (at.b != at.a) {
          b.nodes.push_back(m.lateralFace[static_cast<std::size_t>(at.b)]);
          b.weights.push_back(at.wb);
        }
      }
    }
    if (q.kind == ObservedQuantity::Kind::SegmentLocal) {
      const SegmentMesh& m = body.segments()[b.segment];
      int layer = -1;
      if (q.layer == "coat") layer = static_cast<int>(m.layerNames.size()) - 1;
      for (std::size_t l = 0; l < m.layerNames.size() && layer < 0; ++l)
        if (m.layerNames[l] == q.layer || fmt::format("{}", l) == q.layer) layer = static_cast<int>(l);
      // The layer's volume mean in the two axial cells whose centres bracket the position, interpolated linearly
      // (axialPoint): weights (1 - w) V_i / V_a and w V_i / V_b, summing to 1.
      const AxialPoint at = axialPoint(m, q.position * segmentLength(body, m));
      for (const auto& [iz, share] : {std::pair{at.a, 1.0 - at.wb}, std::pair{at.b, at.wb}}) {
        if (share <= 0.0 || (iz == at.b && at.b == at.a)) continue;
        double total = 0.0;
        for (int ir = 0; ir < m.nr; ++ir)
          if (m.layer[static_cast<std::size_t>(ir)] == layer) total += m.volume[static_cast<std::size_t>(iz * m.nr + ir)];
        for (int ir = 0; ir < m.nr; ++ir)
          if (m.layer[static_cast<std::size_t>(ir)] == layer) {
            b.nodes.push_back(m.node(iz, ir));
            b.weights.push_back(share * m.volume[static_cast<std::size_t>(iz * m.nr + ir)] / total);
          }
      }
    }
    bindings_.push_back(std::move(b));
  }
}

double ObservationSampler::value(std::size_t s, double time, std::span<const double> y, const RunSummary& summary) const {
  using K = ObservedQuantity::Kind;
  const ObservedQuantity& q = data_.series[s].quantity;
  const Binding& b = bindings_[s];
  const Network& n = body_.network();
  const std::size_t channels = n.channels.size();
  // Whole-body flow of channel c (storage for c == channels): weighted sum over every group, as the results file.
  auto bodyFlow = [&](std::size_t c) {
    double total = 0.0;
    for (std::size_t g = 0; g < n.groups.size(); ++g)
      total += n.groupWeights[g] * (c == channels ? summary.storage[g] : summary.flows[g * channels + c]);
    return total;
  };
  switch (q.kind) {
    case K::Core: {
      const SegmentMesh& core = body_.segments()[body_.coreSegment()];
      double sum = 0.0, volume = 0.0;
      for (int iz = 0; iz < core.nz; ++iz)
        for (int ir = 0; ir < core.innermostLayerCells; ++ir) {
          double v = core.volume[static_cast<std::size_t>(iz * core.nr + ir)];
          sum += v * y[core.node(iz, ir)];
          volume += v;
        }
      return sum / volume - kelvinOffset;
    }
    case K::Blood:
      if (body_.poolNode()) return y[*body_.poolNode()] - kelvinOffset;
      return body_.spec().circulation.fixedArterialTemperature.value_or(nan) - kelvinOffset;
    case K::MeanSkin: {
      double skin = 0.0, area = 0.0;
      for (const SegmentMesh& m : body_.segments())
        for (int iz = 0; iz < m.nz; ++iz) {
          double a = m.weight * n.faces[m.lateralFace[static_cast<std::size_t>(iz)]].area;
          skin += a * m.skinAt(iz, y);
          area += a;
        }
      return skin / area - kelvinOffset;
    }
    case K::MetabolicRate: {
      double total = 0.0;
      for (std::size_t c = 0; c < channels; ++c)
        if (n.channels[c] == "metabolism" || n.channels[c] == "shivering") total += bodyFlow(c);
      return total;
    }
    case K::BodyFlow:
      return bodyFlow(b.channel);
    case K::SegmentMean: {
      const SegmentMesh& m = body_.segments()[b.segment];
      double weighted = 0.0, volume = 0.0;
      for (int iz = 0; iz < m.nz; ++iz)
        for (int ir = 0; ir <= m.skinCell; ++ir) {
          double v = m.volume[static_cast<std::size_t>(iz * m.nr + ir)];
          weighted += v * y[m.node(iz, ir)];
          volume += v;
        }
      return weighted / volume - kelvinOffset;
    }
    case K::SegmentFlow:
      return b.channel == channels ? summary.storage[b.segment] : summary.flows[b.segment * channels + b.channel];
    case K::SegmentSurface: {
      // Face temperatures as the assembly solves them: G (T_n - T_s) + q(T_s, t) = 0 by Newton's method (G at time
      // t: a drying coat's follows its wetness).
      n.coefficientsAt(time);
      double weighted = 0.0, area = 0.0;
      std::vector<double> heat(channels), slope(channels), ignored(channels);
      for (std::size_t i = 0; i < b.nodes.size(); ++i) {
        const SurfaceFace& f = n.faces[b.nodes[i]];
        const double tn = y[f.node];
        double ts = tn;
        bool converged = false;
        for (int iteration = 0; iteration < 60 && !converged; ++iteration) {
          std::fill(heat.begin(), heat.end(), 0.0);
          std::fill(slope.begin(), slope.end(), 0.0);
          // A face of a segment that sweats evaporates over sweating's wetted fraction at the output's state.
          const Index sweat = body_.sweatingControl();
          if (sweat != none && sweat < summary.controls.size() &&
              body_.environment().sweats(body_.environment().face(b.nodes[i]).segment))
            n.surface->controlledFaceHeat(b.nodes[i], ts, time, summary.controls[sweat], heat, slope, ignored);
          else
            n.surface->faceHeat(b.nodes[i], ts, time, heat, slope);
          double total = 0.0, dq = 0.0;
          for (std::size_t c = 0; c < channels; ++c) {
            total += heat[c];
            dq += slope[c];
          }
          const double step = (f.halfConductance * (tn - ts) + total) / (f.halfConductance - dq);
          ts += step;
          converged = std::abs(step) < 1e-11 * (1.0 + std::abs(ts));
        }
        if (!converged) return nan;
        weighted += b.weights[i] * ts;
        area += b.weights[i];
      }
      return weighted / area - kelvinOffset;
    }
    case K::SegmentLocal: {
      double weighted = 0.0, volume = 0.0;
      for (std::size_t i = 0; i < b.nodes.size(); ++i) {
        weighted += b.weights[i] * y[b.nodes[i]];
        volume += b.weights[i];
      }
      return weighted / volume - kelvinOffset;
    }
  }
  return nan;
}

std::vector<double> ObservationSampler::timesBetweenOutputs(const ObservedData& data, const RunSpec& run) {
  std::vector<double> out;
  for (const ObservedSeries& s : data.series)
    for (double t : s.times) {
      if (!(t > 0.0) || !(t < run.duration)) continue;
      const double k = std::round(t / run.outputInterval);
      if (std::abs(t - k * run.outputInterval) <= 1e-9 * std::max(1.0, t)) continue;
      out.push_back(t);
    }
  std::sort(out.begin(), out.end());
  out.erase(std::unique(out.begin(), out.end()), out.end());
  return out;
}

void ObservationSampler::observe(double time, std::span<const double> temperatures, const RunSummary& summary) {
  std::vector<double> row(data_.series.size());
  for (std::size_t s = 0; s < row.size(); ++s) row[s] = value(s, time, temperatures, summary);
  if (!times_.empty() && time == times_.back()) {  // a repeated output time (a restart): keep the latest
    samples_.back() = std::move(row);
    return;
  }
  times_.push_back(time);
  samples_.push_back(std::move(row));
}

std::vector<double> ObservationSampler::outputSeries(std::size_t s) const {
  std::vector<double> out;
  for (const std::vector<double>& row : samples_) out.push_back(row[s]);
  return out;
}

std::vector<double> ObservationSampler::predictions() const {
  std::vector<double> out;
  for (std::size_t s = 0; s < data_.series.size(); ++s)
    for (double t : data_.series[s].times) {
      auto it = std::lower_bound(times_.begin(), times_.end(), t);
      if (it == times_.end()) {
        // Within round-off of the end of the run.
        out.push_back(times_.empty() ? nan : samples_.back()[s]);
        continue;
      }
      const std::size_t k = static_cast<std::size_t>(it - times_.begin());
      if (*it == t || k == 0) {
        out.push_back(samples_[k][s]);
        continue;
      }
      const double t0 = times_[k - 1], t1 = times_[k];
      const double v0 = samples_[k - 1][s], v1 = samples_[k][s];
      out.push_back(v0 + (v1 - v0) * (t - t0) / (t1 - t0));
    }
  return out;
}

}  // namespace thermorph
