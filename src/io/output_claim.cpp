#include "aerosect/io/output_claim.hpp"

#include <cerrno>
#include <cstring>
#include <map>
#include <mutex>
#include <set>
#include <utility>

#include <fcntl.h>
#include <fmt/format.h>
#include <sys/stat.h>
#include <unistd.h>

#include "aerosect/error.hpp"

namespace aerosect {

namespace {

using FileId = std::pair<dev_t, ino_t>;

// The process's inputs and held claims. A process is one command: the
// registry lives until it exits, when the lock files are removed.
class Registry {
 public:
  static Registry& instance() {
    static Registry r;
    return r;
  }

  void add_input(const FileId& id) {
    const std::lock_guard<std::mutex> lock(mutex_);
    inputs_.insert(id);
  }
  bool is_input(const FileId& id) {
    const std::lock_guard<std::mutex> lock(mutex_);
    return inputs_.count(id) > 0;
  }
  void claim(const std::string& target);

  ~Registry() { release(); }

  // One claim (as release() does for all); nothing when it is not held.
  void release(const std::string& lock_path) {
    const std::lock_guard<std::mutex> lock(mutex_);
    const auto it = claims_.find(lock_path);
    if (it == claims_.end()) return;
    ::unlink(it->first.c_str());
    ::close(it->second);
    claims_.erase(it);
  }

  void release() {
    const std::lock_guard<std::mutex> lock(mutex_);
    for (auto& [path, fd] : claims_) {
      // Removed while still locked, so no other run can hold a lock on the
      // inode that disappears (a run that opened it meanwhile re-checks the
      // path after locking, see claim()).
      ::unlink(path.c_str());
      ::close(fd);
    }
    claims_.clear();
  }

 private:
  std::mutex mutex_;
  std::set<FileId> inputs_;
  std::map<std::string, int> claims_;  // lock file path -> locked descriptor
};


bool lock_exclusive(int fd) {
  struct flock fl {};
  fl.l_type = F_WRLCK;
  fl.l_whence = SEEK_SET;
  fl.l_start = 0;
  fl.l_len = 0;
  return ::fcntl(fd, F_OFD_SETLK, &fl) == 0;
}

void Registry::claim(const std::string& target) {
  const std::string lock_path = target + ".lock";
  const std::lock_guard<std::mutex> lock(mutex_);
  if (claims_.count(lock_path)) return;
  for (int attempt = 0; attempt < 8; ++attempt) {
    const int fd = ::open(lock_path.c_str(), O_RDWR | O_CREAT | O_CLOEXEC | O_NOFOLLOW, 0644);
    if (fd < 0) {
      const int error = errno;
      // Where no lock file can be made, no output can be either: the
      // writer's own check says why (missing folder, permission, ...).
      if (error == ENOENT || error == ENOTDIR || error == EACCES || error == EROFS ||
          error == EPERM || error == ENOSPC || error == EDQUOT)
        return;
      throw OutputError(target, fmt::format("cannot create the lock file '{}': {}", lock_path,
                                            std::strerror(error)));
    }
    if (!lock_exclusive(fd)) {
      const int error = errno;
      ::close(fd);
      if (error == EAGAIN || error == EACCES)
        throw OutputError(target, fmt::format(
            "another aerosect run is writing this output (it holds '{}'); wait for it to finish "
            "or choose another output name", lock_path));
      throw OutputError(target, fmt::format("cannot lock '{}': {}", lock_path, std::strerror(error)));
    }
    // The owner before us may have removed the lock file after we opened
    // it: the lock then sits on an unlinked inode. Hold it only while the
    // path still names the locked file.
    struct stat held {}, now {};
    if (::fstat(fd, &held) == 0 && ::stat(lock_path.c_str(), &now) == 0 &&
        held.st_dev == now.st_dev && held.st_ino == now.st_ino) {
      claims_.emplace(lock_path, fd);
      return;
    }
    ::close(fd);
  }
  throw OutputError(target, fmt::format("cannot take the lock '{}' (it keeps being replaced)", lock_path));
}

}  // namespace

const char* file_type_name(unsigned mode) {
  const mode_t m = static_cast<mode_t>(mode);
  if (S_ISDIR(m)) return "a directory";
  if (S_ISFIFO(m)) return "a FIFO (named pipe)";
  if (S_ISCHR(m)) return "a character device";
  if (S_ISBLK(m)) return "a block device";
  if (S_ISSOCK(m)) return "a socket";
  return "not a regular file";
}

void register_input(const std::string& path) {
  struct stat st {};
  if (::stat(path.c_str(), &st) == 0) Registry::instance().add_input({st.st_dev, st.st_ino});
}

void release_output_claims() { Registry::instance().release(); }

void release_output_claim(const std::string& target) { Registry::instance().release(target + ".lock"); }

void claim_output(const std::string& target) {
  if (target.empty()) throw OutputError(target, "no file name given");
  struct stat st {};
  if (::stat(target.c_str(), &st) == 0) {
    if (S_ISDIR(st.st_mode)) throw OutputError(target, "a directory of that name exists");
    if (!S_ISREG(st.st_mode))
      throw OutputError(target, fmt::format("it is {}; aerosect writes regular files only, and "
                                            "writing would replace it", file_type_name(st.st_mode)));
    if (Registry::instance().is_input({st.st_dev, st.st_ino}))
      throw OutputError(target, "it is an input of this run; writing would replace it: choose "
                                "another output name");
  }
  Registry::instance().claim(target);
}

}  // namespace aerosect
