#include "drivers/results.hpp"

#include <hdf5.h>
#include <hdf5_hl.h>
#include <libdeflate.h>

#include <algorithm>
#include <cstring>

#include <filesystem>
#include <numeric>
#include <stdexcept>

#include <fmt/format.h>

#include "drivers/h5_append.hpp"
#include "drivers/output_file.hpp"
#include "solver/scratch.hpp"

namespace thermorph {
namespace {

void checkH5(long long status, const std::string& what) {
  if (status < 0) {
    const std::string reason = writeFailureReason();
    throw OutputError(fmt::format("HDF5: cannot {}{}", what, reason.empty() ? "" : ": " + reason));
  }
}

// One variable-length UTF-8 string type, one scalar dataspace and one compact-layout creation list for the whole
// process (HDF5 identifiers, released when the library closes at exit): making and closing them for each of a
// results file's ~140 attributes and ~60 deferred series was ~2.5 million instructions of a 100-node run. The
// objects they create are the same.
hid_t textType() {
  // Variable-length UTF-8: read back as text (str in h5py), not bytes.
  static const hid_t type = [] {
    hid_t t = H5Tcopy(H5T_C_S1);
    H5Tset_size(t, H5T_VARIABLE);
    H5Tset_cset(t, H5T_CSET_UTF8);
    return t;
  }();
  return type;
}

hid_t scalarSpace() {
  static const hid_t space = H5Screate(H5S_SCALAR);
  return space;
}

hid_t compactLayout() {
  static const hid_t plist = [] {
    hid_t p = H5Pcreate(H5P_DATASET_CREATE);
    H5Pset_layout(p, H5D_COMPACT);
    return p;
  }();
  return plist;
}

//! A scalar text attribute of `object`, replacing one of that name unless `fresh` (an object just created).
void writeStringAttribute(hid_t object, const std::string& name, const std::string& value, bool fresh = false) {
  if (!fresh && H5Aexists(object, name.c_str()) > 0) H5Adelete(object, name.c_str());
  hid_t attr = H5Acreate2(object, name.c_str(), textType(), scalarSpace(), H5P_DEFAULT, H5P_DEFAULT);
  checkH5(attr, "create attribute " + name);
  const char* text = value.c_str();
  H5Awrite(attr, textType(), &text);
  H5Aclose(attr);
}

//! A scalar numeric attribute of `object` (replaced when present unless `fresh`).
template <class T>
void writeScalarAttribute(hid_t object, const std::string& name, hid_t type, T value, bool fresh = false) {
  if (!fresh && H5Aexists(object, name.c_str()) > 0) H5Adelete(object, name.c_str());
  hid_t attr = H5Acreate2(object, name.c_str(), type, scalarSpace(), H5P_DEFAULT, H5P_DEFAULT);
  H5Awrite(attr, type, &value);
  H5Aclose(attr);
}

}  // namespace

ResultsFile::ResultsFile(std::string finalPath) : finalPath_(std::move(finalPath)) {
  std::filesystem::path p(finalPath_);
  std::filesystem::path dir = p.parent_path().empty() ? std::filesystem::path(".") : p.parent_path();
  if (!std::filesystem::is_directory(dir))
    throw std::runtime_error(fmt::format("output folder {} does not exist", dir.string()));
  temporary_ = std::make_unique<TemporaryFile>(finalPath_);  // a short name beside it (drivers/output_file.hpp)
  H5Eset_auto2(H5E_DEFAULT, nullptr, nullptr);
  file_ = H5Fcreate(temporary_->path().c_str(), H5F_ACC_TRUNC, H5P_DEFAULT, H5P_DEFAULT);
  checkH5(file_, "create " + temporary_->path() + " for " + finalPath_);
}

//! The compressed series' filters: HDF5's shuffle (byte k of every element together) and deflate at this level.
constexpr int deflateLevel = 1;
//! Values per chunk of a compressed series (64 KiB): time points of a field are gathered up to it.
constexpr std::uint64_t kChunkValues = 8192;
//! A field of more values than this per time point is written in chunks of part of a time point (32 KiB at most).
//! Measured on the radial peer case's 20 000-cell field (61 time points, libdeflate level 1): chunks of 4 000 values
//! took 40 ms of samples against 54 ms for one chunk per time point (160 KiB) with the same instructions (437 and
//! 447 million in a stand-alone test), chunks of 8192 values about halfway; the file 1.7 % larger.
constexpr std::uint64_t kSplitValues = 4096;

struct ResultsFile::ChunkCompressor {
  libdeflate_compressor* compressor = libdeflate_alloc_compressor(deflateLevel);
  ~ChunkCompressor() { libdeflate_free_compressor(compressor); }
};

ResultsFile::~ResultsFile() {
  close();  // the temporary file is removed by temporary_ unless committed
}

const std::string& ResultsFile::temporaryPath() const { return temporary_->path(); }

bool ResultsFile::close() {
  bool ok = true;
  for (Series& s : series_)
    if (s.dataset >= 0) ok = H5Dclose(s.dataset) >= 0 && ok;
  series_.clear();
  for (const auto& [path, group] : groups_) ok = H5Gclose(group) >= 0 && ok;
  groups_.clear();
  if (file_ >= 0) {
    // The handle is given up whatever H5Fclose returns: closing it again (the destructor after a failed
    // commit) crashed HDF5.
    const hid_t file = file_;
    file_ = -1;
    ok = H5Fclose(file) >= 0 && ok;
  }
  return ok;
}

long long ResultsFile::ensureGroup(const std::string& path) {
  // Create every missing group along `path`; return the deepest (caller closes). Groups made or opened here stay
  // open until the file is closed (one handle per group path): most datasets go into a group already used.
  if (auto it = groups_.find(path); it != groups_.end()) {
    H5Iinc_ref(it->second);
    return it->second;
  }
  std::string partial;
  hid_t group = H5Gopen2(file_, "/", H5P_DEFAULT);
  std::size_t start = 1;
  while (start <= path.size()) {
    std::size_t end = path.find('/', start);
    if (end == std::string::npos) end = path.size();
    std::string name = path.substr(start, end - start);
    if (!name.empty()) {
      hid_t next = H5Lexists(group, name.c_str(), H5P_DEFAULT) > 0
                       ? H5Gopen2(group, name.c_str(), H5P_DEFAULT)
                       : H5Gcreate2(group, name.c_str(), H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
      checkH5(next, "create group " + path);
      H5Gclose(group);
      group = next;
    }
    start = end + 1;
  }
  if (group >= 0) {
    groups_.emplace(path, group);
    H5Iinc_ref(group);
  }
  return group;
}

static std::pair<std::string, std::string> splitPath(const std::string& path) {
  auto pos = path.find_last_of('/');
  return {pos == 0 ? "/" : path.substr(0, pos), path.substr(pos + 1)};
}

long long ResultsFile::openObject(const std::string& path) {
  // An existing group or dataset, else a new group.
  if (path == "/") return H5Oopen(file_, "/", H5P_DEFAULT);
  if (H5Lexists(file_, path.c_str(), H5P_DEFAULT) > 0) return H5Oopen(file_, path.c_str(), H5P_DEFAULT);
  hid_t group = ensureGroup(path);
  H5Gclose(group);
  return H5Oopen(file_, path.c_str(), H5P_DEFAULT);
}

void ResultsFile::writeArray(const std::string& path, std::span<const double> values,
                             const std::vector<std::uint64_t>& shape, const std::string& units,
                             const std::string& longName) {
  auto [parent, name] = splitPath(path);
  hid_t group = ensureGroup(parent);
  std::vector<hsize_t> dims(shape.begin(), shape.end());
  hid_t space = H5Screate_simple(static_cast<int>(dims.size()), dims.data(), nullptr);
  hid_t ds = H5Dcreate2(group, name.c_str(), H5T_NATIVE_DOUBLE, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
  checkH5(ds, "create " + path);
  checkH5(H5Dwrite(ds, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, values.data()), "write " + path);
  writeStringAttribute(ds, "units", units, true);
  if (!longName.empty()) writeStringAttribute(ds, "long_name", longName, true);
  H5Dclose(ds);
  H5Sclose(space);
  H5Gclose(group);
}

void ResultsFile::writeIntArray(const std::string& path, std::span<const int> values, const std::string& units) {
  auto [parent, name] = splitPath(path);
  hid_t group = ensureGroup(parent);
  hsize_t dims = values.size();
  hid_t space = H5Screate_simple(1, &dims, nullptr);
  hid_t ds = H5Dcreate2(group, name.c_str(), H5T_NATIVE_INT, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
  checkH5(ds, "create " + path);
  H5Dwrite(ds, H5T_NATIVE_INT, H5S_ALL, H5S_ALL, H5P_DEFAULT, values.data());
  writeStringAttribute(ds, "units", units, true);
  H5Dclose(ds);
  H5Sclose(space);
  H5Gclose(group);
}

void ResultsFile::writeStringArray(const std::string& path, const std::vector<std::string>& values) {
  auto [parent, name] = splitPath(path);
  hid_t group = ensureGroup(parent);
  hid_t type = H5Tcopy(H5T_C_S1);
  H5Tset_size(type, H5T_VARIABLE);
  H5Tset_cset(type, H5T_CSET_UTF8);
  hsize_t n = values.size();
  hid_t space = H5Screate_simple(1, &n, nullptr);
  std::vector<const char*> pointers;
  for (const std::string& v : values) pointers.push_back(v.c_str());
  hid_t ds = H5Dcreate2(group, name.c_str(), type, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
  checkH5(ds, "create " + path);
  if (!values.empty()) checkH5(H5Dwrite(ds, type, H5S_ALL, H5S_ALL, H5P_DEFAULT, pointers.data()), "write " + path);
  H5Dclose(ds);
  H5Sclose(space);
  H5Tclose(type);
  H5Gclose(group);
}

void ResultsFile::writeStringArrayAttribute(const std::string& object, const std::string& name,
                                            const std::vector<std::string>& values) {
  hid_t obj = H5Oopen(file_, object.c_str(), H5P_DEFAULT);
  checkH5(obj, "open " + object);
  hid_t type = H5Tcopy(H5T_C_S1);
  H5Tset_size(type, H5T_VARIABLE);
  H5Tset_cset(type, H5T_CSET_UTF8);
  hsize_t n = values.size();
  hid_t space = H5Screate_simple(1, &n, nullptr);
  std::vector<const char*> pointers;
  for (const std::string& v : values) pointers.push_back(v.c_str());
  hid_t attr = H5Acreate2(obj, name.c_str(), type, space, H5P_DEFAULT, H5P_DEFAULT);
  if (!values.empty()) H5Awrite(attr, type, pointers.data());
  H5Aclose(attr);
  H5Sclose(space);
  H5Tclose(type);
  H5Oclose(obj);
}

std::size_t ResultsFile::createDataset(const std::string& path, const std::vector<std::uint64_t>& shape,
                                       const std::string& units, const std::string& longName) {
  auto [parent, name] = splitPath(path);
  hid_t group = ensureGroup(parent);
  std::vector<hsize_t> dims{0}, maxDims{H5S_UNLIMITED}, chunk;
  for (auto s : shape) {
    dims.push_back(s);
    maxDims.push_back(s);
  }
  // Chunks of about 64 KiB (8192 values): several time points of the whole field, or one time point of it; a field of
  // more than 4096 values per time point (32 KiB) is cut into chunks of at most that (the first dimensions cut
  // first: a chunk holds whole rows of the last dimension where one fits; kSplitValues). One time point of a field of
  // 10^5 cells in one chunk needed two filter buffers of 0.8 MB each (shuffle, deflate) beside the integrator while it
  // was written, the peak of a run at 10^5 nodes. Chunks of 32 768 values made its file 4 % larger (the radial run of
  // peer_table.sh: 25.2 -> 26.2 MB; chunks of 8192 values: 27.5 MB).
  std::uint64_t perPoint = std::accumulate(shape.begin(), shape.end(), std::uint64_t{1}, std::multiplies<>());
  chunk.push_back(std::max<hsize_t>(1, kChunkValues / std::max<std::uint64_t>(perPoint, 1)));
  std::vector<std::uint64_t> chunkShape(shape);
  if (perPoint > kSplitValues) {
    std::uint64_t rest = perPoint;  // values in one step of dimension d (the product of the later extents)
    for (std::size_t d = 0; d < shape.size(); ++d) {
      rest /= shape[d];
      // At most kSplitValues, in pieces of equal size along the dimension cut (20 000 values: 5 x 4000, not 4 x 4096
      // and a padded 3616).
      const std::uint64_t most = std::clamp<std::uint64_t>(kSplitValues / std::max<std::uint64_t>(rest, 1), 1, shape[d]);
      const std::uint64_t pieces = (shape[d] + most - 1) / most;
      chunkShape[d] = (shape[d] + pieces - 1) / pieces;
      if (chunkShape[d] * rest <= kSplitValues) break;
    }
  }
  // All the expected points at most 128 KiB: kept in memory, created and written whole at commit (expectPoints).
  const bool small = expectedPoints_ > 0 && std::max<std::uint64_t>(perPoint, 1) * expectedPoints_ <= 16384;
  if (small) {
    H5Gclose(group);
    Series s{-1, shape, 0, expectedPoints_};
    s.deferred = true;
    s.path = path;
    s.units = units;
    s.longName = longName;
    s.pending.reserve(std::max<std::uint64_t>(perPoint, 1) * expectedPoints_);
    series_.push_back(std::move(s));
    return series_.size() - 1;
  }
  for (auto c : chunkShape) chunk.push_back(c);
  hid_t space = H5Screate_simple(static_cast<int>(dims.size()), dims.data(), maxDims.data());
  hid_t plist = H5Pcreate(H5P_DATASET_CREATE);
  H5Pset_chunk(plist, static_cast<int>(chunk.size()), chunk.data());
  // Shuffle and deflate level 1: chunks filtered by writeChunks with libdeflate (the 20,000-cell field: 360
  // million instructions against zlib's 878, file 4 % larger; libdeflate's level 2 608 million, 4 % smaller).
  H5Pset_shuffle(plist);
  H5Pset_deflate(plist, deflateLevel);
  hid_t ds = H5Dcreate2(group, name.c_str(), H5T_NATIVE_DOUBLE, space, H5P_DEFAULT, plist, H5P_DEFAULT);
  checkH5(ds, "create " + path);
  writeStringAttribute(ds, "units", units, true);
  if (!longName.empty()) writeStringAttribute(ds, "long_name", longName, true);
  H5Pclose(plist);
  H5Sclose(space);
  H5Gclose(group);
  series_.push_back({ds, shape, 0, chunk[0], chunkShape});
  return series_.size() - 1;
}

std::size_t ResultsFile::createTime(const std::string& units, const std::string& longName) {
  time_ = createDataset("/time", {}, units, longName);
  timeUnits_ = units;
  timeLongName_ = longName;
  if (series_[time_].deferred)
    series_[time_].scaleName = "time";
  else
    checkH5(H5DSset_scale(series_[time_].dataset, "time"), "make /time a dimension scale");
  groupTimes_.emplace_back("/", time_);
  return time_;
}

std::size_t ResultsFile::groupTime(const std::string& group) {
  for (const auto& [g, series] : groupTimes_)
    if (g == group) return series;
  if (time_ == noSeries) throw std::logic_error("ResultsFile: createTime before any other series");
  std::size_t copy = createDataset(group + "/time", {}, timeUnits_, timeLongName_);
  if (series_[copy].deferred)
    series_[copy].scaleName = "time";
  else
    checkH5(H5DSset_scale(series_[copy].dataset, "time"), "make " + group + "/time a dimension scale");
  // Catch up with the points already recorded (series created after the first output).
  for (double t : pointsSoFar(time_)) append(copy, {&t, 1});
  groupTimes_.emplace_back(group, copy);
  return copy;
}

std::vector<double> ResultsFile::pointsSoFar(std::size_t index) {
  Series& s = series_.at(index);
  if (s.deferred) return s.pending;
  flush(index);
  std::vector<double> values(s.count * std::accumulate(s.shape.begin(), s.shape.end(), std::uint64_t{1},
                                                      std::multiplies<>()));
  if (!values.empty())
    checkH5(H5Dread(s.dataset, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, values.data()), "read a series");
  return values;
}

std::size_t ResultsFile::deferredSeries(const std::string& path) const {
  for (std::size_t i = 0; i < series_.size(); ++i)
    if (series_[i].deferred && series_[i].path == path) return i;
  return noSeries;
}

void ResultsFile::materialise(std::size_t index) {
  Series& s = series_.at(index);
  const std::uint64_t perPoint =
      std::accumulate(s.shape.begin(), s.shape.end(), std::uint64_t{1}, std::multiplies<>());
  const hsize_t rows = perPoint == 0 ? 0 : s.pending.size() / perPoint;
  std::vector<hsize_t> dims{rows};
  for (auto d : s.shape) dims.push_back(d);
  auto [parent, name] = splitPath(s.path);
  hid_t group = ensureGroup(parent);
  hid_t space = H5Screate_simple(static_cast<int>(dims.size()), dims.data(), nullptr);
  // Compact: the values inside the dataset's object header (no separate block); limit 64 KiB with the header.
  const bool compact = !s.pending.empty() && s.pending.size() * sizeof(double) <= 32768;
  hid_t ds = H5Dcreate2(group, name.c_str(), H5T_NATIVE_DOUBLE, space, H5P_DEFAULT,
                        compact ? compactLayout() : H5P_DEFAULT, H5P_DEFAULT);
  H5Sclose(space);
  H5Gclose(group);
  checkH5(ds, "create " + s.path);
  s.dataset = ds;
  s.deferred = false;
  s.count = rows;
  if (!s.pending.empty())
    checkH5(H5Dwrite(ds, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, s.pending.data()), "write " + s.path);
  s.pending = {};
  writeStringAttribute(ds, "units", s.units, true);
  if (!s.longName.empty()) writeStringAttribute(ds, "long_name", s.longName, true);
  // Pending attributes in the order they were set; a name set twice is replaced as before.
  for (std::size_t k = 0; k < s.attributes.size(); ++k) {
    const PendingAttribute& a = s.attributes[k];
    bool fresh = a.name != "units" && a.name != "long_name";
    for (std::size_t j = 0; j < k && fresh; ++j) fresh = s.attributes[j].name != a.name;
    if (a.kind == 0) writeStringAttribute(ds, a.name, a.text, fresh);
    if (a.kind == 1) writeScalarAttribute(ds, a.name, H5T_NATIVE_DOUBLE, a.number, fresh);
    if (a.kind == 2) writeScalarAttribute(ds, a.name, H5T_NATIVE_LONG, a.integer, fresh);
  }
  s.attributes.clear();
  if (!s.scaleName.empty()) checkH5(H5DSset_scale(ds, s.scaleName.c_str()), "make " + s.path + " a dimension scale");
}

std::size_t ResultsFile::createSeries(const std::string& path, const std::vector<std::uint64_t>& shape,
                                      const std::string& units, const std::string& longName,
                                      const std::vector<std::string>& dims) {
  const std::string parent = splitPath(path).first;
  const std::size_t time = groupTime(parent);
  const std::size_t index = createDataset(path, shape, units, longName);
  // Attached at commit, when every series exists in the file.
  attachments_.push_back({index, time, "", 0});
  for (std::size_t i = 0; i < dims.size(); ++i) {
    if (dims[i].empty()) continue;
    const std::string scalePath = (parent == "/" ? "" : parent) + "/" + dims[i];
    attachments_.push_back({index, noSeries, scalePath, static_cast<unsigned>(i + 1)});
  }
  return index;
}

void ResultsFile::makeCoordinate(const std::string& path) {
  if (std::size_t d = deferredSeries(path); d != noSeries) {
    series_[d].scaleName = splitPath(path).second;
    return;
  }
  hid_t ds = H5Dopen2(file_, path.c_str(), H5P_DEFAULT);
  checkH5(ds, "open " + path);
  herr_t status = H5DSset_scale(ds, splitPath(path).second.c_str());
  H5Dclose(ds);
  checkH5(status, "make " + path + " a dimension scale");
}

void ResultsFile::attachDimensions(const std::string& path, const std::vector<std::string>& dims) {
  const std::string parent = splitPath(path).first;
  if (std::size_t d = deferredSeries(path); d != noSeries) {
    for (std::size_t i = 0; i < dims.size(); ++i)
      if (!dims[i].empty())
        attachments_.push_back({d, noSeries, (parent == "/" ? "" : parent) + "/" + dims[i], static_cast<unsigned>(i)});
    return;
  }
  // A dataset written already: attached at commit too, with the rest (one write per attribute).
  hid_t ds = H5Dopen2(file_, path.c_str(), H5P_DEFAULT);
  checkH5(ds, "open " + path);
  H5Dclose(ds);
  for (std::size_t i = 0; i < dims.size(); ++i)
    if (!dims[i].empty())
      attachments_.push_back({noSeries, noSeries, (parent == "/" ? "" : parent) + "/" + dims[i], static_cast<unsigned>(i), path});
}

void ResultsFile::append(std::size_t index, std::span<const double> values) { appendPoints(index, values, std::nullopt); }

void ResultsFile::append(std::size_t index, std::span<const double> values, double subtract) {
  appendPoints(index, values, subtract);
}

void ResultsFile::appendPoints(std::size_t index, std::span<const double> values, std::optional<double> subtract) {
  // Time points are collected a chunk at a time and written with one extent change and one write per chunk
  // (a few large writes instead of one per output and series).
  Series& s = series_.at(index);
  const std::uint64_t perPoint = std::max<std::uint64_t>(
      1, std::accumulate(s.shape.begin(), s.shape.end(), std::uint64_t{1}, std::multiplies<>()));
  if (!s.deferred && s.pending.empty() && s.count % s.chunkRows == 0 && values.size() == s.chunkRows * perPoint) {
    // A whole chunk at once (a large field: one time point per chunk): filtered and written from the caller's
    // values, without a copy in `pending` (the same chunk, written at the same point).
    writeChunks(s, values, s.chunkRows, subtract);
  } else {
    if (subtract)
      for (double v : values) s.pending.push_back(v - *subtract);
    else
      s.pending.insert(s.pending.end(), values.begin(), values.end());
    if (s.pending.size() / perPoint >= s.chunkRows) flush(index);
  }
  // The time coordinate extends every group's copy with it.
  if (index == time_)
    for (const auto& [group, copy] : groupTimes_)
      if (copy != time_) appendPoints(copy, values, subtract);
}

void ResultsFile::flush(std::size_t index) {
  Series& s = series_.at(index);
  if (s.pending.empty() || s.deferred) return;
  const std::uint64_t perPoint = std::max<std::uint64_t>(
      1, std::accumulate(s.shape.begin(), s.shape.end(), std::uint64_t{1}, std::multiplies<>()));
  const hsize_t rows = s.pending.size() / perPoint;
  if (s.count % s.chunkRows == 0) {  // whole chunks from the start of one: filtered here
    writeChunks(s, s.pending, rows);
    s.pending.clear();
    return;
  }
  // A partly written chunk (points read back before a chunk was full): HDF5 reads, merges and refilters it.
  std::vector<hsize_t> dims{s.count + rows}, start{s.count}, count{rows};
  for (auto d : s.shape) {
    dims.push_back(d);
    start.push_back(0);
    count.push_back(d);
  }
  checkH5(H5Dset_extent(s.dataset, dims.data()), "extend a time series");
  hid_t fileSpace = H5Dget_space(s.dataset);
  H5Sselect_hyperslab(fileSpace, H5S_SELECT_SET, start.data(), nullptr, count.data(), nullptr);
  hid_t memSpace = H5Screate_simple(static_cast<int>(count.size()), count.data(), nullptr);
  checkH5(H5Dwrite(s.dataset, H5T_NATIVE_DOUBLE, memSpace, fileSpace, H5P_DEFAULT, s.pending.data()),
          "write a time series");
  H5Sclose(memSpace);
  H5Sclose(fileSpace);
  s.count += rows;
  s.pending.clear();
}

void ResultsFile::writeChunks(Series& s, std::span<const double> points, std::uint64_t rows,
                              std::optional<double> subtract) {
  const std::uint64_t perPoint = std::max<std::uint64_t>(
      1, std::accumulate(s.shape.begin(), s.shape.end(), std::uint64_t{1}, std::multiplies<>()));
  std::vector<hsize_t> dims{s.count + rows};
  for (auto d : s.shape) dims.push_back(d);
  checkH5(H5Dset_extent(s.dataset, dims.data()), "extend a time series");
  if (!compressor_) compressor_ = std::make_unique<ChunkCompressor>();
  ChunkCompressor& c = *compressor_;
  if (!c.compressor) throw std::runtime_error("cannot allocate a deflate compressor");
  // The chunk's extents in the field's dimensions, its lines along the last one (a scalar series: lines of one value).
  const std::size_t rank = s.shape.size();
  const std::vector<std::uint64_t>& extent = s.chunkShape.empty() ? s.shape : s.chunkShape;
  const std::uint64_t line = rank == 0 ? 1 : std::max<std::uint64_t>(1, extent[rank - 1]);
  const std::uint64_t perChunkPoint = std::max<std::uint64_t>(
      1, std::accumulate(extent.begin(), extent.end(), std::uint64_t{1}, std::multiplies<>()));
  const std::uint64_t lines = std::max<std::uint64_t>(1, perChunkPoint / line);
  const std::size_t elements = s.chunkRows * perChunkPoint, bytes = elements * sizeof(double);
  // The filter buffers, shuffled values then deflated bytes, in one block of the thread's spare (solver/scratch.hpp),
  // reused from one time point to the next.
  const std::size_t bound = libdeflate_zlib_compress_bound(c.compressor, bytes);
  const ScratchLease block(bytes + bound);
  unsigned char* const shuffled = block.as<unsigned char>();
  unsigned char* const packed = shuffled + bytes;
  std::vector<hsize_t> offset(dims.size(), 0);
  std::vector<std::uint64_t> origin(rank, 0), at(rank, 0);
  for (std::uint64_t done = 0; done < rows; done += s.chunkRows) {
    const std::uint64_t n = std::min<std::uint64_t>(s.chunkRows, rows - done);
    // Every chunk of these time points: the field's chunk grid in row-major order.
    std::fill(origin.begin(), origin.end(), 0);
    for (;;) {
      // HDF5's shuffle filter: byte k of element i goes to k * elements + i; the elements are the chunk's values
      // in row-major order, the fill value 0 where the chunk reaches past the data (as HDF5 stores a partial edge
      // chunk). Read from the points directly (no copy of the chunk first).
      std::size_t i = 0;
      for (std::uint64_t r = 0; r < s.chunkRows; ++r)
        for (std::uint64_t l = 0; l < lines; ++l) {
          // The line's first value in the field (row-major), or none inside it.
          std::uint64_t first = 0, valid = r < n ? line : 0;
          for (std::size_t d = 0, k = l; d + 1 < rank; ++d) {
            std::uint64_t below = 1;
            for (std::size_t e = d + 1; e + 1 < rank; ++e) below *= extent[e];
            at[d] = origin[d] + k / below;
            k %= below;
            if (at[d] >= s.shape[d]) valid = 0;
          }
          if (rank > 0) {
            at[rank - 1] = origin[rank - 1];
            valid = std::min<std::uint64_t>(valid, s.shape[rank - 1] - origin[rank - 1]);
          }
          if (valid > 0)
            for (std::size_t d = 0; d < rank; ++d) first = first * s.shape[d] + at[d];
          const double* const values = valid > 0 ? points.data() + (done + r) * perPoint + first : nullptr;
          for (std::uint64_t j = 0; j < line; ++j, ++i) {
            const double v = j < valid ? (subtract ? values[j] - *subtract : values[j]) : 0.0;
            unsigned char octets[sizeof(double)];
            std::memcpy(octets, &v, sizeof(double));
            for (std::size_t k = 0; k < sizeof(double); ++k) shuffled[k * elements + i] = octets[k];
          }
        }
      const std::size_t size =
          libdeflate_zlib_compress(c.compressor, shuffled, bytes, packed, bound);
      if (size == 0) throw std::runtime_error("deflate of a chunk failed");
      offset[0] = s.count + done;
      for (std::size_t d = 0; d < rank; ++d) offset[d + 1] = origin[d];
      checkH5(H5Dwrite_chunk(s.dataset, H5P_DEFAULT, 0, offset.data(), size, packed), "write a chunk");
      // The next chunk of the grid (the last dimension fastest); none after the last.
      bool next = false;
      for (std::size_t d = rank; d-- > 0 && !next;) {
        origin[d] += extent[d];
        next = origin[d] < s.shape[d];
        if (!next) origin[d] = 0;
      }
      if (!next) break;
    }
  }
  s.count += rows;
}

void ResultsFile::setAttribute(const std::string& object, const std::string& name, const std::string& value) {
  if (std::size_t d = deferredSeries(object); d != noSeries) {
    PendingAttribute a{name, 0, "", 0.0, 0};
    a.text = value;
    series_[d].attributes.push_back(std::move(a));
    return;
  }
  hid_t obj = openObject(object);
  writeStringAttribute(obj, name, value);
  H5Oclose(obj);
}


void ResultsFile::setAttribute(const std::string& object, const std::string& name, double value) {
  if (std::size_t d = deferredSeries(object); d != noSeries) {
    PendingAttribute a{name, 1, "", 0.0, 0};
    a.number = value;
    series_[d].attributes.push_back(std::move(a));
    return;
  }
  hid_t obj = openObject(object);
  writeScalarAttribute(obj, name, H5T_NATIVE_DOUBLE, value);
  H5Oclose(obj);
}

void ResultsFile::setAttribute(const std::string& object, const std::string& name, long value) {
  if (std::size_t d = deferredSeries(object); d != noSeries) {
    PendingAttribute a{name, 2, "", 0.0, 0};
    a.integer = value;
    series_[d].attributes.push_back(std::move(a));
    return;
  }
  hid_t obj = openObject(object);
  writeScalarAttribute(obj, name, H5T_NATIVE_LONG, value);
  H5Oclose(obj);
}

std::string ResultsFile::commit(const std::string& otherPath) {
  const std::string target = otherPath.empty() ? finalPath_ : otherPath;
  bool flushed = true;
  try {
    for (std::size_t i = 0; i < series_.size(); ++i) {
      if (series_[i].deferred)
        materialise(i);  // the small series, whole
      else
        flush(i);  // the last, partly filled chunks
    }
    // Every attachment in one call: each DIMENSION_LIST and REFERENCE_LIST written once (drivers/h5_append.hpp).
    std::map<std::string, hid_t> opened;  // coordinates given by path, each opened once
    struct CloseOpened {
      std::map<std::string, hid_t>& opened;
      ~CloseOpened() {
        for (const auto& [path, id] : opened) H5Dclose(id);
      }
    } closeOpened{opened};
    auto open = [&](const std::string& path) {
      if (auto it = opened.find(path); it != opened.end()) return it->second;
      const hid_t id = H5Dopen2(file_, path.c_str(), H5P_DEFAULT);
      checkH5(id, "open " + path);
      opened.emplace(path, id);
      return id;
    };
    std::vector<ScaleAttachment> list;
    list.reserve(attachments_.size());
    for (const Attachment& a : attachments_) {
      const hid_t scale = a.scaleSeries != noSeries ? series_[a.scaleSeries].dataset : open(a.scalePath);
      const hid_t dataset = a.series != noSeries ? series_[a.series].dataset : open(a.datasetPath);
      list.push_back({dataset, scale, a.axis});
    }
    attachScales(list);
    attachments_.clear();
  } catch (const std::exception&) {
    flushed = false;
  }
  if (!close() || !flushed) {
    const std::string reason = writeFailureReason();
    temporary_->discard();
    throw OutputError(fmt::format("cannot write the results file {}{}; {} is unchanged", target,
                                  reason.empty() ? "" : ": " + reason, target));
  }
  temporary_->commit(target);
  committed_ = true;
  return target;
}

}  // namespace thermorph
