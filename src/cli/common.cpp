#include "command.hpp"

#include <csignal>
#include <cmath>
#include <cstdio>
#include <iostream>
#include <sstream>
#include <thread>

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

int jobs_or_all_cores(int jobs) {
  return jobs > 0 ? jobs : static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
}

void print(const std::string& s) { std::fwrite(s.data(), 1, s.size(), stdout); }

int report_interrupted(const std::string& what_is_kept) {
  std::cerr << "aerosect: interrupted by " << signal_name(interrupted_signal()) << "; " << what_is_kept
            << "\n";
  return interrupted_status();
}

}  // namespace aerosect::cli
