#pragma once
// The command-line driver's shared pieces. Each command lives in its own
// file (src/cli/<command>.cpp) as one function that declares the command's
// options on the application and returns how to run it once parsed:
//
//   Command add_flutter_command(CLI::App& app);   // src/cli/flutter.cpp
//
// main.cpp lists the commands, parses, runs the chosen one and turns the
// engine's typed errors into messages and exit codes. A new command is a new
// file, one declaration below and one line in main.cpp's list.
//
// Interruption: the first SIGINT or SIGTERM sets the cancel flag the engine
// is handed (`cancel_flag()`); the engine stops at its next check and the
// command returns `interrupted_status()` (128 + signal number: 130 for
// SIGINT, 143 for SIGTERM) after saying on stderr what is kept. A second
// signal ends the program at once (the signal's default action).

#include <atomic>
#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <type_traits>
#include <vector>

#include <CLI/CLI.hpp>

#include "aerosect/analysis/options.hpp"  // option values shared with the Python module
#include "aerosect/error.hpp"

namespace aerosect::cli {

struct Command {
  CLI::App* app = nullptr;   // the subcommand (true once it was given)
  std::function<int()> run;  // runs it; returns the exit status
};

Command add_check_command(CLI::App& app);
Command add_simulate_command(CLI::App& app);
Command add_flutter_command(CLI::App& app);
Command add_gust_command(CLI::App& app);
Command add_sweep_command(CLI::App& app);
Command add_merge_command(CLI::App& app);
Command add_study_command(CLI::App& app);
Command add_orbits_command(CLI::App& app);
Command add_batch_command(CLI::App& app);

// --- Signals -------------------------------------------------------------
// Installs the SIGINT/SIGTERM handlers and ignores SIGXFSZ (once, from main).
void install_signal_handlers();
// The flag handed to the engine: set by the first signal, or by
// request_stop() (e.g. a sweep whose journal cannot be written).
std::atomic<bool>* cancel_flag();
void request_stop();
// The first signal received, 0 when none.
int interrupted_signal();
// 128 + interrupted_signal().
int interrupted_status();
// "SIGINT" / "SIGTERM".
std::string signal_name(int signal);

// --- Options every case command takes --------------------------------------
struct CaseOptions {
  std::string case_path;
  std::vector<std::string> overrides;
  bool json = false;
};
void add_case_options(CLI::App* cmd, CaseOptions& o);
// --speeds FROM:TO:N and --method state-space|pk|both (flutter, batch).
void add_flutter_speed_options(CLI::App* cmd, std::string& speeds, std::string& method);

// --- Checks of option values (before any work; InputError, exit 2) ----------
// The longest path component of an output name, and the longest name: the
// writers add suffixes (".part", ".lock", ".journal", ".incomplete") that
// must still fit the system's limits (NAME_MAX 255, PATH_MAX 4096).
inline constexpr std::size_t kMaxOutputComponent = 200;
inline constexpr std::size_t kMaxOutputPath = 4000;
// An output name given with `option` (-o): not empty, no component longer
// than kMaxOutputComponent bytes, at most kMaxOutputPath bytes.
void check_output_name(const std::string& option, const std::string& path);

// --- Output ------------------------------------------------------------------
// Writes `s` to stdout as is.
void print(std::string_view s);
// Tells on stderr that the run was stopped by a signal and what is kept;
// returns interrupted_status().
int report_interrupted(const std::string& what_is_kept);

// The tail of a one-result command (flutter, gust): runs `analyse`; on a
// signal (Cancelled) reports that nothing was written; else writes the
// result to `output` when one is given (`write(output, result)`) and prints
// `summary(result, written)`, `written` being the output or "".
template <class Analyse, class Write, class Summary>
int analyse_write_print(const std::string& output, Analyse analyse, Write write, Summary summary) {
  std::invoke_result_t<Analyse> result;
  try {
    result = analyse();
  } catch (const Cancelled&) {
    return report_interrupted(output.empty() ? "nothing written" : "nothing written (" + output + " left as it was)");
  }
  if (!output.empty()) write(output, result);
  print(summary(result, output));
  return 0;
}

}  // namespace aerosect::cli
