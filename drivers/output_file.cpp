#include "drivers/output_file.hpp"

#include <fcntl.h>
#include <hdf5.h>
#include <sys/stat.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <cmath>
#include <cstring>
#include <filesystem>

#include <fmt/format.h>

#include "drivers/stop_signal.hpp"
#include "models/body.hpp"
#include "models/case.hpp"

namespace thermorph {
namespace {

namespace fs = std::filesystem;

std::atomic<unsigned> temporaryCounter{0};

fs::path folderOf(const fs::path& p) { return p.parent_path().empty() ? fs::path(".") : p.parent_path(); }

//! Longest file name in `folder` (NAME_MAX; 255 on common file systems).
std::size_t nameLimit(const fs::path& folder) {
  errno = 0;
  long limit = ::pathconf(folder.c_str(), _PC_NAME_MAX);
  return limit > 0 ? static_cast<std::size_t>(limit) : 255;
}

std::string shortTemporaryName() {
  return fmt::format(".thermorph-{}-{}.tmp", ::getpid(), temporaryCounter.fetch_add(1));
}

//! One file the command will create or replace: a regular file or nothing, never an input.
void checkTarget(const std::string& output, const fs::path& target, const std::vector<std::string>& inputs,
                 const std::string& option, std::size_t limit) {
  const std::string name = target.filename().string();
  if (name.size() > limit)
    throw CaseError(fmt::format("{} {}: {} is {} bytes long; the limit in this folder is {}", option, output,
                                target.string() == output ? std::string("the file name")
                                                          : fmt::format("the name {} written beside it", name),
                                name.size(), limit));
  struct stat info {};
  if (::stat(target.c_str(), &info) != 0) {
    if (errno == ENOENT) return;  // a new file (or a dangling symbolic link, replaced)
    throw CaseError(fmt::format("{} {}: cannot inspect {}: {}", option, output, target.string(), std::strerror(errno)));
  }
  if (S_ISDIR(info.st_mode))
    throw CaseError(fmt::format("{} {}: {} is a folder; give a file name, e.g. {}/results.h5", option, output,
                                target.string(), target.string()));
  if (!S_ISREG(info.st_mode))
    throw CaseError(fmt::format("{} {}: {} is not a regular file (a device, FIFO or socket); results are written to a "
                                "new file and renamed into place, which would replace it: give a file name",
                                option, output, target.string()));
  for (const std::string& input : inputs) {
    std::error_code error;
    if (!input.empty() && fs::equivalent(target, input, error))
      throw CaseError(fmt::format("{} {}: {} is an input of this command ({}); it would be replaced by the results: "
                                  "give another output name",
                                  option, output, target.string(), input));
  }
}

}  // namespace

void checkOutputPath(const std::string& output, const std::vector<std::string>& inputs,
                     const std::vector<std::string>& derived, const std::string& option) {
  if (output.empty()) throw CaseError(fmt::format("{}: the output path is empty", option));
  const fs::path path(output);
  const std::string name = path.filename().string();
  if (name.empty() || name == "." || name == "..")
    throw CaseError(fmt::format("{} {}: not a file name (a folder?); give e.g. {}results.h5", option, output,
                                output.back() == '/' ? output : output + "/"));
  const fs::path folder = folderOf(path);
  struct stat info {};
  if (::stat(folder.c_str(), &info) != 0)
    throw CaseError(fmt::format("{} {}: the folder {} {}", option, output, folder.string(),
                                errno == ENOENT ? std::string("does not exist") : std::strerror(errno)));
  if (!S_ISDIR(info.st_mode))
    throw CaseError(fmt::format("{} {}: {} is not a folder", option, output, folder.string()));
  const std::size_t limit = nameLimit(folder);
  checkTarget(output, path, inputs, option, limit);
  for (const std::string& d : derived) checkTarget(output, fs::path(d), inputs, option, limit);
  // Can a file be created there? Try it (permissions, read-only file systems and root alike).
  const fs::path probe = folder / shortTemporaryName();
  const int fd = ::open(probe.c_str(), O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
  if (fd < 0)
    throw CaseError(fmt::format("{} {}: cannot create files in the folder {}: {}", option, output, folder.string(),
                                std::strerror(errno)));
  ::close(fd);
  ::unlink(probe.c_str());
}

std::vector<std::string> inputPaths(const Case& c) {
  std::vector<std::string> paths;
  for (const InputFile& f : c.inputs) paths.push_back(f.path);
  return paths;
}

std::string incompleteOutputPath(const std::string& output) {
  const fs::path p(output);
  return (p.parent_path() / (p.stem().string() + ".incomplete" + p.extension().string())).string();
}

TemporaryFile::TemporaryFile(const std::string& finalPath)
    : path_((folderOf(fs::path(finalPath)) / shortTemporaryName()).string()) {
  slot_ = registerTemporary(path_.c_str());
}

TemporaryFile::~TemporaryFile() {
  if (!done_) ::unlink(path_.c_str());
  unregisterTemporary(slot_);
}

void TemporaryFile::commit(const std::string& target) {
  if (::rename(path_.c_str(), target.c_str()) != 0)
    throw OutputError(fmt::format("cannot move the finished results to {}: {}", target, std::strerror(errno)));
  done_ = true;
  unregisterTemporary(slot_);
  slot_ = -1;
}

void TemporaryFile::discard() {
  if (!done_) ::unlink(path_.c_str());
  done_ = true;
  unregisterTemporary(slot_);
  slot_ = -1;
}

std::string projectedOutputWarning(const Body& body) {
  const RunSpec& run = body.spec().run;
  const double outputs = std::ceil(run.duration / run.outputInterval) + 1.0;
  // Every output stores each node (temperatures and blood streams) plus a few values per segment.
  const double values = static_cast<double>(body.network().nodes.size()) + 20.0 * static_cast<double>(body.segments().size());
  const double bytes = 8.0 * outputs * values;
  if (bytes < 1e9) return "";
  return fmt::format("{:.3g} outputs (duration {:g} s, output_interval {:g} s) of about {:.3g} values each: about "
                     "{:.3g} GB of results before compression; a longer run.output_interval writes less",
                     outputs, run.duration, run.outputInterval, values, bytes / 1e9);
}

void skipHdf5CleanupAtExit() { H5dont_atexit(); }

std::string writeFailureReason() {
  const int e = errno;
  switch (e) {
    case ENOSPC:
    case EDQUOT: return fmt::format("{} (disk full)", std::strerror(e));
    case EFBIG: return fmt::format("{} (file-size limit)", std::strerror(e));
    case EIO:
    case EROFS: return std::strerror(e);
    default: return "";
  }
}

}  // namespace thermorph
