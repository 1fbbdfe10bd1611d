#pragma once
//! Small HDF5 writer for the fit, sensitivity and uncertainty groups: datasets of doubles and strings with
//! `units` attributes, written into a new file or into an existing results file (the fitted run's).
#include <cstdint>
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
//! Names of the members of a group (empty when missing), in HDF5's name order.
std::vector<std::string> h5List(const std::string& file, const std::string& group);
//! A string attribute ("" when missing).
std::string h5ReadStringAttribute(const std::string& file, const std::string& object, const std::string& name);
}  // namespace thermorph
