// libFuzzer target: arbitrary bytes as a case file through the reader and
// validator (parse_case: io/toml_reader.cpp, io/case.cpp, io/case_gusts.cpp),
// then the model build from a case that reads.
// InputError is the expected answer to bad input; any other exception
// (libFuzzer reports it as a crash), a crash, a sanitizer report or a
// message longer than one screen is a finding.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string>

#include "aerosect/error.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/model/system.hpp"
#include "fuzz_check.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string text(reinterpret_cast<const char*>(data), size);
  try {
    const aerosect::Case c = aerosect::parse_case(text, "fuzz.toml");
    const aerosect::AeroelasticModel model(c.model);
    if (model.state_size() <= 0) std::abort();
  } catch (const aerosect::InputError& e) {
    aerosect::fuzz::check_one_screen(e);
  }
  return 0;
}
