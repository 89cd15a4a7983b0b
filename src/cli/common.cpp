#include "command.hpp"

#include <csignal>
#include <cmath>
#include <cstdio>
#include <iostream>
#include <sstream>
#include <thread>

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

std::vector<double> Range::values() const {
  std::vector<double> v;
  for (long i = 0; i < n; ++i) v.push_back(n == 1 ? from : from + (to - from) * i / (n - 1));
  return v;
}

std::optional<Range> parse_range(const std::string& text) {
  Range r;
  char c1 = 0, c2 = 0;
  std::istringstream in(text);
  in >> r.from >> c1 >> r.to >> c2 >> r.n;
  if (!in || c1 != ':' || c2 != ':' || !(in >> std::ws).eof() || !std::isfinite(r.from) ||
      !std::isfinite(r.to))
    return std::nullopt;
  return r;
}

int max_jobs() { return static_cast<int>(std::max(256u, 4 * std::thread::hardware_concurrency())); }

int jobs_or_all_cores(const std::optional<int>& jobs, const char* option) {
  if (!jobs) return static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
  if (*jobs < 1 || *jobs > max_jobs())
    throw InputError({option, 0, 0}, option, std::to_string(*jobs), "is not a thread count",
                     fmt::format("1 <= N <= {} (leave it out for one thread per core: {})", max_jobs(),
                                 std::max(1u, std::thread::hardware_concurrency())));
  return *jobs;
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

void check_number(const std::string& option, double value, double lo, double hi, bool open_lo,
                  const std::string& allowed) {
  if (!std::isfinite(value) || value < lo || (open_lo && value == lo) || value > hi)
    throw InputError({option, 0, 0}, option, fmt::format("{}", value),
                     std::isfinite(value) ? "is out of range" : "is not a finite number", allowed);
}

bool distinct_values(const Range& r) {
  const std::vector<double> v = r.values();
  for (std::size_t k = 1; k < v.size(); ++k)
    if (!(v[k] > v[k - 1])) return false;
  return true;
}

void print(const std::string& s) { std::fwrite(s.data(), 1, s.size(), stdout); }

int report_interrupted(const std::string& what_is_kept) {
  std::cerr << "aerosect: interrupted by " << signal_name(interrupted_signal()) << "; " << what_is_kept
            << "\n";
  return interrupted_status();
}

}  // namespace aerosect::cli
