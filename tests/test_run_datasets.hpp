#pragma once
//! A transient run of a case text written to a temporary HDF5 file, with its summary, /time and the datasets asked
//! for (tests of events that step a case's values: contact, tucking).
#include <unistd.h>

#include <filesystem>
#include <string>
#include <vector>

#include "test_common.hpp"
#include "drivers/simulation.hpp"
#include "models/body.hpp"
#include "models/case.hpp"

namespace thermorph::testing {

struct RunDatasets {
  RunSummary summary;
  std::vector<double> time;
  std::vector<std::vector<double>> data;
};

//! Runs `text` (loaded as `name`, with `overrides`) to a temporary file, removed afterwards.
inline RunDatasets runDatasets(const std::string& text, const std::string& name, const std::vector<std::string>& datasets,
                               const std::vector<std::string>& overrides = {}) {
  Body body(loadCaseFromString(text, name, overrides));
  const std::filesystem::path out =
      std::filesystem::temp_directory_path() / ("thermorph-" + name + "-" + std::to_string(::getpid()) + ".h5");
  RunOptions options;
  options.output = out.string();
  options.quiet = true;
  RunDatasets r;
  r.summary = runTransient(body, options);
  r.time = common::readDataset(out.string(), "/time");
  for (const std::string& d : datasets) r.data.push_back(common::readDataset(out.string(), d));
  std::filesystem::remove(out);
  return r;
}

}  // namespace thermorph::testing
