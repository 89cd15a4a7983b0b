#pragma once
// Small text outputs (JSON summaries, the case as run, HTML reports),
// written like every other aerosect file: to a temporary name beside the
// target, flushed, then renamed into place, so an existing file is never
// left half-written.

#include <cstdint>
#include <string>
#include <string_view>

#include "aerosect/error.hpp"

namespace aerosect {

// Inputs are regular files of bounded size: a FIFO, a device (/dev/zero), a
// socket or a directory is refused before anything is read (a FIFO is
// opened without blocking), and so is a file larger than `max_bytes`. The
// limits of each kind of input are in the README ("Limits").
inline constexpr std::uint64_t kMaxCaseFileBytes = 16ull << 20;        // 16 MiB
inline constexpr std::uint64_t kMaxGustCsvBytes = 512ull << 20;        // 512 MiB
inline constexpr std::uint64_t kMaxGustRecordSamples = 50'000'000;     // per dataset or CSV

// The whole input file `path`, for a reader that names the file as `what`
// ("case file", "recorded gust file"). Throws InputError at `where` / `key`
// (with the path as the value when `key` is given) saying what the file is
// when it is not a regular file, cannot be opened or read, or is larger
// than `max_bytes`; `allowed` is the reader's description of a good input.
std::string read_input_file(const std::string& path, std::uint64_t max_bytes,
                            const std::string& what, const SourceLocation& where,
                            const std::string& key, const std::string& allowed);

// Throws like read_input_file when `path` is not a regular file of at most
// `max_bytes` (for readers that open the file themselves, such as HDF5).
void check_input_file(const std::string& path, std::uint64_t max_bytes, const std::string& what,
                      const SourceLocation& where, const std::string& key,
                      const std::string& allowed);

// Throws OutputError naming the path when the file cannot be written.
void write_file_atomically(const std::string& path, std::string_view contents);

// The whole file as bytes; throws OutputError (for a missing input the
// report cannot embed) naming the path.
std::string read_file_bytes(const std::string& path);

}  // namespace aerosect
