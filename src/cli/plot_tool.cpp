#include "plot_tool.hpp"

#include <cerrno>
#include <chrono>
#include <csignal>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <sstream>
#include <thread>

#include <fcntl.h>
#include <poll.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

extern char** environ;

namespace aerosect::cli {

namespace fs = std::filesystem;

std::string plot_tool() {
  if (const char* env = std::getenv("AEROSECT_PLOT"); env && *env) return env;
  return AEROSECT_PLOT_TOOL;
}

namespace {

// Waits for `pid`; with `stop` set, first asks it to stop (SIGTERM, then
// SIGKILL after 5 s). Returns the wait status.
int reap(pid_t pid, bool stop) {
  int status = 0;
  if (stop) {
    ::kill(pid, SIGTERM);
    const auto until = std::chrono::steady_clock::now() + std::chrono::seconds(5);
    while (::waitpid(pid, &status, WNOHANG) == 0) {
      if (std::chrono::steady_clock::now() > until) {
        ::kill(pid, SIGKILL);
        break;
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(20));
    }
  }
  while (::waitpid(pid, &status, 0) < 0 && errno == EINTR) {
  }
  return status;
}

}  // namespace

PlotRun run_plot_tool(const std::string& tool, const std::string& file, const std::string& directory,
                      const std::atomic<bool>* cancel) {
  PlotRun out;
  auto cancelled = [&] { return cancel != nullptr && cancel->load(); };
  // Staging directory beside the target (same file system: figures move by rename).
  std::string staging = (fs::path(directory) / ".figures-XXXXXX").string();
  if (::mkdtemp(staging.data()) == nullptr) {
    out.last_line = "cannot create a staging directory in " + directory + ": " + std::strerror(errno);
    return out;
  }
  struct Cleanup {
    std::string dir;
    ~Cleanup() {
      std::error_code ec;
      fs::remove_all(dir, ec);
    }
  } cleanup{staging};

  int fds[2];
  if (::pipe(fds) != 0) {
    out.last_line = std::string("cannot run the plotting tool: ") + std::strerror(errno);
    return out;
  }
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_addclose(&actions, fds[0]);
  posix_spawn_file_actions_adddup2(&actions, fds[1], 1);
  posix_spawn_file_actions_adddup2(&actions, fds[1], 2);
  posix_spawn_file_actions_addclose(&actions, fds[1]);
  std::vector<std::string> args = {tool, file, "-o", staging};
  std::vector<char*> argv;
  for (auto& a : args) argv.push_back(a.data());
  argv.push_back(nullptr);
  pid_t pid = 0;
  const int rc = ::posix_spawnp(&pid, tool.c_str(), &actions, nullptr, argv.data(), environ);
  posix_spawn_file_actions_destroy(&actions);
  ::close(fds[1]);
  if (rc != 0) {
    ::close(fds[0]);
    out.last_line = "cannot run " + tool + ": " + std::strerror(rc);
    return out;
  }
  // Read its output until it closes, polling the cancel flag in between.
  std::string text;
  bool stop = false;
  for (;;) {
    if (cancelled()) {
      stop = true;
      break;
    }
    pollfd p{fds[0], POLLIN, 0};
    const int ready = ::poll(&p, 1, 100);
    if (ready < 0 && errno != EINTR) break;
    if (ready <= 0) continue;
    char buf[4096];
    const ssize_t n = ::read(fds[0], buf, sizeof buf);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) break;
    text.append(buf, static_cast<std::size_t>(n));
  }
  ::close(fds[0]);
  const int status = reap(pid, stop);
  if (stop || cancelled()) {
    out.cancelled = true;
    return out;
  }
  out.ok = WIFEXITED(status) && WEXITSTATUS(status) == 0;
  // The figures it lists, moved from the staging directory into the target.
  std::istringstream lines(text);
  std::string line;
  while (std::getline(lines, line)) {
    if (line.empty()) continue;
    out.last_line = line;
    if (line.size() <= 4 || line.compare(line.size() - 4, 4, ".png") != 0) continue;
    const fs::path made(line);
    std::error_code ec;
    if (made.parent_path() != fs::path(staging) || !fs::is_regular_file(made, ec)) continue;
    const fs::path target = fs::path(directory) / made.filename();
    fs::rename(made, target, ec);
    if (!ec) out.figures.push_back(target.string());
  }
  return out;
}

}  // namespace aerosect::cli
