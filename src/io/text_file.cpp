#include "aerosect/io/text_file.hpp"

#include <cerrno>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iterator>

#include <fcntl.h>
#include <fmt/format.h>
#include <sys/stat.h>
#include <unistd.h>

#include "aerosect/error.hpp"
#include "aerosect/io/output_claim.hpp"

namespace aerosect {

namespace fs = std::filesystem;

void write_file_atomically(const std::string& path, std::string_view contents) {
  claim_output(path);
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

namespace {


std::string size_text(std::uint64_t bytes) {
  if (bytes >= (1ull << 20)) return fmt::format("{:.4g} MiB", static_cast<double>(bytes) / (1 << 20));
  return fmt::format("{} bytes", bytes);
}

// Closes a descriptor on every path out.
struct Descriptor {
  int fd = -1;
  ~Descriptor() {
    if (fd >= 0) ::close(fd);
  }
};

[[noreturn]] void refuse(const std::string& path, const SourceLocation& where,
                         const std::string& key, const std::string& problem,
                         const std::string& allowed) {
  SourceLocation w = where;
  if (key.empty() && w.file.empty()) w.file = path;
  throw InputError(w, key, key.empty() ? std::string() : path, problem, allowed);
}

// Opens `path` read-only without blocking (a FIFO would block until a
// writer appears) and checks it is a regular file of at most max_bytes.
int open_checked(const std::string& path, std::uint64_t max_bytes, const std::string& what,
                 const SourceLocation& where, const std::string& key, const std::string& allowed,
                 std::uint64_t& size) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_NONBLOCK | O_CLOEXEC | O_NOCTTY);
  if (fd < 0)
    refuse(path, where, key, fmt::format("cannot open the {} ({})", what, std::strerror(errno)),
           allowed);
  struct stat st {};
  if (::fstat(fd, &st) != 0) {
    const std::string why = std::strerror(errno);
    ::close(fd);
    refuse(path, where, key, fmt::format("cannot examine the {} ({})", what, why), allowed);
  }
  if (!S_ISREG(st.st_mode)) {
    ::close(fd);
    refuse(path, where, key,
           fmt::format("cannot read the {} (it is {}{})", what, file_type_name(st.st_mode),
                       S_ISDIR(st.st_mode) ? "" : ", not a regular file"),
           allowed);
  }
  register_input(path);
  size = static_cast<std::uint64_t>(st.st_size);
  if (size > max_bytes) {
    ::close(fd);
    refuse(path, where, key,
           fmt::format("the {} is too large ({}; the limit is {})", what, size_text(size),
                       size_text(max_bytes)),
           allowed);
  }
  return fd;
}

}  // namespace

void check_input_file(const std::string& path, std::uint64_t max_bytes, const std::string& what,
                      const SourceLocation& where, const std::string& key,
                      const std::string& allowed) {
  std::uint64_t size = 0;
  Descriptor d{open_checked(path, max_bytes, what, where, key, allowed, size)};
}

std::string read_input_file(const std::string& path, std::uint64_t max_bytes,
                            const std::string& what, const SourceLocation& where,
                            const std::string& key, const std::string& allowed) {
  std::uint64_t size = 0;
  Descriptor d{open_checked(path, max_bytes, what, where, key, allowed, size)};
  // Read up to one byte past the limit: a file that grows while it is read
  // is refused like one that was too large from the start.
  std::string bytes;
  bytes.reserve(static_cast<std::size_t>(size));
  char buffer[1 << 16];
  while (true) {
    const ssize_t n = ::read(d.fd, buffer, sizeof buffer);
    if (n < 0) {
      if (errno == EINTR) continue;
      refuse(path, where, key, fmt::format("cannot read the {} ({})", what, std::strerror(errno)),
             allowed);
    }
    if (n == 0) break;
    bytes.append(buffer, static_cast<std::size_t>(n));
    if (bytes.size() > max_bytes)
      refuse(path, where, key,
             fmt::format("the {} grew past the limit of {} while it was read", what,
                         size_text(max_bytes)),
             allowed);
  }
  return bytes;
}

}  // namespace aerosect
