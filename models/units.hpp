#pragma once
//! Unit strings parsed with udunits2 and converted to SI.
#include <span>
#include <stdexcept>
#include <string>
#include <string_view>

namespace thermorph {

//! A value or unit string that cannot be read or has the wrong dimension.
class UnitError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

//! Human name of the quantity an SI unit measures ("length" for "m"), for messages.
std::string quantityName(std::string_view siUnit);
//! quantityName with its indefinite article ("a length", "an irradiance or heat flux"), for messages.
std::string aQuantity(std::string_view siUnit);

//! True when `unit` parses and converts to `siUnit`.
bool unitConvertible(std::string_view unit, std::string_view siUnit);

//! Convert `value` given in `unit` to `siUnit` (offsets such as degC -> K included).
double convertUnit(double value, std::string_view unit, std::string_view siUnit);

//! Parse "12 cm", "37 degC", "0.5 mL/(100 g min)" into a number and a unit string.
//! A string without a unit ("12") returns an empty unit.
struct ValueWithUnit {
  double value = 0.0;
  std::string unit;
};
ValueWithUnit splitValueUnit(std::string_view text);

//! Parse `text` and convert to `siUnit`; throws UnitError naming the expected unit.
double parseQuantity(std::string_view text, std::string_view siUnit);

//! Which udunits2 unit database parses a unit string. `automatic` (what every function above uses): the small
//! database shipped with thermorph (models/udunits/thermorph-units.xml, a verbatim subset of udunits2's own,
//! read in about a tenth of the time) when every identifier in both strings is one of smallUnitIdentifiers(),
//! else the full database (read on first use). An identifier outside that list is never read with the small
//! database, where it could parse as something else (a prefix and a unit: "ft" as femto-tonne).
enum class UnitDatabase { automatic, small, full };
//! Convert with a chosen database (tests compare the two; `small` throws UnitError when it is not found).
double convertUnitWith(UnitDatabase database, double value, std::string_view unit, std::string_view siUnit);
//! The identifiers the small database is used for; each converts as with the full database (tested).
std::span<const std::string_view> smallUnitIdentifiers();
//! The SI unit strings that `automatic` converts to themselves without a database (as udunits2 does: x); degC to
//! K likewise (x + 273.15). A case in SI numbers reads no unit database (tested against udunits2).
std::span<const std::string_view> databaseFreeSiUnits();
//! True when `unit` is read with the small database (every identifier in it is one of smallUnitIdentifiers()).
bool smallUnitDatabaseCovers(std::string_view unit);
//! The small database's file, or "" when none was found (then every unit uses the full database).
std::string smallUnitDatabasePath();

}  // namespace thermorph
