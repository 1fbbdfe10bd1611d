#include "drivers/provenance.hpp"

#include <algorithm>

// The revision and commit of the build (cmake/revision.cmake, written at every build into the build tree).
#include "thermorph_revision.hpp"

namespace thermorph {

std::string sourceRevision() { return THERMORPH_SOURCE_REVISION; }
std::string sourceCommit() { return THERMORPH_SOURCE_COMMIT; }

void writeProvenance(ResultsFile& f, const std::vector<InputFile>& inputs) {
  f.setAttribute("/provenance", "source_revision", sourceRevision());
  f.setAttribute("/provenance", "source_commit", sourceCommit());
  std::vector<std::string> roles, paths, hashes;
  for (const InputFile& i : inputs) {
    roles.push_back(i.role);
    paths.push_back(i.path);
    hashes.push_back(i.sha256);
    if (i.role == "case") f.setAttribute("/provenance", "case_sha256", i.sha256);
  }
  f.writeStringArrayAttribute("/provenance", "input_roles", roles);
  f.writeStringArrayAttribute("/provenance", "input_paths", paths);
  f.writeStringArrayAttribute("/provenance", "input_sha256", hashes);
}

void writeWarnings(ResultsFile& f, const std::vector<std::string>& warnings) {
  std::vector<std::string> distinct;
  for (const std::string& w : warnings)
    if (std::find(distinct.begin(), distinct.end(), w) == distinct.end()) distinct.push_back(w);
  f.writeStringArray("/provenance/warnings", distinct);
  f.makeCoordinate("/provenance/warnings");
  f.setAttribute("/provenance/warnings", "long_name",
                 std::string("warnings of the run (body and environment, validity ranges of correlations)"));
}

}  // namespace thermorph
