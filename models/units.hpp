#pragma once
//! Unit strings parsed with udunits2 and converted to SI.
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

}  // namespace thermorph
