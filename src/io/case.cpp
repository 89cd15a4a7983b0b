#include "aerosect/io/case.hpp"

#include "aerosect/io/text_file.hpp"

#include "case_gusts.hpp"

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
#include "aerosect/integrate/exact_flow.hpp"
#include "aerosect/model/atmosphere.hpp"
#include "aerosect/io/toml_reader.hpp"
#include "aerosect/model/gust.hpp"
#include "aerosect/model/spring.hpp"
#include "aerosect/units.hpp"

namespace aerosect {

namespace {

using std::numbers::pi;
using namespace toml_input;

// ---------------------------------------------------------------------------
// The schema: every key a case file may hold. The gust keys come from
// case_gusts.cpp, the spring keys from kSpringLaws below.
const std::vector<std::string> kCaseKeys = {
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
    "steady.incidence_deg",
    "steady.flap_trim_deg",
    "steady.hinge_moment",
    "steady.gravity",
};

// The laws of a [springs.<dof>] table and the keys of each law: one list
// for the three DOFs. A displacement key (kSpringLengthKeys) carries the
// suffix "_deg" (degrees) in the pitch and flap tables and none (m) in the
// plunge table.
const std::vector<std::pair<std::string, std::vector<std::string>>> kSpringLaws = {
    {"linear", {}},
    {"freeplay", {"half_gap", "total_gap", "gap_below", "gap_above", "offset"}},
    {"bilinear", {"inner_stiffness", "half_width", "offset"}},
    {"cubic", {"cubic_coefficient"}},
    {"polynomial", {"coefficients"}},
    {"table", {"displacements", "forces"}},
};
const std::vector<std::string> kSpringLengthKeys = {"half_gap",  "total_gap",  "gap_below",    "gap_above",
                                                    "offset",    "half_width", "displacements"};

// A spring key as written in the table of DOF `dof`.
std::string spring_key(const std::string& key, int dof) {
  const bool length = std::find(kSpringLengthKeys.begin(), kSpringLengthKeys.end(), key) !=
                      kSpringLengthKeys.end();
  return length && is_angle_dof(dof) ? key + "_deg" : key;
}

// springs.<dof>.law, then the laws' keys in the order first named.
std::vector<std::string> spring_case_keys() {
  std::vector<std::string> names = {"law"};
  for (const auto& [law, keys] : kSpringLaws)
    for (const auto& k : keys)
      if (std::find(names.begin(), names.end(), k) == names.end()) names.push_back(k);
  std::vector<std::string> out;
  for (int dof = 0; dof < kMaxDof; ++dof)
    for (const auto& k : names) out.push_back(fmt::format("springs.{}.{}", kDofNames[dof], spring_key(k, dof)));
  return out;
}

const Schema& case_schema() {
  static const Schema schema = [] {
    std::vector<std::string> keys = kCaseKeys;
    for (const auto& k : gust_case_keys()) keys.push_back(k);
    for (const auto& k : spring_case_keys()) keys.push_back(k);
    return Schema(std::move(keys), {"gust"}, "the keys listed in README.md, \"Case file reference\"",
                  "--set section.mass=12.5 (a dotted key from the case-file reference)", "case file");
  }();
  return schema;
}

// ---------------------------------------------------------------------------
// Reading the section forms.
constexpr const char* kChordPos = "a position in semichords from midchord, -1 < x < 1";

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

// Of two keys of `t` whose values clash, the one a message blames: the one
// given by a --set override when only one is, else the one on the later
// line (the last written is the likeliest edit); `first` on a tie.
std::string_view blamed_of(const Table& t, std::string_view first, std::string_view second) {
  const SourceLocation a = t.where(first), b = t.where(second);
  const bool a_set = a.file.rfind("--", 0) == 0, b_set = b.file.rfind("--", 0) == 0;
  if (a_set != b_set) return b_set ? second : first;
  return b.line > a.line ? second : first;
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
    const std::string_view key = blamed_of(sec, inertia_key, cg_key);
    const std::string_view other = key == inertia_key ? cg_key : inertia_key;
    sec.fail(key,
             fmt::format("is physically impossible with '{}': r_alpha^2 = {:.6g} <= "
                         "x_alpha^2 = {:.6g} (the inertia about the CG would be {:.6g} kg m^2/m)",
                         sec.key_path(other), r2, x2, I_cg),
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
  if (!(n.radius_of_gyration * n.radius_of_gyration > n.cg_offset * n.cg_offset)) {
    const std::string_view key = blamed_of(nd, "radius_of_gyration", "cg_offset");
    nd.fail(key,
            fmt::format("is physically impossible with '{}': r_alpha^2 = {:.6g} <= x_alpha^2 = {:.6g}",
                        nd.key_path(key == "cg_offset" ? "radius_of_gyration" : "cg_offset"),
                        n.radius_of_gyration * n.radius_of_gyration, n.cg_offset * n.cg_offset),
            "r_alpha > |x_alpha| (positive inertia about the CG)");
  }
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
  // With a steady condition the section flies in it before t = 0: the lag
  // states start in the steady flow unless the case says "rest".
  s.steady_lag_states =
      ini.choice("lag_states", {"rest", "steady"}, c.model.steady.any() ? "steady" : "rest") == "steady";

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
  // auto: exact propagation where the case allows it, else Dormand-Prince
  // (integrator.hpp, StepperKind::kExact); "exact" insists (checked once the
  // gusts are read, in parse_case).
  const std::string st = sim.choice("stepper", {"auto", "exact", "dopri5", "bulirsch-stoer"}, "auto");
  in.stepper = st == "dopri5"           ? StepperKind::kDopri5
               : st == "bulirsch-stoer" ? StepperKind::kBulirschStoer
                                        : StepperKind::kExact;
  if (auto v = sim.number("relative_tolerance")) {
    sim.require(*v >= 1e-15 && *v <= 0.1, "relative_tolerance", "is outside the useful range",
                "1e-15 <= relative_tolerance <= 0.1");
    in.relative_tolerance = *v;
  }
  if (auto v = sim.number("absolute_tolerance")) {
    // Below 1e-16 the step control chases round-off: a state that starts at
    // exactly zero asks for steps of 1e-70 s, and the run collapses or crawls.
    sim.require(*v >= 1e-16 && *v <= 1, "absolute_tolerance", "is outside the useful range",
                "0 < absolute_tolerance <= 1 and >= 1e-16 (in the state's SI units; smaller ones chase "
                "round-off)");
    in.absolute_tolerance = *v;
  }
  in.max_step = nonnegative_or(sim, "max_step", 0.0, "seconds, 0 for no limit");
  in.initial_step = nonnegative_or(sim, "initial_step", 0.0, "seconds, 0 for automatic");
  // Steps the integrator can take: at most 1e7 steps per run from max_step
  // (a smaller one would run for hours or collapse into round-off of the
  // time), and a first step well above the round-off of t near 0 (the
  // integrator stops at a step below 16 eps times the shortest period).
  const double min_max_step = s.duration * 1e-7;
  if (in.max_step > 0 && in.max_step < min_max_step)
    sim.fail("max_step", "is too small to finish the run (more than 1e7 steps)",
             fmt::format("0 (no limit) or max_step >= duration / 1e7 = {:.3g} s", min_max_step));
  {
    const auto w = uncoupled_frequencies(c.model.section);
    const double shortest = 2 * pi / std::max({w.plunge, w.pitch, w.flap});
    const double min_initial_step = 1e-12 * shortest;
    if (std::isfinite(min_initial_step) && in.initial_step > 0 && in.initial_step < min_initial_step)
      sim.fail("initial_step", "is below what double precision can step",
               fmt::format("0 (automatic) or initial_step >= 1e-12 x the shortest uncoupled period = {:.3g} s",
                           min_initial_step));
  }

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
  std::vector<std::string> laws;
  for (const auto& l : kSpringLaws) laws.push_back(l.first);
  const std::string law = t.choice("law", laws, "linear");
  // Keys that belong to each law; any other law's key is an error.
  std::map<std::string, std::vector<std::string>> keys_of;
  for (const auto& [l, keys] : kSpringLaws) {
    auto& mine = keys_of[l];
    for (const auto& k : keys) mine.push_back(spring_key(k, dof));
  }
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


// [steady]: the steady flight condition (model/system.hpp, SteadyCondition).
// The flap's trim is either a deflection seen by the aerodynamics
// (flap_trim_deg: the surface rigged at beta_0, its spring centred there) or
// an applied hinge moment (hinge_moment: what a tab or actuator presses it
// with), not both: each alone says what holds the surface.
void read_steady(const Table& t, Case& c) {
  SteadyCondition& st = c.model.steady;
  const int n = c.model.section.dof;
  if (auto v = t.number("incidence_deg")) {
    t.require(std::abs(*v) <= 20, "incidence_deg", "is beyond the theory's attached flow",
              "|incidence| <= 20 degrees (thin-aerofoil theory is linear and knows no stall)");
    st.incidence = *v * kRadPerDeg;
  }
  for (const char* k : {"flap_trim_deg", "hinge_moment"})
    if (n == 2 && t.has(k)) t.fail(k, "needs a flap", "flap keys only for a 3-DOF case");
  const std::string trim = t.one_of({"flap_trim_deg", "hinge_moment"});
  if (trim == "flap_trim_deg") {
    const double v = *t.number(trim);
    t.require(std::abs(v) <= 20, trim, "is beyond the theory's attached flow",
              "|flap trim| <= 20 degrees (thin-aerofoil theory is linear)");
    st.flap_trim = v * kRadPerDeg;
  } else if (trim == "hinge_moment") {
    st.hinge_moment = *t.number(trim);  // N m/m, any finite value
  }
  if (auto v = t.number("gravity")) {
    t.require(std::abs(*v) <= 100, "gravity", "is beyond any flight load",
              "the component of gravity (times the load factor) along +plunge (down), m/s^2, "
              "|gravity| <= 100 (about 10 g); 9.80665 for level flight at 1 g, 0 for none");
    st.gravity = *v;
  }
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

const std::vector<std::string>& known_case_keys() { return case_schema().keys(); }

std::string case_key_units(const std::string& key) {
  // Units of the keys of the README's reference tables, each once. Keys
  // absent here are text (or choices): "".
  static const std::map<std::string, std::string, std::less<>> units = {
      {"section.semichord", "m"},
      {"section.mass", "kg m-1"},
      {"section.elastic_axis", "1"},
      {"section.cg", "1"},
      {"section.cg_offset", "1"},
      {"section.static_unbalance", "kg m m-1"},
      {"section.pitch_inertia", "kg m2 m-1"},
      {"section.pitch_inertia_cg", "kg m2 m-1"},
      {"section.radius_of_gyration", "1"},
      {"section.plunge_stiffness", "N m-1 m-1"},
      {"section.plunge_frequency_hz", "Hz"},
      {"section.pitch_stiffness", "N m rad-1 m-1"},
      {"section.pitch_frequency_hz", "Hz"},
      {"section.plunge_damping_ratio", "1"},
      {"section.pitch_damping_ratio", "1"},
      {"flap.hinge", "1"},
      {"flap.static_unbalance", "kg m m-1"},
      {"flap.mass", "kg m-1"},
      {"flap.cg_offset", "1"},
      {"flap.inertia", "kg m2 m-1"},
      {"flap.inertia_cg", "kg m2 m-1"},
      {"flap.stiffness", "N m rad-1 m-1"},
      {"flap.frequency_hz", "Hz"},
      {"flap.damping_ratio", "1"},
      {"flow.airspeed", "m s-1"},
      {"flow.density", "kg m-3"},
      {"flow.altitude", "m"},
      {"nondimensional.mass_ratio", "1"},
      {"nondimensional.elastic_axis", "1"},
      {"nondimensional.cg_offset", "1"},
      {"nondimensional.radius_of_gyration", "1"},
      {"nondimensional.frequency_ratio", "1"},
      {"nondimensional.plunge_damping_ratio", "1"},
      {"nondimensional.pitch_damping_ratio", "1"},
      {"nondimensional.reduced_speed", "1"},
      {"nondimensional.hinge", "1"},
      {"nondimensional.flap_cg_offset", "1"},
      {"nondimensional.flap_radius_of_gyration", "1"},
      {"nondimensional.flap_frequency_ratio", "1"},
      {"nondimensional.flap_damping_ratio", "1"},
      {"nondimensional.reference.semichord", "m"},
      {"nondimensional.reference.pitch_frequency_hz", "Hz"},
      {"nondimensional.reference.density", "kg m-3"},
      {"aerodynamics.wagner_coefficients", "1"},
      {"aerodynamics.wagner_exponents", "1"},  // per semichord travelled
      {"aerodynamics.kussner_coefficients", "1"},
      {"aerodynamics.kussner_exponents", "1"},
      {"initial.plunge", "m"},
      {"initial.plunge_semichords", "1"},
      {"initial.pitch_deg", "degree"},
      {"initial.flap_deg", "degree"},
      {"initial.plunge_rate", "m s-1"},
      {"initial.pitch_rate_deg_s", "degree s-1"},
      {"initial.flap_rate_deg_s", "degree s-1"},
      {"initial.lag_states", "1"},
      {"simulation.duration", "s"},
      {"simulation.duration_semichords", "1"},
      {"simulation.sample_rate", "Hz"},
      {"simulation.sample_interval", "s"},
      {"simulation.sample_interval_semichords", "1"},
      {"simulation.relative_tolerance", "1"},
      {"simulation.absolute_tolerance", "1"},
      {"simulation.max_step", "s"},
      {"simulation.initial_step", "s"},
      {"envelope.dive_speed_eas", "m s-1"},
      {"steady.incidence_deg", "degree"},
      {"steady.flap_trim_deg", "degree"},
      {"steady.hinge_moment", "N m m-1"},
      {"steady.gravity", "m s-2"},
      {"gust.start", "s"},
      {"gust.start_semichords", "1"},
      {"gust.start_distance", "m"},
      {"gust.amplitude", "m s-1"},
      {"gust.amplitude_eas", "m s-1"},
      {"gust.gradient", "m"},
      {"gust.gradient_chords", "1"},
      {"gust.mean_chord", "m"},
      {"gust.altitude", "m"},
      {"gust.landing_weight_ratio", "1"},
      {"gust.zero_fuel_weight_ratio", "1"},
      {"gust.max_operating_altitude", "m"},
      {"gust.frequency_hz", "Hz"},
      {"gust.reduced_frequency", "1"},
      {"gust.cycles", "1"},
      {"gust.scale", "1"},
      {"gust.intensity", "m s-1"},
      {"gust.scale_length", "m"},
      {"gust.seed", "1"},
      {"gust.sample_interval", "s"},
  };
  std::string k = key;
  // gust.<index>.<key> -> gust.<key>
  if (k.rfind("gust.", 0) == 0) {
    const std::size_t dot = k.find('.', 5);
    if (dot != std::string::npos && dot > 5 &&
        std::all_of(k.begin() + 5, k.begin() + static_cast<std::ptrdiff_t>(dot),
                    [](char ch) { return ch >= '0' && ch <= '9'; }))
      k = "gust" + k.substr(dot);
  }
  if (auto it = units.find(k); it != units.end()) return it->second;
  // springs.<dof>.<key>: lengths in m (plunge) or degrees (_deg), stiffness
  // per the DOF, coefficients per displacement unit.
  if (k.rfind("springs.", 0) == 0) {
    const std::size_t dot = k.find('.', 8);
    if (dot == std::string::npos) return "";
    const std::string dof = k.substr(8, dot - 8), name = k.substr(dot + 1);
    const bool plunge = dof == "plunge";
    if (dof != "plunge" && dof != "pitch" && dof != "flap") return "";
    if (name.size() > 4 && name.compare(name.size() - 4, 4, "_deg") == 0) return plunge ? "" : "degree";
    if (plunge && (name == "half_gap" || name == "total_gap" || name == "gap_below" || name == "gap_above" ||
                   name == "offset" || name == "half_width" || name == "displacements"))
      return "m";
    if (name == "inner_stiffness") return plunge ? "N m-1 m-1" : "N m rad-1 m-1";
    if (name == "cubic_coefficient") return plunge ? "m-2" : "rad-2";
    if (name == "coefficients") return "1";  // c_n in units of displacement^(1-n): a list, see README
    if (name == "forces") return plunge ? "N m-1" : "N m m-1";
  }
  return "";
}

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

namespace {
Case read_case(toml::table root, const std::string& text, const std::string& path,
               const std::vector<std::string>& overrides);
}  // namespace

Case parse_case(const std::string& text, const std::string& path,
                const std::vector<std::string>& overrides) {
  return read_case(parse_document(text, path), text, path, overrides);
}

struct CaseDocument::Impl {
  std::string text, path;
  toml::table root;
};
CaseDocument::CaseDocument(std::string text, std::string path) {
  auto impl = std::make_unique<Impl>();
  impl->root = parse_document(text, path);
  impl->text = std::move(text);
  impl->path = std::move(path);
  impl_ = std::move(impl);
}
CaseDocument::~CaseDocument() = default;
Case CaseDocument::with(const std::vector<std::string>& overrides) const {
  return read_case(impl_->root, impl_->text, impl_->path, overrides);  // (a copy of the parsed document)
}

namespace {
Case read_case(toml::table root, const std::string& text, const std::string& path,
               const std::vector<std::string>& overrides) {
  Context ctx{path, {}};
  Case c;
  c.path = path;
  c.text = text;
  c.overrides = overrides;

  for (const auto& o : overrides) apply_override(root, o, case_schema(), ctx);
  check_unknown_keys(ctx, case_schema(), root);

  const Table top(ctx, &root, "");
  c.title = top.string("title").value_or("");
  (void)top.string("description");
  const Table sec = top.sub("section"), flap = top.sub("flap"), flow = top.sub("flow");
  const Table nd = top.sub("nondimensional");
  const bool si = sec.present() || flap.present() || flow.present();
  if (si && nd.present()) {
    const Table& first = sec.present() ? sec : (flap.present() ? flap : flow);
    // A table without a line in the file was made by a --set override.
    const SourceLocation w = first.where_table();
    const std::string at = w.line > 0 ? fmt::format("at line {}", w.line)
                           : w.file.rfind("--", 0) == 0 ? "given by " + w.file
                                                        : "given by a --set override";
    throw InputError(nd.where_table(), "nondimensional", "",
                     fmt::format("conflicts with [{}] {}: a case gives the section in one "
                                 "form only",
                                 first.path(), at),
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
  read_steady(top.sub("steady"), c);
  read_initial_and_simulation(top.sub("initial"), top.sub("simulation"), c);
  read_gusts(root, ctx, top.sub("aerodynamics"), c);
  if (const Table sim = top.sub("simulation"); sim.string("stepper") == std::optional<std::string>("exact")) {
    std::string why;
    if (!exact_propagation_eligible(c.model, &why))
      sim.fail("stepper", "cannot be exact for this case: " + why,
               "\"exact\" for a case without gusts whose nonlinear springs are continuous and piecewise linear "
               "(freeplay, bilinear, table); \"auto\", \"dopri5\" or \"bulirsch-stoer\" otherwise");
  }
  return c;
}
}  // namespace

}  // namespace aerosect
