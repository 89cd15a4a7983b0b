// libFuzzer targets over the recorded-gust readers (io/gust_record): the
// bytes of each input are written to a scratch file named *.csv (target
// aerosect_fuzz_gust_csv) or *.h5 (aerosect_fuzz_gust_h5, built with
// AEROSECT_FUZZ_GUST_HDF5) and read as a [[gust]] shape = "recorded" file.
// InputError is the expected answer to bad input; any other exception, a
// crash, a sanitizer report, a message longer than one screen or a record
// that breaks the reader's promises (at least two finite samples, strictly
// increasing base, equal lengths) is a finding.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <string>

#include "aerosect/error.hpp"
#include "aerosect/io/gust_record.hpp"
#include "fuzz_check.hpp"

namespace {
const std::string& scratch_path() {
#ifdef AEROSECT_FUZZ_GUST_HDF5
  static const std::string p = aerosect::fuzz::scratch_file("_gust.h5");
#else
  static const std::string p = aerosect::fuzz::scratch_file("_gust.csv");
#endif
  return p;
}
}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string& path = scratch_path();
  {
    std::ofstream out(path, std::ios::binary | std::ios::trunc);
    out.write(reinterpret_cast<const char*>(data), static_cast<std::streamsize>(size));
  }
  try {
    const aerosect::GustRecord r =
        aerosect::read_gust_record(path, "time", "gust_velocity", {"fuzz.toml", 1, 1}, "gust.file");
    if (r.base.size() < 2 || r.base.size() != r.velocity.size()) std::abort();
    for (std::size_t i = 1; i < r.base.size(); ++i)
      if (!(r.base[i] > r.base[i - 1])) std::abort();
  } catch (const aerosect::InputError& e) {
    aerosect::fuzz::check_one_screen(e);
  }
  return 0;
}
