#pragma once
//! Provenance of result and sweep files: the source revision the tool was built from, the SHA-256 of the case
//! text and of every file it reads, and every warning of the run. Layout (both file kinds):
//!   /provenance attrs: source_revision (`git describe --always --dirty` at configure time, or "unknown"
//!                      outside a git checkout or without git), source_commit (full hash or "unknown"),
//!                      case_sha256, input_roles, input_paths, input_sha256 (one entry per file, case first)
//!   /provenance/warnings  [nw] text, every warning of the run (a netCDF coordinate of its own)
#include <string>
#include <vector>

#include "drivers/results.hpp"
#include "models/case.hpp"

namespace thermorph {

std::string sourceRevision();
std::string sourceCommit();

//! /provenance attributes of a result file.
void writeProvenance(ResultsFile& f, const std::vector<InputFile>& inputs);
//! /provenance/warnings of a result file (distinct, in order of first appearance).
void writeWarnings(ResultsFile& f, const std::vector<std::string>& warnings);

}  // namespace thermorph
