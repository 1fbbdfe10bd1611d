#pragma once
//! The single parameter schema: validates case files and generates the case-file reference.
#include <span>
#include <string_view>

namespace thermorph {

enum class ParamKind {
  Table,         //!< a [table]
  TableArray,    //!< an array of tables ([[segments]], layers = [{...}])
  NamedTables,   //!< a table of user-named tables ([tissues.NAME])
  Quantity,      //!< a number in SI or a string with a unit
  Perfusion,     //!< 1/s or a volume flow per tissue mass, e.g. "0.5 mL/(100 g min)"
  Number,        //!< a dimensionless number
  Integer,       //!< an integer
  Text,          //!< free text
  Choice,        //!< one of a fixed list of words
};

//! One case key: its path pattern ("segments[].layers[].thickness", "tissues.*.q10"), kind, SI unit,
//! default, allowed range and a one-line description.
struct Param {
  std::string_view path;
  ParamKind kind;
  std::string_view unit;          //!< SI unit for quantities ("m", "K", "W/(m K)")
  std::string_view defaultValue;  //!< as written in a case file; empty: required or computed
  double min;                     //!< lower bound in SI
  double max;                     //!< upper bound in SI
  bool minExclusive;              //!< min itself not allowed (sizes and properties must be > 0)
  std::string_view choices;       //!< "|"-separated for Choice
  std::string_view doc;
};

//! Every known case key.
std::span<const Param> caseSchema();

//! The entry for a path pattern, or nullptr.
const Param* findParam(std::string_view pattern);

}  // namespace thermorph
