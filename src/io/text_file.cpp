#include "aerosect/io/text_file.hpp"

#include <cerrno>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iterator>

#include <fmt/format.h>
#include <unistd.h>

#include "aerosect/error.hpp"

namespace aerosect {

namespace fs = std::filesystem;

void write_file_atomically(const std::string& path, std::string_view contents) {
  const std::string temporary = fmt::format("{}.part-{}", path, static_cast<long>(::getpid()));
  {
    std::ofstream out(temporary, std::ios::binary | std::ios::trunc);
    if (!out)
      throw OutputError(path, fmt::format("cannot create '{}': {}", temporary, std::strerror(errno)));
    out.write(contents.data(), static_cast<std::streamsize>(contents.size()));
    out.flush();
    if (!out) {
      const std::string why = std::strerror(errno);
      out.close();
      std::error_code ec;
      fs::remove(temporary, ec);
      throw OutputError(path, fmt::format("cannot write '{}': {}", temporary, why));
    }
  }
  std::error_code ec;
  fs::rename(temporary, path, ec);
  if (ec) {
    fs::remove(temporary, ec);
    throw OutputError(path, fmt::format("cannot rename '{}' into place: {}", temporary, ec.message()));
  }
}

std::string read_file_bytes(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw OutputError(path, fmt::format("cannot read '{}': {}", path, std::strerror(errno)));
  return {std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>()};
}

}  // namespace aerosect
