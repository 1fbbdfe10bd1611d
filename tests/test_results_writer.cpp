// The results writer against HDF5 itself: dimension scales attached in bulk (drivers/h5_append.hpp, attachScales)
// read back through HDF5's dimension-scale API (H5DS of hdf5_hl, the reference implementation netCDF-4 and h5py
// build on): the same scales per axis, in the same order, and the same REFERENCE_LIST on each scale as one
// H5DSattach_scale per entry; and compressed series whose chunks the writer filters itself decoded by HDF5's own
// filter pipeline (shuffle and zlib's inflate) to the values written.
#include <hdf5.h>
#include <hdf5_hl.h>
#include <unistd.h>

#include <catch2/catch.hpp>
#include <cmath>
#include <filesystem>
#include <string>
#include <utility>
#include <vector>

#include "drivers/h5_append.hpp"
#include "drivers/results.hpp"

using namespace thermorph;

namespace {

//! The attachments of a file: per dataset and axis the names of its scales (H5DSiterate_scales order), and per
//! scale its REFERENCE_LIST entries (dataset name, axis) in stored order.
struct Layout {
  std::vector<std::vector<std::vector<std::string>>> axes;
  std::vector<std::vector<std::pair<std::string, int>>> references;
};

std::string nameOf(hid_t id) {
  char name[256];
  H5Iget_name(id, name, sizeof name);
  return name;
}

herr_t collectScale(hid_t, unsigned, hid_t scale, void* out) {
  static_cast<std::vector<std::string>*>(out)->push_back(nameOf(scale));
  return 0;
}

Layout readLayout(hid_t file, const std::vector<std::string>& datasets, const std::vector<std::string>& scales) {
  Layout out;
  for (const std::string& d : datasets) {
    hid_t ds = H5Dopen2(file, d.c_str(), H5P_DEFAULT);
    REQUIRE(ds >= 0);
    hid_t space = H5Dget_space(ds);
    const int rank = H5Sget_simple_extent_ndims(space);
    H5Sclose(space);
    std::vector<std::vector<std::string>> axes(static_cast<std::size_t>(rank));
    for (int i = 0; i < rank; ++i) {
      const int n = H5DSget_num_scales(ds, static_cast<unsigned>(i));
      if (n > 0) REQUIRE(H5DSiterate_scales(ds, static_cast<unsigned>(i), nullptr, collectScale, &axes[i]) >= 0);
      CHECK(static_cast<int>(axes[i].size()) == std::max(n, 0));
    }
    out.axes.push_back(axes);
    H5Dclose(ds);
  }
  // REFERENCE_LIST read with HDF5's own compound layout {object reference, int}.
  struct Entry {
    hobj_ref_t ref;
    int dim;
  };
  for (const std::string& s : scales) {
    hid_t sc = H5Dopen2(file, s.c_str(), H5P_DEFAULT);
    REQUIRE(sc >= 0);
    CHECK(H5DSis_scale(sc) > 0);
    std::vector<std::pair<std::string, int>> refs;
    if (H5Aexists(sc, "REFERENCE_LIST") > 0) {
      hid_t attr = H5Aopen(sc, "REFERENCE_LIST", H5P_DEFAULT);
      hid_t space = H5Aget_space(attr);
      const auto n = static_cast<std::size_t>(H5Sget_simple_extent_npoints(space));
      hid_t type = H5Tcreate(H5T_COMPOUND, sizeof(Entry));
      H5Tinsert(type, "dataset", HOFFSET(Entry, ref), H5T_STD_REF_OBJ);
      H5Tinsert(type, "dimension", HOFFSET(Entry, dim), H5T_NATIVE_INT);
      std::vector<Entry> entries(n);
      REQUIRE(H5Aread(attr, type, entries.data()) >= 0);
      for (const Entry& e : entries) {
        hid_t target = H5Rdereference2(sc, H5P_DEFAULT, H5R_OBJECT, &e.ref);
        REQUIRE(target >= 0);
        refs.emplace_back(nameOf(target), e.dim);
        H5Dclose(target);
      }
      H5Tclose(type);
      H5Sclose(space);
      H5Aclose(attr);
    }
    out.references.push_back(refs);
    H5Dclose(sc);
  }
  return out;
}

//! Scales /x (3), /y (2), /t (4), datasets /a [4 x 3], /b [4 x 3 x 2], /c [4], /d [4 x 3]; `attach` attaches.
template <class Attach>
Layout build(const std::string& path, bool duplicate, Attach attach) {
  hid_t file = H5Fcreate(path.c_str(), H5F_ACC_TRUNC, H5P_DEFAULT, H5P_DEFAULT);
  REQUIRE(file >= 0);
  auto make = [&](const std::string& name, std::vector<hsize_t> dims) {
    hid_t space = H5Screate_simple(static_cast<int>(dims.size()), dims.data(), nullptr);
    hid_t ds = H5Dcreate2(file, name.c_str(), H5T_NATIVE_DOUBLE, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    H5Sclose(space);
    REQUIRE(ds >= 0);
    return ds;
  };
  hid_t x = make("x", {3}), y = make("y", {2}), t = make("t", {4});
  for (auto [id, name] : {std::pair{x, "x"}, std::pair{y, "y"}, std::pair{t, "t"}}) REQUIRE(H5DSset_scale(id, name) >= 0);
  hid_t a = make("a", {4, 3}), b = make("b", {4, 3, 2}), c = make("c", {4}), d = make("d", {4, 3});
  // A second scale on one axis (/y on /a's axis 1 after /x); with `duplicate`, /c-/t twice.
  std::vector<ScaleAttachment> list{{a, t, 0}, {a, x, 1}, {b, t, 0}, {b, x, 1}, {b, y, 2},
                                    {c, t, 0}, {a, y, 1}, {d, t, 0}, {d, x, 1}};
  if (duplicate) list.insert(list.begin() + 7, ScaleAttachment{c, t, 0});
  attach(list, file);
  Layout layout = readLayout(file, {"/a", "/b", "/c", "/d"}, {"/x", "/y", "/t"});
  for (hid_t id : {x, y, t, a, b, c, d}) H5Dclose(id);
  H5Fclose(file);
  return layout;
}

}  // namespace

TEST_CASE("attachScales writes the dimension scales H5DSattach_scale writes", "[h5][results]") {
  const std::filesystem::path dir = std::filesystem::temp_directory_path();
  const std::string one = (dir / ("thermorph-scales-one-" + std::to_string(::getpid()) + ".h5")).string();
  const std::string bulk = (dir / ("thermorph-scales-bulk-" + std::to_string(::getpid()) + ".h5")).string();
  const std::string mixed = (dir / ("thermorph-scales-mixed-" + std::to_string(::getpid()) + ".h5")).string();
  const Layout reference = build(one, false, [](const std::vector<ScaleAttachment>& list, hid_t) {
    for (const ScaleAttachment& e : list) REQUIRE(H5DSattach_scale(e.dataset, e.scale, e.axis) >= 0);
  });
  // The reference itself, as HDF5 documents it: /a axis 1 has /x then /y; /t is referenced by a, b, c, d.
  REQUIRE(reference.axes[0][1] == std::vector<std::string>{"/x", "/y"});
  REQUIRE(reference.references[2].size() == 4);

  SECTION("all in one call") {
    const Layout layout = build(bulk, false, [](const std::vector<ScaleAttachment>& list, hid_t) { attachScales(list); });
    CHECK(layout.axes == reference.axes);
    CHECK(layout.references == reference.references);
  }
  SECTION("a duplicate entry is dropped") {
    // HDF5 1.10's H5DSattach_scale leaves DIMENSION_LIST alone for a duplicate but still appends it to the
    // scale's REFERENCE_LIST (5 entries on /t); attachScales drops it from both.
    const Layout layout = build(bulk, true, [](const std::vector<ScaleAttachment>& list, hid_t) { attachScales(list); });
    CHECK(layout.axes == reference.axes);
    CHECK(layout.references == reference.references);
  }
  SECTION("some attached earlier one by one: the rest joins them") {
    const Layout layout = build(mixed, false, [](const std::vector<ScaleAttachment>& list, hid_t) {
      // /d to /t before: every entry sharing /t, and by closure every entry here, goes one by one.
      REQUIRE(H5DSattach_scale(list[7].dataset, list[7].scale, list[7].axis) >= 0);
      std::vector<ScaleAttachment> rest(list.begin(), list.begin() + 7);
      rest.push_back(list[8]);
      attachScales(rest);
    });
    CHECK(layout.axes == reference.axes);
    // /t's list starts with /d (attached first here); every other list as in the reference.
    CHECK(layout.references[0] == reference.references[0]);
    CHECK(layout.references[1] == reference.references[1]);
    CHECK(layout.references[2].front().first == "/d");
    CHECK(layout.references[2].size() == reference.references[2].size());
  }
  SECTION("a dataset cannot be its own scale") {
    hid_t file = H5Fcreate(bulk.c_str(), H5F_ACC_TRUNC, H5P_DEFAULT, H5P_DEFAULT);
    hsize_t n = 3;
    hid_t space = H5Screate_simple(1, &n, nullptr);
    hid_t x = H5Dcreate2(file, "x", H5T_NATIVE_DOUBLE, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    REQUIRE(H5DSset_scale(x, "x") >= 0);
    std::vector<ScaleAttachment> list{{x, x, 0}};
    CHECK_THROWS(attachScales(list));
    H5Dclose(x);
    H5Sclose(space);
    H5Fclose(file);
  }
  for (const std::string& f : {one, bulk, mixed}) std::filesystem::remove(f);
}

TEST_CASE("compressed series filtered by the writer read back through HDF5's own filters", "[h5][results]") {
  // The chunks of a compressed series are shuffled and deflated by drivers/results.cpp (libdeflate) and written
  // raw; HDF5's filter pipeline (zlib) must decode them to the values written, for whole chunks, a partial last
  // chunk, and a chunk first written partly (points read back early: a group created after the first outputs)
  // and then completed by HDF5's own read-merge-write.
  const std::string path =
      (std::filesystem::temp_directory_path() / ("thermorph-writer-" + std::to_string(::getpid()) + ".h5")).string();
  const std::uint64_t cells = 700;  // 11 points per chunk of 8192 values
  const int points = 40;
  auto value = [](int k, std::uint64_t i) { return 37.0 - 1e-3 * static_cast<double>(k) * std::sin(0.01 * static_cast<double>(i)) + 1e-12 * static_cast<double>(i); };
  {
    ResultsFile f(path);
    const std::size_t time = f.createTime("s", "time");
    const std::size_t field = f.createSeries("/a/temperature", {cells}, "degC");
    std::vector<double> row(cells);
    for (int k = 0; k < points; ++k) {
      if (k == 5) f.createSeries("/b/temperature", {cells}, "degC");  // reads /time back: its chunk written partly
      const double t = 60.0 * k;
      f.append(time, {&t, 1});
      for (std::uint64_t i = 0; i < cells; ++i) row[i] = value(k, i);
      f.append(field, row);
    }
    f.commit();
  }
  hid_t file = H5Fopen(path.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
  REQUIRE(file >= 0);
  auto read = [&](const char* name, std::size_t n) {
    std::vector<double> out(n);
    hid_t ds = H5Dopen2(file, name, H5P_DEFAULT);
    REQUIRE(ds >= 0);
    hid_t plist = H5Dget_create_plist(ds);
    CHECK(H5Pget_nfilters(plist) == 2);  // shuffle, deflate: the file says how to decode it
    H5Pclose(plist);
    REQUIRE(H5Dread(ds, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, out.data()) >= 0);
    H5Dclose(ds);
    return out;
  };
  const std::vector<double> time = read("/time", points), field = read("/a/temperature", points * cells),
                            copy = read("/b/time", points);
  H5Fclose(file);
  std::filesystem::remove(path);
  for (int k = 0; k < points; ++k) {
    CHECK(time[static_cast<std::size_t>(k)] == 60.0 * k);
    CHECK(copy[static_cast<std::size_t>(k)] == 60.0 * k);
  }
  std::size_t wrong = 0;
  for (int k = 0; k < points; ++k)
    for (std::uint64_t i = 0; i < cells; ++i) wrong += field[static_cast<std::size_t>(k) * cells + i] != value(k, i);
  CHECK(wrong == 0);
}

TEST_CASE("fields of more than 4096 values per time point are split into chunks of part of one", "[h5][results]") {
  // A large field's time point is written as several chunks of 32 KiB at most (the first dimensions cut first, in
  // pieces of equal size along the dimension cut, edge chunks padded with the fill value); HDF5's own filter pipeline (zlib) and chunk index must give back every value
  // written, and the dataset's chunk shape must say so.
  const std::string path =
      (std::filesystem::temp_directory_path() / ("thermorph-split-" + std::to_string(::getpid()) + ".h5")).string();
  struct Field {
    const char* name;
    std::vector<std::uint64_t> shape;
    std::vector<hsize_t> chunk;  // expected: time points, then the field's dimensions
  };
  const std::vector<Field> fields = {
      {"/a/one_line", {70000}, {1, 3889}},        // 18 chunks per time point, the last with 2 values of padding
      {"/b/rows", {7, 1000}, {1, 4, 1000}},       // whole rows, the last chunk of rows partial
      {"/c/lines", {3, 40000}, {1, 1, 4000}},     // lines longer than a chunk: cut along the last dimension too
      {"/e/equal", {20000}, {1, 4000}},           // five equal pieces (the radial peer case's field)
      {"/f/point", {4096}, {2, 4096}},            // up to 4096 values: whole time points per chunk, as before
      {"/d/small", {40, 30}, {6, 40, 30}},        // 1200 values: several time points per chunk, as before
  };
  const int points = 5;
  auto value = [](int k, std::size_t f, std::uint64_t i) {
    return 37.0 - 1e-3 * static_cast<double>(k + 1) * std::sin(0.01 * static_cast<double>(i)) + 0.5 * static_cast<double>(f);
  };
  {
    ResultsFile file(path);
    const std::size_t time = file.createTime("s", "time");
    std::vector<std::size_t> series;
    for (const Field& f : fields) series.push_back(file.createSeries(f.name, f.shape, "degC"));
    for (int k = 0; k < points; ++k) {
      const double t = 60.0 * k;
      file.append(time, {&t, 1});
      for (std::size_t f = 0; f < fields.size(); ++f) {
        std::uint64_t perPoint = 1;
        for (auto d : fields[f].shape) perPoint *= d;
        std::vector<double> row(perPoint);
        for (std::uint64_t i = 0; i < row.size(); ++i) row[i] = value(k, f, i) + 273.15;
        file.append(series[f], row, 273.15);  // written in degC as the field recorder does
      }
    }
    file.commit();
  }
  hid_t file = H5Fopen(path.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
  REQUIRE(file >= 0);
  for (std::size_t f = 0; f < fields.size(); ++f) {
    const Field& field = fields[f];
    std::uint64_t perPoint = 1;
    for (auto d : field.shape) perPoint *= d;
    hid_t ds = H5Dopen2(file, field.name, H5P_DEFAULT);
    REQUIRE(ds >= 0);
    hid_t plist = H5Dget_create_plist(ds);
    std::vector<hsize_t> chunk(field.shape.size() + 1);
    CHECK(H5Pget_chunk(plist, static_cast<int>(chunk.size()), chunk.data()) == static_cast<int>(chunk.size()));
    H5Pclose(plist);
    CHECK(chunk == field.chunk);
    std::vector<double> out(points * perPoint);
    REQUIRE(H5Dread(ds, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, out.data()) >= 0);
    H5Dclose(ds);
    std::size_t wrong = 0;
    for (int k = 0; k < points; ++k)
      for (std::uint64_t i = 0; i < perPoint; ++i)
        wrong += out[static_cast<std::size_t>(k) * perPoint + i] != (value(k, f, i) + 273.15) - 273.15;
    INFO(field.name);
    CHECK(wrong == 0);
  }
  H5Fclose(file);
  std::filesystem::remove(path);
}
