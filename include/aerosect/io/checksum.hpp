#pragma once
// SHA-256 digests (FIPS 180-4, computed by GNU Nettle) of the case text and
// of every input file a case reads, so that a report names exactly what it
// was computed from: `sha256sum FILE` prints the same hexadecimal digest.

#include <optional>
#include <string>
#include <string_view>

namespace aerosect {

// Lower-case hexadecimal SHA-256 of `bytes` (64 characters).
std::string sha256_hex(std::string_view bytes);

// The same of the whole file `path`, read in blocks; nullopt when it cannot
// be opened or read to its end.
std::optional<std::string> sha256_hex_of_file(const std::string& path);

}  // namespace aerosect
