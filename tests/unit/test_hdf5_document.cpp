// Tests of Hdf5Document: files are written into a temporary directory and
// read back with the HDF5 C++ and HL APIs (never with the document's own
// code). Each check names the document it is checked against.

#include <catch2/catch.hpp>

#include <H5Cpp.h>
#include <hdf5_hl.h>
#include <unistd.h>

#include <algorithm>
#include <array>
#include <atomic>
#include <cmath>
#include <cstdint>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <limits>
#include <string>
#include <span>
#include <vector>

#include <fmt/format.h>

#include "aerosect/error.hpp"
#include "hdf5_helpers.hpp"
#include "aerosect/io/hdf5_document.hpp"

namespace fs = std::filesystem;
using aerosect::Hdf5Document;
using aerosect::OutputError;
using aerosect::RunMetadata;

using namespace aerosect::test;  // TempDir and the HDF5 readers (hdf5_helpers.hpp)

namespace {

RunMetadata document_metadata() {
  RunMetadata meta;
  meta.file_kind = "flutter";
  meta.title = "document test";
  meta.text_attributes = {{"caution", "a test file"}, {"sign_conventions", "plunge down"}};
  meta.parameters = {{"si", "semichord", 0.127, "m", "semichord"},
                     {"si", "density", 1.225, "kg m-3", "air density"},
                     {"nondimensional", "mass_ratio", 40.0, "1", "mass ratio"}};
  return meta;
}

const std::vector<double> kSpeeds{10.0, 20.0, 30.0, 40.0, 50.0};
const std::vector<std::int32_t> kModes{1, 2, 3};

// Element (i, j) of a (speed, mode) array: any transposed or misplaced
// element shows.
double value_at(std::size_t i, std::size_t j) {
  return 100.0 * static_cast<double>(i) + static_cast<double>(j) + 0.25;
}

std::vector<double> speed_mode_values() {
  std::vector<double> v;
  for (std::size_t i = 0; i < kSpeeds.size(); ++i)
    for (std::size_t j = 0; j < kModes.size(); ++j) v.push_back(value_at(i, j));
  return v;
}

// The layout of a small flutter file, without committing it.
void write_layout(Hdf5Document& doc) {
  doc.metadata(document_metadata());
  doc.axis("speed", kSpeeds, "m s-1", "true airspeed");
  doc.integer_axis("mode", kModes, "mode number");
  doc.text_attribute("mode", "mode_names", "plunge,pitch,flap");
  std::vector<double> reduced(kSpeeds.size());
  for (std::size_t i = 0; i < kSpeeds.size(); ++i) reduced[i] = kSpeeds[i] / 25.0;
  doc.dataset("reduced_speed", {"speed"}, reduced, "1", "reduced speed");
  const auto v = speed_mode_values();
  doc.dataset("nominal/state_space/damping_ratio", {"speed", "mode"}, v, "1", "damping ratio");
  doc.dataset("/nominal/pk/frequency", {"speed", "mode"}, v, "Hz", "modal frequency");
  doc.integer_attribute("nominal/state_space", "flutter_found", 1);
  doc.number_attribute("nominal/state_space", "flutter_speed", 41.5, "m s-1");
  doc.number_attribute("nominal/pk", "flutter_speed",
                       std::numeric_limits<double>::quiet_NaN(), "m s-1");
  doc.number_attribute("", "reference_speed", 25.0, "m s-1");
  doc.text_attribute("/", "history", "written by a test");
  doc.text_attribute("nominal/state_space/damping_ratio", "comment", "per mode");
}

std::string write_document(const TempDir& dir, const std::string& name = "flutter.h5") {
  const std::string path = dir.file(name);
  Hdf5Document doc(path);
  write_layout(doc);
  doc.commit();
  return path;
}

// Runs `call` and returns the OutputError it throws (fails when it throws
// nothing or something else).
template <typename Call>
OutputError output_error(Call call) {
  try {
    call();
  } catch (const OutputError& e) {
    return e;
  }
  FAIL("no OutputError thrown");
  return OutputError("", "");
}

}  // namespace

TEST_CASE("HDF5 document: values are stored row-major with units and long_name",
          "[hdf5_document]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = write_document(dir);
  H5::H5File file(path, H5F_ACC_RDONLY);

  // Axes: 1-D, F64LE / I32LE, the values given (HDF5 H5T docs, H5Dread).
  H5::DataSet speed = file.openDataSet("speed");
  REQUIRE(speed.getDataType() == H5::PredType::IEEE_F64LE);
  REQUIRE(read_all(speed) == kSpeeds);
  H5::DataSet mode = file.openDataSet("mode");
  REQUIRE(mode.getDataType() == H5::PredType::STD_I32LE);
  REQUIRE(dims_of(mode) == std::vector<hsize_t>{3});
  std::array<std::int32_t, 3> modes{};
  mode.read(modes.data(), H5::PredType::NATIVE_INT32);
  REQUIRE(modes == std::array<std::int32_t, 3>{1, 2, 3});

  // HDF5 User Guide, dataspaces: a C-order (row-major) buffer, the last
  // dimension varying fastest, so element (i, j) is at i * n_mode + j.
  H5::DataSet damping = file.openDataSet("/nominal/state_space/damping_ratio");
  REQUIRE(damping.getDataType() == H5::PredType::IEEE_F64LE);
  REQUIRE(dims_of(damping) == std::vector<hsize_t>{5, 3});
  const auto values = read_all(damping);
  for (std::size_t i = 0; i < 5; ++i)
    for (std::size_t j = 0; j < 3; ++j) {
      INFO("speed " << i << ", mode " << j);
      REQUIRE(values[i * 3 + j] == value_at(i, j));
    }
  REQUIRE(read_all(file.openDataSet("nominal/pk/frequency")) == speed_mode_values());
  REQUIRE(read_all(file.openDataSet("reduced_speed")) ==
          std::vector<double>{0.4, 0.8, 1.2, 1.6, 2.0});

  // CF conventions 1.8 §3.1 units (UDUNITS strings) and §3.2 long_name, on
  // every dataset, axes included; integer axes are dimensionless ("1").
  REQUIRE(text_attribute(speed, "units") == "m s-1");
  REQUIRE(text_attribute(speed, "long_name") == "true airspeed");
  REQUIRE(text_attribute(mode, "units") == "1");
  REQUIRE(text_attribute(mode, "long_name") == "mode number");
  REQUIRE(text_attribute(damping, "units") == "1");
  REQUIRE(text_attribute(damping, "long_name") == "damping ratio");
  H5::DataSet frequency = file.openDataSet("nominal/pk/frequency");
  REQUIRE(text_attribute(frequency, "units") == "Hz");
  // Text attributes are variable-length UTF-8 strings: netCDF-4's NC_STRING
  // (netCDF User Guide, "netCDF-4 format"), read as str by h5py 3 (h5py
  // docs, "Strings in HDF5": fixed-length strings read as bytes).
  H5::StrType type = frequency.openAttribute("long_name").getStrType();
  REQUIRE(type.isVariableStr());
  REQUIRE(type.getCset() == H5T_CSET_UTF8);
}

TEST_CASE("HDF5 document: axes are dimension scales attached to every dimension",
          "[hdf5_document]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = write_document(dir);
  H5::H5File file(path, H5F_ACC_RDONLY);
  H5::DataSet speed = file.openDataSet("speed");
  H5::DataSet mode = file.openDataSet("mode");

  // HDF5 dimension-scale spec / H5DS docs (H5DSis_scale, H5DSget_scale_name).
  for (const std::string name : {"speed", "mode"}) {
    INFO(name);
    H5::DataSet axis = file.openDataSet(name);
    REQUIRE(H5DSis_scale(axis.getId()) > 0);
    char scale_name[32] = {};
    REQUIRE(H5DSget_scale_name(axis.getId(), scale_name, sizeof scale_name) ==
            static_cast<ssize_t>(name.size()));
    REQUIRE(std::string(scale_name) == name);
  }

  // H5DS docs (H5DSis_attached, H5DSget_num_scales): dimension 0 of every
  // (speed, mode) dataset is attached to its group's speed axis, dimension
  // 1 to its mode axis, and to nothing else. A group's datasets use the
  // group's own copy of a root axis (same values, units and long_name), so
  // that a netCDF-4 reader opening the group alone (xarray's
  // open_dataset(group=...)) finds its coordinate variables there.
  for (const std::string group : {"nominal/state_space", "nominal/pk"}) {
    const std::string name = group == "nominal/pk" ? "nominal/pk/frequency" : "nominal/state_space/damping_ratio";
    INFO(name);
    H5::DataSet d = file.openDataSet(name);
    H5::DataSet local_speed = file.openDataSet(group + "/speed");
    H5::DataSet local_mode = file.openDataSet(group + "/mode");
    REQUIRE(read_all(local_speed) == read_all(speed));
    REQUIRE(text_attribute(local_speed, "units") == "m s-1");
    REQUIRE(text_attribute(local_mode, "long_name") == "mode number");
    REQUIRE(H5DSis_scale(d.getId()) == 0);
    REQUIRE(H5DSis_attached(d.getId(), local_speed.getId(), 0) > 0);
    REQUIRE(H5DSis_attached(d.getId(), local_mode.getId(), 1) > 0);
    REQUIRE(H5DSis_attached(d.getId(), local_mode.getId(), 0) == 0);
    REQUIRE(H5DSis_attached(d.getId(), local_speed.getId(), 1) == 0);
    REQUIRE(H5DSis_attached(d.getId(), speed.getId(), 0) == 0);
    REQUIRE(H5DSget_num_scales(d.getId(), 0) == 1);
    REQUIRE(H5DSget_num_scales(d.getId(), 1) == 1);
  }
  H5::DataSet reduced = file.openDataSet("reduced_speed");
  REQUIRE(H5DSis_attached(reduced.getId(), speed.getId(), 0) > 0);
  REQUIRE(H5DSget_num_scales(reduced.getId(), 0) == 1);
}

TEST_CASE("HDF5 document: a group's own axis is a dimension scale of that group", "[hdf5_document]") {
  // netCDF-4 data model (netCDF User Guide, groups): a dimension belongs to
  // a group and is seen by its variables; in HDF5 a dimension scale in the
  // group named after the dimension (H5DS docs).
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = dir.file("groups.h5");
  {
    Hdf5Document doc(path);
    doc.axis("speed", kSpeeds, "m s-1", "true airspeed");
    const std::vector<double> t{0.0, 0.5, 1.0, 1.5};
    doc.axis("history_1/time", t, "s", "time");
    doc.dataset("history_1/lift", {"history_1/time"}, std::vector<double>{1, 2, 3, 4}, "N m-1", "lift");
    doc.dataset("history_1/gradient", {}, std::vector<double>{9.0}, "m", "H");
    doc.commit();
  }
  H5::H5File file(path, H5F_ACC_RDONLY);
  H5::DataSet time = file.openDataSet("history_1/time");
  REQUIRE(H5DSis_scale(time.getId()) > 0);
  char scale_name[32] = {};
  REQUIRE(H5DSget_scale_name(time.getId(), scale_name, sizeof scale_name) == 4);
  REQUIRE(std::string(scale_name) == "time");
  H5::DataSet lift = file.openDataSet("history_1/lift");
  REQUIRE(H5DSis_attached(lift.getId(), time.getId(), 0) > 0);
  REQUIRE(H5DSget_num_scales(lift.getId(), 0) == 1);
  REQUIRE(file.openDataSet("history_1/gradient").getSpace().getSimpleExtentNdims() == 0);
}

TEST_CASE("HDF5 document: metadata, parameters and attributes", "[hdf5_document]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = write_document(dir);
  H5::H5File file(path, H5F_ACC_RDONLY);
  H5::Group root = file.openGroup("/");

  // CF conventions 1.8 §2.6.1 Conventions, §2.6.2 title; our own file kind.
  REQUIRE(text_attribute(root, "Conventions") == "CF-1.8");
  REQUIRE(text_attribute(root, "title") == "document test");
  REQUIRE(text_attribute(root, "aerosect_file_kind") == "flutter");
  REQUIRE(text_attribute(root, "caution") == "a test file");
  REQUIRE(text_attribute(root, "sign_conventions") == "plunge down");
  REQUIRE(text_attribute(root, "history") == "written by a test");
  REQUIRE(numeric_attribute<double>(root, "reference_speed", H5::PredType::NATIVE_DOUBLE) ==
          25.0);

  // Parameters: one scalar F64LE dataset per record, with units and
  // long_name (HDF5 H5S docs, H5Sget_simple_extent_type).
  H5::DataSet semichord = file.openDataSet("/parameters/si/semichord");
  REQUIRE(semichord.getSpace().getSimpleExtentType() == H5S_SCALAR);
  double value = 0;
  semichord.read(&value, H5::PredType::NATIVE_DOUBLE);
  REQUIRE(value == 0.127);
  REQUIRE(text_attribute(semichord, "units") == "m");
  REQUIRE(text_attribute(semichord, "long_name") == "semichord");
  H5::DataSet density = file.openDataSet("/parameters/si/density");
  density.read(&value, H5::PredType::NATIVE_DOUBLE);
  REQUIRE(value == 1.225);
  REQUIRE(text_attribute(density, "units") == "kg m-3");
  H5::DataSet mass_ratio = file.openDataSet("/parameters/nondimensional/mass_ratio");
  mass_ratio.read(&value, H5::PredType::NATIVE_DOUBLE);
  REQUIRE(value == 40.0);

  // Group attributes. HDF5 H5T docs: integers keep their declared width
  // (int64), numbers are IEEE binary64, which keeps NaN (IEEE 754).
  H5::Group state_space = file.openGroup("nominal/state_space");
  H5::Attribute found = state_space.openAttribute("flutter_found");
  REQUIRE(found.getIntType().getSize() == 8);
  REQUIRE(numeric_attribute<std::int64_t>(state_space, "flutter_found",
                                          H5::PredType::NATIVE_INT64) == 1);
  REQUIRE(state_space.openAttribute("flutter_speed").getDataType() ==
          H5::PredType::IEEE_F64LE);
  REQUIRE(numeric_attribute<double>(state_space, "flutter_speed",
                                    H5::PredType::NATIVE_DOUBLE) == 41.5);
  REQUIRE(std::isnan(numeric_attribute<double>(file.openGroup("nominal/pk"), "flutter_speed",
                                               H5::PredType::NATIVE_DOUBLE)));
  // Each numeric attribute NAME has its units in NAME_units (our convention:
  // CF 1.10 §3.1 defines `units` for variables only); integers are counts,
  // flags or indices, "1".
  REQUIRE(text_attribute(state_space, "flutter_speed_units") == "m s-1");
  REQUIRE(text_attribute(state_space, "flutter_found_units") == "1");
  REQUIRE(text_attribute(root, "reference_speed_units") == "m s-1");

  // Dataset attributes, on an axis and on a nested dataset.
  REQUIRE(text_attribute(file.openDataSet("mode"), "mode_names") == "plunge,pitch,flap");
  REQUIRE(text_attribute(file.openDataSet("nominal/state_space/damping_ratio"), "comment") ==
          "per mode");
}

TEST_CASE("HDF5 document: an attribute on a new path makes a group", "[hdf5_document]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = dir.file("groups.h5");
  {
    Hdf5Document doc(path);
    doc.integer_attribute("gap_open/state_space", "divergence_found", 0);
    doc.text_attribute("gap_open", "note", "");
    doc.commit();
  }
  H5::H5File file(path, H5F_ACC_RDONLY);
  // HDF5 H5O docs (H5Oget_info: object type).
  REQUIRE(file.childObjType("gap_open") == H5O_TYPE_GROUP);
  REQUIRE(file.childObjType("gap_open/state_space") == H5O_TYPE_GROUP);
  REQUIRE(numeric_attribute<std::int64_t>(file.openGroup("gap_open/state_space"),
                                          "divergence_found", H5::PredType::NATIVE_INT64) == 0);
  // An empty text is an empty variable-length string.
  H5::Attribute note = file.openGroup("gap_open").openAttribute("note");
  REQUIRE(note.getStrType().isVariableStr());
  REQUIRE(text_attribute(file.openGroup("gap_open"), "note").empty());
}

TEST_CASE("HDF5 document: creation order is tracked and indexed", "[hdf5_document]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = write_document(dir);
  H5::H5File file(path, H5F_ACC_RDONLY);
  // HDF5 H5P docs (H5Pget_link_creation_order, H5Pget_attr_creation_order):
  // netCDF-4 creates every group with both flags, and reads objects and
  // attributes in creation order when they are set.
  auto flags_of_group = [&](const std::string& name) {
    const hid_t group = H5Gopen2(file.getId(), name.c_str(), H5P_DEFAULT);
    const hid_t gcpl = H5Gget_create_plist(group);
    unsigned links = 0;
    unsigned attributes = 0;
    H5Pget_link_creation_order(gcpl, &links);
    H5Pget_attr_creation_order(gcpl, &attributes);
    H5Pclose(gcpl);
    H5Gclose(group);
    return std::pair<unsigned, unsigned>{links, attributes};
  };
  const unsigned both = H5P_CRT_ORDER_TRACKED | H5P_CRT_ORDER_INDEXED;
  for (const std::string name : {"/", "nominal", "nominal/state_space", "parameters/si"}) {
    INFO(name);
    REQUIRE(flags_of_group(name) == std::pair<unsigned, unsigned>{both, both});
  }
  unsigned attributes = 0;
  H5Pget_attr_creation_order(
      file.openDataSet("nominal/pk/frequency").getCreatePlist().getId(), &attributes);
  REQUIRE(attributes == both);

  // Links of the root in creation order (HDF5 H5L docs, H5Literate with
  // H5_INDEX_CRT_ORDER).
  std::vector<std::string> names;
  H5Literate(
      file.getId(), H5_INDEX_CRT_ORDER, H5_ITER_INC, nullptr,
      [](hid_t, const char* name, const H5L_info_t*, void* data) -> herr_t {
        static_cast<std::vector<std::string>*>(data)->push_back(name);
        return 0;
      },
      &names);
  REQUIRE(names == std::vector<std::string>{"parameters", "speed", "mode", "reduced_speed",
                                            "nominal"});
}

TEST_CASE("HDF5 document: large datasets are chunked and compressed", "[hdf5_document]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = dir.file("large.h5");
  std::vector<double> rows(200);
  std::vector<double> columns(100);
  for (std::size_t k = 0; k < rows.size(); ++k) rows[k] = static_cast<double>(k);
  for (std::size_t k = 0; k < columns.size(); ++k) columns[k] = static_cast<double>(k);
  std::vector<double> big(rows.size() * columns.size());  // 160 000 bytes
  for (std::size_t k = 0; k < big.size(); ++k) big[k] = std::sin(0.001 * static_cast<double>(k));
  {
    Hdf5Document doc(path);
    doc.axis("row", rows, "1", "row");
    doc.axis("column", columns, "1", "column");
    doc.dataset("maps/big", {"row", "column"}, big, "1", "a large map");
    doc.dataset("maps/small", {"column"}, columns, "1", "a small one");
    doc.commit();
  }
  H5::H5File file(path, H5F_ACC_RDONLY);
  H5::DataSet d = file.openDataSet("maps/big");
  REQUIRE(read_all(d) == big);
  // HDF5 H5P docs (H5Pget_layout, H5Pget_chunk, H5Pget_filter2): chunked,
  // each chunk at most 64 KiB of whole rows, shuffle then deflate.
  H5::DSetCreatPropList dcpl = d.getCreatePlist();
  REQUIRE(dcpl.getLayout() == H5D_CHUNKED);
  hsize_t chunk[2] = {0, 0};
  REQUIRE(dcpl.getChunk(2, chunk) == 2);
  REQUIRE(chunk[1] == 100);
  REQUIRE(chunk[0] >= 1);
  REQUIRE(chunk[0] * chunk[1] * sizeof(double) <= 64 * 1024);
  REQUIRE(dcpl.getNfilters() == 2);
  unsigned flags = 0;
  std::size_t n_values = 1;
  unsigned level = 0;
  char filter_name[64];
  unsigned config = 0;
  REQUIRE(dcpl.getFilter(0, flags, n_values, &level, sizeof filter_name, filter_name, config) ==
          H5Z_FILTER_SHUFFLE);
  n_values = 1;
  REQUIRE(dcpl.getFilter(1, flags, n_values, &level, sizeof filter_name, filter_name, config) ==
          H5Z_FILTER_DEFLATE);
  // Small datasets stay contiguous, without filters.
  H5::DSetCreatPropList small = file.openDataSet("maps/small").getCreatePlist();
  REQUIRE(small.getLayout() == H5D_CONTIGUOUS);
  REQUIRE(small.getNfilters() == 0);
}

TEST_CASE("HDF5 document: a dataset over no axes is a scalar", "[hdf5_document]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = dir.file("scalar.h5");
  {
    Hdf5Document doc(path);
    const std::vector<double> one{3.5};
    doc.dataset("summary/peak", {}, one, "m", "peak plunge");
    doc.commit();
  }
  H5::H5File file(path, H5F_ACC_RDONLY);
  H5::DataSet d = file.openDataSet("summary/peak");
  // HDF5 H5S docs: a scalar dataspace holds one element.
  REQUIRE(d.getSpace().getSimpleExtentType() == H5S_SCALAR);
  double value = 0;
  d.read(&value, H5::PredType::NATIVE_DOUBLE);
  REQUIRE(value == 3.5);
}

TEST_CASE("HDF5 document: temporary file, commit and destructor", "[hdf5_document]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = dir.file("flutter.h5");

  SECTION("the data goes to path.part until commit()") {
    Hdf5Document doc(path);
    REQUIRE(doc.path() == path);
    write_layout(doc);
    REQUIRE(fs::exists(path + ".part"));
    REQUIRE_FALSE(fs::exists(path));
    doc.commit();
    REQUIRE(fs::exists(path));
    REQUIRE_FALSE(fs::exists(path + ".part"));
    // Common practice, no source: no HDF5 object stays open after commit.
    REQUIRE(open_hdf5_objects() == 0);
    // Common practice, no source: a committed document takes no more data.
    REQUIRE_THROWS_AS(doc.number_attribute("", "late", 1.0, "1"), OutputError);
    REQUIRE_THROWS_AS(doc.commit(), OutputError);
  }

  SECTION("commit replaces an older file") {
    { std::ofstream(path) << "old result"; }
    write_document(dir);
    // HDF5 H5F docs (H5Fis_hdf5).
    REQUIRE(H5Fis_hdf5(path.c_str()) > 0);
  }

  SECTION("destroying the document before commit() removes the temporary file") {
    { std::ofstream(path) << "old result"; }
    {
      Hdf5Document doc(path);
      write_layout(doc);
      REQUIRE(fs::exists(path + ".part"));
    }
    REQUIRE_FALSE(fs::exists(path + ".part"));
    std::ifstream old(path);
    std::string text;
    std::getline(old, text);
    REQUIRE(text == "old result");
    REQUIRE(open_hdf5_objects() == 0);
  }
}

TEST_CASE("HDF5 document: unwritable places throw OutputError", "[hdf5_document]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string plain_file = dir.file("not_a_directory");
  { std::ofstream(plain_file) << "x"; }

  SECTION("a path under a regular file") {
    const std::string path = plain_file + "/flutter.h5";
    const OutputError e = output_error([&] { Hdf5Document doc(path); });
    // POSIX open(2): ENOTDIR when a path component is not a directory.
    REQUIRE(e.path() == path);
    const std::string what = e.what();
    REQUIRE(what.find(path) != std::string::npos);
    REQUIRE(what.find("Not a directory") != std::string::npos);
  }

  SECTION("a directory that does not exist") {
    const std::string path = dir.file("missing/flutter.h5");
    const OutputError e = output_error([&] { Hdf5Document doc(path); });
    // POSIX open(2): ENOENT when a directory of the path does not exist.
    REQUIRE(std::string(e.what()).find("No such file or directory") != std::string::npos);
    REQUIRE_FALSE(fs::exists(dir.file("missing")));
  }

  SECTION("a directory in place of the file") {
    const std::string path = dir.file("result_dir");
    fs::create_directory(path);
    REQUIRE_THROWS_AS(Hdf5Document(path), OutputError);
    REQUIRE(fs::is_directory(path));
  }

  SECTION("a read-only directory") {
    if (::geteuid() == 0) {
      WARN("running as root: permissions are not enforced, check skipped");
      return;
    }
    const std::string locked = dir.file("locked");
    fs::create_directory(locked);
    fs::permissions(locked, fs::perms::owner_read | fs::perms::owner_exec);
    const OutputError e = output_error([&] { Hdf5Document doc(locked + "/flutter.h5"); });
    // POSIX open(2): EACCES when write permission on the directory is denied.
    REQUIRE(std::string(e.what()).find("Permission denied") != std::string::npos);
    fs::permissions(locked, fs::perms::owner_all);
  }
  REQUIRE(open_hdf5_objects() == 0);
}

TEST_CASE("HDF5 document: requests that do not fit throw OutputError and change nothing",
          "[hdf5_document]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = dir.file("flutter.h5");
  Hdf5Document doc(path);
  doc.axis("speed", kSpeeds, "m s-1", "true airspeed");
  doc.integer_axis("mode", kModes, "mode number");
  const auto v = speed_mode_values();

  auto refused = [&](auto call, const std::string& expected) {
    const OutputError e = output_error(call);
    INFO(e.what());
    REQUIRE(e.path() == path);
    REQUIRE(std::string(e.what()).find(expected) != std::string::npos);
  };

  // Common practice, no source: a dataset must hold exactly the product of
  // the lengths of its axes (HDF5 H5Dwrite reads that many elements).
  const std::vector<double> short_data(v.begin(), v.end() - 1);
  refused([&] { doc.dataset("nominal/state_space/frequency", {"speed", "mode"}, short_data, "Hz",
                            "frequency"); },
          "has 14 values but its axes (speed, mode) hold 15");
  refused([&] { doc.dataset("nominal/state_space/frequency", {"mode", "speed", "mode"}, v, "Hz",
                            "frequency"); },
          "hold 45");
  // An axis must be written before a dataset names it (a netCDF variable's
  // dimensions must exist: netCDF User Guide, data model).
  refused([&] { doc.dataset("nominal/pk/frequency", {"speed", "airspeed"}, v, "Hz", "f"); },
          "unknown axis 'airspeed'");
  refused([&] { doc.dataset("bad//path", {"speed"}, kSpeeds, "1", "x"); }, "invalid dataset path");
  refused([&] { doc.dataset("", {"speed"}, kSpeeds, "1", "x"); }, "invalid dataset path");
  refused([&] { doc.axis("speed", kSpeeds, "m s-1", "again"); }, "'speed' already exists");
  refused([&] { doc.axis("a//b", kSpeeds, "1", "x"); }, "invalid axis name");
  refused([&] { doc.axis("parameters/t", kSpeeds, "1", "x"); }, "invalid axis name");

  doc.dataset("nominal/state_space/frequency", {"speed", "mode"}, v, "Hz", "frequency");
  refused([&] { doc.dataset("nominal/state_space/frequency", {"speed", "mode"}, v, "Hz", "f"); },
          "already exists");
  // HDF5 User Guide, groups: a dataset holds no links.
  refused([&] { doc.dataset("nominal/state_space/frequency/x", {"speed"}, kSpeeds, "1", "x"); },
          "is not a group");
  doc.number_attribute("nominal/state_space", "flutter_speed", 41.5, "m s-1");
  refused([&] { doc.number_attribute("nominal/state_space", "flutter_speed", 40.0, "m s-1"); },
          "already written");
  RunMetadata clash = document_metadata();
  clash.text_attributes.push_back({"title", "again"});
  refused([&] { doc.metadata(clash); }, "root attribute 'title' is empty, reserved or given twice");
  doc.text_attribute("", "caution", "written before the metadata");
  refused([&] { doc.metadata(document_metadata()); }, "root attribute 'caution' already written");
  RunMetadata meta = document_metadata();
  meta.text_attributes.erase(meta.text_attributes.begin());  // without the caution
  doc.metadata(meta);
  refused([&] { doc.metadata(meta); }, "the metadata was already written");

  // The document is still usable and none of the refused requests left
  // anything behind.
  doc.commit();
  H5::H5File file(path, H5F_ACC_RDONLY);
  REQUIRE(read_all(file.openDataSet("nominal/state_space/frequency")) == v);
  REQUIRE_FALSE(file.nameExists("nominal/pk"));
  REQUIRE_FALSE(file.nameExists("bad"));
  REQUIRE(numeric_attribute<double>(file.openGroup("nominal/state_space"), "flutter_speed",
                                    H5::PredType::NATIVE_DOUBLE) == 41.5);
  H5::Group root = file.openGroup("/");
  REQUIRE(text_attribute(root, "caution") == "written before the metadata");
  REQUIRE(text_attribute(root, "title") == "document test");
  REQUIRE(file.nameExists("parameters/si/semichord"));
}

TEST_CASE("HDF5 document: netCDF-4 reads the layout", "[hdf5_document]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = write_document(dir);
  const std::string header_path = dir.file("header.txt");
  // netCDF User Guide, netCDF-4/HDF5 interoperability: HDF5 dimension
  // scales are read as netCDF dimensions, groups as netCDF groups.
  const std::string command = "ncdump -h '" + path + "' > '" + header_path + "' 2>&1";
  if (std::system("command -v ncdump > /dev/null 2>&1") != 0) {
    WARN("ncdump not found (Debian package netcdf-bin): check skipped");
    return;
  }
  REQUIRE(std::system(command.c_str()) == 0);
  std::ifstream in(header_path);
  const std::string header((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  INFO(header);
  REQUIRE(header.find("speed = 5 ;") != std::string::npos);
  REQUIRE(header.find("mode = 3 ;") != std::string::npos);
  REQUIRE(header.find("double speed(speed) ;") != std::string::npos);
  REQUIRE(header.find("int mode(mode) ;") != std::string::npos);
  REQUIRE(header.find("group: state_space {") != std::string::npos);
  REQUIRE(header.find("double damping_ratio(speed, mode) ;") != std::string::npos);
  REQUIRE(header.find("mode:mode_names = \"plunge,pitch,flap\" ;") != std::string::npos);
  REQUIRE(header.find(":flutter_found = 1LL ;") != std::string::npos);
}

TEST_CASE("HDF5 document: integer tables, flags and fill values", "[hdf5_document]") {
  // CF 1.10 §2.5.1: _FillValue has the variable's type; §3.5 flags:
  // flag_values of the variable's type, flag_meanings one word per value;
  // a class holds codes, not a quantity (no units).
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = dir.file("flags.h5");
  const double nan = std::numeric_limits<double>::quiet_NaN();
  {
    Hdf5Document doc(path);
    doc.axis("speed", std::vector<double>{10, 20, 30}, "m s-1", "true airspeed");
    doc.integer_dataset("response_class", {"speed"}, std::vector<std::int64_t>{0, 1, aerosect::kIntegerFill}, "1",
                        "response class", {{0, 1}, "decayed periodic_lco"});
    doc.integer_dataset("cycles", {"speed"}, std::vector<std::int64_t>{3, 4, 5}, "1", "cycles", {});
    doc.dataset("frequency", {"speed"}, std::vector<double>{1.0, nan, 2.0}, "Hz", "frequency");
    doc.nan_fill("frequency");
    doc.integer_axis("direction", std::vector<std::int32_t>{0, 1}, "sweep direction");
    doc.axis_flags("direction", {{0, 1}, "up down"});
    const OutputError not_integer = output_error([&] { doc.axis_flags("speed", {{0}, "slow"}); });
    REQUIRE(std::string(not_integer.what()).find("'speed' is not an integer axis") != std::string::npos);
    // A dataset in a group whose copy of the axis would clash is refused.
    doc.dataset("g/speed", {}, std::vector<double>{1.0}, "m s-1", "a scalar named like the axis");
    const OutputError e = output_error([&] { doc.dataset("g/lift", {"speed"}, std::vector<double>{1, 2, 3}, "N", "x"); });
    REQUIRE(std::string(e.what()).find("needs its copy 'g/speed', a name already taken") != std::string::npos);
    doc.commit();
  }
  H5::H5File file(path, H5F_ACC_RDONLY);
  H5::DataSet cls = file.openDataSet("response_class");
  REQUIRE(cls.getDataType() == H5::PredType::STD_I64LE);
  REQUIRE_FALSE(cls.attrExists("units"));
  REQUIRE(numeric_attribute<std::int64_t>(cls, "_FillValue", H5::PredType::NATIVE_INT64) == -1);
  REQUIRE(cls.openAttribute("_FillValue").getDataType() == H5::PredType::STD_I64LE);
  H5::Attribute values = cls.openAttribute("flag_values");
  REQUIRE(values.getDataType() == H5::PredType::STD_I64LE);
  std::array<std::int64_t, 2> codes{};
  REQUIRE(values.getSpace().getSimpleExtentNpoints() == 2);
  values.read(H5::PredType::NATIVE_INT64, codes.data());
  REQUIRE(codes == std::array<std::int64_t, 2>{0, 1});
  REQUIRE(text_attribute(cls, "flag_meanings") == "decayed periodic_lco");
  // An integer axis made a class: flag_values in its own type (int32).
  H5::DataSet direction = file.openDataSet("direction");
  REQUIRE_FALSE(direction.attrExists("units"));
  REQUIRE(direction.openAttribute("flag_values").getDataType() == H5::PredType::STD_I32LE);
  REQUIRE(text_attribute(direction, "flag_meanings") == "up down");
  H5::DataSet cycles = file.openDataSet("cycles");
  REQUIRE(text_attribute(cycles, "units") == "1");
  REQUIRE_FALSE(cycles.attrExists("flag_values"));
  H5::DataSet frequency = file.openDataSet("frequency");
  REQUIRE(frequency.openAttribute("_FillValue").getDataType() == H5::PredType::IEEE_F64LE);
  REQUIRE(std::isnan(numeric_attribute<double>(frequency, "_FillValue", H5::PredType::NATIVE_DOUBLE)));
  // Read back as doubles, the integer fill value is NaN.
  const auto back = aerosect::read_double_dataset(path, "response_class", 3);
  REQUIRE(back[0] == 0.0);
  REQUIRE(back[1] == 1.0);
  REQUIRE(std::isnan(back[2]));
}

TEST_CASE("HDF5 document: a table asked for block by block is the table written whole", "[hdf5_document]") {
  // HDF5 H5Sselect_hyperslab / H5Dwrite docs: a selection written into a
  // chunked dataset; read back with the HDF5 C++ API. Shapes chosen so the
  // chunk splits the first, the second and the last dimension, with parts
  // that do not divide it (common practice, no source: every value once,
  // ascending, no block above a chunk).
  H5::Exception::dontPrint();
  TempDir dir;
  const double nan = std::numeric_limits<double>::quiet_NaN();
  for (const std::vector<std::size_t>& shape : std::vector<std::vector<std::size_t>>{
           {3, 5}, {3, 10, 4000}, {2, 3, 7, 900}, {1, 20000}, {2, 1, 9000}}) {
    std::vector<std::string> dims;
    std::size_t count = 1;
    const std::string path = dir.file(fmt::format("blocks{}.h5", shape.size() * 100 + shape.back()));
    std::vector<double> whole;
    {
      Hdf5Document doc(path);
      for (std::size_t k = 0; k < shape.size(); ++k) {
        dims.push_back(fmt::format("d{}", k));
        std::vector<double> axis(shape[k]);
        for (std::size_t q = 0; q < shape[k]; ++q) axis[q] = static_cast<double>(q);
        doc.axis(dims.back(), axis, "1", "index");
        count *= shape[k];
      }
      for (std::size_t v = 0; v < count; ++v) whole.push_back(v % 7 == 3 ? nan : 0.5 * static_cast<double>(v));
      std::size_t next = 0, largest = 0;
      const auto blocks = [&](std::size_t first, std::span<double> out) {
        REQUIRE(first == next);  // every value once, in ascending blocks
        next += out.size();
        largest = std::max(largest, out.size());
        std::copy_n(whole.begin() + static_cast<std::ptrdiff_t>(first), out.size(), out.begin());
      };
      doc.dataset_blocks("real", dims, count, blocks, "1", "asked by blocks");
      REQUIRE(next == count);
      REQUIRE(largest * sizeof(double) <= 64 * 1024);
      next = 0;
      doc.integer_dataset_blocks("integer", dims, count, blocks, "1", "asked by blocks", {});
      doc.dataset("reference", dims, whole, "1", "written whole");
      doc.commit();
    }
    H5::H5File file(path, H5F_ACC_RDONLY);
    const std::vector<double> real = read_all(file.openDataSet("real"));
    const std::vector<double> reference = read_all(file.openDataSet("reference"));
    REQUIRE(real.size() == count);
    for (std::size_t v = 0; v < count; ++v) {
      REQUIRE((real[v] == reference[v] || (std::isnan(real[v]) && std::isnan(reference[v]))));
    }
    const std::vector<double> integer = aerosect::read_double_dataset(path, "integer", count);
    for (std::size_t v = 0; v < count; ++v) {
      if (std::isnan(whole[v]))
        REQUIRE(std::isnan(integer[v]));  // the fill value, kIntegerFill
      else
        REQUIRE(integer[v] == static_cast<double>(static_cast<std::int64_t>(whole[v])));
    }
  }
}
