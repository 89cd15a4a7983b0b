// libFuzzer target over the shard reader of `aerosect merge`: the bytes of
// each input are written to a scratch file named *.h5 and merged alone
// (merge_sweep_files in analysis/sweep.cpp: the sweep_request attribute
// through request_from_json and the case reader, then every table through
// the sweep's layout, checked against the request). A shard K/N with N > 1
// is read whole and then refused as an incomplete set; a 1/1 file (a whole
// map) is merged into a scratch output, which is removed.
// InputError is the expected answer to bad input; any other exception, a
// crash, a sanitizer report or a message longer than one screen is a
// finding. tools/fuzz replays the seeds (tests/fuzz/seeds/shard) and fuzzes
// this target only with --fuzz-hdf5: Debian's HDF5 library is not
// instrumented.
#include <cstddef>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <string>

#include "aerosect/analysis/sweep.hpp"
#include "aerosect/error.hpp"
#include "fuzz_check.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  static const std::string input = aerosect::fuzz::scratch_file("_shard.h5"),
                           output = aerosect::fuzz::scratch_file("_merged.h5");
  {
    std::ofstream out(input, std::ios::binary | std::ios::trunc);
    out.write(reinterpret_cast<const char*>(data), static_cast<std::streamsize>(size));
  }
  try {
    aerosect::merge_sweep_files({input}, output);
  } catch (const aerosect::InputError& e) {
    aerosect::fuzz::check_one_screen(e);
  }
  std::error_code ec;
  std::filesystem::remove(output, ec);
  return 0;
}
