// libFuzzer target: arbitrary bytes as a case file through the reader and
// validator (parse_case: io/toml_reader.cpp, io/case.cpp, io/case_gusts.cpp),
// then the model build from a case that reads.
// InputError is the expected answer to bad input; any other exception
// (libFuzzer reports it as a crash), a crash, a sanitizer report or a
// message longer than one screen is a finding.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <cstdio>
#include <string>

#include "aerosect/error.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/model/system.hpp"

namespace {
// One screen (the rule of tests/integration/test_bad_input.py): at most 25
// lines after wrapping at 100 columns; 2500 characters bounds their size.
constexpr std::size_t kMaxMessage = 2500;
}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string text(reinterpret_cast<const char*>(data), size);
  try {
    const aerosect::Case c = aerosect::parse_case(text, "fuzz.toml");
    const aerosect::AeroelasticModel model(c.model);
    if (model.state_size() <= 0) std::abort();
  } catch (const aerosect::InputError& e) {
    const std::string screen = aerosect::wrapped(e.what());
    std::size_t lines = 1;
    for (char ch : screen) lines += ch == '\n';
    if (screen.size() > kMaxMessage || lines > 25) {
      std::fprintf(stderr, "message longer than one screen (%zu characters, %zu lines):\n%s\n",
                   screen.size(), lines, screen.c_str());
      std::abort();
    }
  }
  return 0;
}
