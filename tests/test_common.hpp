#pragma once
// Small helpers shared by several test files: the message of a bad case, and datasets of a results file.
#include <hdf5.h>

#include <catch2/catch.hpp>
#include <string>
#include <vector>

#include "models/case.hpp"

namespace thermorph::common {

//! The CaseError message of loading `text` (or "no error").
inline std::string caseErrorOf(const std::string& text, const std::vector<std::string>& overrides = {}) {
  try {
    loadCaseFromString(text, "case.toml", overrides);
  } catch (const CaseError& e) {
    return e.what();
  }
  return "no error";
}

//! A dataset of an HDF5 results file, flattened.
inline std::vector<double> readDataset(const std::string& file, const std::string& path) {
  hid_t f = H5Fopen(file.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
  REQUIRE(f >= 0);
  hid_t d = H5Dopen2(f, path.c_str(), H5P_DEFAULT);
  REQUIRE(d >= 0);
  hid_t space = H5Dget_space(d);
  std::vector<double> out(static_cast<std::size_t>(H5Sget_simple_extent_npoints(space)));
  H5Dread(d, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, out.data());
  H5Sclose(space);
  H5Dclose(d);
  H5Fclose(f);
  return out;
}

}  // namespace thermorph::common
