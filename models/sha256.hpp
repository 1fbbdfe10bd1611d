#pragma once
//! SHA-256 (FIPS 180-4, 2015, section 6.2) of a byte string, as 64 lowercase hex digits. Used for the provenance
//! of result files (hashes of the case text and of every file a case reads).
#include <string>
#include <string_view>

namespace thermorph {

std::string sha256Hex(std::string_view bytes);

}  // namespace thermorph
