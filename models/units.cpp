#include "models/units.hpp"

#include <udunits2.h>

#include <cctype>
#include <charconv>
#include <map>
#include <memory>
#include <mutex>
#include <string>
#include <utility>

#include <fmt/format.h>

namespace thermorph {
namespace {

// udunits2 keeps global state and is not thread safe: one system, one lock.
std::mutex unitMutex;

ut_system* unitSystem() {
  static ut_system* system = [] {
    ut_set_error_message_handler(ut_ignore);
    ut_system* s = ut_read_xml(nullptr);
    if (!s) throw UnitError("udunits2: cannot read the unit database (package libudunits2-data)");
    return s;
  }();
  return system;
}

struct UnitFree {
  void operator()(ut_unit* u) const { ut_free(u); }
};
using UnitPtr = std::unique_ptr<ut_unit, UnitFree>;

UnitPtr parseUnit(std::string_view text) {
  std::string s(text);
  // Accept the udunits-style "W m-2 K-1" and the common "W/(m2 K)" alike; "°C" as degC.
  if (s == "°C" || s == "C" || s == "celsius") s = "degC";
  return UnitPtr(ut_parse(unitSystem(), ut_trim(s.data(), UT_UTF8), UT_UTF8));
}

}  // namespace

std::string quantityName(std::string_view siUnit) {
  static const std::map<std::string, std::string, std::less<>> names = {
      {"m", "length"},
      {"m2", "area"},
      {"m3", "volume"},
      {"kg", "mass"},
      {"s", "time"},
      {"K", "temperature"},
      {"W", "power"},
      {"J", "energy"},
      {"W/m3", "volumetric heat rate"},
      {"W/m2", "irradiance or heat flux"},
      {"W/(m K)", "thermal conductivity"},
      {"W/(m2 K)", "heat transfer coefficient"},
      {"W/K", "thermal conductance"},
      {"J/(kg K)", "specific heat"},
      {"kg/m3", "density"},
      {"1/s", "perfusion rate"},
      {"m/s", "speed"},
      {"m3/s", "volume flow"},
      {"1", "dimensionless number"},
  };
  auto it = names.find(siUnit);
  return it == names.end() ? std::string(siUnit) : it->second;
}

bool unitConvertible(std::string_view unit, std::string_view siUnit) {
  std::lock_guard lock(unitMutex);
  UnitPtr from = parseUnit(unit);
  UnitPtr to = parseUnit(siUnit);
  return from && to && ut_are_convertible(from.get(), to.get());
}

double convertUnit(double value, std::string_view unit, std::string_view siUnit) {
  std::lock_guard lock(unitMutex);
  // udunits2's converter of each (unit, SI unit) pair is kept for the process: a case and the schema's defaults
  // name few distinct units, and parsing them again for every value (and every run of a sweep) cost more than
  // the conversions. The same converter converts, so the values are the same.
  struct ConverterFree {
    void operator()(cv_converter* c) const { cv_free(c); }
  };
  static std::map<std::pair<std::string, std::string>, std::unique_ptr<cv_converter, ConverterFree>, std::less<>>
      converters;
  std::pair<std::string, std::string> key{std::string(unit), std::string(siUnit)};
  auto it = converters.find(key);
  if (it == converters.end()) {
    UnitPtr from = parseUnit(unit);
    if (!from) throw UnitError(fmt::format("\"{}\" is not a unit udunits2 understands", unit));
    UnitPtr to = parseUnit(siUnit);
    if (!to) throw UnitError(fmt::format("internal: bad SI unit \"{}\"", siUnit));
    if (!ut_are_convertible(from.get(), to.get()))
      throw UnitError(fmt::format("unit \"{}\" is not a {} (not convertible to {})", unit, quantityName(siUnit),
                                  siUnit));
    cv_converter* converter = ut_get_converter(from.get(), to.get());
    if (!converter) throw UnitError(fmt::format("udunits2: no converter from \"{}\" to {}", unit, siUnit));
    it = converters.emplace(std::move(key), converter).first;
  }
  return cv_convert_double(it->second.get(), value);
}

ValueWithUnit splitValueUnit(std::string_view text) {
  std::size_t begin = 0;
  while (begin < text.size() && std::isspace(static_cast<unsigned char>(text[begin]))) ++begin;
  ValueWithUnit out;
  const char* first = text.data() + begin;
  const char* last = text.data() + text.size();
  auto [ptr, ec] = std::from_chars(first, last, out.value);
  if (ec != std::errc() || ptr == first)
    throw UnitError(fmt::format("\"{}\" does not start with a number (write e.g. \"4 cm\")", text));
  std::string_view rest(ptr, static_cast<std::size_t>(last - ptr));
  while (!rest.empty() && std::isspace(static_cast<unsigned char>(rest.front()))) rest.remove_prefix(1);
  while (!rest.empty() && std::isspace(static_cast<unsigned char>(rest.back()))) rest.remove_suffix(1);
  out.unit = std::string(rest);
  return out;
}

double parseQuantity(std::string_view text, std::string_view siUnit) {
  ValueWithUnit vu = splitValueUnit(text);
  if (vu.unit.empty()) return vu.value;
  return convertUnit(vu.value, vu.unit, siUnit);
}

}  // namespace thermorph
