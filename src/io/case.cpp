#include "aerosect/io/case.hpp"
#include "aerosect/io/text_file.hpp"

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <limits>
#include <map>
#include <numbers>
#include <set>
#include <sstream>

#include <Eigen/Cholesky>
#include <fmt/format.h>
#include <toml++/toml.h>

#include "aerosect/error.hpp"
#include "aerosect/model/atmosphere.hpp"
#include "aerosect/io/gust_record.hpp"
#include "aerosect/model/gust.hpp"
#include "aerosect/model/spring.hpp"
#include "aerosect/model/turbulence.hpp"
#include "aerosect/units.hpp"

namespace aerosect {

namespace {

using std::numbers::pi;

// ---------------------------------------------------------------------------
// The schema: every key a case file may hold.
const std::vector<std::string> kKnownKeys = {
    "title",
    "description",
    "section.semichord",
    "section.mass",
    "section.elastic_axis",
    "section.cg",
    "section.cg_offset",
    "section.static_unbalance",
    "section.pitch_inertia",
    "section.pitch_inertia_cg",
    "section.radius_of_gyration",
    "section.plunge_stiffness",
    "section.plunge_frequency_hz",
    "section.pitch_stiffness",
    "section.pitch_frequency_hz",
    "section.plunge_damping_ratio",
    "section.pitch_damping_ratio",
    "flap.hinge",
    "flap.static_unbalance",
    "flap.mass",
    "flap.cg_offset",
    "flap.inertia",
    "flap.inertia_cg",
    "flap.stiffness",
    "flap.frequency_hz",
    "flap.damping_ratio",
    "flow.airspeed",
    "flow.density",
    "flow.altitude",
    "nondimensional.mass_ratio",
    "nondimensional.elastic_axis",
    "nondimensional.cg_offset",
    "nondimensional.radius_of_gyration",
    "nondimensional.frequency_ratio",
    "nondimensional.plunge_damping_ratio",
    "nondimensional.pitch_damping_ratio",
    "nondimensional.reduced_speed",
    "nondimensional.hinge",
    "nondimensional.flap_cg_offset",
    "nondimensional.flap_radius_of_gyration",
    "nondimensional.flap_frequency_ratio",
    "nondimensional.flap_damping_ratio",
    "nondimensional.reference.semichord",
    "nondimensional.reference.pitch_frequency_hz",
    "nondimensional.reference.density",
    "aerodynamics.model",
    "aerodynamics.wagner",
    "aerodynamics.wagner_coefficients",
    "aerodynamics.wagner_exponents",
    "initial.plunge",
    "initial.plunge_semichords",
    "initial.pitch_deg",
    "initial.flap_deg",
    "initial.plunge_rate",
    "initial.pitch_rate_deg_s",
    "initial.flap_rate_deg_s",
    "initial.lag_states",
    "simulation.duration",
    "simulation.duration_semichords",
    "simulation.sample_rate",
    "simulation.sample_interval",
    "simulation.sample_interval_semichords",
    "simulation.every_step",
    "simulation.stepper",
    "simulation.relative_tolerance",
    "simulation.absolute_tolerance",
    "simulation.max_step",
    "simulation.initial_step",
    "simulation.hold",
    "envelope.dive_speed_eas",
    "aerodynamics.kussner",
    "aerodynamics.kussner_coefficients",
    "aerodynamics.kussner_exponents",
    "gust.shape",
    "gust.start",
    "gust.start_semichords",
    "gust.start_distance",
    "gust.amplitude",
    "gust.amplitude_eas",
    "gust.gradient",
    "gust.design",
    "gust.speed_condition",
    "gust.altitude",
    "gust.landing_weight_ratio",
    "gust.zero_fuel_weight_ratio",
    "gust.max_operating_altitude",
    "gust.frequency_hz",
    "gust.reduced_frequency",
    "gust.cycles",
    "gust.label",
    "gust.file",
    "gust.base",
    "gust.base_dataset",
    "gust.velocity_dataset",
    "gust.scale",
    "gust.model",
    "gust.intensity",
    "gust.severity",
    "gust.scale_length",
    "gust.seed",
    "gust.sample_interval",
    "springs.plunge.law",
    "springs.plunge.half_gap",
    "springs.plunge.total_gap",
    "springs.plunge.gap_below",
    "springs.plunge.gap_above",
    "springs.plunge.offset",
    "springs.plunge.inner_stiffness",
    "springs.plunge.half_width",
    "springs.plunge.cubic_coefficient",
    "springs.plunge.coefficients",
    "springs.plunge.displacements",
    "springs.plunge.forces",
    "springs.pitch.law",
    "springs.pitch.half_gap_deg",
    "springs.pitch.total_gap_deg",
    "springs.pitch.gap_below_deg",
    "springs.pitch.gap_above_deg",
    "springs.pitch.offset_deg",
    "springs.pitch.inner_stiffness",
    "springs.pitch.half_width_deg",
    "springs.pitch.cubic_coefficient",
    "springs.pitch.coefficients",
    "springs.pitch.displacements_deg",
    "springs.pitch.forces",
    "springs.flap.law",
    "springs.flap.half_gap_deg",
    "springs.flap.total_gap_deg",
    "springs.flap.gap_below_deg",
    "springs.flap.gap_above_deg",
    "springs.flap.offset_deg",
    "springs.flap.inner_stiffness",
    "springs.flap.half_width_deg",
    "springs.flap.cubic_coefficient",
    "springs.flap.coefficients",
    "springs.flap.displacements_deg",
    "springs.flap.forces",
};

// Tables that may appear (prefixes of known keys).
bool is_known_table(const std::string& path) {
  return std::any_of(kKnownKeys.begin(), kKnownKeys.end(),
                     [&](const std::string& k) { return k.rfind(path + ".", 0) == 0; });
}
bool is_known_key(const std::string& path) {
  return std::find(kKnownKeys.begin(), kKnownKeys.end(), path) != kKnownKeys.end();
}

std::size_t edit_distance(std::string_view a, std::string_view b) {
  std::vector<std::size_t> prev(b.size() + 1), cur(b.size() + 1);
  for (std::size_t j = 0; j <= b.size(); ++j) prev[j] = j;
  for (std::size_t i = 1; i <= a.size(); ++i) {
    cur[0] = i;
    for (std::size_t j = 1; j <= b.size(); ++j) {
      const std::size_t sub = prev[j - 1] + (a[i - 1] == b[j - 1] ? 0 : 1);
      cur[j] = std::min({prev[j] + 1, cur[j - 1] + 1, sub});
    }
    std::swap(prev, cur);
  }
  return prev[b.size()];
}

std::string leaf_of(const std::string& path) {
  const auto p = path.rfind('.');
  return p == std::string::npos ? path : path.substr(p + 1);
}

std::string parent_of(const std::string& path) {
  const auto p = path.rfind('.');
  return p == std::string::npos ? std::string() : path.substr(0, p);
}

// Closest known key (or table) to an unknown dotted path, or "": first
// among the keys of the same table, then anywhere (a key put in the wrong
// table). An unknown table is matched against tables only ([springs.roll]
// is no 'simulation.hold'); an unknown value against keys and tables.
std::string suggestion_for(const std::string& path, bool is_table = false) {
  std::vector<std::string> candidates;
  if (!is_table) candidates = kKnownKeys;
  for (const auto& k : kKnownKeys) {
    for (auto p = k.find('.'); p != std::string::npos; p = k.find('.', p + 1))
      candidates.push_back(k.substr(0, p));
  }
  const std::string leaf = leaf_of(path), parent = parent_of(path);
  const std::size_t limit = std::max<std::size_t>(2, leaf.size() / 3);
  for (bool same_table : {true, false}) {
    std::string best;
    std::size_t best_d = limit + 1;
    for (const auto& c : candidates) {
      if (same_table != (parent_of(c) == parent)) continue;
      const std::size_t d = edit_distance(leaf, leaf_of(c));
      // A candidate sharing nothing with the leaf ('x' -> 'cg') is no hint.
      if (d < best_d && d < leaf.size()) {
        best_d = d;
        best = c;
      }
    }
    if (!best.empty()) return best;
  }
  return std::string();
}

std::string join(const std::vector<std::string>& v, const char* sep = ", ") {
  std::string s;
  for (std::size_t i = 0; i < v.size(); ++i) s += (i ? sep : "") + v[i];
  return s;
}

std::string quoted_list(const std::vector<std::string>& v) {
  std::vector<std::string> q;
  for (const auto& s : v) q.push_back("\"" + s + "\"");
  return join(q);
}

// A value on one line as the user would write it: numbers in their shortest
// round-trip form (0.1, not 0.10000000000000001), arrays element by element,
// at most 60 characters.
std::string node_text(const toml::node& n) {
  std::string s;
  if (n.is_table()) {
    s = "(table)";
  } else if (auto* a = n.as_array()) {
    s = "[";
    for (std::size_t i = 0; i < a->size() && s.size() <= 60; ++i)
      s += (i ? ", " : "") + node_text(*a->get(i));
    s += "]";
  } else if (auto* f = n.as_floating_point()) {
    const double v = f->get();
    s = std::isnan(v) ? std::string("nan") : fmt::format("{}", v);
    if (std::isfinite(v) && s.find_first_of(".e") == std::string::npos) s += ".0";
  } else {
    std::ostringstream os;
    n.visit([&](auto&& v) { os << v; });
    s = os.str();
  }
  if (s.size() > 60) s = s.substr(0, 57) + "...";
  return s;
}

// ---------------------------------------------------------------------------
// Reading context: where values came from.
struct Context {
  std::string file;
  std::map<std::string, std::string> overrides;  // key -> "key=value"
};

class Table {
 public:
  Table(const Context& ctx, const toml::table* t, std::string path)
      : ctx_(ctx), t_(t), path_(std::move(path)) {}

  bool present() const { return t_ != nullptr; }
  const std::string& path() const { return path_; }
  std::string key_path(std::string_view key) const {
    return path_.empty() ? std::string(key) : path_ + "." + std::string(key);
  }

  const toml::node* node(std::string_view key) const {
    return t_ ? t_->get(key) : nullptr;
  }
  bool has(std::string_view key) const { return node(key) != nullptr; }

  SourceLocation where(std::string_view key) const {
    const std::string kp = key_path(key);
    if (auto it = ctx_.overrides.find(kp); it != ctx_.overrides.end())
      return {"--set " + it->second, 0, 0};
    if (const toml::node* n = node(key)) {
      const auto& src = n->source();
      return {ctx_.file, static_cast<int>(src.begin.line), static_cast<int>(src.begin.column)};
    }
    return where_table();
  }
  SourceLocation where_table() const {
    if (t_) {
      const auto& src = t_->source();
      return {ctx_.file, static_cast<int>(src.begin.line), 0};
    }
    return {ctx_.file, 0, 0};
  }

  [[noreturn]] void fail(std::string_view key, const std::string& problem,
                         const std::string& allowed) const {
    const toml::node* n = node(key);
    throw InputError(where(key), key_path(key), n ? node_text(*n) : std::string(), problem,
                     allowed);
  }

  // A number (integers accepted), or nullopt when absent.
  std::optional<double> number(std::string_view key) const {
    const toml::node* n = node(key);
    if (!n) return std::nullopt;
    std::optional<double> v = n->value<double>();
    if (!v || n->is_boolean()) fail(key, "must be a number", "a finite number");
    if (!std::isfinite(*v)) fail(key, "must be finite", "a finite number (not nan or inf)");
    return v;
  }

  double required_number(std::string_view key, const std::string& what) const {
    auto v = number(key);
    if (!v) missing(key, what);
    return *v;
  }

  [[noreturn]] void missing(std::string_view key, const std::string& what) const {
    throw InputError(where_table(), key_path(key), "",
                     fmt::format("missing{}", present() ? "" : fmt::format(" (no [{}] table)", path_)),
                     what);
  }

  std::optional<std::string> string(std::string_view key) const {
    const toml::node* n = node(key);
    if (!n) return std::nullopt;
    auto v = n->value<std::string>();
    if (!v) fail(key, "must be a string", "a quoted string");
    return v;
  }

  std::string choice(std::string_view key, const std::vector<std::string>& allowed,
                     const std::string& def) const {
    auto v = string(key);
    if (!v) return def;
    if (std::find(allowed.begin(), allowed.end(), *v) == allowed.end()) {
      std::string hint;
      std::size_t best = 3;
      for (const auto& a : allowed) {
        const std::size_t d = edit_distance(*v, a);
        if (d < best) {
          best = d;
          hint = a;
        }
      }
      fail(key, hint.empty() ? "is not one of the choices"
                             : fmt::format("is not one of the choices (did you mean \"{}\"?)", hint),
           quoted_list(allowed));
    }
    return *v;
  }

  std::optional<bool> boolean(std::string_view key) const {
    const toml::node* n = node(key);
    if (!n) return std::nullopt;
    if (!n->is_boolean()) fail(key, "must be true or false", "true or false");
    return n->value<bool>();
  }

  std::optional<std::vector<double>> numbers(std::string_view key) const {
    const toml::node* n = node(key);
    if (!n) return std::nullopt;
    const toml::array* a = n->as_array();
    if (!a) fail(key, "must be an array of numbers", "an array such as [0.165, 0.335]");
    std::vector<double> out;
    for (const auto& e : *a) {
      auto v = e.value<double>();
      if (!v || e.is_boolean()) fail(key, "must be an array of numbers", "finite numbers");
      if (!std::isfinite(*v)) fail(key, "must hold finite numbers", "finite numbers");
      out.push_back(*v);
    }
    return out;
  }

  std::optional<std::vector<std::string>> strings(std::string_view key) const {
    const toml::node* n = node(key);
    if (!n) return std::nullopt;
    const toml::array* a = n->as_array();
    if (!a) fail(key, "must be an array of strings", "an array such as [\"plunge\"]");
    std::vector<std::string> out;
    for (const auto& e : *a) {
      auto v = e.value<std::string>();
      if (!v) fail(key, "must be an array of strings", "strings");
      out.push_back(*v);
    }
    return out;
  }

  // Which one of alternative keys is given; "" when none. Two given: error.
  std::string one_of(const std::vector<std::string>& keys) const {
    std::string found;
    for (const auto& k : keys) {
      if (!has(k)) continue;
      if (!found.empty())
        fail(k, fmt::format("conflicts with '{}': give only one of them", key_path(found)),
             "one of " + join(keys));
      found = k;
    }
    return found;
  }
  std::string required_one_of(const std::vector<std::string>& keys,
                              const std::string& what) const {
    std::string k = one_of(keys);
    if (k.empty()) {
      std::vector<std::string> full;
      for (const auto& x : keys) full.push_back(key_path(x));
      throw InputError(where_table(), join(full, " | "), "",
                       fmt::format("missing: give one of {}", join(full)), what);
    }
    return k;
  }

  // Value checks.
  void require(bool ok, std::string_view key, const std::string& problem,
               const std::string& allowed) const {
    if (!ok) fail(key, problem, allowed);
  }
  Table sub(std::string_view key) const {
    const toml::node* n = node(key);
    if (n && !n->is_table())
      fail(key, "must be a table", fmt::format("a [{}] table", key_path(key)));
    return Table(ctx_, n ? n->as_table() : nullptr, key_path(key));
  }

 private:
  const Context& ctx_;
  const toml::table* t_;
  std::string path_;
};

// Unknown keys anywhere in the document.
void check_unknown_keys(const Context& ctx, const toml::table& t, const std::string& prefix) {
  for (const auto& [k, v] : t) {
    const std::string path = prefix.empty() ? std::string(k.str()) : prefix + "." + std::string(k.str());
    if (v.is_table() && is_known_table(path)) {
      check_unknown_keys(ctx, *v.as_table(), path);
      continue;
    }
    // [[gust]]: an array of tables, each checked against the gust keys.
    if (path == "gust" && v.is_array_of_tables()) {
      for (const auto& e : *v.as_array()) check_unknown_keys(ctx, *e.as_table(), path);
      continue;
    }
    if (!v.is_table() && is_known_key(path)) continue;
    // A value where a table belongs (`section = 3`, `[[section]]`): left to
    // Table::sub, which reports "must be a table" at the value.
    if (!v.is_table() && is_known_table(path)) continue;
    SourceLocation where{ctx.file, static_cast<int>(k.source().begin.line),
                         static_cast<int>(k.source().begin.column)};
    if (where.line == 0) {
      where.line = static_cast<int>(v.source().begin.line);
      where.column = static_cast<int>(v.source().begin.column);
    }
    if (auto it = ctx.overrides.find(path); it != ctx.overrides.end())
      where = {"--set " + it->second, 0, 0};
    const std::string hint = suggestion_for(path, v.is_table() && !is_known_key(path));
    std::string problem = v.is_table() && !is_known_table(path) && is_known_key(path)
                              ? "must be a value, not a table"
                              : "unknown key";
    if (!hint.empty() && hint != path) problem += fmt::format(" (did you mean '{}'?)", hint);
    throw InputError(where, path, v.is_table() ? "" : node_text(v), problem,
                     "the keys listed in README.md, \"Case file reference\"");
  }
}

// ---------------------------------------------------------------------------
// Overrides.
void apply_override(toml::table& root, const std::string& text, Context& ctx) {
  const auto eq = text.find('=');
  if (eq == std::string::npos || eq == 0)
    throw InputError({"--set " + text, 0, 0}, "", text, "is not of the form key=value",
                     "--set section.mass=12.5 (a dotted key from the case-file reference)");
  auto trim = [](std::string s) {
    const auto b = s.find_first_not_of(" \t"), e = s.find_last_not_of(" \t");
    return b == std::string::npos ? std::string() : s.substr(b, e - b + 1);
  };
  const std::string key = trim(text.substr(0, eq));
  const std::string value = trim(text.substr(eq + 1));
  if (is_known_table(key)) {
    const auto first = std::find_if(kKnownKeys.begin(), kKnownKeys.end(), [&](const std::string& k) {
      return k.rfind(key + ".", 0) == 0;
    });
    throw InputError({"--set " + text, 0, 0}, key, value, "is a table, not a key",
                     fmt::format("a key inside it, such as --set {}=...", *first));
  }
  if (!is_known_key(key)) {
    const std::string hint = suggestion_for(key);
    throw InputError({"--set " + text, 0, 0}, key, value,
                     hint.empty() ? "unknown key" : fmt::format("unknown key (did you mean '{}'?)", hint),
                     "the keys listed in README.md, \"Case file reference\"");
  }
  // Parse the value as TOML; a bare word is a string.
  toml::table parsed;
  try {
    parsed = toml::parse(std::string_view("v = " + value));
  } catch (const toml::parse_error&) {
    parsed = toml::table{};
    parsed.insert("v", value);
  }
  // Walk/create the tables on the path.
  toml::table* t = &root;
  std::size_t start = 0;
  while (true) {
    const auto dot = key.find('.', start);
    if (dot == std::string::npos) break;
    const std::string part = key.substr(start, dot - start);
    toml::node* n = t->get(part);
    if (!n) {
      t->insert(part, toml::table{});
      n = t->get(part);
    }
    if (!n->is_table())
      throw InputError({"--set " + text, 0, 0}, key, value,
                       fmt::format("'{}' is not a table in the case file", key.substr(0, dot)),
                       fmt::format("a [{}] table in the case file", key.substr(0, dot)));
    t = n->as_table();
    start = dot + 1;
  }
  const std::string leaf = key.substr(start);
  t->insert_or_assign(leaf, *parsed.get("v"));
  ctx.overrides[key] = text;
}

// ---------------------------------------------------------------------------
// Reading the section forms.
constexpr const char* kChordPos = "a position in semichords from midchord, -1 < x < 1";

double positive(const Table& t, std::string_view key, const std::string& units) {
  const double v = t.required_number(key, "a positive number, " + units);
  t.require(v > 0, key, "must be positive", "a positive number, " + units);
  return v;
}

double nonnegative_or(const Table& t, std::string_view key, double def, const std::string& what) {
  auto v = t.number(key);
  if (!v) return def;
  t.require(*v >= 0, key, "must not be negative", what);
  return *v;
}

double damping_ratio(const Table& t, std::string_view key) {
  auto v = t.number(key);
  if (!v) return 0.0;
  t.require(*v >= 0 && *v < 1, key, "is outside the allowed range",
            "a viscous damping ratio 0 <= zeta < 1 (fraction of critical, not percent)");
  return *v;
}

double chord_position(const Table& t, std::string_view key) {
  const double v = t.required_number(key, kChordPos);
  t.require(v > -1 && v < 1, key, "is outside the chord", kChordPos);
  return v;
}

// A quantity derived from inputs must be a finite number (and positive when
// `positive`): each input may be finite while their product overflows double
// precision (mass = 1e308 kg/m gives an infinite stiffness) or a square
// underflows (semichord = 1e-308 m gives a zero inertia). The message points
// at the input farthest from 1 in magnitude, the likely culprit; `inputs`
// lists the keys the quantity comes from (absent keys are skipped).
struct DerivedInput {
  const Table* table;
  std::string key;
};
void require_physical(double v, const std::string& what, const std::vector<DerivedInput>& inputs,
                      bool positive = false) {
  if (std::isfinite(v) && (!positive || v > 0)) return;
  const DerivedInput* worst = nullptr;
  double worst_size = -1;
  for (const auto& in : inputs) {
    const std::optional<double> x = in.table->number(in.key);
    if (!x) continue;
    const double size = *x == 0 ? 0 : std::abs(std::log10(std::abs(*x)));
    if (size > worst_size) {
      worst_size = size;
      worst = &in;
    }
  }
  AEROSECT_CHECK(worst != nullptr);
  worst->table->fail(worst->key,
                     fmt::format("gives {} = {:g}, {} double precision", what, v,
                                 std::isfinite(v) ? "below" : "beyond"),
                     "values of physical size (every derived quantity a finite number)");
}

void read_si(const Table& sec, const Table& flap, const Table& flow, Case& c) {
  SectionProperties& s = c.model.section;
  FlowConditions& f = c.model.flow;
  s.semichord = positive(sec, "semichord", "m");
  s.mass = positive(sec, "mass", "kg per m span");
  s.elastic_axis = chord_position(sec, "elastic_axis");
  const double b = s.semichord, m = s.mass, a = s.elastic_axis;

  const std::string cg_key = sec.required_one_of(
      {"cg", "cg_offset", "static_unbalance"},
      "the CG position: cg (semichords from midchord), cg_offset (x_alpha, semichords aft of "
      "the elastic axis) or static_unbalance (S_alpha, kg m/m)");
  const double cg_value = *sec.number(cg_key);
  if (cg_key == "cg") {
    sec.require(cg_value > -1 && cg_value < 1, "cg", "is outside the chord", kChordPos);
    s.static_unbalance = m * (cg_value - a) * b;
  } else if (cg_key == "cg_offset") {
    s.static_unbalance = m * cg_value * b;
  } else {
    s.static_unbalance = cg_value;
  }
  const double x_alpha_b = s.static_unbalance / m;  // CG offset, m

  const std::string inertia_key = sec.required_one_of(
      {"pitch_inertia", "pitch_inertia_cg", "radius_of_gyration"},
      "the pitch inertia: pitch_inertia (about the elastic axis, kg m^2/m), pitch_inertia_cg "
      "(about the CG, kg m^2/m) or radius_of_gyration (r_alpha, semichords, about the elastic "
      "axis)");
  const double iv = *sec.number(inertia_key);
  sec.require(iv > 0, inertia_key, "must be positive", "a positive number");
  if (inertia_key == "pitch_inertia") {
    s.pitch_inertia = iv;
  } else if (inertia_key == "pitch_inertia_cg") {
    s.pitch_inertia = iv + m * x_alpha_b * x_alpha_b;  // parallel-axis theorem
  } else {
    s.pitch_inertia = m * iv * iv * b * b;
  }
  const std::vector<DerivedInput> mass_inputs = {
      {&sec, "semichord"}, {&sec, "mass"}, {&sec, cg_key}, {&sec, inertia_key}};
  require_physical(s.static_unbalance, "a static unbalance (kg m/m)", mass_inputs);
  require_physical(s.pitch_inertia, "a pitch inertia (kg m^2/m)", mass_inputs, true);
  require_physical(m * x_alpha_b * x_alpha_b, "an inertia term m (x_alpha b)^2", mass_inputs);
  // A physical section has I_cg = I_alpha - m (x_alpha b)^2 > 0, i.e. r_alpha^2 > x_alpha^2.
  const double I_cg = s.pitch_inertia - m * x_alpha_b * x_alpha_b;
  if (!(I_cg > 1e-12 * s.pitch_inertia)) {
    const double r2 = s.pitch_inertia / (m * b * b), x2 = x_alpha_b * x_alpha_b / (b * b);
    sec.fail(inertia_key,
             fmt::format("is physically impossible with the given CG: r_alpha^2 = {:.6g} <= "
                         "x_alpha^2 = {:.6g} (the inertia about the CG would be {:.6g} kg m^2/m)",
                         r2, x2, I_cg),
             "an inertia about the elastic axis larger than m (x_alpha b)^2 (r_alpha^2 > x_alpha^2)");
  }

  const std::string kh = sec.required_one_of(
      {"plunge_stiffness", "plunge_frequency_hz"},
      "plunge_stiffness (N/m per m span) or plunge_frequency_hz (uncoupled, Hz)");
  const double khv = *sec.number(kh);
  sec.require(khv >= 0, kh, "must not be negative", "a number >= 0");
  s.plunge_stiffness = kh == "plunge_stiffness" ? khv : m * std::pow(2 * pi * khv, 2);
  require_physical(s.plunge_stiffness, "a plunge stiffness (N/m per m span)", {{&sec, "mass"}, {&sec, kh}});
  const std::string ka = sec.required_one_of(
      {"pitch_stiffness", "pitch_frequency_hz"},
      "pitch_stiffness (N m/rad per m span) or pitch_frequency_hz (uncoupled, Hz)");
  const double kav = *sec.number(ka);
  sec.require(kav > 0, ka, "must be positive", "a positive number");
  s.pitch_stiffness = ka == "pitch_stiffness" ? kav : s.pitch_inertia * std::pow(2 * pi * kav, 2);
  {
    std::vector<DerivedInput> in = mass_inputs;
    in.push_back({&sec, ka});
    require_physical(s.pitch_stiffness, "a pitch stiffness (N m/rad per m span)", in);
  }
  s.plunge_damping_ratio = damping_ratio(sec, "plunge_damping_ratio");
  s.pitch_damping_ratio = damping_ratio(sec, "pitch_damping_ratio");

  if (flap.present()) {
    s.dof = 3;
    s.hinge = chord_position(flap, "hinge");
    flap.require(s.hinge > a, "hinge", "must lie aft of the elastic axis",
                 fmt::format("elastic_axis = {} < hinge < 1", a));
    const std::string su = flap.one_of({"static_unbalance", "cg_offset"});
    const std::optional<double> flap_mass = flap.number("mass");
    if (flap_mass) {
      flap.require(*flap_mass > 0 && *flap_mass < m, "mass", "is impossible",
                   fmt::format("0 < flap mass < section mass = {} kg/m", m));
    }
    if (su.empty()) {
      flap.missing("static_unbalance",
                   "static_unbalance (S_beta about the hinge, kg m/m, CG aft positive), or mass "
                   "with cg_offset (semichords aft of the hinge)");
    } else if (su == "cg_offset") {
      if (!flap_mass)
        flap.missing("mass", "the flap mass (kg/m), needed with flap.cg_offset");
      s.flap_static_unbalance = *flap_mass * *flap.number("cg_offset") * b;
    } else {
      s.flap_static_unbalance = *flap.number("static_unbalance");
    }
    require_physical(s.flap_static_unbalance, "a flap static unbalance (kg m/m)",
                     {{&flap, "mass"}, {&flap, su}, {&sec, "semichord"}});
    const std::string ik = flap.required_one_of(
        {"inertia", "inertia_cg"},
        "inertia (I_beta about the hinge, kg m^2/m) or inertia_cg (about the flap CG, with mass)");
    const double fi = *flap.number(ik);
    flap.require(fi > 0, ik, "must be positive", "a positive number, kg m^2/m");
    if (ik == "inertia_cg") {
      if (!flap_mass) flap.missing("mass", "the flap mass (kg/m), needed with flap.inertia_cg");
      const double d = s.flap_static_unbalance / *flap_mass;
      s.flap_inertia = fi + *flap_mass * d * d;
    } else {
      s.flap_inertia = fi;
      if (flap_mass) {
        const double d = s.flap_static_unbalance / *flap_mass;
        flap.require(fi > *flap_mass * d * d, "inertia",
                     fmt::format("is physically impossible: below the flap's own parallel-axis "
                                 "term m_beta d^2 = {:.6g} kg m^2/m",
                                 *flap_mass * d * d),
                     "an inertia about the hinge larger than S_beta^2 / m_beta");
      }
    }
    const std::string kb = flap.required_one_of(
        {"stiffness", "frequency_hz"},
        "stiffness (hinge spring, N m/rad per m span) or frequency_hz (uncoupled, Hz)");
    const double kbv = *flap.number(kb);
    flap.require(kbv >= 0, kb, "must not be negative", "a number >= 0");
    require_physical(s.flap_inertia, "a flap inertia (kg m^2/m)",
                     {{&flap, "mass"}, {&flap, su}, {&flap, ik}, {&sec, "semichord"}});
    s.flap_stiffness = kb == "stiffness" ? kbv : s.flap_inertia * std::pow(2 * pi * kbv, 2);
    require_physical(s.flap_stiffness, "a flap stiffness (N m/rad per m span)",
                     {{&flap, "mass"}, {&flap, su}, {&flap, ik}, {&flap, kb}, {&sec, "semichord"}});
    s.flap_damping_ratio = damping_ratio(flap, "damping_ratio");
  }

  // Flow.
  f.airspeed = flow.required_number("airspeed", "true airspeed, m/s, >= 0");
  flow.require(f.airspeed >= 0, "airspeed", "must not be negative", "true airspeed, m/s, >= 0");
  flow.require(f.airspeed < 1000, "airspeed", "is beyond any subsonic flight",
               "true airspeed below 1000 m/s (the theory is incompressible)");
  const std::string dk = flow.required_one_of(
      {"density", "altitude"}, "density (kg/m^3, 0 for vacuum) or altitude (m, ISA)");
  const double dv = *flow.number(dk);
  if (dk == "density") {
    flow.require(dv >= 0 && dv < 100, "density", "is impossible", "0 <= density < 100 kg/m^3");
    f.density = dv;
  } else {
    flow.require(dv >= kIsaMinAltitude && dv <= kIsaMaxAltitude, "altitude",
                 "is outside the standard atmosphere", "-2000 m <= altitude <= 20000 m (ISA)");
    c.altitude = dv;
    f.density = isa(dv).density;
  }
}

void read_nondimensional(const Table& nd, Case& c) {
  NondimensionalParameters& n = c.nondimensional;
  n.mass_ratio = positive(nd, "mass_ratio", "mu = m / (pi rho b^2)");
  n.elastic_axis = chord_position(nd, "elastic_axis");
  n.cg_offset = nd.required_number("cg_offset", "x_alpha, semichords aft of the elastic axis");
  n.radius_of_gyration = positive(nd, "radius_of_gyration", "r_alpha, semichords");
  nd.require(n.radius_of_gyration * n.radius_of_gyration > n.cg_offset * n.cg_offset,
             "radius_of_gyration",
             fmt::format("is physically impossible: r_alpha^2 = {:.6g} <= x_alpha^2 = {:.6g}",
                         n.radius_of_gyration * n.radius_of_gyration, n.cg_offset * n.cg_offset),
             "r_alpha > |x_alpha| (positive inertia about the CG)");
  n.frequency_ratio = nd.required_number("frequency_ratio", "omega_h / omega_alpha >= 0");
  nd.require(n.frequency_ratio >= 0, "frequency_ratio", "must not be negative",
             "omega_h / omega_alpha >= 0");
  n.plunge_damping_ratio = damping_ratio(nd, "plunge_damping_ratio");
  n.pitch_damping_ratio = damping_ratio(nd, "pitch_damping_ratio");
  n.reduced_speed = nd.required_number("reduced_speed", "U* = U / (b omega_alpha) >= 0");
  nd.require(n.reduced_speed >= 0, "reduced_speed", "must not be negative",
             "U* = U / (b omega_alpha) >= 0");
  const bool flap = nd.has("hinge");
  for (const char* k : {"flap_cg_offset", "flap_radius_of_gyration", "flap_frequency_ratio",
                        "flap_damping_ratio"}) {
    if (!flap && nd.has(k))
      nd.fail(k, "needs nondimensional.hinge (a flap)", "flap keys only with a hinge position");
  }
  if (flap) {
    n.dof = 3;
    n.hinge = chord_position(nd, "hinge");
    nd.require(n.hinge > n.elastic_axis, "hinge", "must lie aft of the elastic axis",
               fmt::format("elastic_axis = {} < hinge < 1", n.elastic_axis));
    n.flap_cg_offset = nd.number("flap_cg_offset").value_or(0.0);
    n.flap_radius_of_gyration = positive(nd, "flap_radius_of_gyration",
                                         "r_beta = sqrt(I_beta / (m b^2)), about the hinge");
    n.flap_frequency_ratio = nd.required_number("flap_frequency_ratio", "omega_beta / omega_alpha >= 0");
    nd.require(n.flap_frequency_ratio >= 0, "flap_frequency_ratio", "must not be negative",
               "omega_beta / omega_alpha >= 0");
    n.flap_damping_ratio = damping_ratio(nd, "flap_damping_ratio");
  }
  const Table ref = nd.sub("reference");
  if (auto v = ref.number("semichord")) {
    ref.require(*v > 0, "semichord", "must be positive", "a positive number, m");
    n.reference.semichord = *v;
  }
  if (auto v = ref.number("pitch_frequency_hz")) {
    ref.require(*v > 0, "pitch_frequency_hz", "must be positive", "a positive number, Hz");
    n.reference.pitch_frequency = 2 * pi * *v;
  }
  if (auto v = ref.number("density")) {
    ref.require(*v > 0 && *v < 100, "density", "is impossible", "0 < density < 100 kg/m^3");
    n.reference.density = *v;
  }
  from_nondimensional(n, c.model.section, c.model.flow);
  // The SI section these numbers resolve to must be finite (mass_ratio = 1e308
  // overflows the mass); the reference scales come from [nondimensional.reference].
  const SectionProperties& s = c.model.section;
  const std::vector<DerivedInput> in = {
      {&nd, "mass_ratio"},       {&nd, "cg_offset"},       {&nd, "radius_of_gyration"},
      {&nd, "frequency_ratio"},  {&nd, "reduced_speed"},   {&nd, "flap_cg_offset"},
      {&nd, "flap_radius_of_gyration"}, {&nd, "flap_frequency_ratio"},
      {&ref, "semichord"},       {&ref, "pitch_frequency_hz"}, {&ref, "density"}};
  require_physical(s.mass, "a mass (kg/m)", in);
  require_physical(s.static_unbalance, "a static unbalance (kg m/m)", in);
  require_physical(s.pitch_inertia, "a pitch inertia (kg m^2/m)", in, true);
  require_physical(s.plunge_stiffness, "a plunge stiffness (N/m per m span)", in);
  require_physical(s.pitch_stiffness, "a pitch stiffness (N m/rad per m span)", in);
  require_physical(c.model.flow.airspeed, "an airspeed (m/s)", in);
  if (n.dof == 3) {
    require_physical(s.flap_static_unbalance, "a flap static unbalance (kg m/m)", in);
    require_physical(s.flap_inertia, "a flap inertia (kg m^2/m)", in, true);
    require_physical(s.flap_stiffness, "a flap stiffness (N m/rad per m span)", in);
  }
}

void read_aerodynamics(const Table& t, Case& c) {
  AeroSettings& a = c.model.aero;
  const std::string model = t.choice("model", {"wagner", "quasi-steady", "steady"}, "wagner");
  a.model = model == "wagner" ? AeroModel::kWagner
            : model == "quasi-steady" ? AeroModel::kQuasiSteady
                                      : AeroModel::kSteady;
  a.wagner_name = t.choice("wagner", {"jones", "custom"}, "jones");
  const auto coef = t.numbers("wagner_coefficients");
  const auto expo = t.numbers("wagner_exponents");
  if (a.wagner_name == "jones") {
    if (coef) t.fail("wagner_coefficients", "is only used with wagner = \"custom\"",
                     "wagner = \"custom\" with wagner_coefficients and wagner_exponents");
    if (expo) t.fail("wagner_exponents", "is only used with wagner = \"custom\"",
                     "wagner = \"custom\" with wagner_coefficients and wagner_exponents");
    a.wagner = WagnerApproximation::jones();
  } else {
    const std::string what =
        "phi(s) = 1 - sum psi_i exp(-eps_i s): wagner_coefficients = [psi_1, ...] and "
        "wagner_exponents = [eps_1, ...] (per semichord), 1 to 8 poles";
    if (!coef) t.missing("wagner_coefficients", what);
    if (!expo) t.missing("wagner_exponents", what);
    t.require(!coef->empty() && coef->size() <= 8, "wagner_coefficients",
              "must have 1 to 8 entries", what);
    t.require(expo->size() == coef->size(), "wagner_exponents",
              fmt::format("has {} entries but wagner_coefficients has {}", expo->size(), coef->size()),
              what);
    double sum = 0;
    for (double v : *coef) sum += v;
    t.require(sum > 0 && sum < 1, "wagner_coefficients",
              fmt::format("sum to {:.6g}, which makes phi(0) = {:.6g} impossible", sum, 1 - sum),
              "coefficients whose sum lies in (0, 1), so that 0 < phi(0) < 1 = phi(inf)");
    for (double e : *expo)
      t.require(e > 0, "wagner_exponents", "must all be positive", "eps_i > 0 per semichord");
    a.wagner = {*coef, *expo};
  }
}

void read_initial_and_simulation(const Table& ini, const Table& sim, Case& c) {
  const int n = c.model.section.dof;
  const double b = c.model.section.semichord, U = c.model.flow.airspeed;
  SimulationSettings& s = c.simulation;
  s.initial_displacement = DofVector::Zero(n);
  s.initial_velocity = DofVector::Zero(n);
  const std::string hk = ini.one_of({"plunge", "plunge_semichords"});
  if (hk == "plunge") s.initial_displacement(kPlunge) = *ini.number("plunge");
  if (hk == "plunge_semichords") s.initial_displacement(kPlunge) = *ini.number("plunge_semichords") * b;
  if (auto v = ini.number("pitch_deg")) {
    ini.require(std::abs(*v) <= 90, "pitch_deg", "is beyond the theory's small angles",
                "|pitch| <= 90 degrees (the aerodynamics is linear: keep it small)");
    s.initial_displacement(kPitch) = *v * kRadPerDeg;
  }
  if (auto v = ini.number("plunge_rate")) s.initial_velocity(kPlunge) = *v;
  if (auto v = ini.number("pitch_rate_deg_s")) s.initial_velocity(kPitch) = *v * kRadPerDeg;
  for (const char* k : {"flap_deg", "flap_rate_deg_s"})
    if (n == 2 && ini.has(k)) ini.fail(k, "needs a flap", "flap keys only for a 3-DOF case");
  if (n == 3) {
    if (auto v = ini.number("flap_deg")) {
      ini.require(std::abs(*v) <= 90, "flap_deg", "is beyond the theory's small angles",
                  "|flap| <= 90 degrees");
      s.initial_displacement(kFlap) = *v * kRadPerDeg;
    }
    if (auto v = ini.number("flap_rate_deg_s")) s.initial_velocity(kFlap) = *v * kRadPerDeg;
  }
  s.steady_lag_states = ini.choice("lag_states", {"rest", "steady"}, "rest") == "steady";

  // Time span.
  const std::string dk = sim.required_one_of(
      {"duration", "duration_semichords"},
      "duration (s) or duration_semichords (tau = U t / b, semichords travelled)");
  double duration = *sim.number(dk);
  if (dk == "duration_semichords") {
    sim.require(U > 0, dk, "needs a positive airspeed", "duration (s) when the airspeed is zero");
    duration *= b / U;
  }
  sim.require(duration > 0, dk, "must be positive", "a positive duration");
  s.duration = duration;

  // Output schedule.
  const std::string ok = sim.one_of(
      {"sample_rate", "sample_interval", "sample_interval_semichords", "every_step"});
  if (ok.empty()) {
    const auto w = uncoupled_frequencies(c.model.section);
    const double wmax = std::max({w.plunge, w.pitch, w.flap});
    s.output.interval = 2 * pi / wmax / 50.0;  // 50 samples per shortest period
  } else if (ok == "every_step") {
    s.output.every_step = *sim.boolean("every_step");
    if (!s.output.every_step)
      sim.fail("every_step", "false is the default: remove it or give a sample interval",
               "every_step = true, or one of sample_rate / sample_interval");
  } else {
    double v = *sim.number(ok);
    sim.require(v > 0, ok, "must be positive", "a positive number");
    if (ok == "sample_rate") v = 1.0 / v;
    if (ok == "sample_interval_semichords") {
      sim.require(U > 0, ok, "needs a positive airspeed", "sample_interval (s)");
      v *= b / U;
    }
    s.output.interval = v;
  }
  if (!s.output.every_step) {
    const double count = s.duration / s.output.interval;
    if (count > 2e9)
      sim.fail(ok.empty() ? dk : ok,
               fmt::format("asks for {:.3g} samples", count),
               "at most 2e9 samples in one run (lengthen the interval or shorten the duration)");
  }

  IntegratorSettings& in = s.integrator;
  const std::string st = sim.choice("stepper", {"dopri5", "bulirsch-stoer"}, "dopri5");
  in.stepper = st == "dopri5" ? StepperKind::kDopri5 : StepperKind::kBulirschStoer;
  if (auto v = sim.number("relative_tolerance")) {
    sim.require(*v >= 1e-15 && *v <= 0.1, "relative_tolerance", "is outside the useful range",
                "1e-15 <= relative_tolerance <= 0.1");
    in.relative_tolerance = *v;
  }
  if (auto v = sim.number("absolute_tolerance")) {
    sim.require(*v > 0 && *v <= 1, "absolute_tolerance", "is outside the useful range",
                "0 < absolute_tolerance <= 1 (in the state's SI units)");
    in.absolute_tolerance = *v;
  }
  in.max_step = nonnegative_or(sim, "max_step", 0.0, "seconds, 0 for no limit");
  in.initial_step = nonnegative_or(sim, "initial_step", 0.0, "seconds, 0 for automatic");

  if (auto held = sim.strings("hold")) {
    for (const auto& h : *held) {
      const std::vector<std::string> names =
          std::vector<std::string>(kDofNames, kDofNames + n);
      auto it = std::find(names.begin(), names.end(), h);
      if (it == names.end())
        sim.fail("hold", fmt::format("names an unknown degree of freedom \"{}\"", h),
                 quoted_list(names));
      c.model.held[static_cast<std::size_t>(it - names.begin())] = true;
    }
  }
}


// [springs.<dof>]: restoring laws. The linear (nominal) stiffness always
// comes from the section; a law adds the nonlinearity around it.
SpringLaw read_spring(const Table& t, int dof, double k) {
  const bool angle = dof != kPlunge;
  const std::string suf = angle ? "_deg" : "";
  const double unit = angle ? kRadPerDeg : 1.0;
  const std::string du = angle ? "degrees" : "m";
  const std::string law =
      t.choice("law", {"linear", "freeplay", "bilinear", "cubic", "polynomial", "table"}, "linear");
  // Keys that belong to each law; any other law's key is an error.
  const std::map<std::string, std::vector<std::string>> keys_of = {
      {"linear", {}},
      {"freeplay", {"half_gap" + suf, "total_gap" + suf, "gap_below" + suf, "gap_above" + suf,
                    "offset" + suf}},
      {"bilinear", {"inner_stiffness", "half_width" + suf, "offset" + suf}},
      {"cubic", {"cubic_coefficient"}},
      {"polynomial", {"coefficients"}},
      {"table", {"displacements" + suf, "forces"}}};
  const auto& mine = keys_of.at(law);
  for (const auto& [other, ks] : keys_of) {
    for (const auto& key : ks) {
      if (t.has(key) && std::find(mine.begin(), mine.end(), key) == mine.end())
        t.fail(key, fmt::format("does not belong to law = \"{}\"", law),
               mine.empty() ? std::string("no other keys for a linear spring")
                            : "keys of this law: " + join(mine));
    }
  }
  auto length = [&](const std::string& key, double def) {
    auto v = t.number(key);
    if (!v) return def;
    t.require(*v >= 0, key, "must not be negative", du + ", >= 0");
    if (angle)
      t.require(*v <= 90, key, "is beyond the theory's small angles", "0 <= angle <= 90 degrees");
    return *v * unit;
  };
  auto offset_of = [&]() {
    const double v = t.number("offset" + suf).value_or(0.0);
    if (angle)
      t.require(std::abs(v) <= 90, "offset" + suf, "is beyond the theory's small angles",
                "|offset| <= 90 degrees");
    return v * unit;
  };
  if (law == "linear") return SpringLaw::linear(k);
  if (law == "freeplay") {
    const double offset = offset_of();
    const std::string g = t.required_one_of(
        {"half_gap" + suf, "total_gap" + suf, "gap_below" + suf},
        fmt::format("the free play: half_gap{0} (half of the total free play, {1}), total_gap{0} "
                    "(the whole free play), or gap_below{0} with gap_above{0} (asymmetric, "
                    "measured from offset{0})",
                    suf, du));
    double below, above;
    if (g == "gap_below" + suf) {
      if (!t.has("gap_above" + suf))
        t.missing("gap_above" + suf, "gap_above" + suf + " with gap_below" + suf);
      below = length(g, 0.0);
      above = length("gap_above" + suf, 0.0);
    } else {
      if (t.has("gap_above" + suf))
        t.fail("gap_above" + suf, "conflicts with '" + t.key_path(g) + "'",
               "gap_below" + suf + " with gap_above" + suf + ", or one symmetric gap");
      const double v = length(g, 0.0);
      below = above = g == "total_gap" + suf ? 0.5 * v : v;
    }
    return SpringLaw::freeplay(k, below, above, offset);
  }
  if (law == "bilinear") {
    const double offset = offset_of();
    const double kin = t.required_number("inner_stiffness", "the stiffness inside the breakpoints");
    t.require(kin >= 0, "inner_stiffness", "must not be negative",
              angle ? "N m/rad per m span, >= 0" : "N/m per m span, >= 0");
    const double d = t.required_number("half_width" + suf, "distance from offset to each breakpoint");
    t.require(d > 0, "half_width" + suf, "must be positive", du + ", > 0");
    if (angle)
      t.require(d <= 90, "half_width" + suf, "is beyond the theory's small angles",
                "0 < half_width_deg <= 90 degrees");
    return SpringLaw::bilinear(kin, k, d * unit, offset);
  }
  if (law == "cubic") {
    const double beta = t.required_number(
        "cubic_coefficient", angle ? "beta in f = k (x + beta x^3), 1/rad^2" : "beta, 1/m^2");
    return SpringLaw::cubic(k, beta);
  }
  if (law == "polynomial") {
    const auto c = t.numbers("coefficients");
    const std::string what = angle ? "[c2, c3, ...] of f = k (x + c2 x^2 + c3 x^3 + ...), x in rad"
                                   : "[c2, c3, ...] of f = k (x + c2 x^2 + ...), x in m";
    if (!c) t.missing("coefficients", what);
    t.require(!c->empty() && c->size() <= 8, "coefficients", "must have 1 to 8 entries", what);
    std::vector<double> full = {k};
    for (double v : *c) full.push_back(k * v);
    return SpringLaw::polynomial(full);
  }
  // table
  const auto x = t.numbers("displacements" + suf);
  const auto f = t.numbers("forces");
  const std::string what = fmt::format(
      "displacements{} ({}, strictly increasing) and forces ({}) of the same length, 2 to 256 points",
      suf, du, angle ? "N m per m span" : "N per m span");
  if (!x) t.missing("displacements" + suf, what);
  if (!f) t.missing("forces", what);
  t.require(x->size() >= 2 && x->size() <= 256, "displacements" + suf, "must have 2 to 256 points", what);
  t.require(f->size() == x->size(), "forces",
            fmt::format("has {} entries but displacements{} has {}", f->size(), suf, x->size()), what);
  std::vector<double> xs;
  for (std::size_t i = 0; i < x->size(); ++i) {
    if (i > 0 && !((*x)[i] > (*x)[i - 1]))
      t.fail("displacements" + suf, fmt::format("is not strictly increasing at entry {}", i + 1), what);
    xs.push_back((*x)[i] * unit);
  }
  return SpringLaw::table(xs, *f);
}


// [aerodynamics] Küssner keys and the [[gust]] tables.
void read_gusts(const toml::table& root, const Context& ctx, const Table& aero, Case& c) {
  const std::string kk = aero.choice("kussner", {"two-pole", "three-pole", "custom"}, "two-pole");
  const auto kc = aero.numbers("kussner_coefficients");
  const auto ke = aero.numbers("kussner_exponents");
  const std::string kwhat =
      "psi(s) = 1 - sum c_i exp(-d_i s): kussner_coefficients = [c_1, ...] and "
      "kussner_exponents = [d_1, ...] per semichord (not per chord), 1 to 8 poles";
  if (kk != "custom") {
    if (kc) aero.fail("kussner_coefficients", "is only used with kussner = \"custom\"", kwhat);
    if (ke) aero.fail("kussner_exponents", "is only used with kussner = \"custom\"", kwhat);
    c.model.kussner = kk == "two-pole" ? kussner_two_pole() : kussner_three_pole();
  } else {
    if (!kc) aero.missing("kussner_coefficients", kwhat);
    if (!ke) aero.missing("kussner_exponents", kwhat);
    aero.require(!kc->empty() && kc->size() <= 8, "kussner_coefficients", "must have 1 to 8 entries", kwhat);
    aero.require(ke->size() == kc->size(), "kussner_exponents",
                 fmt::format("has {} entries but kussner_coefficients has {}", ke->size(), kc->size()),
                 kwhat);
    double sum = 0;
    for (double v : *kc) sum += v;
    aero.require(sum > 0 && sum <= 1 + 1e-12, "kussner_coefficients",
                 fmt::format("sum to {:.6g}: psi(0) = {:.6g} would be negative or psi would not rise", sum, 1 - sum),
                 "coefficients whose sum lies in (0, 1] (psi(0) = 0 for a sharp-edged gust)");
    for (double e : *ke) aero.require(e > 0, "kussner_exponents", "must all be positive", "d_i > 0");
    c.model.kussner = {*kc, *ke};
  }
  c.model.kussner_name = kk;

  const toml::node* node = root.get("gust");
  if (!node) return;
  const Table top(ctx, &root, "");
  if (!node->is_array_of_tables())
    top.fail("gust", "must be an array of tables", "one [[gust]] table per gust profile");
  const double U = c.model.flow.airspeed, b = c.model.section.semichord;
  const double rho = c.model.flow.density;
  std::vector<GustProfile> profiles;
  for (const auto& e : *node->as_array()) {
    const Table g(ctx, e.as_table(), "gust");
    GustProfile p;
    const std::string shape = g.choice(
        "shape", {"sharp-edged", "one-minus-cosine", "sinusoidal", "recorded", "turbulence"}, "");
    if (shape.empty())
      g.missing("shape", "\"sharp-edged\", \"one-minus-cosine\", \"sinusoidal\" or \"recorded\"");
    const bool turbulence = shape == "turbulence";
    p.shape = shape == "sharp-edged"        ? GustShape::kSharpEdged
              : shape == "one-minus-cosine" ? GustShape::kOneMinusCosine
              : shape == "sinusoidal"       ? GustShape::kSinusoidal
                                            : GustShape::kRecorded;
    const bool recorded = p.shape == GustShape::kRecorded && !turbulence;
    for (const char* k : {"model", "intensity", "severity", "scale_length", "seed", "sample_interval"})
      if (!turbulence && g.has(k)) g.fail(k, "is only used by turbulence", "shape = \"turbulence\"");
    for (const char* k : {"file", "base", "base_dataset", "velocity_dataset", "scale"})
      if (!recorded && g.has(k)) g.fail(k, "is only used by recorded gusts", "shape = \"recorded\"");
    g.require(U > 0 && rho > 0, "shape", "needs air and a positive airspeed",
              "a case with density > 0 and airspeed > 0");
    const std::string sk = g.one_of({"start", "start_semichords", "start_distance"});
    if (sk == "start") p.start = *g.number("start");
    if (sk == "start_semichords") p.start = *g.number("start_semichords") * b / U;
    if (sk == "start_distance") p.start = *g.number("start_distance") / U;
    if (!sk.empty()) g.require(p.start >= 0, sk, "must not be negative", "s or semichords >= 0");
    const std::string design = g.choice("design", {"cs-25"}, "");
    const double eas_to_tas = eas_to_tas_factor(rho);
    if (p.shape == GustShape::kOneMinusCosine) {
      const double H = g.required_number("gradient", "gust gradient distance H, m (9 to 107 m in CS-25.341)");
      g.require(H > 0, "gradient", "must be positive", "H in m");
      p.gradient = H;
      if (design == "cs-25") {
        for (const char* k : {"amplitude", "amplitude_eas"})
          if (g.has(k)) g.fail(k, "conflicts with design = \"cs-25\" (which sizes the gust)",
                               "either an amplitude or design = \"cs-25\" with its inputs");
        g.require(H >= 30 * 0.3048 - 1e-9 && H <= 350 * 0.3048 + 1e-9, "gradient",
                  "is outside the rule's range", "9.144 m <= H <= 106.68 m (30 to 350 ft)");
        RegulationGustInputs in;
        in.gradient = H;
        if (auto a = g.number("altitude")) {
          g.require(*a >= 0 && *a <= kIsaMaxAltitude, "altitude", "is out of range", "0 to 20000 m");
          in.altitude = *a;
        } else if (c.altitude) {
          in.altitude = std::max(0.0, *c.altitude);
        } else {
          g.missing("altitude", "the altitude for the rule (m), needed when [flow] gives a density");
        }
        auto ratio = [&](const char* k) {
          const double v = g.required_number(k, "a weight ratio, 0 < ratio <= 1");
          g.require(v > 0 && v <= 1, k, "is not a weight ratio", "0 < ratio <= 1");
          return v;
        };
        in.landing_weight_ratio = ratio("landing_weight_ratio");
        in.zero_fuel_weight_ratio = ratio("zero_fuel_weight_ratio");
        in.max_operating_altitude = g.required_number("max_operating_altitude", "Z_mo, m");
        g.require(in.max_operating_altitude > 0 && in.max_operating_altitude < 76200,
                  "max_operating_altitude", "is out of range", "0 < Z_mo < 76200 m (250 000 ft)");
        in.at_dive_speed = g.choice("speed_condition", {"VC", "VD"}, "VC") == "VD";
        p.amplitude = cs25_design_gust_velocity(in) * eas_to_tas;
        p.regulation_sized = true;
        p.eas_to_tas = eas_to_tas;
        c.gust_regulation = in;
      }
    }
    if (turbulence) {
      // Continuous turbulence: a seeded record from the shaping filter
      // (turbulence.hpp), replayed as a recorded gust over the whole run.
      for (const char* k : {"amplitude", "amplitude_eas", "design", "gradient", "file"})
        if (g.has(k)) g.fail(k, "is not used by turbulence", "model, intensity or severity, scale_length, seed");
      TurbulenceSpec spec;
      spec.model = g.choice("model", {"dryden", "von-karman"}, "von-karman") == "dryden"
                       ? TurbulenceModel::kDryden
                       : TurbulenceModel::kVonKarman;
      spec.airspeed = U;
      double h = c.altitude.value_or(-1.0);
      if (auto a = g.number("altitude")) h = *a;
      const std::string ik = g.one_of({"intensity", "severity"});
      if (ik == "intensity") {
        spec.intensity = *g.number("intensity");
        g.require(spec.intensity >= 0 && spec.intensity < 50, "intensity", "is impossible", "0 <= sigma_w < 50 m/s");
      } else {
        const std::string sev = g.choice("severity", {"light", "moderate", "severe"}, "");
        if (sev.empty()) g.missing("intensity | gust.severity", "intensity (sigma_w, m/s) or severity (MIL-F-8785C)");
        if (!(h > 0)) g.missing("altitude", "an altitude (m) for the MIL-F-8785C intensity");
        spec.intensity = mil8785c_intensity(sev == "light" ? TurbulenceSeverity::kLight
                                            : sev == "moderate" ? TurbulenceSeverity::kModerate
                                                                : TurbulenceSeverity::kSevere, h);
      }
      if (auto L = g.number("scale_length")) {
        g.require(*L > 0, "scale_length", "must be positive", "L_w in m (MIL-F-8785C convention)");
        spec.scale_length = *L;
      } else {
        if (!(h > 0)) g.missing("scale_length", "a scale length (m), or an altitude for the MIL-F-8785C default");
        spec.scale_length = mil8785c_scale_length(spec.model, h);
      }
      const double seed = g.number("seed").value_or(1.0);
      g.require(seed >= 0 && seed < 9.007e15 && seed == std::floor(seed), "seed", "must be a whole number",
                "0 <= seed < 2^53");
      spec.seed = static_cast<std::uint64_t>(seed);
      const auto w = uncoupled_frequencies(c.model.section);
      const double fastest = std::max({w.plunge, w.pitch, w.flap});
      double dt = std::min(spec.scale_length / U / 20.0, 2 * pi / fastest / 40.0);
      if (auto v = g.number("sample_interval")) {
        g.require(*v > 0, "sample_interval", "must be positive", "s");
        dt = *v;
      }
      const double span = c.simulation.duration - p.start;
      g.require(span / dt < 5e7, "sample_interval", fmt::format("gives {:.3g} samples", span / dt),
                "at most 5e7 samples in a turbulence record");
      const std::size_t n = static_cast<std::size_t>(std::ceil(std::max(span, dt) / dt)) + 1;
      const std::vector<double> rec = turbulence_record(spec, dt, n);
      p.record_velocity = rec;
      p.record_time.resize(n);
      for (std::size_t k = 0; k < n; ++k) p.record_time[k] = static_cast<double>(k) * dt;
      p.label = fmt::format("{} turbulence sigma = {:.3g} m/s, L = {:.4g} m, seed {}", to_string(spec.model),
                            spec.intensity, spec.scale_length, spec.seed);
    } else if (recorded) {
      for (const char* k : {"amplitude", "amplitude_eas", "design", "gradient"})
        if (g.has(k)) g.fail(k, "is not used by recorded gusts (scale the record with `scale`)",
                             "file, base, base_dataset, velocity_dataset, scale");
      const std::string file = g.string("file").value_or("");
      if (file.empty()) g.missing("file", "the recorded gust file (CSV or HDF5)");
      std::string full = file;
      if (!file.empty() && file[0] != '/') {
        const auto slash = c.path.rfind('/');
        if (slash != std::string::npos) full = c.path.substr(0, slash + 1) + file;
      }
      const std::string base = g.choice("base", {"time", "distance"}, "time");
      const GustRecord rec = read_gust_record(
          full, g.string("base_dataset").value_or(base), g.string("velocity_dataset").value_or("gust_velocity"),
          g.where("file"), "gust.file");
      const double scale = g.number("scale").value_or(1.0);
      p.record_time = rec.base;
      if (base == "distance")
        for (double& x : p.record_time) x /= U;
      for (double w : rec.velocity) p.record_velocity.push_back(scale * w);
    } else if (design.empty() || p.shape != GustShape::kOneMinusCosine) {
      if (!design.empty()) g.fail("design", "applies to one-minus-cosine gusts only", "shape = \"one-minus-cosine\"");
      for (const char* k : {"speed_condition", "altitude", "landing_weight_ratio",
                            "zero_fuel_weight_ratio", "max_operating_altitude"})
        if (g.has(k)) g.fail(k, "is only used with design = \"cs-25\"", "design = \"cs-25\"");
      const std::string ak = g.required_one_of(
          {"amplitude", "amplitude_eas"}, "gust velocity in m/s: amplitude (true airspeed) or amplitude_eas");
      const double a = *g.number(ak);
      g.require(std::abs(a) < 100, ak, "is beyond any atmospheric gust", "|amplitude| < 100 m/s");
      p.amplitude = ak == "amplitude" ? a : a * eas_to_tas;
    }
    if (p.shape != GustShape::kOneMinusCosine && g.has("gradient"))
      g.fail("gradient", "is only used by one-minus-cosine gusts", "shape = \"one-minus-cosine\"");
    if (p.shape == GustShape::kSinusoidal) {
      const std::string fk = g.required_one_of(
          {"frequency_hz", "reduced_frequency"}, "frequency_hz (Hz) or reduced_frequency (k = omega b / U)");
      const double f = *g.number(fk);
      g.require(f > 0, fk, "must be positive", "a positive frequency");
      p.frequency = fk == "frequency_hz" ? 2 * pi * f : f * U / b;
      p.cycles = nonnegative_or(g, "cycles", 0.0, "periods, 0 for until the end");
    } else {
      for (const char* k : {"frequency_hz", "reduced_frequency", "cycles"})
        if (g.has(k)) g.fail(k, "is only used by sinusoidal gusts", "shape = \"sinusoidal\"");
    }
    if (!turbulence) p.label = g.string("label").value_or(
        p.shape == GustShape::kOneMinusCosine ? fmt::format("1-cos H = {:g} m", p.gradient) : shape);
    profiles.push_back(p);
  }
  c.model.gusts = GustField(profiles, U);
}

// The 3-DOF structural mass matrix must be positive definite.
void check_mass_matrix(const Case& c, const Table& flap, const Table& nd) {
  if (c.model.section.dof != 3) return;
  const DofMatrix M = structural_mass(c.model.section);
  const Eigen::MatrixXd Mx = M;
  Eigen::LLT<Eigen::MatrixXd> llt(Mx);
  if (llt.info() == Eigen::Success) return;
  const std::string msg =
      "makes the structural mass matrix indefinite (the flap's unbalance or inertia is not "
      "possible for this section)";
  const std::string allowed =
      "a flap inertia and unbalance that keep the 3x3 mass matrix positive definite (smaller "
      "unbalance or larger inertia)";
  if (flap.present()) flap.fail(flap.has("inertia") ? "inertia" : "inertia_cg", msg, allowed);
  nd.fail("flap_radius_of_gyration", msg, allowed);
}

// A regular file of at most kMaxCaseFileBytes (a FIFO or /dev/zero is
// refused before anything is read).
std::string read_file(const std::string& path) {
  return read_input_file(path, kMaxCaseFileBytes, "case file", {path, 0, 0}, "",
                         "a readable TOML file");
}

}  // namespace

const std::vector<std::string>& known_case_keys() { return kKnownKeys; }

std::string Case::text_as_run() const {
  std::string s = text;
  if (!overrides.empty()) {
    s += "\n# command-line overrides (--set), applied on top of the file:\n";
    for (const auto& o : overrides) s += "# " + o + "\n";
  }
  return s;
}

Case load_case(const std::string& path, const std::vector<std::string>& overrides) {
  return parse_case(read_file(path), path, overrides);
}

Case parse_case(const std::string& text, const std::string& path,
                const std::vector<std::string>& overrides) {
  Context ctx{path, {}};
  Case c;
  c.path = path;
  c.text = text;
  c.overrides = overrides;

  toml::table root;
  try {
    root = toml::parse(std::string_view(text), std::string_view(path));
  } catch (const toml::parse_error& e) {
    const auto& src = e.source();
    throw InputError({path, static_cast<int>(src.begin.line), static_cast<int>(src.begin.column)},
                     "", "", fmt::format("not valid TOML: {}", e.description()),
                     "TOML syntax (https://toml.io): key = value lines under [table] headers");
  }
  for (const auto& o : overrides) apply_override(root, o, ctx);
  check_unknown_keys(ctx, root, "");

  const Table top(ctx, &root, "");
  c.title = top.string("title").value_or("");
  (void)top.string("description");
  const Table sec = top.sub("section"), flap = top.sub("flap"), flow = top.sub("flow");
  const Table nd = top.sub("nondimensional");
  const bool si = sec.present() || flap.present() || flow.present();
  if (si && nd.present()) {
    const Table& first = sec.present() ? sec : (flap.present() ? flap : flow);
    throw InputError(nd.where_table(), "nondimensional", "",
                     fmt::format("conflicts with [{}] at line {}: a case gives the section in one "
                                 "form only",
                                 first.path(), first.where_table().line),
                     "either [section] + [flow] (+ [flap]) in SI units, or [nondimensional]");
  }
  if (!si && !nd.present()) {
    throw InputError({path, 0, 0}, "section", "", "no section is defined",
                     "a [section] table with [flow] (SI units) or a [nondimensional] table");
  }
  if (si) {
    if (!sec.present()) sec.missing("semichord", "a [section] table (SI form)");
    if (!flow.present()) flow.missing("airspeed", "a [flow] table with airspeed and density or altitude");
    c.input_form = "si";
    read_si(sec, flap, flow, c);
    c.nondimensional = to_nondimensional(c.model.section, c.model.flow);
  } else {
    c.input_form = "nondimensional";
    read_nondimensional(nd, c);
  }
  check_mass_matrix(c, flap, nd);

  // Spring laws around the section's nominal stiffnesses.
  const SectionProperties& s = c.model.section;
  const Table springs = top.sub("springs");
  const double k_nominal[3] = {s.plunge_stiffness, s.pitch_stiffness,
                               s.dof == 3 ? s.flap_stiffness : 0.0};
  for (int j = 0; j < 3; ++j) {
    const Table t = springs.sub(kDofNames[j]);
    if (j == kFlap && s.dof == 2 && t.present())
      t.fail("law", "needs a flap", "[springs.flap] only for a 3-DOF case");
    c.model.springs[j] = read_spring(t, j, k_nominal[j]);
  }

  read_aerodynamics(top.sub("aerodynamics"), c);
  const Table env = top.sub("envelope");
  if (auto v = env.number("dive_speed_eas")) {
    env.require(*v > 0 && *v < 1000, "dive_speed_eas", "is impossible",
                "design dive speed V_D, m/s equivalent airspeed, 0 < V_D < 1000");
    c.dive_speed_eas = *v;
  }
  read_initial_and_simulation(top.sub("initial"), top.sub("simulation"), c);
  read_gusts(root, ctx, top.sub("aerodynamics"), c);
  return c;
}

}  // namespace aerosect
