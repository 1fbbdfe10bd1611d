#include "drivers/h5_append.hpp"

#include <hdf5.h>
#include <hdf5_hl.h>

#include <algorithm>
#include <cstddef>
#include <stdexcept>
#include <unordered_map>

#include <fmt/format.h>

namespace thermorph {
namespace {

hid_t stringType() {
  hid_t type = H5Tcopy(H5T_C_S1);
  H5Tset_size(type, H5T_VARIABLE);
  H5Tset_cset(type, H5T_CSET_UTF8);
  return type;
}

//! Link-creation property list that creates missing intermediate groups.
hid_t intermediate() {
  hid_t plist = H5Pcreate(H5P_LINK_CREATE);
  H5Pset_create_intermediate_group(plist, 1);
  return plist;
}

void check(herr_t status, const std::string& what) {
  if (status < 0) throw std::runtime_error("HDF5: cannot " + what);
}

//! The default CF long_name: the dataset's name, underscores as spaces.
std::string nameOf(const std::string& path) {
  std::string name = path.substr(path.find_last_of('/') + 1);
  for (char& c : name)
    if (c == '_') c = ' ';
  return name;
}

}  // namespace

H5Writer::H5Writer(const std::string& path, bool append) {
  file_ = append ? H5Fopen(path.c_str(), H5F_ACC_RDWR, H5P_DEFAULT)
                 : H5Fcreate(path.c_str(), H5F_ACC_TRUNC, H5P_DEFAULT, H5P_DEFAULT);
  if (file_ < 0) throw std::runtime_error(fmt::format("HDF5: cannot {} {}", append ? "open" : "create", path));
}

H5Writer::~H5Writer() { close(); }

void H5Writer::close() {
  if (file_ >= 0) H5Fclose(file_);
  file_ = -1;
}

void H5Writer::group(const std::string& path) {
  if (H5Lexists(file_, path.c_str(), H5P_DEFAULT) > 0) return;
  hid_t plist = intermediate();
  hid_t g = H5Gcreate2(file_, path.c_str(), plist, H5P_DEFAULT, H5P_DEFAULT);
  H5Pclose(plist);
  if (g < 0) throw std::runtime_error("HDF5: cannot create group " + path);
  H5Gclose(g);
}

void H5Writer::doubles(const std::string& path, const std::vector<double>& values, std::vector<std::uint64_t> shape,
                       const std::string& units, const std::string& longName) {
  if (shape.empty()) shape = {values.size()};
  std::vector<hsize_t> dims(shape.begin(), shape.end());
  hid_t space = H5Screate_simple(static_cast<int>(dims.size()), dims.data(), nullptr);
  hid_t plist = intermediate();
  hid_t ds = H5Dcreate2(file_, path.c_str(), H5T_NATIVE_DOUBLE, space, plist, H5P_DEFAULT, H5P_DEFAULT);
  H5Pclose(plist);
  if (ds < 0) throw std::runtime_error("HDF5: cannot create " + path);
  if (!values.empty()) check(H5Dwrite(ds, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, values.data()), "write " + path);
  H5Dclose(ds);
  H5Sclose(space);
  attribute(path, "units", units);
  attribute(path, "long_name", longName.empty() ? nameOf(path) : longName);
}

bool H5Writer::exists(const std::string& path) const { return H5Lexists(file_, path.c_str(), H5P_DEFAULT) > 0; }

void H5Writer::scale(const std::string& path) {
  hid_t ds = H5Dopen2(file_, path.c_str(), H5P_DEFAULT);
  if (ds < 0) throw std::runtime_error("HDF5: cannot open " + path);
  const std::string name = path.substr(path.find_last_of('/') + 1);
  const herr_t status = H5DSset_scale(ds, name.c_str());
  H5Dclose(ds);
  check(status, "make " + path + " a dimension scale");
}

void H5Writer::indexScale(const std::string& path, std::size_t n, const std::string& longName) {
  std::vector<double> index(n);
  for (std::size_t i = 0; i < n; ++i) index[i] = static_cast<double>(i);
  doubles(path, index, {}, "1", longName);
  scale(path);
}

void H5Writer::attach(const std::string& path, const std::vector<std::string>& scales) {
  hid_t ds = H5Dopen2(file_, path.c_str(), H5P_DEFAULT);
  if (ds < 0) throw std::runtime_error("HDF5: cannot open " + path);
  herr_t status = 0;
  for (std::size_t i = 0; i < scales.size() && status >= 0; ++i) {
    if (scales[i].empty()) continue;
    hid_t sc = H5Dopen2(file_, scales[i].c_str(), H5P_DEFAULT);
    status = sc < 0 ? -1 : H5DSattach_scale(ds, sc, static_cast<unsigned>(i));
    if (sc >= 0) H5Dclose(sc);
  }
  H5Dclose(ds);
  check(status, "attach dimension scales to " + path);
}

void H5Writer::strings(const std::string& path, const std::vector<std::string>& values, const std::string& longName) {
  std::vector<const char*> pointers;
  for (const std::string& s : values) pointers.push_back(s.c_str());
  hsize_t n = values.size();
  hid_t type = stringType();
  hid_t space = H5Screate_simple(1, &n, nullptr);
  hid_t plist = intermediate();
  hid_t ds = H5Dcreate2(file_, path.c_str(), type, space, plist, H5P_DEFAULT, H5P_DEFAULT);
  H5Pclose(plist);
  if (ds < 0) throw std::runtime_error("HDF5: cannot create " + path);
  if (n) H5Dwrite(ds, type, H5S_ALL, H5S_ALL, H5P_DEFAULT, pointers.data());
  H5Dclose(ds);
  H5Sclose(space);
  H5Tclose(type);
  attribute(path, "long_name", longName.empty() ? nameOf(path) : longName);
}

void H5Writer::attribute(const std::string& object, const std::string& name, const std::string& value) {
  hid_t type = stringType();
  hid_t space = H5Screate(H5S_SCALAR);
  if (H5Aexists_by_name(file_, object.c_str(), name.c_str(), H5P_DEFAULT) > 0)
    H5Adelete_by_name(file_, object.c_str(), name.c_str(), H5P_DEFAULT);
  hid_t a = H5Acreate_by_name(file_, object.c_str(), name.c_str(), type, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
  const char* p = value.c_str();
  if (a >= 0) {
    H5Awrite(a, type, &p);
    H5Aclose(a);
  }
  H5Sclose(space);
  H5Tclose(type);
  if (a < 0) throw std::runtime_error("HDF5: cannot write attribute " + name + " of " + object);
}

void H5Writer::attribute(const std::string& object, const std::string& name, double value) {
  hid_t space = H5Screate(H5S_SCALAR);
  if (H5Aexists_by_name(file_, object.c_str(), name.c_str(), H5P_DEFAULT) > 0)
    H5Adelete_by_name(file_, object.c_str(), name.c_str(), H5P_DEFAULT);
  hid_t a = H5Acreate_by_name(file_, object.c_str(), name.c_str(), H5T_NATIVE_DOUBLE, space, H5P_DEFAULT, H5P_DEFAULT,
                              H5P_DEFAULT);
  if (a >= 0) {
    H5Awrite(a, H5T_NATIVE_DOUBLE, &value);
    H5Aclose(a);
  }
  H5Sclose(space);
  if (a < 0) throw std::runtime_error("HDF5: cannot write attribute " + name + " of " + object);
}

std::vector<double> h5ReadDoubles(const std::string& file, const std::string& path) {
  std::vector<double> out;
  hid_t f = H5Fopen(file.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
  if (f < 0) throw std::runtime_error("HDF5: cannot open " + file);
  if (H5Lexists(f, path.c_str(), H5P_DEFAULT) > 0) {
    hid_t ds = H5Dopen2(f, path.c_str(), H5P_DEFAULT);
    hid_t space = H5Dget_space(ds);
    hssize_t n = H5Sget_simple_extent_npoints(space);
    out.resize(static_cast<std::size_t>(n));
    if (n > 0) H5Dread(ds, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, out.data());
    H5Sclose(space);
    H5Dclose(ds);
  }
  H5Fclose(f);
  return out;
}

std::vector<std::string> h5ReadStrings(const std::string& file, const std::string& path) {
  std::vector<std::string> out;
  hid_t f = H5Fopen(file.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
  if (f < 0) throw std::runtime_error("HDF5: cannot open " + file);
  if (H5Lexists(f, path.c_str(), H5P_DEFAULT) > 0) {
    hid_t ds = H5Dopen2(f, path.c_str(), H5P_DEFAULT);
    hid_t space = H5Dget_space(ds);
    hssize_t n = H5Sget_simple_extent_npoints(space);
    std::vector<char*> buffer(static_cast<std::size_t>(n), nullptr);
    hid_t type = stringType();
    if (n > 0) H5Dread(ds, type, H5S_ALL, H5S_ALL, H5P_DEFAULT, buffer.data());
    for (char* s : buffer) out.emplace_back(s ? s : "");
    if (n > 0) H5Dvlen_reclaim(type, space, H5P_DEFAULT, buffer.data());
    H5Tclose(type);
    H5Sclose(space);
    H5Dclose(ds);
  }
  H5Fclose(f);
  return out;
}

}  // namespace thermorph

namespace thermorph {

namespace {
herr_t collectName(hid_t, const char* name, const H5L_info_t*, void* data) {
  static_cast<std::vector<std::string>*>(data)->emplace_back(name);
  return 0;
}
}  // namespace

void attachScales(std::span<const ScaleAttachment> list) {
  if (list.empty()) return;
  // Objects that carry their list already (attached earlier) keep HDF5's own read-modify-write, and so does every
  // entry that shares a dataset or scale with them (closure): the two sets of entries touch disjoint objects.
  std::vector<hobj_ref_t> datasetRefs(list.size()), scaleRefs(list.size());
  for (std::size_t i = 0; i < list.size(); ++i) {  // object references: the objects' addresses in the file
    check(H5Rcreate(&datasetRefs[i], list[i].dataset, ".", H5R_OBJECT, -1), "reference a dataset");
    check(H5Rcreate(&scaleRefs[i], list[i].scale, ".", H5R_OBJECT, -1), "reference a dimension scale");
  }
  std::unordered_map<hobj_ref_t, bool> earlier;  // per object: attached before this call
  for (std::size_t i = 0; i < list.size(); ++i) {
    if (!earlier.count(datasetRefs[i])) earlier[datasetRefs[i]] = H5Aexists(list[i].dataset, "DIMENSION_LIST") != 0;
    if (!earlier.count(scaleRefs[i])) earlier[scaleRefs[i]] = H5Aexists(list[i].scale, "REFERENCE_LIST") != 0;
  }
  std::vector<bool> legacy(list.size(), false);
  for (bool grown = true; grown;) {
    grown = false;
    for (std::size_t i = 0; i < list.size(); ++i) {
      if (legacy[i] || !(earlier[datasetRefs[i]] || earlier[scaleRefs[i]])) continue;
      legacy[i] = grown = true;
      earlier[datasetRefs[i]] = earlier[scaleRefs[i]] = true;
    }
  }
  for (std::size_t i = 0; i < list.size(); ++i)
    if (legacy[i]) check(H5DSattach_scale(list[i].dataset, list[i].scale, list[i].axis), "attach a dimension scale");
  struct Target {
    hid_t id;
    std::vector<std::vector<hobj_ref_t>> axes;  // the scales of each axis, in the order given
  };
  // One REFERENCE_LIST element: the layout of HDF5's own ds_list_t (an object reference, then the axis).
  struct Entry {
    hobj_ref_t dataset;
    unsigned int dimension;
  };
  struct Scale {
    hid_t id;
    std::vector<Entry> entries;
  };
  std::vector<Target> targets;
  std::vector<Scale> scales;
  std::unordered_map<hobj_ref_t, std::size_t> targetIndex, scaleIndex;
  for (std::size_t i = 0; i < list.size(); ++i) {
    if (legacy[i]) continue;
    const ScaleAttachment& a = list[i];
    const hobj_ref_t dataset = datasetRefs[i], scale = scaleRefs[i];
    if (dataset == scale) throw std::runtime_error("HDF5: cannot attach a dataset to itself as a dimension scale");
    auto [t, newTarget] = targetIndex.emplace(dataset, targets.size());
    if (newTarget) {
      if (H5DSis_scale(a.dataset) != 0) throw std::runtime_error("HDF5: a dimension scale cannot have dimension scales");
      const hid_t space = H5Dget_space(a.dataset);
      const int rank = space < 0 ? -1 : H5Sget_simple_extent_ndims(space);
      if (space >= 0) H5Sclose(space);
      check(rank, "read the rank of a dataset");
      targets.push_back({a.dataset, std::vector<std::vector<hobj_ref_t>>(static_cast<std::size_t>(std::max(rank, 1)))});
    }
    Target& target = targets[t->second];
    if (a.axis >= target.axes.size()) throw std::runtime_error("HDF5: dimension scale attached to a missing axis");
    std::vector<hobj_ref_t>& axis = target.axes[a.axis];
    if (std::find(axis.begin(), axis.end(), scale) != axis.end()) continue;  // attached already
    axis.push_back(scale);
    auto [s, newScale] = scaleIndex.emplace(scale, scales.size());
    if (newScale) scales.push_back({a.scale, {}});
    scales[s->second].entries.push_back({dataset, a.axis});
  }
  for (const Scale& s : scales) {
    hobj_ref_t ref = 0;
    H5Rcreate(&ref, s.id, ".", H5R_OBJECT, -1);
    if (targetIndex.count(ref) || H5Aexists(s.id, "DIMENSION_LIST") != 0)
      throw std::runtime_error("HDF5: a dimension scale cannot have dimension scales");
  }
  // Closes the HDF5 handles of this function on every path.
  struct Handles {
    std::vector<std::pair<hid_t, herr_t (*)(hid_t)>> open;
    ~Handles() {
      for (auto it = open.rbegin(); it != open.rend(); ++it)
        if (it->first >= 0) it->second(it->first);
    }
    hid_t keep(hid_t id, herr_t (*closer)(hid_t)) {
      open.emplace_back(id, closer);
      return id;
    }
  } h;
  const hid_t listType = h.keep(H5Tvlen_create(H5T_STD_REF_OBJ), H5Tclose);
  check(listType < 0 ? -1 : 0, "create the DIMENSION_LIST type");
  for (const Target& t : targets) {
    std::vector<hvl_t> lists(t.axes.size());
    for (std::size_t i = 0; i < t.axes.size(); ++i) {
      lists[i].len = t.axes[i].size();
      lists[i].p = t.axes[i].empty() ? nullptr : const_cast<hobj_ref_t*>(t.axes[i].data());
    }
    const hsize_t n = lists.size();
    const hid_t space = h.keep(H5Screate_simple(1, &n, nullptr), H5Sclose);
    const hid_t attr = h.keep(H5Acreate2(t.id, "DIMENSION_LIST", listType, space, H5P_DEFAULT, H5P_DEFAULT), H5Aclose);
    check(attr < 0 ? -1 : H5Awrite(attr, listType, lists.data()), "write a DIMENSION_LIST");
  }
  const hid_t entryType = h.keep(H5Tcreate(H5T_COMPOUND, sizeof(Entry)), H5Tclose);
  check(entryType < 0 ? -1 : 0, "create the REFERENCE_LIST type");
  check(H5Tinsert(entryType, "dataset", offsetof(Entry, dataset), H5T_STD_REF_OBJ), "create the REFERENCE_LIST type");
  check(H5Tinsert(entryType, "dimension", offsetof(Entry, dimension), H5T_NATIVE_INT), "create the REFERENCE_LIST type");
  for (const Scale& s : scales) {
    const hsize_t n = s.entries.size();
    const hid_t space = h.keep(H5Screate_simple(1, &n, nullptr), H5Sclose);
    const hid_t attr = h.keep(H5Acreate2(s.id, "REFERENCE_LIST", entryType, space, H5P_DEFAULT, H5P_DEFAULT), H5Aclose);
    check(attr < 0 ? -1 : H5Awrite(attr, entryType, s.entries.data()), "write a REFERENCE_LIST");
    // As H5DSattach_scale: a dataset attached as a scale is marked one.
    if (H5DSis_scale(s.id) == 0) check(H5DSset_scale(s.id, nullptr), "make a dataset a dimension scale");
  }
}

std::vector<std::string> h5List(const std::string& file, const std::string& group) {
  std::vector<std::string> out;
  hid_t f = H5Fopen(file.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
  if (f < 0) throw std::runtime_error("HDF5: cannot open " + file);
  if (H5Lexists(f, group.c_str(), H5P_DEFAULT) > 0) {
    hid_t g = H5Gopen2(f, group.c_str(), H5P_DEFAULT);
    H5Literate(g, H5_INDEX_NAME, H5_ITER_INC, nullptr, collectName, &out);
    H5Gclose(g);
  }
  H5Fclose(f);
  return out;
}

std::string h5ReadStringAttribute(const std::string& file, const std::string& object, const std::string& name) {
  std::string out;
  hid_t f = H5Fopen(file.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
  if (f < 0) throw std::runtime_error("HDF5: cannot open " + file);
  if (H5Aexists_by_name(f, object.c_str(), name.c_str(), H5P_DEFAULT) > 0) {
    hid_t a = H5Aopen_by_name(f, object.c_str(), name.c_str(), H5P_DEFAULT, H5P_DEFAULT);
    hid_t type = H5Aget_type(a);
    if (H5Tis_variable_str(type) > 0) {
      char* s = nullptr;
      hid_t mem = stringType();
      H5Aread(a, mem, &s);
      if (s) out = s;
      H5free_memory(s);
      H5Tclose(mem);
    } else {
      std::vector<char> buffer(H5Tget_size(type) + 1, '\0');
      H5Aread(a, type, buffer.data());
      out = buffer.data();
    }
    H5Tclose(type);
    H5Aclose(a);
  }
  H5Fclose(f);
  return out;
}

}  // namespace thermorph
