#include "aerosect/analysis/options.hpp"

#include <algorithm>
#include <cmath>
#include <sstream>
#include <tuple>
#include <thread>

#include <fmt/format.h>

#include "aerosect/analysis/gust_sweep.hpp"
#include "aerosect/analysis/orbit.hpp"
#include "aerosect/error.hpp"
#include "aerosect/units.hpp"

namespace aerosect {

namespace {

// `value` is one of `allowed` (the command line's parser checks these
// before any of this runs; other drivers rely on this check).
void check_member(const char* option, const std::string& value, const std::vector<std::string>& allowed) {
  if (std::find(allowed.begin(), allowed.end(), value) != allowed.end()) return;
  std::string list;
  for (std::size_t k = 0; k < allowed.size(); ++k)
    list += (k == 0 ? "" : k + 1 == allowed.size() ? " or " : ", ") + allowed[k];
  throw InputError({option, 0, 0}, option, value, "is not one of the choices", list);
}

}  // namespace

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

bool distinct_values(const Range& r) {
  const std::vector<double> v = r.values();
  for (std::size_t k = 1; k < v.size(); ++k)
    if (!(v[k] > v[k - 1])) return false;
  return true;
}

void check_number(const std::string& option, double value, double lo, double hi, bool open_lo,
                  const std::string& allowed) {
  if (!std::isfinite(value) || value < lo || (open_lo && value == lo) || value > hi)
    throw InputError({option, 0, 0}, option, fmt::format("{}", value),
                     std::isfinite(value) ? "is out of range" : "is not a finite number", allowed);
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

std::vector<double> flutter_speeds(const std::string& text) {
  const auto r = parse_range(text);
  if (!r || !(r->from >= 0) || !(r->to > r->from) || !(r->to < 1000) || r->n < 2 || r->n > 100000 ||
      !distinct_values(*r))
    throw InputError({"--speeds " + text, 0, 0}, "--speeds", text, "is not a valid speed range",
                     "FROM:TO:N with 0 <= FROM < TO < 1000 (m s-1, true airspeed; the theory is "
                     "incompressible), 2 <= N <= 100000 distinct speeds, e.g. --speeds 10:120:221");
  std::vector<double> s = r->values();
  if (s.front() == 0.0) s.front() = 1e-6 * r->to;  // U = 0 has no reduced frequency
  return s;
}

FlutterOptions flutter_options(const std::string& speeds, const std::string& method,
                               const std::optional<double>& amplitude) {
  FlutterOptions fo;
  if (!speeds.empty()) fo.speeds = flutter_speeds(speeds);
  check_member("--method", method, {"state-space", "pk", "both"});
  if (amplitude)
    check_number("--amplitude", *amplitude, 0, 1e6, true,
                 "a positive finite amplitude (degrees for pitch/flap springs, m for plunge)");
  fo.state_space = method != "pk";
  fo.pk = method != "state-space";
  fo.amplitude = amplitude;
  return fo;
}

std::vector<double> gust_gradients(const std::string& text) {
  if (text.empty()) return default_gradients();
  const auto r = parse_range(text);
  // H sets the length of each run (the gust lasts 2H/U): 1 km is ten times
  // the longest CS-25 gradient; 1 cm is far below any design gust.
  if (!r || !(r->from >= 0.01) || !(r->to >= r->from) || !(r->to <= 1000) || r->n < 1 || r->n > 10000 ||
      (r->n > 1 && !distinct_values(*r)) || (r->n == 1 && r->to != r->from))
    throw InputError({"--gradients " + text, 0, 0}, "--gradients", text, "is not a valid gradient range",
                     "FROM:TO:N with 0.01 <= FROM <= TO <= 1000 (m), 1 <= N <= 10000 distinct "
                     "gradients (N = 1 when FROM = TO), e.g. --gradients 9.144:106.68:12");
  return r->values();
}

SweepAxis sweep_axis(const std::string& text) {
  const auto eq = text.find('=');
  const auto r = eq != std::string::npos && eq > 0 ? parse_range(text.substr(eq + 1)) : std::nullopt;
  if (!r || !(r->to > r->from) || r->n < 2 || r->n > kMaxAxisValues || !distinct_values(*r))
    throw InputError({"--vary " + text, 0, 0}, "--vary", text, "is not a valid sweep",
                     fmt::format("KEY=FROM:TO:N with a numeric case key, finite FROM < TO and 2 <= N <= {} "
                                 "distinct values, e.g. --vary nondimensional.reduced_speed=1:7:61",
                                 kMaxAxisValues));
  return {text.substr(0, eq), r->values()};
}

SweepRequest sweep_request(const SweepSettings& s) {
  SweepRequest req;
  req.overrides = s.overrides;
  if (s.vary.empty() || s.vary.size() > 2)
    throw InputError({"--vary", 0, 0}, "--vary", "", "give one or two --vary options",
                     "--vary KEY=FROM:TO:N [--vary KEY2=FROM:TO:N]");
  for (const auto& v : s.vary) req.options.axes.push_back(sweep_axis(v));
  if (req.options.axes.size() == 2 && req.options.axes[0].key == req.options.axes[1].key)
    throw InputError({"--vary " + s.vary[1], 0, 0}, "--vary", s.vary[1],
                     "varies the same key as the first --vary", "two --vary options with different keys");
  check_member("--direction", s.direction, {"up", "down", "both"});
  check_member("--restart", s.restart, {"continue", "fresh"});
  req.options.up = s.direction != "down";
  req.options.down = s.direction != "up";
  req.options.continuation = s.restart == "continue";
  req.options.traces = s.traces;
  req.options.with_gusts = s.with_gusts;
  req.options.jobs = jobs_or_all_cores(s.jobs);
  const long points = (s.direction == "both" ? 2 : 1) * static_cast<long>(req.options.axes[0].values.size()) *
                      (req.options.axes.size() > 1 ? static_cast<long>(req.options.axes[1].values.size()) : 1);
  if (points > kMaxSweepPoints)
    throw InputError({"--vary", 0, 0}, "--vary", fmt::format("{} points", points), "is too large a sweep",
                     fmt::format("at most {} points over both directions and the whole grid", kMaxSweepPoints));
  std::tie(req.options.shard_index, req.options.shard_count) = parse_shard(s.shard);
  return req;
}

std::pair<int, int> parse_shard(const std::string& shard) {
  if (shard.empty()) return {1, 1};
  int k = 0, n = 0;
  char slash = 0;
  std::istringstream in(shard);
  in >> k >> slash >> n;
  if (!in || slash != '/' || n < 1 || k < 1 || k > n || !(in >> std::ws).eof())
    throw InputError({"--shard " + shard, 0, 0}, "--shard", shard, "is not a shard",
                     "K/N with 1 <= K <= N, e.g. --shard 2/8");
  return {k, n};
}

void check_branch_settings(const BranchSettings& s) {
  if (s.points < 2 || s.points > 100000)
    throw InputError({"--points", 0, 0}, "--points", std::to_string(s.points), "is out of range", "2 to 100000 points");
  for (const auto& [name, v] : {std::pair{"--from", s.from}, std::pair{"--to", s.to}})
    if (v && !std::isfinite(*v))
      throw InputError({name, 0, 0}, name, fmt::format("{}", *v), "is not a finite number",
                       "a finite value of the continued key, in its units");
  if (s.start_amplitude && (!(*s.start_amplitude > 0) || !std::isfinite(*s.start_amplitude)))
    throw InputError({"--start-amplitude", 0, 0}, "--start-amplitude", fmt::format("{}", *s.start_amplitude),
                     "is not a positive amplitude", "a positive number, degrees for pitch/flap, m for plunge");
  check_member("--start", s.start, {"auto", "hopf", "march", "describing"});
  parse_shard(s.shard);
}

BranchOptions branch_options(const Case& c, const BranchSettings& s) {
  BranchOptions bo;
  bo.key = s.key;
  bo.from = s.from;
  bo.to = s.to;
  bo.max_points = s.points;
  bo.start = s.start == "hopf"         ? BranchStart::kHopf
             : s.start == "march"      ? BranchStart::kMarch
             : s.start == "describing" ? BranchStart::kDescribing
                                       : BranchStart::kAuto;
  if (s.start_amplitude) bo.start_amplitude = *s.start_amplitude;
  if (!s.watch.empty()) {
    const int j = dof_index(s.watch);
    if (j < 0 || j >= c.model.section.dof)
      throw InputError({"--watch", 0, 0}, "--watch", s.watch, "is not a DOF of this case",
                       c.model.section.dof == 3 ? "plunge, pitch or flap" : "plunge or pitch");
    bo.orbit.watched_dof = j;
  }
  if (s.start_amplitude) {
    const int w = bo.orbit.watched_dof >= 0 ? bo.orbit.watched_dof : orbit_watched_dof(AeroelasticModel(c.model), -1);
    if (w != 0) bo.start_amplitude *= kRadPerDeg;
  }
  return bo;
}

StudyOptions study_options(const std::optional<int>& jobs, int points, const std::string& speeds) {
  StudyOptions so;
  so.jobs = jobs_or_all_cores(jobs);
  if (points < 2 || points > kMaxStudySweepPoints)
    throw InputError({"--sweep-points", 0, 0}, "--sweep-points", std::to_string(points), "is out of range",
                     fmt::format("2 <= N <= {} airspeeds per direction", kMaxStudySweepPoints));
  so.sweep_points = points;
  if (!speeds.empty()) {
    const auto r = parse_range(speeds);
    if (!r || !(r->from > 0) || !(r->to > r->from) || !(r->to < 1000) || r->n < 2 || r->n > kMaxStudySweepPoints ||
        !distinct_values(*r))
      throw InputError({"--sweep-speeds " + speeds, 0, 0}, "--sweep-speeds", speeds, "is not a valid speed range",
                       fmt::format("FROM:TO:N with 0 < FROM < TO < 1000 (m s-1, true airspeed) and 2 <= N <= {} "
                                   "distinct speeds, e.g. --sweep-speeds 10:90:41",
                                   kMaxStudySweepPoints));
    so.sweep_speeds = std::make_pair(r->from, r->to);
    so.sweep_points = static_cast<int>(r->n);
  }
  return so;
}

}  // namespace aerosect
