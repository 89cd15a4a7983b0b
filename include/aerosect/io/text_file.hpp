#pragma once
// Small text outputs (JSON summaries, the case as run, HTML reports),
// written like every other aerosect file: to a temporary name beside the
// target, flushed, then renamed into place, so an existing file is never
// left half-written.

#include <string>
#include <string_view>

namespace aerosect {

// Throws OutputError naming the path when the file cannot be written.
void write_file_atomically(const std::string& path, std::string_view contents);

// The whole file as bytes; throws OutputError (for a missing input the
// report cannot embed) naming the path.
std::string read_file_bytes(const std::string& path);

}  // namespace aerosect
