#pragma once
//! Small HDF5 writer for the fit, sensitivity and uncertainty groups: datasets of doubles and strings with
//! `units` attributes, written into a new file or into an existing results file (the fitted run's).
#include <cstdint>
#include <span>
#include <string>
#include <vector>

namespace thermorph {

class H5Writer {
 public:
  //! Create `path` (truncating), or open an existing file for appending when `append`.
  H5Writer(const std::string& path, bool append);
  ~H5Writer();
  H5Writer(const H5Writer&) = delete;
  H5Writer& operator=(const H5Writer&) = delete;

  //! Every dataset gets `units` (numbers) and a CF `long_name` (given, or its name with spaces for underscores).
  void doubles(const std::string& path, const std::vector<double>& values, std::vector<std::uint64_t> shape,
               const std::string& units, const std::string& longName = "");
  void strings(const std::string& path, const std::vector<std::string>& values, const std::string& longName = "");
  //! netCDF-4 dimensions: make dataset `path` a dimension scale (a coordinate named after the dataset).
  void scale(const std::string& path);
  //! An index coordinate 0 .. n-1 (units 1) at `path`, made a dimension scale.
  void indexScale(const std::string& path, std::size_t n, const std::string& longName);
  //! Attach one dimension scale (a dataset path) to each dimension of dataset `path`, in order.
  void attach(const std::string& path, const std::vector<std::string>& scales);
  bool exists(const std::string& path) const;
  void attribute(const std::string& object, const std::string& name, const std::string& value);
  void attribute(const std::string& object, const std::string& name, double value);
  void group(const std::string& path);
  void close();

 private:
  long long file_ = -1;
};

//! Read a 1-D dataset of doubles (empty when missing); for the sweep tables the sensitivity commands read back.
std::vector<double> h5ReadDoubles(const std::string& file, const std::string& path);
//! Read a 1-D dataset of variable-length strings.
std::vector<std::string> h5ReadStrings(const std::string& file, const std::string& path);

}  // namespace thermorph

namespace thermorph {
//! One netCDF-4 dimension: axis `axis` of dataset `dataset` gets the dimension scale `scale` (open HDF5 dataset
//! handles; the scale already made one with H5DSset_scale).
struct ScaleAttachment {
  long long dataset;
  long long scale;
  unsigned axis;
};
//! Attach many dimension scales at once. Writes the same attributes as one `H5DSattach_scale` per entry (HDF5
//! 1.10 layout: on the dataset `DIMENSION_LIST`, a variable-length list of object references per axis; on the
//! scale `REFERENCE_LIST`, compound {dataset: object reference, dimension: int} per attached axis, in the order
//! given; a duplicate entry is dropped from both, where H5DSattach_scale appends it to REFERENCE_LIST again), but each attribute is created and written once: `H5DSattach_scale` reads, deletes
//! and rewrites the scale's whole REFERENCE_LIST at every call (quadratic in the datasets per scale; 19 % of a
//! 100-node run, 10 % of a small sweep's process). Entries whose dataset or scale already carries its list
//! (attached earlier), and every entry sharing an object with those, go through `H5DSattach_scale` one by one.
//! Throws std::runtime_error.
void attachScales(std::span<const ScaleAttachment> list);
//! Names of the members of a group (empty when missing), in HDF5's name order.
std::vector<std::string> h5List(const std::string& file, const std::string& group);
//! A string attribute ("" when missing).
std::string h5ReadStringAttribute(const std::string& file, const std::string& object, const std::string& name);
}  // namespace thermorph
