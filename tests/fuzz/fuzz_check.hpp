#pragma once
// What every fuzz target (tests/fuzz) shares. The check it applies to the
// InputError a reader throws for bad input: its message, as the program prints it, must
// fit on one screen (the rule of tests/integration/test_bad_input.py): at
// most 25 lines after wrapping at 100 columns; 2500 characters bounds their
// size. A longer message is a finding: the target aborts after printing it.
#include <cstddef>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <string>
#include <vector>

#include <unistd.h>

#include "aerosect/error.hpp"

namespace aerosect::fuzz {

inline constexpr std::size_t kMaxMessage = 2500;
inline constexpr std::size_t kMaxLines = 25;

inline void check_one_screen(const InputError& e) {
  const std::string screen = wrapped(e.what());
  std::size_t lines = 1;
  for (char ch : screen) lines += ch == '\n';
  if (screen.size() > kMaxMessage || lines > kMaxLines) {
    std::fprintf(stderr, "message longer than one screen (%zu characters, %zu lines):\n%s\n", screen.size(), lines,
                 screen.c_str());
    std::abort();
  }
}

// A scratch file of this process in the temporary folder,
// aerosect_fuzz_PID + suffix, removed when the process exits normally (a
// target writes each input there for a reader that takes a path).
inline std::string scratch_file(const std::string& suffix) {
  static std::vector<std::string> files;
  const std::string p =
      (std::filesystem::temp_directory_path() / ("aerosect_fuzz_" + std::to_string(::getpid()) + suffix)).string();
  if (files.empty())
    std::atexit([] {
      std::error_code ec;
      for (const auto& f : files) std::filesystem::remove(f, ec);
    });
  files.push_back(p);
  return p;
}

}  // namespace aerosect::fuzz
