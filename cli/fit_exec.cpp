// `fit` in the executable thermorph: the process is replaced by thermorph-fit from the same folder, with the same
// arguments (argv[0] too, so the results store the same command line). Fits use Ceres, whose static library
// brings 17 shared libraries (glog, gflags, SuiteSparse's CHOLMOD, LAPACK, BLAS, gfortran, ...): loading them cost
// about 2.7 ms of CPU time at the start of every run and check (tests/bench, DEVELOPERS.md "Benchmarks").
#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <string>
#include <vector>

#include <fmt/format.h>

#include "cli/fit_cli.hpp"
#include "models/caution.hpp"

namespace thermorph {

int runFitCli(FitOptions&, const std::string&) {
  std::error_code ec;
  const std::filesystem::path self = std::filesystem::read_symlink("/proc/self/exe", ec);
  const std::filesystem::path fit = self.parent_path() / "thermorph-fit";
  std::ifstream in("/proc/self/cmdline", std::ios::binary);
  const std::string all((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  std::vector<std::string> args;
  for (std::size_t start = 0; start < all.size();) {
    const std::size_t end = all.find('\0', start);
    args.push_back(all.substr(start, end == std::string::npos ? std::string::npos : end - start));
    if (end == std::string::npos) break;
    start = end + 1;
  }
  std::vector<char*> argv;
  for (std::string& a : args) argv.push_back(a.data());
  argv.push_back(nullptr);
  std::fflush(stdout);
  std::fflush(stderr);
  if (!ec && args.size() > 1) execv(fit.c_str(), argv.data());
  const int error = errno;
  fmt::print(stderr, "Caution: {}\n", caution);
  fmt::print(stderr, "error: `fit` runs {} (linked with Ceres), which cannot be started: {}\n",
             ec ? std::string("thermorph-fit") : fit.string(), ec ? ec.message() : std::strerror(error));
  return 3;
}

}  // namespace thermorph
