#include "command.hpp"

#include <csignal>
#include <cmath>
#include <cstdio>
#include <iostream>
#include <sstream>

#include <fmt/format.h>

#include "aerosect/error.hpp"

namespace aerosect::cli {

namespace {

std::atomic<bool> g_cancel{false};
volatile std::sig_atomic_t g_signal = 0;  // the first signal received

extern "C" void on_signal(int s) {
  if (g_signal != 0) {  // the second: stop now
    std::signal(s, SIG_DFL);
    std::raise(s);
    return;
  }
  g_signal = s;
  g_cancel.store(true);
}

}  // namespace

void install_signal_handlers() {
  std::signal(SIGINT, on_signal);
  std::signal(SIGTERM, on_signal);
  // A write past the file size limit (`ulimit -f`) then fails with EFBIG,
  // which the writers report (exit 4, naming the file, no .part left),
  // instead of the signal killing the process with nothing said.
  std::signal(SIGXFSZ, SIG_IGN);
}

std::atomic<bool>* cancel_flag() { return &g_cancel; }
void request_stop() { g_cancel.store(true); }
int interrupted_signal() { return static_cast<int>(g_signal); }
int interrupted_status() { return 128 + static_cast<int>(g_signal); }

std::string signal_name(int signal) {
  return signal == SIGINT ? "SIGINT" : signal == SIGTERM ? "SIGTERM" : "signal " + std::to_string(signal);
}

void add_case_options(CLI::App* cmd, CaseOptions& c) {
  cmd->add_option("CASE", c.case_path, "case file (TOML)")->required();
  cmd->add_option("--set", c.overrides,
                  "override a case entry, e.g. --set flow.airspeed=42 (repeatable)")
      ->type_name("KEY=VALUE");
  cmd->add_flag("--json", c.json, "print a machine-readable summary on stdout");
}

void add_flutter_speed_options(CLI::App* cmd, std::string& speeds, std::string& method) {
  cmd->add_option("--speeds", speeds, "airspeeds FROM:TO:N in m s-1 (true airspeed)");
  cmd->add_option("--method", method, "state-space, pk or both")
      ->check(CLI::IsMember({"state-space", "pk", "both"}))
      ->capture_default_str();
}

void check_output_name(const std::string& option, const std::string& path) {
  const std::string allowed = fmt::format(
      "a file name, at most {} bytes per folder or file name and {} bytes in all", kMaxOutputComponent,
      kMaxOutputPath);
  if (path.empty()) throw InputError({option, 0, 0}, option, "\"\"", "is empty: no output named", allowed);
  if (path.find('\0') != std::string::npos)
    throw InputError({option, 0, 0}, option, path, "holds a NUL byte", allowed);
  if (path.size() > kMaxOutputPath)
    throw InputError({option, 0, 0}, option, path, fmt::format("is {} bytes long", path.size()), allowed);
  std::size_t start = 0;
  while (start <= path.size()) {
    const std::size_t slash = std::min(path.find('/', start), path.size());
    if (slash - start > kMaxOutputComponent)
      throw InputError({option, 0, 0}, option, path,
                       fmt::format("has a name of {} bytes ('{}...')", slash - start, path.substr(start, 20)),
                       allowed);
    start = slash + 1;
  }
}

void print(std::string_view s) { std::fwrite(s.data(), 1, s.size(), stdout); }

int report_interrupted(const std::string& what_is_kept) {
  std::cerr << "aerosect: interrupted by " << signal_name(interrupted_signal()) << "; " << what_is_kept
            << "\n";
  return interrupted_status();
}

}  // namespace aerosect::cli
