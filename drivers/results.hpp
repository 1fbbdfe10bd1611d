#pragma once
//! HDF5 results file: datasets with `units` attributes, time series chunked, compressed and extended per output.
//! Written under a temporary name in the same folder and renamed on success, so a failed run never clobbers
//! an earlier result.
//!
//! netCDF-4 layout (HDF5 dimension scales, H5DS API of hdf5_hl; CF `units` and `long_name`): `/time` is a
//! dimension scale, and every group holding time series gets its own copy `<group>/time` (same values, extended
//! with /time), so a netCDF-4 reader opening one group (xarray with group=...) finds `time` as a coordinate
//! there; the time dimension of each series is attached to its group's copy. Other axes are attached to
//! coordinates of the same group made with makeCoordinate (e.g. a segment's `radius` and `axial`).
#include <cstdint>
#include <map>
#include <memory>
#include <optional>
#include <span>
#include <string>
#include <vector>

namespace thermorph {

class TemporaryFile;

class ResultsFile {
 public:
  //! Open `finalPath`'s temporary sibling for writing.
  explicit ResultsFile(std::string finalPath);
  ~ResultsFile();  //!< removes the temporary file unless commit() was called
  ResultsFile(const ResultsFile&) = delete;
  ResultsFile& operator=(const ResultsFile&) = delete;

  //! Fixed dataset of doubles with shape `shape`.
  void writeArray(const std::string& path, std::span<const double> values, const std::vector<std::uint64_t>& shape,
                  const std::string& units, const std::string& longName = "");
  void writeIntArray(const std::string& path, std::span<const int> values, const std::string& units);
  void writeStringArray(const std::string& path, const std::vector<std::string>& values);
  void writeStringArrayAttribute(const std::string& object, const std::string& name,
                                 const std::vector<std::string>& values);

  //! The number of time points the series will get (0: not known; the default). A series whose points
  //! altogether are at most 16384 values (128 KiB) is then kept in memory and written when the file is committed,
  //! with the number of points recorded, in one write, uncompressed (compact layout up to 32 KiB, else contiguous;
  //! not extensible): deflating a few kilobytes and the chunk index of each small series cost more CPU time than
  //! anything else in writing a small run's file. Other series are chunked, deflated and written a chunk at a time.
  void expectPoints(std::uint64_t points) { expectedPoints_ = points; }
  //! The time coordinate /time [nt] (a dimension scale); returns a handle for append(), which also extends
  //! every group's copy. Create it before any other series.
  std::size_t createTime(const std::string& units, const std::string& longName);
  //! A time series dataset [nt, shape...]; returns a handle for append(). `dims` names the coordinates of the
  //! axes after time (datasets of the same group made coordinates with makeCoordinate; "" leaves one unnamed).
  std::size_t createSeries(const std::string& path, const std::vector<std::uint64_t>& shape, const std::string& units,
                           const std::string& longName = "", const std::vector<std::string>& dims = {});
  //! Append one time point to series `series` (size: product of its shape).
  void append(std::size_t series, std::span<const double> values);
  //! Append values[i] - subtract (the same numbers as appending a shifted copy, without the copy: a whole chunk of
  //! a large field is shifted as it is filtered).
  void append(std::size_t series, std::span<const double> values, double subtract);
  //! Make the 1-D dataset `path` a dimension scale (a netCDF coordinate) named after it.
  void makeCoordinate(const std::string& path);
  //! Attach axis i of dataset `path` to the coordinate `dims[i]` of the same group ("" skips an axis), at commit.
  void attachDimensions(const std::string& path, const std::vector<std::string>& dims);

  void setAttribute(const std::string& object, const std::string& name, const std::string& value);
  void setAttribute(const std::string& object, const std::string& name, double value);
  void setAttribute(const std::string& object, const std::string& name, long value);

  //! Close and move to the final path (or `otherPath` when given). Returns the path written. Throws OutputError
  //! when the file cannot be completed (disk full): the temporary file is then removed.
  std::string commit(const std::string& otherPath = "");
  const std::string& temporaryPath() const;

 private:
  long long ensureGroup(const std::string& path);
  long long openObject(const std::string& path);
  //! The group's copy of /time (made at its first series); its series handle.
  std::size_t groupTime(const std::string& group);
  std::size_t createDataset(const std::string& path, const std::vector<std::uint64_t>& shape,
                            const std::string& units, const std::string& longName);
  //! An attribute of a series written at commit (a deferred series does not exist in the file before).
  struct PendingAttribute {
    std::string name;
    int kind;  //!< 0 text, 1 double, 2 long
    std::string text;
    double number;
    long integer;
  };
  struct Series {
    long long dataset;                  //!< -1 while deferred
    std::vector<std::uint64_t> shape;
    std::uint64_t count;                //!< time points in the file
    std::uint64_t chunkRows = 1;        //!< time points per chunk
    //! A chunk's extent in each dimension of `shape` (empty: the whole shape). A field of more than 4096 values
    //! per time point is split so that a chunk keeps 32 KiB at most (results.cpp, createDataset).
    std::vector<std::uint64_t> chunkShape = {};
    std::vector<double> pending = {};   //!< time points appended but not yet written (fewer than a chunk)
    bool deferred = false;              //!< created and written whole at commit (see expectPoints)
    std::string path = {}, units = {}, longName = {}, scaleName = {};
    std::vector<PendingAttribute> attributes = {};
  };
  //! A dimension scale attached at commit: axis `axis` of series `series` (or, when noSeries, the dataset
  //! `datasetPath`) to series `scaleSeries` or the dataset `scalePath`.
  struct Attachment {
    std::size_t series;
    std::size_t scaleSeries;
    std::string scalePath;
    unsigned axis;
    std::string datasetPath = {};
  };
  //! The deferred series at `path`, or noSeries.
  std::size_t deferredSeries(const std::string& path) const;
  //! Create, write and close-ready a deferred series (at commit).
  void materialise(std::size_t index);
  //! The time points of series `index` so far (written and pending).
  std::vector<double> pointsSoFar(std::size_t index);
  std::vector<Attachment> attachments_;
  std::map<std::string, long long> groups_;  //!< open group handles by path (ensureGroup)
  //! Closes every series and the file; false when HDF5 could not flush them.
  bool close();
  //! Write the pending time points of series `index` in one extent change and one write.
  void flush(std::size_t index);
  std::string finalPath_;
  std::unique_ptr<TemporaryFile> temporary_;
  long long file_ = -1;
  std::vector<Series> series_;
  static constexpr std::size_t noSeries = static_cast<std::size_t>(-1);
  std::size_t time_ = noSeries;
  std::string timeUnits_, timeLongName_;
  std::vector<std::pair<std::string, std::size_t>> groupTimes_;  //!< group path, series of its /time copy
  bool committed_ = false;
  std::uint64_t expectedPoints_ = 0;
  //! Chunks of the compressed series filtered here (shuffle, then zlib-format deflate by libdeflate) and written
  //! with H5Dwrite_chunk: the filters declared on the dataset, so every HDF5 reader decodes them as its own.
  struct ChunkCompressor;
  std::unique_ptr<ChunkCompressor> compressor_;
  //! Write `rows` points of series `s` (from `points`: its pending points, or a whole chunk given to append), which
  //! starts at a chunk boundary, chunk by chunk.
  //! `subtract`: written as points[i] - *subtract.
  void writeChunks(Series& s, std::span<const double> points, std::uint64_t rows,
                   std::optional<double> subtract = std::nullopt);
  void appendPoints(std::size_t series, std::span<const double> values, std::optional<double> subtract);
};

}  // namespace thermorph
