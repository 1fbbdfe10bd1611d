#pragma once
//! HDF5 results file: datasets with `units` attributes, time series chunked, compressed and extended per output.
//! Written under a temporary name in the same folder and renamed on success, so a failed run never clobbers
//! an earlier result.
#include <cstdint>
#include <span>
#include <string>
#include <vector>

namespace thermorph {

class ResultsFile {
 public:
  //! Open `finalPath`'s temporary sibling for writing.
  explicit ResultsFile(std::string finalPath);
  ~ResultsFile();  //!< removes the temporary file unless commit() was called
  ResultsFile(const ResultsFile&) = delete;
  ResultsFile& operator=(const ResultsFile&) = delete;

  //! Fixed dataset of doubles with shape `shape`.
  void writeArray(const std::string& path, std::span<const double> values, const std::vector<std::uint64_t>& shape,
                  const std::string& units);
  void writeIntArray(const std::string& path, std::span<const int> values, const std::string& units);
  void writeStringArray(const std::string& path, const std::vector<std::string>& values);
  void writeStringArrayAttribute(const std::string& object, const std::string& name,
                                 const std::vector<std::string>& values);

  //! A time series dataset [nt, shape...]; returns a handle for append().
  std::size_t createSeries(const std::string& path, const std::vector<std::uint64_t>& shape, const std::string& units);
  //! Append one time point to series `series` (size: product of its shape).
  void append(std::size_t series, std::span<const double> values);

  void setAttribute(const std::string& object, const std::string& name, const std::string& value);
  void setAttribute(const std::string& object, const std::string& name, double value);
  void setAttribute(const std::string& object, const std::string& name, long value);

  //! Close and move to the final path (or `otherPath` when given). Returns the path written.
  std::string commit(const std::string& otherPath = "");
  const std::string& temporaryPath() const { return temporaryPath_; }

 private:
  long long ensureGroup(const std::string& path);
  long long openObject(const std::string& path);
  struct Series {
    long long dataset;
    std::vector<std::uint64_t> shape;
    std::uint64_t count;
  };
  std::string finalPath_, temporaryPath_;
  long long file_ = -1;
  std::vector<Series> series_;
  bool committed_ = false;
};

}  // namespace thermorph
