#pragma once
//! Small text helpers shared by the option parsers of sweeps, fits and sensitivities (--vary, --scale, --free,
//! --start, --prior): trimming, splitting key paths and specs, and "KEY=VALUE" options.
#include <sstream>
#include <string>
#include <utility>
#include <vector>

#include <fmt/format.h>

#include "models/case.hpp"

namespace thermorph::option_text {

//! `s` without leading and trailing blanks.
inline std::string trim(const std::string& s) {
  std::size_t b = s.find_first_not_of(" \t\r\n"), e = s.find_last_not_of(" \t\r\n");
  return b == std::string::npos ? std::string() : s.substr(b, e - b + 1);
}

//! Trimmed parts of `s` between separators; a trailing separator gives a trailing empty part (so that "a.b." is
//! reported as a key with an empty part instead of being read as "a.b").
inline std::vector<std::string> split(const std::string& s, char separator) {
  std::vector<std::string> parts;
  std::stringstream ss(s);
  for (std::string part; std::getline(ss, part, separator);) parts.push_back(trim(part));
  if (!s.empty() && s.back() == separator) parts.emplace_back();
  return parts;
}

//! "KEY=VALUE" split at the first '=' (both trimmed); `valueName` names the right-hand side in the message
//! ("SPEC", "..."), `example` is a complete valid option.
inline std::pair<std::string, std::string> keyValue(const std::string& text, const char* option, const char* example,
                                                    const char* valueName) {
  auto eq = text.find('=');
  if (eq == std::string::npos || eq == 0)
    throw CaseError(fmt::format("{} {}: expected KEY={}, e.g. {} {}", option, text, valueName, option, example));
  return {trim(text.substr(0, eq)), trim(text.substr(eq + 1))};
}

}  // namespace thermorph::option_text
