#pragma once
// The options a driver takes as text or numbers (the command line's
// --speeds, --vary, --jobs, ...; the Python module's keyword arguments),
// checked and turned into the analyses' option structs. One implementation
// for both drivers, so a bad value gets the same message from either: every
// check throws InputError naming the option as the command line spells it
// ("--speeds", "--vary"), the value given and what is allowed.
//
//   FlutterOptions fo = flutter_options("10:120:221", "both", std::nullopt);
//   SweepRequest req = sweep_request({.vary = {"flow.airspeed=10:60:26"}});
//
// Ranges are "FROM:TO:N": N evenly spaced values from FROM to TO.

#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "aerosect/analysis/continuation.hpp"
#include "aerosect/analysis/flutter.hpp"
#include "aerosect/analysis/study.hpp"
#include "aerosect/analysis/sweep.hpp"
#include "aerosect/io/case.hpp"

namespace aerosect {

// --- Ranges and numbers -------------------------------------------------------
// "FROM:TO:N": the three numbers, or nullopt when the text is not of that form.
struct Range {
  double from = 0, to = 0;
  long n = 0;
  // N evenly spaced values from FROM to TO (FROM alone when N = 1).
  std::vector<double> values() const;
};
std::optional<Range> parse_range(const std::string& text);
// A range's values are distinct and increasing (the spacing is not lost to
// rounding), e.g. 10:10.0000000000001:1000 is refused.
bool distinct_values(const Range& r);
// `value` is a finite number in [lo, hi] (lo excluded when `open_lo`).
void check_number(const std::string& option, double value, double lo, double hi, bool open_lo,
                  const std::string& allowed);

// --- Threads -------------------------------------------------------------------
// The most threads a run may ask for: 256, or 4 per hardware thread on a
// machine with more than 64.
int max_jobs();
// `jobs` when given, else every core. Given, it must be 1 <= jobs <=
// max_jobs(), else InputError naming `option`.
int jobs_or_all_cores(const std::optional<int>& jobs, const char* option = "--jobs");

// --- Per analysis ----------------------------------------------------------------
// flutter: `speeds` "FROM:TO:N" in m/s ("" = the case's default speeds),
// `method` "state-space", "pk" or "both", the describing-function amplitude
// (degrees for pitch/flap springs, m for plunge) when given.
std::vector<double> flutter_speeds(const std::string& text);
FlutterOptions flutter_options(const std::string& speeds, const std::string& method,
                               const std::optional<double>& amplitude);

// gust: gradients "FROM:TO:N" in m ("" = default_gradients()).
std::vector<double> gust_gradients(const std::string& text);

// --shard "K/N" (sweep, orbits) -> (K, N); "" -> (1, 1). Throws InputError
// (key --shard) unless 1 <= K <= N.
std::pair<int, int> parse_shard(const std::string& shard);

// sweep: one --vary "KEY=FROM:TO:N".
SweepAxis sweep_axis(const std::string& text);
struct SweepSettings {
  std::vector<std::string> overrides;  // the case's "key=value" overrides
  std::vector<std::string> vary;       // one or two "KEY=FROM:TO:N"
  std::string direction = "both";      // up, down or both
  std::string restart = "continue";    // continue or fresh
  std::optional<int> jobs;             // default: every core
  std::string shard;                   // "K/N", "" for the whole sweep
  bool traces = false;
  bool with_gusts = false;
};
// The request without the case (its text and path are set by the caller,
// then check_swept_values).
SweepRequest sweep_request(const SweepSettings& s);

// orbits: the options that need no case are checked by check_branch_settings
// (before the case is read), the rest by branch_options.
struct BranchSettings {
  std::string key;                      // "" = the case's default
  std::optional<double> from, to;       // parameter window, the key's units
  std::string start = "auto";           // auto, hopf, march or describing
  std::optional<double> start_amplitude;  // degrees for pitch/flap, m for plunge
  int points = 200;
  std::string watch;                    // plunge, pitch, flap or "" (automatic)
  std::string shard;                    // "K/N", "" for the whole run (branch_report.hpp)
};
void check_branch_settings(const BranchSettings& s);
BranchOptions branch_options(const Case& c, const BranchSettings& s);

// study: threads, airspeeds of the LCO sweep per direction, and optionally
// the sweep's airspeeds "FROM:TO:N" (m/s TAS; N replaces `points`).
inline constexpr int kMaxStudySweepPoints = 10000;
StudyOptions study_options(const std::optional<int>& jobs, int points, const std::string& speeds);

}  // namespace aerosect
