#include "models/units.hpp"

#include <dlfcn.h>
#include <udunits2.h>

#include <cctype>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <tuple>
#include <charconv>
#include <map>
#include <unordered_map>
#include <memory>
#include <mutex>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include <fmt/format.h>

namespace thermorph {
namespace {

// udunits2 keeps global state and is not thread safe: one system, one lock.
std::mutex unitMutex;

// The full udunits2 database (about 110 kB of XML, several milliseconds to read): read on first use only.
ut_system* fullSystem() {
  static ut_system* system = [] {
    ut_set_error_message_handler(ut_ignore);
    ut_system* s = ut_read_xml(nullptr);
    if (!s) throw UnitError("udunits2: cannot read the unit database (package libudunits2-data)");
    return s;
  }();
  return system;
}

// thermorph's small database (models/udunits/thermorph-units.xml): the installed copy beside the binary that holds
// this code, else the source tree's copy of the build, else the copy installed under the configured prefix. Not
// found: every unit uses the full database.
const std::string& smallPath() {
  static const std::string path = [] {
    // Beside the binary first: an installed executable (bin/) or Python module (its Python folder) reads the copy
    // installed with it under whatever --prefix `cmake --install` was given (before 2026-12-05 it read the source
    // tree's, and the configured prefix's, /usr/local, only). The module is the shared object dladdr names for this
    // variable; the executable (dladdr gives argv[0] there) is /proc/self/exe. A build's binaries have no
    // share/thermorph beside them and read the source tree's.
    static const char anchor = 0;
    std::vector<std::string> candidates;
    std::error_code ec;
    if (Dl_info info{}; dladdr(&anchor, &info) && info.dli_fname && std::strstr(info.dli_fname, ".so"))
      candidates.push_back((std::filesystem::path(info.dli_fname).parent_path() / THERMORPH_UNITS_XML_FROM_PYTHON)
                               .lexically_normal().string());
    else if (const std::filesystem::path exe = std::filesystem::read_symlink("/proc/self/exe", ec); !ec)
      candidates.push_back((exe.parent_path() / THERMORPH_UNITS_XML_FROM_BIN).lexically_normal().string());
    candidates.push_back(THERMORPH_UNITS_XML_SOURCE);
    candidates.push_back(THERMORPH_UNITS_XML_INSTALLED);
    for (const std::string& candidate : candidates)
      if (std::FILE* f = std::fopen(candidate.c_str(), "rb")) {
        std::fclose(f);
        return candidate;
      }
    return std::string();
  }();
  return path;
}

ut_system* smallSystem() {
  static ut_system* system = [] {
    ut_set_error_message_handler(ut_ignore);
    return smallPath().empty() ? nullptr : ut_read_xml(smallPath().c_str());
  }();
  return system;
}

// Identifiers read with the small database. Each is defined there exactly as in the full database (the same
// definitions, copied), and none is a prefixed form of something else in the full one; tests/test_units_small.cpp
// converts each (and every unit of the schema and the example cases) with both databases and compares.
constexpr std::string_view smallIdentifiers[] = {
    "m", "km", "dm", "cm", "mm", "um", "\u00b5m", "nm", "meter", "meters", "metre", "metres",
    "kg", "g", "mg", "gram", "grams", "kilogram", "kilograms",
    "s", "ms", "min", "h", "hr", "d", "second", "seconds", "minute", "minutes", "hour", "hours", "day", "days",
    "K", "degC", "kelvin",
    "W", "mW", "kW", "watt", "watts", "J", "kJ", "MJ", "joule", "joules", "cal", "kcal",
    "L", "l", "mL", "ml", "dL", "uL", "liter", "liters", "litre", "litres",
    "Pa", "kPa", "hPa", "percent", "%",
};

bool isIdentifierByte(unsigned char c) { return std::isalpha(c) || c == '_' || c == '%' || c >= 0x80; }

// True when every identifier of `text` (a run of letters, '_', '%' and non-ASCII bytes; digits, spaces,
// operators and parentheses separate them) is one of smallIdentifiers.
bool smallCovers(std::string_view text) {
  std::size_t i = 0;
  while (i < text.size()) {
    if (!isIdentifierByte(static_cast<unsigned char>(text[i]))) {
      ++i;
      continue;
    }
    std::size_t j = i;
    while (j < text.size() && isIdentifierByte(static_cast<unsigned char>(text[j]))) ++j;
    const std::string_view word = text.substr(i, j - i);
    bool known = false;
    for (std::string_view id : smallIdentifiers) known = known || id == word;
    if (!known) return false;
    i = j;
  }
  return true;
}

std::string normalised(std::string_view text) {
  std::string s(text);
  // Accept the udunits-style "W m-2 K-1" and the common "W/(m2 K)" alike; "°C" as degC.
  if (s == "°C" || s == "C" || s == "celsius") s = "degC";
  return s;
}

// The database for a pair of unit strings (both parsed with the same one: udunits2 compares units of one system).
ut_system* systemFor(UnitDatabase database, const std::string& unit, const std::string& siUnit) {
  if (database == UnitDatabase::full) return fullSystem();
  if (database == UnitDatabase::small) {
    if (!smallSystem()) throw UnitError("udunits2: thermorph's small unit database was not found");
    return smallSystem();
  }
  if (smallSystem() && smallCovers(unit) && smallCovers(siUnit)) return smallSystem();
  return fullSystem();
}

// Conversions that need no database: each SI unit string the schema converts to, given as itself (udunits2's
// trivial converter, x), and degC to K (its offset converter, x + 273.15). A case written in SI numbers then never
// reads a database (its degC defaults included): reading the small one was about a tenth of the instructions of a
// 100-node run. tests/test_units_small.cpp checks every pair against udunits2's converters of both databases.
constexpr std::string_view databaseFreeSi[] = {
    "1", "m", "m3", "kg", "s", "K", "W", "J", "Pa", "W/m3", "W/m2", "W/(m K)", "W/(m2 K)", "W/K",
    "J/(kg K)", "kg/m3", "1/s", "m/s", "m3/s", "m3/(kg s)",
};

std::optional<double> databaseFree(const std::string& unit, const std::string& siUnit, double value) {
  if (unit == "degC" && siUnit == "K") return value + 273.15;
  if (unit != siUnit) return std::nullopt;
  for (std::string_view si : databaseFreeSi)
    if (si == unit) return value;
  return std::nullopt;
}

struct UnitFree {
  void operator()(ut_unit* u) const { ut_free(u); }
};
using UnitPtr = std::unique_ptr<ut_unit, UnitFree>;

UnitPtr parseUnit(ut_system* system, std::string s) {
  return UnitPtr(ut_parse(system, ut_trim(s.data(), UT_UTF8), UT_UTF8));
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

std::string aQuantity(std::string_view siUnit) {
  const std::string name = quantityName(siUnit);
  const bool vowel = !name.empty() && std::string_view("aeiou").find(name.front()) != std::string_view::npos;
  return (vowel ? "an " : "a ") + name;
}

bool unitConvertible(std::string_view unit, std::string_view siUnit) {
  std::lock_guard lock(unitMutex);
  // The answer for each pair of texts is kept for the process, as the converters are (convertUnitWith): a perfusion
  // given per tissue mass asked it twice per value read, parsing both units with udunits2 each time.
  static std::unordered_map<std::string, bool> answers;
  std::string key;
  key.reserve(unit.size() + siUnit.size() + 1);
  key.append(unit).push_back('\0');
  key.append(siUnit);
  if (auto it = answers.find(key); it != answers.end()) return it->second;
  const std::string u = normalised(unit), si = normalised(siUnit);
  ut_system* system = systemFor(UnitDatabase::automatic, u, si);
  UnitPtr from = parseUnit(system, u);
  UnitPtr to = parseUnit(system, si);
  const bool convertible = from && to && ut_are_convertible(from.get(), to.get());
  answers.emplace(std::move(key), convertible);
  return convertible;
}

double convertUnit(double value, std::string_view unit, std::string_view siUnit) {
  return convertUnitWith(UnitDatabase::automatic, value, unit, siUnit);
}

std::span<const std::string_view> smallUnitIdentifiers() { return smallIdentifiers; }

std::span<const std::string_view> databaseFreeSiUnits() { return databaseFreeSi; }

bool smallUnitDatabaseCovers(std::string_view unit) { return smallCovers(normalised(unit)); }

std::string smallUnitDatabasePath() {
  std::lock_guard lock(unitMutex);
  return smallSystem() ? smallPath() : std::string();
}

double convertUnitWith(UnitDatabase database, double value, std::string_view unit, std::string_view siUnit) {
  std::lock_guard lock(unitMutex);
  // udunits2's converter of each (unit, SI unit) pair is kept for the process: a case and the schema's defaults
  // name few distinct units, and parsing them again for every value (and every run of a sweep) cost more than
  // the conversions. The same converter converts, so the values are the same. Keyed by the texts as given and the
  // database asked for (which fix the system systemFor picks), so a cached pair needs neither the normalisation
  // nor systemFor's identifier scan (about 10 000 instructions per value before).
  struct ConverterFree {
    void operator()(cv_converter* c) const { cv_free(c); }
  };
  static std::unordered_map<std::string, std::unique_ptr<cv_converter, ConverterFree>> converters;
  std::string key;
  key.reserve(unit.size() + siUnit.size() + 2);
  key.append(unit).push_back('\0');
  key.append(siUnit).push_back(static_cast<char>('0' + static_cast<int>(database)));
  auto it = converters.find(key);
  if (it == converters.end()) {
    const std::string u = normalised(unit), si = normalised(siUnit);
    if (database == UnitDatabase::automatic)
      if (const std::optional<double> converted = databaseFree(u, si, value)) return *converted;
    ut_system* system = systemFor(database, u, si);
    UnitPtr from = parseUnit(system, u);
    if (!from) throw UnitError(fmt::format("\"{}\" is not a unit udunits2 understands", unit));
    UnitPtr to = parseUnit(system, si);
    if (!to) throw UnitError(fmt::format("internal: bad SI unit \"{}\"", siUnit));
    if (!ut_are_convertible(from.get(), to.get()))
      throw UnitError(fmt::format("unit \"{}\" is not {} (not convertible to {})", unit, aQuantity(siUnit),
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
