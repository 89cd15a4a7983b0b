#include "aerosect/io/checksum.hpp"

#include <array>
#include <fstream>

#include <fmt/format.h>
#include <nettle/sha2.h>

namespace aerosect {

namespace {

std::string hex(const std::array<std::uint8_t, SHA256_DIGEST_SIZE>& d) {
  std::string s;
  s.reserve(2 * d.size());
  for (std::uint8_t b : d) s += fmt::format("{:02x}", b);
  return s;
}

}  // namespace

std::string sha256_hex(std::string_view bytes) {
  sha256_ctx ctx;
  sha256_init(&ctx);
  sha256_update(&ctx, bytes.size(), reinterpret_cast<const std::uint8_t*>(bytes.data()));
  std::array<std::uint8_t, SHA256_DIGEST_SIZE> d{};
  sha256_digest(&ctx, d.size(), d.data());
  return hex(d);
}

std::optional<std::string> sha256_hex_of_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return std::nullopt;
  sha256_ctx ctx;
  sha256_init(&ctx);
  std::array<char, 1 << 16> block{};
  while (in) {
    in.read(block.data(), block.size());
    const auto n = in.gcount();
    if (n > 0) sha256_update(&ctx, static_cast<std::size_t>(n), reinterpret_cast<const std::uint8_t*>(block.data()));
  }
  if (!in.eof()) return std::nullopt;
  std::array<std::uint8_t, SHA256_DIGEST_SIZE> d{};
  sha256_digest(&ctx, d.size(), d.data());
  return hex(d);
}

}  // namespace aerosect
