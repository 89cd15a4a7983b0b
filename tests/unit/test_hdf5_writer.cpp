// Tests of Hdf5TimeHistoryWriter: files are written into a temporary
// directory and read back with the HDF5 C++ and HL APIs (never with the
// writer's own code). Each check names the document it is checked against.

#include <catch2/catch.hpp>

#include <H5Cpp.h>
#include <hdf5_hl.h>
#include <unistd.h>

#include <atomic>
#include <cmath>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <limits>
#include <string>
#include <vector>

#include "aerosect/error.hpp"
#include "hdf5_helpers.hpp"
#include "aerosect/io/hdf5_writer.hpp"

namespace fs = std::filesystem;
using aerosect::Channel;
using aerosect::Hdf5TimeHistoryWriter;
using aerosect::Hdf5WriterOptions;
using aerosect::OutputError;
using aerosect::RunMetadata;
using aerosect::RunOutcome;

using namespace aerosect::test;  // TempDir and the HDF5 readers (hdf5_helpers.hpp)

namespace {

const Channel kTime{"time", "s", "time since the start of the run", 1, {}, ""};

std::vector<Channel> test_channels() {
  return {
      {"plunge", "m", "plunge displacement, down positive", 1, {}, ""},
      {"pitch", "rad", "pitch angle, nose up positive", 1, {}, ""},
      {"wagner_lag_states", "m s-1", "Wagner lag states", 2, {"first", "second"}, "wagner_pole"},
      {"lift", "N m-1", "lift per unit span", 1, {}, ""},
  };
}
constexpr int kRowWidth = 5;

RunMetadata writer_metadata() {
  RunMetadata meta;
  meta.file_kind = "simulation";
  meta.title = "writer test";
  meta.text_attributes = {{"case_file", "cases/test.toml"}, {"history", "written by a test"}};
  meta.parameters = {{"si", "semichord", 0.127, "m", "semichord"},
                     {"si", "airspeed", 12.5, "m s-1", "free-stream airspeed"},
                     {"nondimensional", "mass_ratio", 40.0, "1", "mass ratio"}};
  return meta;
}

// Row i: time 0.01 i; every value is a function of (i, column) so that any
// misplaced row or column shows.
double value_at(std::size_t i, int column) {
  return 1000.0 * column + 0.5 * static_cast<double>(i);
}
double time_at(std::size_t i) { return 0.01 * static_cast<double>(i); }

void write_rows(Hdf5TimeHistoryWriter& w, std::size_t rows) {
  std::vector<double> row(kRowWidth);
  for (std::size_t i = 0; i < rows; ++i) {
    for (int c = 0; c < kRowWidth; ++c) row[c] = value_at(i, c);
    w.append(time_at(i), row);
  }
}

RunOutcome completed(std::int64_t samples) {
  return {true, "completed", samples, {{"steps", 321}, {"rhs_evaluations", 2000}}, {{"end_time", 0.5, "s"}}};
}

void check_values(const std::string& path, std::size_t rows) {
  H5::H5File file(path, H5F_ACC_RDONLY);
  const auto time = read_all(file.openDataSet("time"));
  REQUIRE(time.size() == rows);
  const auto plunge = read_all(file.openDataSet("plunge"));
  const auto pitch = read_all(file.openDataSet("pitch"));
  const auto lags = read_all(file.openDataSet("wagner_lag_states"));
  const auto lift = read_all(file.openDataSet("lift"));
  REQUIRE(lags.size() == 2 * rows);
  for (std::size_t i = 0; i < rows; ++i) {
    INFO("row " << i);
    REQUIRE(time[i] == time_at(i));
    REQUIRE(plunge[i] == value_at(i, 0));
    REQUIRE(pitch[i] == value_at(i, 1));
    REQUIRE(lags[2 * i] == value_at(i, 2));
    REQUIRE(lags[2 * i + 1] == value_at(i, 3));
    REQUIRE(lift[i] == value_at(i, 4));
  }
}

std::string write_complete_run(const TempDir& dir, std::size_t rows, Hdf5WriterOptions options) {
  const std::string path = dir.file("run.h5");
  Hdf5TimeHistoryWriter w(path, options);
  w.begin(kTime, test_channels(), writer_metadata());
  write_rows(w, rows);
  w.finish(completed(static_cast<std::int64_t>(rows)));
  REQUIRE(w.final_path() == path);
  return path;
}

}  // namespace

TEST_CASE("HDF5 writer: values survive a round trip across block boundaries", "[hdf5_writer]") {
  H5::Exception::dontPrint();
  TempDir dir;
  // 10 rows in blocks of 4: two full blocks and a partial one flushed by
  // finish(); 8 rows: exactly two blocks; 1000 rows in blocks of 64.
  // Common practice, no source: every value written must be read back.
  for (auto [rows, block] : {std::pair<std::size_t, std::size_t>{10, 4}, {8, 4}, {3, 4},
                             {1000, 64}, {1, 1}}) {
    INFO(rows << " rows, blocks of " << block);
    const std::string path = write_complete_run(dir, rows, {block, 4});
    check_values(path, rows);
    H5::H5File file(path, H5F_ACC_RDONLY);
    REQUIRE(dims_of(file.openDataSet("wagner_lag_states")) == std::vector<hsize_t>{rows, 2});
    REQUIRE(numeric_attribute<std::int64_t>(file.openGroup("/"), "samples",
                                            H5::PredType::NATIVE_INT64) ==
            static_cast<std::int64_t>(rows));
  }
}

TEST_CASE("HDF5 writer: NaN values are stored as NaN", "[hdf5_writer]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = dir.file("nan.h5");
  {
    Hdf5TimeHistoryWriter w(path, {4, 4});
    w.begin(kTime, test_channels(), writer_metadata());
    const double nan = std::numeric_limits<double>::quiet_NaN();
    for (std::size_t i = 0; i < 6; ++i) {
      std::vector<double> row{1.0, nan, nan, 2.0, std::numeric_limits<double>::infinity()};
      w.append(time_at(i), row);
    }
    w.finish(completed(6));
  }
  H5::H5File file(path, H5F_ACC_RDONLY);
  // IEEE 754 binary64 (HDF5 H5T_IEEE_F64LE) keeps NaN and infinity.
  for (double v : read_all(file.openDataSet("pitch"))) REQUIRE(std::isnan(v));
  for (double v : read_all(file.openDataSet("lift"))) REQUIRE(std::isinf(v));
  const auto lags = read_all(file.openDataSet("wagner_lag_states"));
  REQUIRE(std::isnan(lags[0]));
  REQUIRE(lags[1] == 2.0);
}

TEST_CASE("HDF5 writer: CF and netCDF-4 attributes", "[hdf5_writer]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = write_complete_run(dir, 10, {4, 4});
  H5::H5File file(path, H5F_ACC_RDONLY);
  H5::Group root = file.openGroup("/");

  // CF conventions 1.8 §2.6.1: the Conventions attribute names the version.
  REQUIRE(text_attribute(root, "Conventions") == "CF-1.8");
  // CF conventions 1.8 §2.6.2: title is a global attribute.
  REQUIRE(text_attribute(root, "title") == "writer test");
  REQUIRE(text_attribute(root, "aerosect_file_kind") == "simulation");
  REQUIRE(text_attribute(root, "case_file") == "cases/test.toml");
  REQUIRE(text_attribute(root, "history") == "written by a test");
  REQUIRE(numeric_attribute<std::int32_t>(root, "complete", H5::PredType::NATIVE_INT32) == 1);
  REQUIRE(text_attribute(root, "status") == "completed");
  // Counters are integers (issue #17); every numeric root attribute NAME has
  // its units in NAME_units (our convention: CF 1.10 has none for units of
  // attributes, §3.1 defines `units` for variables only).
  REQUIRE(numeric_attribute<std::int64_t>(root, "steps", H5::PredType::NATIVE_INT64) == 321);
  REQUIRE(numeric_attribute<std::int64_t>(root, "rhs_evaluations", H5::PredType::NATIVE_INT64) == 2000);
  REQUIRE(numeric_attribute<double>(root, "end_time", H5::PredType::NATIVE_DOUBLE) == 0.5);
  REQUIRE(text_attribute(root, "end_time_units") == "s");
  for (const char* name : {"complete", "samples", "steps", "rhs_evaluations"})
    REQUIRE(text_attribute(root, std::string(name) + "_units") == "1");
  // HDF5 H5T docs: integer attributes are stored with their declared widths.
  REQUIRE(root.openAttribute("complete").getIntType().getSize() == 4);
  REQUIRE(root.openAttribute("samples").getIntType().getSize() == 8);
  REQUIRE(root.openAttribute("steps").getIntType().getSize() == 8);

  // The time axis is elapsed time in s, not a calendar time: CF 1.10 §4.4
  // asks a time coordinate (standard_name "time", axis "T") for units
  // "UNIT since EPOCH", so neither attribute is written.
  H5::DataSet time = file.openDataSet("time");
  REQUIRE(text_attribute(time, "units") == "s");
  REQUIRE(text_attribute(time, "long_name") == "time since the start of the run");
  REQUIRE(text_attribute(time, "comment") == "elapsed time since the start of the run, not a calendar time");
  REQUIRE_FALSE(time.attrExists("standard_name"));
  REQUIRE_FALSE(time.attrExists("axis"));

  // CF conventions 1.8 §3.1 units (UDUNITS strings) and §3.2 long_name.
  for (const auto& c : test_channels()) {
    INFO(c.name);
    H5::DataSet d = file.openDataSet(c.name);
    REQUIRE(text_attribute(d, "units") == c.units);
    REQUIRE(text_attribute(d, "long_name") == c.long_name);
    // Text attributes are variable-length UTF-8 strings: netCDF-4's NC_STRING
    // (netCDF User Guide, "netCDF-4 format": NC_STRING is an HDF5
    // variable-length string), which h5py 3 reads as str (h5py docs,
    // "Strings in HDF5": fixed-length strings read as bytes).
    H5::StrType type = d.openAttribute("units").getStrType();
    REQUIRE(type.isVariableStr());
    REQUIRE(type.getCset() == H5T_CSET_UTF8);
  }

  // Parameters: one scalar dataset per record.
  H5::DataSet semichord = file.openDataSet("/parameters/si/semichord");
  REQUIRE(semichord.getSpace().getSimpleExtentType() == H5S_SCALAR);
  double value = 0;
  semichord.read(&value, H5::PredType::NATIVE_DOUBLE);
  REQUIRE(value == 0.127);
  REQUIRE(text_attribute(semichord, "units") == "m");
  REQUIRE(text_attribute(semichord, "long_name") == "semichord");
  H5::DataSet mass_ratio = file.openDataSet("/parameters/nondimensional/mass_ratio");
  mass_ratio.read(&value, H5::PredType::NATIVE_DOUBLE);
  REQUIRE(value == 40.0);
  REQUIRE(text_attribute(mass_ratio, "units") == "1");
}

TEST_CASE("HDF5 writer: chunked, compressed, growing datasets", "[hdf5_writer]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = write_complete_run(dir, 10, {4, 6});
  H5::H5File file(path, H5F_ACC_RDONLY);
  for (const std::string name : {"time", "pitch", "wagner_lag_states"}) {
    INFO(name);
    H5::DataSet d = file.openDataSet(name);
    const bool wide = name == "wagner_lag_states";
    // HDF5 H5P docs (H5Pget_layout, H5Pget_chunk): chunked layout, chunk
    // dimensions block_rows (x width).
    H5::DSetCreatPropList dcpl = d.getCreatePlist();
    REQUIRE(dcpl.getLayout() == H5D_CHUNKED);
    hsize_t chunk[2] = {0, 0};
    REQUIRE(dcpl.getChunk(2, chunk) == (wide ? 2 : 1));
    REQUIRE(chunk[0] == 4);
    if (wide) REQUIRE(chunk[1] == 2);
    // HDF5 H5P docs (H5Pget_filter2): shuffle, then deflate with the level.
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
    REQUIRE(level == 6);
    // HDF5 H5S docs (H5Sget_simple_extent_dims): unlimited along time only.
    H5::DataSpace space = d.getSpace();
    hsize_t dims[2] = {0, 0};
    hsize_t max_dims[2] = {0, 0};
    space.getSimpleExtentDims(dims, max_dims);
    REQUIRE(max_dims[0] == H5S_UNLIMITED);
    if (wide) REQUIRE(max_dims[1] == 2);
    REQUIRE(d.getDataType() == H5::PredType::IEEE_F64LE);
  }
}

TEST_CASE("HDF5 writer: blocks no deeper than the run's expected rows, any number of rows taken",
          "[hdf5_writer]") {
  H5::Exception::dontPrint();
  // block_rows 4. Expected 3 rows: 3-row chunks, whether the run then writes
  // 3, fewer (2) or more (8, over three blocks) rows than it said; every row
  // is in the file (the hint sizes buffers, it never drops a row). Expected
  // 1000: the blocks stay block_rows deep.
  struct Run {
    std::int64_t expected;
    std::size_t rows;
    hsize_t chunk_rows;
  };
  for (const Run run : {Run{3, 3, 3}, Run{3, 2, 3}, Run{3, 8, 3}, Run{1000, 10, 4}}) {
    INFO("expected " << run.expected << ", rows " << run.rows);
    TempDir dir;
    const std::string path = dir.file("run.h5");
    RunMetadata meta = writer_metadata();
    meta.expected_rows = run.expected;
    Hdf5TimeHistoryWriter w(path, {4, 6});
    w.begin(kTime, test_channels(), meta);
    write_rows(w, run.rows);
    w.finish(completed(static_cast<std::int64_t>(run.rows)));
    check_values(path, run.rows);
    H5::H5File file(path, H5F_ACC_RDONLY);
    // HDF5 H5P docs (H5Pget_chunk): the chunk's first dimension.
    hsize_t chunk[2] = {0, 0};
    REQUIRE(file.openDataSet("wagner_lag_states").getCreatePlist().getChunk(2, chunk) == 2);
    REQUIRE(chunk[0] == run.chunk_rows);
    REQUIRE(file.openDataSet("time").getCreatePlist().getChunk(1, chunk) == 1);
    REQUIRE(chunk[0] == run.chunk_rows);
  }
}

TEST_CASE("HDF5 writer: deflate level 0 writes without filters", "[hdf5_writer]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = write_complete_run(dir, 5, {4, 0});
  H5::H5File file(path, H5F_ACC_RDONLY);
  // HDF5 H5P docs (H5Pget_nfilters).
  REQUIRE(file.openDataSet("pitch").getCreatePlist().getNfilters() == 0);
  check_values(path, 5);
}

TEST_CASE("HDF5 writer: a run expected to write few rows is written without filters", "[hdf5_writer]") {
  // Below kMinCompressedRows expected rows no shuffle/deflate (zlib's set-up
  // costs more than it saves); at or above it, and when the length is not
  // known (0), both filters as usual. HDF5 H5P docs (H5Pget_nfilters).
  H5::Exception::dontPrint();
  for (const std::int64_t expected : {std::int64_t{3}, aerosect::kMinCompressedRows - 1, aerosect::kMinCompressedRows, std::int64_t{0}}) {
    INFO("expected " << expected);
    TempDir dir;
    const std::string path = dir.file("run.h5");
    RunMetadata meta = writer_metadata();
    meta.expected_rows = expected;
    Hdf5TimeHistoryWriter w(path, {4, 6});
    w.begin(kTime, test_channels(), meta);
    write_rows(w, 5);
    w.finish(completed(5));
    check_values(path, 5);
    H5::H5File file(path, H5F_ACC_RDONLY);
    const int filters = expected > 0 && expected < aerosect::kMinCompressedRows ? 0 : 2;
    for (const char* name : {"time", "pitch", "wagner_lag_states"})
      CHECK(file.openDataSet(name).getCreatePlist().getNfilters() == filters);
  }
}

TEST_CASE("HDF5 writer: time and component axes are dimension scales", "[hdf5_writer]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = write_complete_run(dir, 10, {4, 4});
  H5::H5File file(path, H5F_ACC_RDONLY);
  H5::DataSet time = file.openDataSet("time");
  // HDF5 dimension-scale spec / H5DS docs: H5DSis_scale, H5DSget_scale_name.
  REQUIRE(H5DSis_scale(time.getId()) > 0);
  char name[32] = {};
  REQUIRE(H5DSget_scale_name(time.getId(), name, sizeof name) == 4);
  REQUIRE(std::string(name) == "time");

  // H5DS docs (H5DSis_attached, H5DSget_num_scales): dimension 0 of every
  // channel is attached to /time, and to nothing else.
  for (const auto& c : test_channels()) {
    INFO(c.name);
    H5::DataSet d = file.openDataSet(c.name);
    REQUIRE(H5DSis_attached(d.getId(), time.getId(), 0) > 0);
    REQUIRE(H5DSget_num_scales(d.getId(), 0) == 1);
  }

  // The second axis of a 2-D channel: int32 1..width, a scale named after
  // Channel::component_axis, attached to dimension 1.
  H5::DataSet lags = file.openDataSet("wagner_lag_states");
  H5::DataSet axis = file.openDataSet("wagner_pole");
  REQUIRE(H5DSis_scale(axis.getId()) > 0);
  REQUIRE(H5DSis_attached(lags.getId(), axis.getId(), 1) > 0);
  REQUIRE(H5DSis_attached(lags.getId(), time.getId(), 1) == 0);
  REQUIRE(axis.getDataType() == H5::PredType::STD_I32LE);
  REQUIRE(dims_of(axis) == std::vector<hsize_t>{2});
  std::int32_t index[2] = {0, 0};
  axis.read(index, H5::PredType::NATIVE_INT32);
  REQUIRE(index[0] == 1);
  REQUIRE(index[1] == 2);
  REQUIRE(text_attribute(axis, "component_names") == "first,second");
  REQUIRE_FALSE(text_attribute(axis, "long_name").empty());
}

TEST_CASE("HDF5 writer: a 2-D channel without an axis name gets its own axis", "[hdf5_writer]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = dir.file("axis.h5");
  {
    Hdf5TimeHistoryWriter w(path);
    w.begin(kTime, {{"forces", "N m-1", "forces", 3, {"x", "y", "z"}, ""}}, writer_metadata());
    const std::vector<double> row{1, 2, 3};
    w.append(0.0, row);
    w.finish(completed(1));
  }
  H5::H5File file(path, H5F_ACC_RDONLY);
  H5::DataSet axis = file.openDataSet("forces_component");
  // H5DS docs (H5DSis_attached).
  REQUIRE(H5DSis_attached(file.openDataSet("forces").getId(), axis.getId(), 1) > 0);
  REQUIRE(text_attribute(axis, "component_names") == "x,y,z");
}

TEST_CASE("HDF5 writer: an empty run gives empty datasets", "[hdf5_writer]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = write_complete_run(dir, 0, {4, 4});
  H5::H5File file(path, H5F_ACC_RDONLY);
  // Common practice, no source: zero rows is a valid extent of an unlimited
  // dimension (HDF5 H5Screate_simple allows a zero current size).
  REQUIRE(dims_of(file.openDataSet("time")) == std::vector<hsize_t>{0});
  REQUIRE(dims_of(file.openDataSet("wagner_lag_states")) == std::vector<hsize_t>{0, 2});
  REQUIRE(numeric_attribute<std::int64_t>(file.openGroup("/"), "samples",
                                          H5::PredType::NATIVE_INT64) == 0);
  REQUIRE(H5DSis_attached(file.openDataSet("pitch").getId(), file.openDataSet("time").getId(),
                          0) > 0);
}

TEST_CASE("HDF5 writer: temporary file and final renames", "[hdf5_writer]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string path = dir.file("run.h5");

  SECTION("incomplete_path replaces the extension") {
    // Common practice, no source (std::filesystem::path::replace_extension).
    REQUIRE(Hdf5TimeHistoryWriter::incomplete_path("run.h5") == "run.incomplete.h5");
    REQUIRE(Hdf5TimeHistoryWriter::incomplete_path("out/run.h5") == "out/run.incomplete.h5");
    REQUIRE(Hdf5TimeHistoryWriter::incomplete_path("out/run") == "out/run.incomplete.h5");
    REQUIRE(Hdf5TimeHistoryWriter::incomplete_path("a.b/run.v2.h5") == "a.b/run.v2.incomplete.h5");
  }

  SECTION("the data goes to path.part until finish()") {
    Hdf5TimeHistoryWriter w(path, {4, 4});
    w.begin(kTime, test_channels(), writer_metadata());
    write_rows(w, 9);
    REQUIRE(w.temporary_path() == path + ".part");
    REQUIRE(fs::exists(path + ".part"));
    REQUIRE_FALSE(fs::exists(path));
    REQUIRE(w.final_path().empty());
    {
      // Rows go to the file one whole block at a time (9 rows, blocks of 4:
      // 8 in the file, 1 buffered). HDF5 H5F docs (H5Fopen): a file already
      // open in the process may be opened again read-only.
      H5::H5File part(path + ".part", H5F_ACC_RDONLY);
      REQUIRE(dims_of(part.openDataSet("time")) == std::vector<hsize_t>{8});
      REQUIRE(dims_of(part.openDataSet("wagner_lag_states")) == std::vector<hsize_t>{8, 2});
    }
    w.finish(completed(9));
    REQUIRE(fs::exists(path));
    REQUIRE_FALSE(fs::exists(path + ".part"));
    // Common practice, no source: no HDF5 object stays open.
    REQUIRE(open_hdf5_objects() == 0);
  }

  SECTION("a completed run replaces an older result") {
    { std::ofstream(path) << "old result"; }
    write_complete_run(dir, 5, {4, 4});
    check_values(path, 5);
  }

  SECTION("an incomplete run never replaces a complete result") {
    { std::ofstream(path) << "complete result"; }
    Hdf5TimeHistoryWriter w(path, {4, 4});
    w.begin(kTime, test_channels(), writer_metadata());
    write_rows(w, 6);
    w.finish({false, "numerical-error: state is NaN", 6, {{"steps", 17}}, {}});
    const std::string incomplete = dir.file("run.incomplete.h5");
    REQUIRE(w.final_path() == incomplete);
    REQUIRE_FALSE(fs::exists(path + ".part"));
    std::ifstream old(path);
    std::string text;
    std::getline(old, text);
    REQUIRE(text == "complete result");

    check_values(incomplete, 6);
    H5::H5File file(incomplete, H5F_ACC_RDONLY);
    H5::Group root = file.openGroup("/");
    REQUIRE(numeric_attribute<std::int32_t>(root, "complete", H5::PredType::NATIVE_INT32) == 0);
    REQUIRE(text_attribute(root, "status") == "numerical-error: state is NaN");
    REQUIRE(numeric_attribute<std::int64_t>(root, "steps", H5::PredType::NATIVE_INT64) == 17);
  }

  SECTION("destroying the writer before finish() removes the temporary file") {
    {
      Hdf5TimeHistoryWriter w(path, {4, 4});
      w.begin(kTime, test_channels(), writer_metadata());
      write_rows(w, 9);
      REQUIRE(fs::exists(path + ".part"));
    }
    REQUIRE_FALSE(fs::exists(path + ".part"));
    REQUIRE_FALSE(fs::exists(path));
    REQUIRE_FALSE(fs::exists(dir.file("run.incomplete.h5")));
    REQUIRE(open_hdf5_objects() == 0);
  }
}

TEST_CASE("HDF5 writer: unwritable places throw OutputError", "[hdf5_writer]") {
  H5::Exception::dontPrint();
  TempDir dir;
  const std::string plain_file = dir.file("not_a_directory");
  { std::ofstream(plain_file) << "x"; }

  SECTION("a path under a regular file") {
    const std::string path = plain_file + "/run.h5";
    Hdf5TimeHistoryWriter w(path);
    try {
      w.begin(kTime, test_channels(), writer_metadata());
      FAIL("begin() did not throw");
    } catch (const OutputError& e) {
      // POSIX open(2): ENOTDIR when a path component is not a directory.
      REQUIRE(e.path() == path);
      const std::string what = e.what();
      REQUIRE(what.find(path) != std::string::npos);
      REQUIRE(what.find("Not a directory") != std::string::npos);
    }
    // After a failed begin(), an incomplete finish() has nothing to do.
    REQUIRE_NOTHROW(w.finish({false, "failed", 0, {}, {}}));
    REQUIRE(w.final_path().empty());
  }

  SECTION("a directory that does not exist") {
    const std::string path = dir.file("missing/run.h5");
    Hdf5TimeHistoryWriter w(path);
    REQUIRE_THROWS_AS(w.begin(kTime, test_channels(), writer_metadata()), OutputError);
    REQUIRE_FALSE(fs::exists(dir.file("missing")));
  }

  SECTION("a directory in place of the result file") {
    const std::string path = dir.file("result_dir");
    fs::create_directory(path);
    Hdf5TimeHistoryWriter w(path);
    REQUIRE_THROWS_AS(w.begin(kTime, test_channels(), writer_metadata()), OutputError);
  }
}
