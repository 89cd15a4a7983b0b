// Recorded gust series (io/gust_record): what a CSV or HDF5 record reads as,
// and what it is refused for. Common practice, no source: these are this
// project's rules for its own input files (README, "Recorded gusts").
#include <H5Cpp.h>

#include <catch2/catch.hpp>

#include <cstdint>
#include <filesystem>
#include <fstream>
#include <string>

#include <sys/stat.h>
#include <unistd.h>

#include "aerosect/error.hpp"
#include "aerosect/io/gust_record.hpp"
#include "aerosect/io/text_file.hpp"

using namespace aerosect;
using Catch::Matchers::Contains;

namespace {

// The scratch folder of this process, removed when the test program exits.
struct ScratchDir {
  std::filesystem::path dir = std::filesystem::temp_directory_path() /
                              ("aerosect_test_gust_record_" + std::to_string(::getpid()));
  ~ScratchDir() {
    std::error_code ec;
    std::filesystem::remove_all(dir, ec);
  }
};

std::string scratch(const std::string& name) {
  static const ScratchDir s;
  std::filesystem::create_directories(s.dir);
  return (s.dir / name).string();
}

std::string write(const std::string& name, const std::string& bytes) {
  const std::string p = scratch(name);
  std::ofstream(p, std::ios::binary) << bytes;
  return p;
}

GustRecord read(const std::string& path) {
  return read_gust_record(path, "time", "gust_velocity", {"case.toml", 7, 1}, "gust.file");
}

// The message of the InputError read() throws for `path`.
std::string refusal(const std::string& path) {
  try {
    (void)read(path);
  } catch (const InputError& e) {
    return e.what();
  }
  FAIL("no InputError for " << path);
  return {};
}

}  // namespace

TEST_CASE("CSV gust records: header, byte-order mark, line ends", "[gust_record]") {
  SECTION("a header line is skipped") {
    const auto r = read(write("h.csv", "time,w\n0,0\n0.5,1.5\n1,0\n"));
    REQUIRE(r.base.size() == 3);
    CHECK(r.velocity[1] == 1.5);
  }
  SECTION("a byte-order mark and no header: the first row is data") {
    const auto r = read(write("bom.csv", "\xEF\xBB\xBF" "0,0.25\n0.5,1.5\n1,0\n"));
    REQUIRE(r.base.size() == 3);
    CHECK(r.base[0] == 0.0);
    CHECK(r.velocity[0] == 0.25);
  }
  SECTION("CR-only and CR LF line ends") {
    CHECK(read(write("cr.csv", "0,0\r0.5,1\r1,0\r")).base.size() == 3);
    CHECK(read(write("crlf.csv", "t;w\r\n0;0\r\n0.5;1\r\n1;0\r\n")).base.size() == 3);
  }
}

TEST_CASE("CSV gust records: refused lines name the line and what is wrong", "[gust_record][errors]") {
  const std::string junk = refusal(write("junk.csv", "0,0\n0.1,5x\n0.2,0\n"));
  CHECK_THAT(junk, Contains(":2: key 'gust.file' = 0.1,5x: is not two numbers"));
  const std::string extra = refusal(write("extra.csv", "0,0,9\n0.1,5,9\n"));
  CHECK_THAT(extra, Contains(":1: key 'gust.file' = 0,0,9: has 3 fields, not two"));
  const std::string commas = refusal(write("comma.csv", "0,0;1,5\n0,2;2,0\n"));
  CHECK_THAT(commas, Contains("decimal commas?"));
  // The first line's first field is a number: it is data, not a header.
  CHECK_THAT(refusal(write("first.csv", "0.1,5x\n0.2,1\n")), Contains(":1: key 'gust.file'"));
}

TEST_CASE("Gust record files must be regular files of bounded size", "[gust_record][errors]") {
  SECTION("a directory") {
    const std::string dir = scratch("adir");
    std::filesystem::create_directories(dir);
    CHECK_THAT(refusal(dir), Contains("cannot read the recorded gust file (it is a directory)"));
    CHECK_THAT(refusal(dir + "/x.h5"), Contains("cannot open the recorded gust file"));
    std::filesystem::create_directories(dir + "/d.h5");
    CHECK_THAT(refusal(dir + "/d.h5"), Contains("(it is a directory)"));
  }
  SECTION("a FIFO is refused without blocking") {
    const std::string fifo = scratch("pipe.csv");
    std::filesystem::remove(fifo);
    REQUIRE(::mkfifo(fifo.c_str(), 0600) == 0);
    CHECK_THAT(refusal(fifo), Contains("a FIFO (named pipe), not a regular file"));
    const std::string fifo_h5 = scratch("pipe.h5");
    std::filesystem::remove(fifo_h5);
    REQUIRE(::mkfifo(fifo_h5.c_str(), 0600) == 0);
    CHECK_THAT(refusal(fifo_h5), Contains("a FIFO (named pipe), not a regular file"));
  }
  SECTION("a device is refused before anything is read") {
    CHECK_THAT(refusal("/dev/zero"), Contains("a character device, not a regular file"));
  }
  SECTION("read_input_file refuses a file larger than its limit") {
    const std::string p = write("big.txt", std::string(1000, 'x'));
    try {
      (void)read_input_file(p, 999, "test file", {}, "", "small files");
      FAIL("no error");
    } catch (const InputError& e) {
      CHECK_THAT(std::string(e.what()), Contains("the test file is too large (1000 bytes; the limit is 999 bytes)"));
      CHECK(e.where().file == p);
    }
    CHECK(read_input_file(p, 1000, "test file", {}, "", "small files").size() == 1000);
  }
}

TEST_CASE("HDF5 gust records: declared sizes are checked before memory is allocated",
          "[gust_record][errors]") {
  H5::Exception::dontPrint();
  const std::string p = scratch("huge.h5");
  {
    // A chunked dataset declaring 2^33 samples: HDF5 allocates nothing until
    // data is written, so the file is tiny while it declares 64 GiB.
    H5::H5File f(p, H5F_ACC_TRUNC);
    const hsize_t n = hsize_t{1} << 33, chunk = 1024;
    H5::DataSpace space(1, &n);
    H5::DSetCreatPropList plist;
    plist.setChunk(1, &chunk);
    f.createDataSet("time", H5::PredType::NATIVE_DOUBLE, space, plist);
    f.createDataSet("gust_velocity", H5::PredType::NATIVE_DOUBLE, space, plist);
  }
  CHECK_THAT(refusal(p), Contains("dataset 'time' declares 8589934592 samples"));
  CHECK_THAT(refusal(p), Contains("at most 50000000 samples"));

  const std::string q = scratch("strings.h5");
  {
    H5::H5File f(q, H5F_ACC_TRUNC);
    const hsize_t n = 3;
    H5::DataSpace space(1, &n);
    f.createDataSet("time", H5::StrType(H5::PredType::C_S1, 8), space);
    f.createGroup("gust_velocity");
  }
  CHECK_THAT(refusal(q), Contains("dataset 'time' is not numeric"));
}

TEST_CASE("Messages show control bytes from files as escapes", "[gust_record][errors]") {
  // An escape sequence, a bell and a NUL from a hostile file must not reach
  // the terminal raw nor cut the message short.
  static constexpr char kHostile[] = "0,0\n0.1,\x1b[31m\a5\0x\n";
  const std::string msg = refusal(write("esc.csv", std::string(kHostile, sizeof kHostile - 1)));
  CHECK_THAT(msg, Contains("\\x1B[31m\\x075\\x00x: is not two numbers"));
  CHECK(msg.find('\x1b') == std::string::npos);
  CHECK(msg.find('\a') == std::string::npos);
  // Printable UTF-8 is kept; a lone continuation byte is escaped.
  const std::string u = refusal(write("utf8.csv", "0,0\n0.1,\xC2\xB5m\x80\n"));
  CHECK_THAT(u, Contains("0.1,\xC2\xB5m\\x80: is not two numbers"));
}
