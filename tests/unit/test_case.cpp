// Case-file reading: every validation error names the file, the line, the
// key and what is allowed. Expected messages are this project's own wording
// (common practice for input validation, no outside source); the physical
// limits they enforce cite their source where they have one.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <fstream>
#include <numbers>
#include <stdexcept>

#include <fmt/format.h>

#include "aerosect/error.hpp"
#include "aerosect/model/atmosphere.hpp"
#include "helpers.hpp"

using namespace aerosect;
using Catch::Matchers::Contains;

namespace {
const std::string kSection = R"([section]
semichord = 0.5
mass = 10.0
elastic_axis = -0.2
cg_offset = 0.1
radius_of_gyration = 0.5
plunge_frequency_hz = 2.0
pitch_frequency_hz = 5.0
)";
const std::string kFlow = "[flow]\ndensity = 1.225\nairspeed = 40.0\n";
const std::string kSim = "[simulation]\nduration = 1.0\n";
const std::string kFlapTable = R"([flap]
hinge = 0.6
static_unbalance = 0.02
inertia = 0.01
frequency_hz = 10.0
)";

// Parses `text` expecting an InputError; checks line, key and message parts.
void expect_error(const std::string& text, int line, const std::string& key,
                  const std::vector<std::string>& parts,
                  const std::vector<std::string>& overrides = {}) {
  try {
    (void)parse_case(text, "bad.toml", overrides);
    FAIL("no error for:\n" << text);
  } catch (const InputError& e) {
    INFO(e.what());
    CHECK(e.key() == key);
    if (line >= 0) CHECK(e.where().line == line);
    const std::string msg = e.what();
    if (overrides.empty()) CHECK_THAT(msg, Contains("bad.toml"));
    if (overrides.empty() && line > 0) CHECK_THAT(msg, Contains(fmt::format("bad.toml:{}:", line)));
    if (!key.empty()) CHECK_THAT(msg, Contains("key '" + key + "'"));
    for (const auto& p : parts) CHECK_THAT(msg, Contains(p));
  }
}

// `text` with its first `from` replaced by `to` (the fixture must hold `from`).
std::string edited(std::string text, const std::string& from, const std::string& to) {
  const auto at = text.find(from);
  REQUIRE(at != std::string::npos);
  text.replace(at, from.size(), to);
  return text;
}

// The InputError that parsing `text` throws, for checks beyond expect_error.
InputError error_of(const std::string& text, const std::vector<std::string>& overrides = {}) {
  try {
    (void)parse_case(text, "bad.toml", overrides);
  } catch (const InputError& e) {
    return e;
  }
  FAIL("no error for:\n" << text);
  throw std::logic_error("unreachable");
}
}  // namespace

TEST_CASE("A complete SI case reads", "[case]") {
  const Case c = test::case_from(kSection + kFlow + kSim);
  CHECK(c.input_form == "si");
  CHECK(c.model.section.dof == 2);
  CHECK(c.model.section.static_unbalance == Approx(10.0 * 0.1 * 0.5));
  CHECK(c.model.section.pitch_inertia == Approx(10.0 * 0.25 * 0.25));
  CHECK(c.model.section.pitch_stiffness ==
        Approx(c.model.section.pitch_inertia * std::pow(2 * std::numbers::pi * 5.0, 2)));
  CHECK(c.simulation.duration == 1.0);
  CHECK(c.model.aero.model == AeroModel::kWagner);
  CHECK(c.model.aero.wagner.coefficients.size() == 2);
}

TEST_CASE("Every case under cases/ reads", "[case]") {
  const Case c = load_case(std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron.toml");
  CHECK(c.model.section.dof == 3);
  CHECK(c.altitude.has_value());
  CHECK(c.model.flow.density == Approx(isa(1500.0).density));
}

TEST_CASE("Syntax errors name the line", "[case][errors]") {
  expect_error("[section]\nsemichord = = 1\n", 2, "", {"not valid TOML"});
  expect_error("", 0, "section", {"no section is defined", "[section]"});
  expect_error(std::string("\x01\x02\xff\xfe junk", 10), -1, "", {"not valid TOML"});
}

TEST_CASE("Unknown keys get a suggestion", "[case][errors]") {
  expect_error(kSection + "semichrod = 0.5\n" + kFlow + kSim, 9, "section.semichrod",
               {"unknown key", "did you mean 'section.semichord'"});
  expect_error(kSection + kFlow + kSim + "[sectoin]\nmass = 1\n", 14, "sectoin",
               {"unknown key", "did you mean 'section'"});
  expect_error(kSection + "hinge = 0.5\n" + kFlow + kSim, 9, "section.hinge",
               {"did you mean 'flap.hinge'"});
}

TEST_CASE("Missing and conflicting keys", "[case][errors]") {
  std::string no_mass = kSection;
  no_mass.replace(no_mass.find("mass = 10.0\n"), 12, "");
  expect_error(no_mass + kFlow + kSim, 1, "section.mass", {"missing", "kg per m span"});
  expect_error(kSection + "cg = 0.0\n" + kFlow + kSim, 5, "section.cg_offset",
               {"conflicts with 'section.cg'"});
  expect_error(kSection + kFlow + "altitude = 100.0\n" + kSim, 12, "flow.altitude",
               {"conflicts with 'flow.density'"});
  expect_error(kSection + kFlow, 0, "simulation.duration | simulation.duration_semichords",
               {"missing: give one of"});
  expect_error(kSection + kFlow + kSim + test::benchmark_2dof(), 14, "nondimensional",
               {"conflicts with [section]", "one form only"});
}

TEST_CASE("Wrong types", "[case][errors]") {
  std::string s = kSection;
  s.replace(s.find("mass = 10.0"), 11, "mass = \"ten\"");
  expect_error(s + kFlow + kSim, 3, "section.mass", {"must be a number", "'ten'"});
  expect_error(kSection + kFlow + kSim + "stepper = 5\n", 14, "simulation.stepper",
               {"must be a string"});
  expect_error(kSection + kFlow + kSim + "hold = \"pitch\"\n", 14, "simulation.hold",
               {"must be an array of strings"});
  expect_error(kSection + kFlow + kSim + "every_step = 1\n", 14, "simulation.every_step",
               {"must be true or false"});
}

TEST_CASE("Impossible values", "[case][errors]") {
  auto with = [](std::string text, const std::string& from, const std::string& to) {
    text.replace(text.find(from), from.size(), to);
    return text;
  };
  expect_error(with(kSection, "mass = 10.0", "mass = -3.0") + kFlow + kSim, 3, "section.mass",
               {"must be positive", "= -3.0"});
  expect_error(with(kSection, "semichord = 0.5", "semichord = nan") + kFlow + kSim, 2,
               "section.semichord", {"must be finite"});
  expect_error(with(kSection, "semichord = 0.5", "semichord = inf") + kFlow + kSim, 2,
               "section.semichord", {"must be finite"});
  expect_error(with(kSection, "elastic_axis = -0.2", "elastic_axis = 1.5") + kFlow + kSim, 4,
               "section.elastic_axis", {"outside the chord", "-1 < x < 1"});
  // r_alpha^2 <= x_alpha^2: the inertia about the CG would be negative (theory sheet, section 1).
  expect_error(with(kSection, "radius_of_gyration = 0.5", "radius_of_gyration = 0.1") + kFlow + kSim,
               6, "section.radius_of_gyration", {"physically impossible", "r_alpha^2 > x_alpha^2"});
  expect_error(with(test::benchmark_2dof("[simulation]\nduration = 1.0\n"),
                    "radius_of_gyration = 0.5", "radius_of_gyration = 0.25"),
               5, "nondimensional.radius_of_gyration", {"physically impossible", "r_alpha > |x_alpha|"});
  expect_error(kSection + "pitch_damping_ratio = 2.0\n" + kFlow +
                   kSim,
               9, "section.pitch_damping_ratio", {"outside the allowed range", "not percent"});
  expect_error(kSection + "[flow]\ndensity = -1.0\nairspeed = 40.0\n" + kSim, 10, "flow.density",
               {"impossible"});
  expect_error(kSection + "[flow]\naltitude = 30000.0\nairspeed = 40.0\n" + kSim, 10,
               "flow.altitude", {"outside the standard atmosphere", "20000 m"});
  expect_error(kSection + "[flow]\ndensity = 1.2\nairspeed = -4.0\n" + kSim, 11, "flow.airspeed",
               {"must not be negative"});
  expect_error(kSection + kFlow + "[simulation]\nduration = -1.0\n", 13, "simulation.duration",
               {"must be positive"});
  expect_error(kSection + "[flow]\ndensity = 1.2\nairspeed = 0.0\n" +
                   "[simulation]\nduration_semichords = 100.0\n",
               13, "simulation.duration_semichords", {"needs a positive airspeed"});
  expect_error(kSection + kFlow + "[simulation]\nduration = 1e12\nsample_rate = 1e6\n", 14,
               "simulation.sample_rate", {"asks for", "at most 2e9 samples"});
  expect_error(kSection + kFlow + kSim + "relative_tolerance = 0.5\n", 14,
               "simulation.relative_tolerance", {"outside the useful range"});
  expect_error(kSection + kFlow + kSim + "stepper = \"dopri\"\n", 14, "simulation.stepper",
               {"did you mean \"dopri5\"", "\"bulirsch-stoer\""});
  expect_error(kSection + kFlow + kSim + "hold = [\"flap\"]\n", 14, "simulation.hold",
               {"unknown degree of freedom \"flap\""});
  expect_error(kSection + kFlow + kSim + "[initial]\nflap_deg = 1.0\n", 15, "initial.flap_deg",
               {"needs a flap"});
  expect_error(kSection + kFlow + kSim + "[initial]\npitch_deg = 120.0\n", 15,
               "initial.pitch_deg", {"small angles"});
}

TEST_CASE("Flap values", "[case][errors]") {
  auto with = [](std::string text, const std::string& from, const std::string& to) {
    text.replace(text.find(from), from.size(), to);
    return text;
  };
  const Case ok = test::case_from(kSection + kFlapTable + kFlow + kSim);
  CHECK(ok.model.section.dof == 3);
  expect_error(kSection + with(kFlapTable, "hinge = 0.6", "hinge = 1.2") + kFlow + kSim, 10,
               "flap.hinge", {"outside the chord"});
  expect_error(kSection + with(kFlapTable, "hinge = 0.6", "hinge = -0.5") + kFlow + kSim, 10,
               "flap.hinge", {"aft of the elastic axis"});
  expect_error(kSection + with(kFlapTable, "inertia = 0.01", "inertia = -0.01") + kFlow + kSim, 12,
               "flap.inertia", {"must be positive"});
  // A flap whose unbalance is too large for its inertia: indefinite mass matrix.
  expect_error(kSection + with(kFlapTable, "static_unbalance = 0.02", "static_unbalance = 2.0") + kFlow +
                   kSim,
               12, "flap.inertia", {"indefinite"});
  expect_error(kSection + with(kFlapTable, "static_unbalance = 0.02", "cg_offset = 0.1") + kFlow + kSim,
               9, "flap.mass", {"missing", "needed with flap.cg_offset"});
  expect_error(kSection + with(kFlapTable, "static_unbalance = 0.02",
                               "mass = 1.0\ncg_offset = 0.3\n") +
                   kFlow + kSim,
               14, "flap.inertia", {"physically impossible"});
  expect_error(kSection + with(kFlapTable, "static_unbalance = 0.02", "mass = 20.0\nstatic_unbalance = 0.02") +
                   kFlow + kSim,
               11, "flap.mass", {"impossible", "section mass"});
}

TEST_CASE("Custom Wagner sets are checked", "[case][errors]") {
  const std::string base = kSection + kFlow + kSim + "[aerodynamics]\n";
  const Case c = test::case_from(base + "wagner = \"custom\"\nwagner_coefficients = [0.2, 0.3]\n"
                                         "wagner_exponents = [0.05, 0.4]\n");
  CHECK(c.model.aero.wagner.initial_value() == Approx(0.5));
  expect_error(base + "wagner_coefficients = [0.2]\n", 15, "aerodynamics.wagner_coefficients",
               {"only used with wagner = \"custom\""});
  expect_error(base + "wagner = \"custom\"\nwagner_coefficients = [0.6, 0.5]\n"
                      "wagner_exponents = [0.05, 0.4]\n",
               16, "aerodynamics.wagner_coefficients", {"sum to 1.1"});
  expect_error(base + "wagner = \"custom\"\nwagner_coefficients = [0.2, 0.3]\n"
                      "wagner_exponents = [0.05]\n",
               17, "aerodynamics.wagner_exponents", {"has 1 entries but wagner_coefficients has 2"});
  expect_error(base + "wagner = \"custom\"\nwagner_coefficients = [0.2, 0.3]\n"
                      "wagner_exponents = [0.05, -0.4]\n",
               17, "aerodynamics.wagner_exponents", {"must all be positive"});
  expect_error(base + "wagner = \"custom\"\n", 14, "aerodynamics.wagner_coefficients",
               {"missing"});
  expect_error(base + "model = \"unsteady\"\n", 15, "aerodynamics.model",
               {"is not one of the choices", "\"quasi-steady\""});
}

TEST_CASE("Command-line overrides", "[case]") {
  const Case c = test::case_from(kSection + kFlow + kSim,
                                 {"flow.airspeed=55.5", "aerodynamics.model=steady",
                                  "initial.pitch_deg = 3"});
  CHECK(c.model.flow.airspeed == 55.5);
  CHECK(c.model.aero.model == AeroModel::kSteady);
  CHECK(c.simulation.initial_displacement(kPitch) == Approx(3.0 * std::numbers::pi / 180));
  CHECK_THAT(c.text_as_run(), Contains("# flow.airspeed=55.5"));
  // Errors from an override name the override.
  try {
    (void)test::case_from(kSection + kFlow + kSim, {"section.mass=-1"});
    FAIL("no error");
  } catch (const InputError& e) {
    CHECK_THAT(std::string(e.what()), Contains("--set section.mass=-1"));
    CHECK_THAT(std::string(e.what()), Contains("must be positive"));
  }
  expect_error(kSection + kFlow + kSim, 0, "flow.airsped", {"unknown key", "did you mean 'flow.airspeed'"},
               {"flow.airsped=3"});
  expect_error(kSection + kFlow + kSim, 0, "", {"is not of the form key=value"}, {"flow.airspeed"});
}

TEST_CASE("An unreadable path is an input error", "[case][errors]") {
  try {
    (void)load_case("/nonexistent/dir/case.toml");
    FAIL("no error");
  } catch (const InputError& e) {
    CHECK_THAT(std::string(e.what()), Contains("/nonexistent/dir/case.toml"));
    CHECK_THAT(std::string(e.what()), Contains("cannot open the case file"));
  }
}

TEST_CASE("SI and nondimensional forms of one section resolve to the same model", "[case]") {
  // Common practice, no source: the definitions of mu, x_alpha, r_alpha,
  // omega_bar, U* link the two forms exactly.
  const Case si = test::case_from(kSection + kFlapTable + kFlow + kSim);
  const NondimensionalParameters& n = si.nondimensional;
  const std::string nd = fmt::format(
      "[nondimensional]\nmass_ratio = {:.17g}\nelastic_axis = {:.17g}\ncg_offset = {:.17g}\n"
      "radius_of_gyration = {:.17g}\nfrequency_ratio = {:.17g}\nreduced_speed = {:.17g}\n"
      "hinge = {:.17g}\nflap_cg_offset = {:.17g}\nflap_radius_of_gyration = {:.17g}\n"
      "flap_frequency_ratio = {:.17g}\n"
      "[nondimensional.reference]\nsemichord = {:.17g}\npitch_frequency_hz = {:.17g}\n"
      "density = {:.17g}\n[simulation]\nduration = 1.0\n",
      n.mass_ratio, n.elastic_axis, n.cg_offset, n.radius_of_gyration, n.frequency_ratio,
      n.reduced_speed, n.hinge, n.flap_cg_offset, n.flap_radius_of_gyration, n.flap_frequency_ratio,
      n.reference.semichord, n.reference.pitch_frequency / (2 * std::numbers::pi), n.reference.density);
  const Case nc = test::case_from(nd);
  const SectionProperties &a = si.model.section, &b = nc.model.section;
  CHECK(b.mass == Approx(a.mass).epsilon(1e-13));
  CHECK(b.static_unbalance == Approx(a.static_unbalance).epsilon(1e-13));
  CHECK(b.pitch_inertia == Approx(a.pitch_inertia).epsilon(1e-13));
  CHECK(b.plunge_stiffness == Approx(a.plunge_stiffness).epsilon(1e-13));
  CHECK(b.pitch_stiffness == Approx(a.pitch_stiffness).epsilon(1e-13));
  CHECK(b.flap_static_unbalance == Approx(a.flap_static_unbalance).epsilon(1e-13));
  CHECK(b.flap_inertia == Approx(a.flap_inertia).epsilon(1e-13));
  CHECK(b.flap_stiffness == Approx(a.flap_stiffness).epsilon(1e-13));
  CHECK(nc.model.flow.airspeed == Approx(si.model.flow.airspeed).epsilon(1e-13));
  CHECK(nc.model.flow.density == Approx(si.model.flow.density).epsilon(1e-13));
}

TEST_CASE("Spring laws in the case file", "[case]") {
  const std::string base = kSection + kFlow + kSim;  // lines 1..13
  const Case fp = test::case_from(base + "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n");
  const SpringLaw& s = fp.model.springs[kPitch];
  CHECK(s.kind() == "freeplay");
  REQUIRE(s.breakpoints().size() == 2);
  CHECK(s.breakpoints()[1] == Approx(0.5 * std::numbers::pi / 180));
  CHECK(s.gap_closed_stiffness() == Approx(fp.model.section.pitch_stiffness));
  const Case tot = test::case_from(base + "[springs.pitch]\nlaw = \"freeplay\"\ntotal_gap_deg = 1.0\n");
  CHECK(tot.model.springs[kPitch].breakpoints()[1] == Approx(s.breakpoints()[1]));
  const Case cu = test::case_from(base + "[springs.pitch]\nlaw = \"cubic\"\ncubic_coefficient = 3.0\n");
  CHECK(cu.model.springs[kPitch].describing_function(0.1) ==
        Approx(cu.model.section.pitch_stiffness * (1 + 0.75 * 3 * 0.01)));
  expect_error(base + "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\ntotal_gap_deg = 1.0\n",
               17, "springs.pitch.total_gap_deg", {"conflicts with 'springs.pitch.half_gap_deg'"});
  expect_error(base + "[springs.pitch]\nlaw = \"freeplay\"\n", 14,
               "springs.pitch.half_gap_deg | springs.pitch.total_gap_deg | springs.pitch.gap_below_deg",
               {"missing: give one of", "half of the total free play"});
  expect_error(base + "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = -0.5\n", 16,
               "springs.pitch.half_gap_deg", {"must not be negative"});
  expect_error(base + "[springs.pitch]\nlaw = \"cubic\"\nhalf_gap_deg = 0.5\n", 16,
               "springs.pitch.half_gap_deg", {"does not belong to law = \"cubic\""});
  expect_error(base + "[springs.plunge]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n", 16,
               "springs.plunge.half_gap_deg", {"unknown key", "did you mean 'springs.plunge.half_gap'"});
  expect_error(base + "[springs.flap]\nlaw = \"cubic\"\ncubic_coefficient = 1.0\n", 15,
               "springs.flap.law", {"needs a flap"});
  expect_error(base + "[springs.pitch]\nlaw = \"table\"\ndisplacements_deg = [0.0, 1.0, 1.0]\n"
                      "forces = [0.0, 1.0, 2.0]\n",
               16, "springs.pitch.displacements_deg", {"not strictly increasing at entry 3"});
  expect_error(base + "[springs.pitch]\nlaw = \"table\"\ndisplacements_deg = [0.0, 1.0]\n"
                      "forces = [0.0, 1.0, 2.0]\n",
               17, "springs.pitch.forces", {"has 3 entries but displacements_deg has 2"});
  expect_error(base + "[springs.pitch]\nlaw = \"bilinear\"\nhalf_width_deg = 1.0\n", 14,
               "springs.pitch.inner_stiffness", {"missing"});
  expect_error(base + "[springs.pitch]\nlaw = \"polynomial\"\ncoefficients = []\n", 16,
               "springs.pitch.coefficients", {"must have 1 to 8 entries"});
  expect_error(base + "[springs.pitch]\nlaw = \"spline\"\n", 15, "springs.pitch.law",
               {"is not one of the choices", "\"freeplay\""});
}

// ===========================================================================
// Every validation error of the case reader (src/io/case.cpp), table by table.
// Common practice, no source: each check pins this project's own wording
// (file, line, key, problem and allowed text); where a limit is physical its
// source is named beside the check.
//
// Error-site index: every error site of src/io/case.cpp and the TEST_CASE
// that triggers it. "[t]" = TEST_CASE "[t] errors"; "top-level" and "forms" =
// "Top-level and form errors"; "--set" = "Command-line override (--set)
// errors"; "read_file" = "read_file errors"; older TEST_CASEs are quoted.
// Table helpers (type and shape errors):
//   number: not a number (string)              "Wrong types"
//   number: not a number (boolean)             [section]
//   number: not finite (nan, inf)              "Impossible values"
//   string: not a string                       "Wrong types", top-level
//   choice: not a choice, with a hint          "Impossible values" (stepper), [initial]
//   choice: not a choice, no hint              [aerodynamics], [initial], [simulation]
//   boolean: not true/false                    "Wrong types"
//   numbers: not an array                      [aerodynamics]
//   numbers: element not a number / boolean    [aerodynamics]
//   numbers: element not finite                [aerodynamics]
//   strings: not an array                      "Wrong types"
//   strings: element not a string              [simulation]
//   one_of: two alternatives given             "Missing and conflicting keys", every table
//   required_one_of: none given                "Missing and conflicting keys", every table
//   required_number / missing: key absent      every table; "(no [t] table)" in [flow]
//   sub: a value where a table belongs         top-level, [nondimensional], [springs.*]
// check_unknown_keys:
//   unknown key, with a hint                   "Unknown keys get a suggestion"
//   unknown key, no hint                       top-level
//   a table where a value belongs              [section], --set
//   located at a --set override                --set
// apply_override (--set):
//   not key=value                              "Command-line overrides", --set
//   unknown key (hint / no hint / title.x)     "Command-line overrides", --set
//   a table name given as the key              --set
//   path through a value ('flow' = 3)          --set
// read_si, [section]: semichord missing/<=0; mass missing/<=0; elastic_axis
//   missing/outside; CG none/two/cg outside; inertia none/two/<=0/impossible;
//   plunge stiffness none/negative; pitch stiffness none/<=0; plunge and pitch
//   damping ratio range                        [section], older tests
// read_si, [flap]: hinge missing/outside/not aft; unbalance two/none; mass
//   impossible; mass missing with cg_offset; inertia none/two/<=0; mass
//   missing with inertia_cg; inertia below m d^2; stiffness none/negative;
//   damping ratio range                        [flap], "Flap values"
// read_si, [flow]: airspeed missing/negative/>=1000; density|altitude
//   none/two; density impossible; altitude outside ISA          [flow]
// read_nondimensional: mass_ratio missing/<=0; elastic_axis missing/outside;
//   cg_offset missing; radius_of_gyration missing/<=0/impossible;
//   frequency_ratio missing/negative; damping ratios range; reduced_speed
//   missing/negative; flap key without hinge (4 keys); hinge outside/not aft;
//   flap_radius_of_gyration missing/<=0; flap_frequency_ratio
//   missing/negative; flap_damping_ratio range; reference semichord/
//   pitch_frequency_hz/density               [nondimensional]
// read_aerodynamics: model choice; wagner choice; coefficients/exponents with
//   jones; coefficients/exponents missing; 1..8 entries; lengths differ; sum;
//   exponents positive                         [aerodynamics], "Custom Wagner..."
// read_initial_and_simulation, [initial]: plunge two; pitch_deg/flap_deg
//   small angles; flap_deg/flap_rate_deg_s without flap; lag_states choice
// read_initial_and_simulation, [simulation]: duration none/two/<=0;
//   duration_semichords at zero airspeed; schedule two; every_step = false;
//   sample value <=0; sample_interval_semichords at zero airspeed; too many
//   samples (given interval / default interval); stepper choice; relative and
//   absolute tolerance range; max_step/initial_step negative; hold type/unknown
//                                              [initial], [simulation]
// read_spring: law choice; key of another law (linear / other law); free play
//   none/two/gap_below without gap_above/gap_above with a symmetric gap/
//   negative lengths; bilinear inner_stiffness missing/negative, half_width
//   missing/<=0; cubic coefficient missing; polynomial missing/1..8 entries;
//   table displacements missing/forces missing/2..256 points/lengths differ/
//   not increasing; [springs.flap] without a flap       [springs], "Spring laws..."
// check_mass_matrix: SI flap (inertia / inertia_cg), nondimensional flap
//                                              [flap], [nondimensional], "Flap values"
// [envelope]: dive_speed_eas range            [envelope]
// parse_case: not TOML; no section; both forms (first table section/flap/
//   flow); SI without [section]; SI without [flow]      "Syntax errors...",
//                                              "Missing and conflicting keys", forms
// read_file: cannot open; a directory          "An unreadable path...", read_file
// Not triggered by any test: read_file's "cannot read the case file" after a
// successful open (a device I/O error, not producible in a unit test).
// ===========================================================================

TEST_CASE("Top-level and form errors", "[case][errors]") {
  // Common practice, no source.
  const std::string rest = kFlow + kSim;
  // string(): title and description must be strings.
  expect_error("title = 3\n" + kSection + rest, 1, "title", {"= 3", "must be a string", "a quoted string"});
  expect_error("description = [\"a\"]\n" + kSection + rest, 1, "description", {"must be a string"});
  // check_unknown_keys: an unknown key with nothing close gets no hint.
  {
    const InputError e = error_of("zzzzzz = 1\n" + kSection + rest);
    CHECK(e.key() == "zzzzzz");
    CHECK(e.where().line == 1);
    CHECK(e.problem() == "unknown key");
    CHECK_THAT(std::string(e.what()), Contains("bad.toml:1:"));
    CHECK_THAT(std::string(e.what()), Contains("\"Case file reference\""));
  }
  // Table::sub: a value where a table belongs.
  expect_error("section = 3\n" + rest, 1, "section", {"= 3", "must be a table", "a [section] table"});
  expect_error("[[section]]\nmass = 1.0\n" + rest, 1, "section", {"must be a table", "a [section] table"});
  expect_error("flap = 3\n" + kSection + rest, 1, "flap", {"must be a table", "a [flap] table"});
  expect_error("flow = \"fast\"\n" + kSection + kSim, 1, "flow", {"must be a table", "a [flow] table"});
  expect_error("nondimensional = 3\n" + kSim, 1, "nondimensional",
               {"must be a table", "a [nondimensional] table"});
  expect_error("aerodynamics = \"steady\"\n" + kSection + rest, 1, "aerodynamics",
               {"must be a table", "a [aerodynamics] table"});
  expect_error("initial = 1\n" + kSection + rest, 1, "initial", {"must be a table", "a [initial] table"});
  expect_error("simulation = 1\n" + kSection + kFlow, 1, "simulation",
               {"must be a table", "a [simulation] table"});
  expect_error("envelope = 1\n" + kSection + rest, 1, "envelope", {"must be a table", "a [envelope] table"});
  expect_error("springs = 1\n" + kSection + rest, 1, "springs", {"must be a table", "a [springs] table"});
  // parse_case: both forms; the message names the first SI table found.
  expect_error(kFlapTable + test::benchmark_2dof(), 6, "nondimensional",
               {"conflicts with [flap] at line 1", "either [section] + [flow]"});
  expect_error(kFlow + test::benchmark_2dof(), 4, "nondimensional", {"conflicts with [flow] at line 1"});
  expect_error(test::benchmark_2dof() + kSection + rest, 1, "nondimensional",
               {"conflicts with [section] at line 8"});
  // parse_case: the SI form without [section] or without [flow].
  expect_error(rest, 0, "section.semichord", {"missing (no [section] table)", "a [section] table (SI form)"});
  expect_error(kFlapTable + rest, 0, "section.semichord", {"missing (no [section] table)"});
  expect_error(kSection + kSim, 0, "flow.airspeed",
               {"missing (no [flow] table)", "a [flow] table with airspeed and density or altitude"});
}

TEST_CASE("[section] errors", "[case][errors]") {
  // Common practice, no source.
  const std::string rest = kFlow + kSim;
  expect_error(edited(kSection, "semichord = 0.5\n", "") + rest, 1, "section.semichord",
               {"missing", "a positive number, m"});
  expect_error(edited(kSection, "semichord = 0.5", "semichord = 0.0") + rest, 2, "section.semichord",
               {"= 0.0", "must be positive", "a positive number, m"});
  expect_error(edited(kSection, "mass = 10.0", "mass = true") + rest, 3, "section.mass",
               {"must be a number", "a finite number"});
  expect_error(edited(kSection, "elastic_axis = -0.2\n", "") + rest, 1, "section.elastic_axis",
               {"missing", "-1 < x < 1"});
  expect_error(edited(kSection, "cg_offset = 0.1\n", "") + rest, 1,
               "section.cg | section.cg_offset | section.static_unbalance",
               {"missing: give one of section.cg, section.cg_offset, section.static_unbalance",
                "the CG position"});
  expect_error(edited(kSection, "cg_offset = 0.1", "cg = -1.0") + rest, 5, "section.cg",
               {"is outside the chord", "-1 < x < 1"});
  expect_error(kSection + "static_unbalance = 0.5\n" + rest, 9, "section.static_unbalance",
               {"conflicts with 'section.cg_offset': give only one of them",
                "one of cg, cg_offset, static_unbalance"});
  expect_error(edited(kSection, "radius_of_gyration = 0.5\n", "") + rest, 1,
               "section.pitch_inertia | section.pitch_inertia_cg | section.radius_of_gyration",
               {"missing: give one of", "the pitch inertia"});
  expect_error(kSection + "pitch_inertia = 1.0\n" + rest, 6, "section.radius_of_gyration",
               {"conflicts with 'section.pitch_inertia'"});
  expect_error(edited(kSection, "radius_of_gyration = 0.5", "pitch_inertia_cg = 0.0") + rest, 6,
               "section.pitch_inertia_cg", {"must be positive", "a positive number"});
  expect_error(edited(kSection, "plunge_frequency_hz = 2.0\n", "") + rest, 1,
               "section.plunge_stiffness | section.plunge_frequency_hz",
               {"missing: give one of", "plunge_frequency_hz (uncoupled, Hz)"});
  expect_error(edited(kSection, "plunge_frequency_hz = 2.0", "plunge_stiffness = -1.0") + rest, 7,
               "section.plunge_stiffness", {"must not be negative", "a number >= 0"});
  expect_error(edited(kSection, "pitch_frequency_hz = 5.0\n", "") + rest, 1,
               "section.pitch_stiffness | section.pitch_frequency_hz",
               {"missing: give one of", "pitch_frequency_hz (uncoupled, Hz)"});
  expect_error(edited(kSection, "pitch_frequency_hz = 5.0", "pitch_frequency_hz = 0.0") + rest, 8,
               "section.pitch_frequency_hz", {"must be positive"});
  expect_error(kSection + "plunge_damping_ratio = -0.1\n" + rest, 9, "section.plunge_damping_ratio",
               {"outside the allowed range", "0 <= zeta < 1"});
  // check_unknown_keys: a key given as a table; no self-suggestion.
  expect_error(edited(kSection, "mass = 10.0\n", "") + rest + "[section.mass]\nvalue = 10.0\n", 13,
               "section.mass", {"must be a value, not a table", "\"Case file reference\""});
  {
    const InputError e = error_of(kSection + rest + "[section.cg]\nvalue = 0.0\n");
    CHECK(e.key() == "section.cg");
    CHECK(e.where().line == 14);
    CHECK(e.problem() == "must be a value, not a table");
    CHECK_THAT(std::string(e.what()), Contains("bad.toml:14:"));
    CHECK_THAT(std::string(e.what()), Contains("key 'section.cg'"));
  }
}

TEST_CASE("[flap] errors", "[case][errors]") {
  // Common practice, no source. Lines: [flap] 9, hinge 10, static_unbalance 11,
  // inertia 12, frequency_hz 13, then 14.
  const std::string rest = kFlow + kSim;
  expect_error(kSection + edited(kFlapTable, "hinge = 0.6\n", "") + rest, 9, "flap.hinge",
               {"missing", "-1 < x < 1"});
  expect_error(kSection + kFlapTable + "cg_offset = 0.1\n" + rest, 14, "flap.cg_offset",
               {"conflicts with 'flap.static_unbalance'", "one of static_unbalance, cg_offset"});
  expect_error(kSection + edited(kFlapTable, "static_unbalance = 0.02\n", "") + rest, 9,
               "flap.static_unbalance", {"missing", "S_beta about the hinge", "mass with cg_offset"});
  expect_error(kSection + kFlapTable + "mass = 0.0\n" + rest, 14, "flap.mass",
               {"is impossible", "0 < flap mass < section mass = 10 kg/m"});
  expect_error(kSection + edited(kFlapTable, "inertia = 0.01\n", "") + rest, 9,
               "flap.inertia | flap.inertia_cg",
               {"missing: give one of flap.inertia, flap.inertia_cg", "about the flap CG, with mass"});
  expect_error(kSection + kFlapTable + "inertia_cg = 0.01\n" + rest, 14, "flap.inertia_cg",
               {"conflicts with 'flap.inertia'"});
  // inertia_cg without mass.
  expect_error(kSection + edited(kFlapTable, "inertia = 0.01", "inertia_cg = 0.01") + rest, 9, "flap.mass",
               {"missing", "needed with flap.inertia_cg"});
  expect_error(kSection + edited(kFlapTable, "inertia = 0.01", "inertia_cg = -0.01") + rest, 12,
               "flap.inertia_cg", {"must be positive", "a positive number, kg m^2/m"});
  expect_error(kSection + edited(kFlapTable, "frequency_hz = 10.0\n", "") + rest, 9,
               "flap.stiffness | flap.frequency_hz", {"missing: give one of", "hinge spring"});
  expect_error(kSection + edited(kFlapTable, "frequency_hz = 10.0", "stiffness = -5.0") + rest, 13,
               "flap.stiffness", {"must not be negative", "a number >= 0"});
  expect_error(kSection + kFlapTable + "damping_ratio = 1.0\n" + rest, 14, "flap.damping_ratio",
               {"outside the allowed range", "not percent"});
  // A physical mass matrix is positive definite (kinetic energy > 0; common
  // practice, no source). Here I_alpha I_beta < coupling^2:
  // 0.625 * 0.201 < (0.201 + 0.5 * 0.8 * 1.0)^2.
  expect_error(kSection + "[flap]\nhinge = 0.6\nmass = 5.0\nstatic_unbalance = 1.0\ninertia_cg = 0.001\n"
                          "frequency_hz = 10.0\n" + rest,
               13, "flap.inertia_cg", {"indefinite", "positive definite"});
}

TEST_CASE("[flow] errors", "[case][errors]") {
  // Common practice, no source; the altitude range is that of this project's
  // ISA model (aerosect/model/atmosphere.hpp).
  expect_error(kSection + "[flow]\ndensity = 1.225\n" + kSim, 9, "flow.airspeed",
               {"missing", "true airspeed, m/s, >= 0"});
  expect_error(kSection + "[flow]\ndensity = 1.225\nairspeed = 1000.0\n" + kSim, 11, "flow.airspeed",
               {"beyond any subsonic flight", "below 1000 m/s"});
  expect_error(kSection + "[flow]\nairspeed = 40.0\n" + kSim, 9, "flow.density | flow.altitude",
               {"missing: give one of flow.density, flow.altitude", "0 for vacuum"});
  expect_error(kSection + "[flow]\naltitude = -3000.0\nairspeed = 40.0\n" + kSim, 10, "flow.altitude",
               {"outside the standard atmosphere", "-2000 m <= altitude"});
}

TEST_CASE("[nondimensional] errors", "[case][errors]") {
  // Common practice, no source. Lines: header 1, mass_ratio 2, elastic_axis 3,
  // cg_offset 4, radius_of_gyration 5, frequency_ratio 6, reduced_speed 7,
  // `extra` from 8.
  auto nd = [](const std::string& extra) { return test::benchmark_2dof(extra) + kSim; };
  expect_error(edited(nd(""), "mass_ratio = 100.0\n", ""), 1, "nondimensional.mass_ratio",
               {"missing", "mu = m / (pi rho b^2)"});
  expect_error(edited(nd(""), "mass_ratio = 100.0", "mass_ratio = 0.0"), 2, "nondimensional.mass_ratio",
               {"must be positive", "a positive number, mu"});
  expect_error(edited(nd(""), "elastic_axis = -0.5\n", ""), 1, "nondimensional.elastic_axis",
               {"missing", "-1 < x < 1"});
  expect_error(edited(nd(""), "elastic_axis = -0.5", "elastic_axis = -1.0"), 3,
               "nondimensional.elastic_axis", {"is outside the chord"});
  expect_error(edited(nd(""), "cg_offset = 0.25\n", ""), 1, "nondimensional.cg_offset",
               {"missing", "x_alpha, semichords aft of the elastic axis"});
  expect_error(edited(nd(""), "radius_of_gyration = 0.5\n", ""), 1, "nondimensional.radius_of_gyration",
               {"missing", "r_alpha, semichords"});
  expect_error(edited(nd(""), "radius_of_gyration = 0.5", "radius_of_gyration = 0.0"), 5,
               "nondimensional.radius_of_gyration", {"must be positive"});
  expect_error(edited(nd(""), "frequency_ratio = 0.2\n", ""), 1, "nondimensional.frequency_ratio",
               {"missing", "omega_h / omega_alpha >= 0"});
  expect_error(edited(nd(""), "frequency_ratio = 0.2", "frequency_ratio = -0.2"), 6,
               "nondimensional.frequency_ratio", {"must not be negative", "omega_h / omega_alpha >= 0"});
  expect_error(nd("plunge_damping_ratio = 1.0\n"), 8, "nondimensional.plunge_damping_ratio",
               {"outside the allowed range"});
  expect_error(nd("pitch_damping_ratio = -0.5\n"), 8, "nondimensional.pitch_damping_ratio",
               {"outside the allowed range"});
  expect_error(edited(nd(""), "reduced_speed = 4.000000\n", ""), 1, "nondimensional.reduced_speed",
               {"missing", "U* = U / (b omega_alpha) >= 0"});
  expect_error(test::benchmark_2dof("", -4.0) + kSim, 7, "nondimensional.reduced_speed",
               {"must not be negative"});
  // The flap keys without a hinge.
  for (const std::string k : {"flap_cg_offset", "flap_radius_of_gyration", "flap_frequency_ratio",
                              "flap_damping_ratio"}) {
    INFO(k);
    expect_error(nd(k + " = 0.5\n"), 8, "nondimensional." + k,
                 {"needs nondimensional.hinge (a flap)", "flap keys only with a hinge position"});
  }
  expect_error(nd("hinge = 1.0\nflap_radius_of_gyration = 0.1\nflap_frequency_ratio = 1.5\n"), 8,
               "nondimensional.hinge", {"is outside the chord"});
  expect_error(nd("hinge = -0.6\nflap_radius_of_gyration = 0.1\nflap_frequency_ratio = 1.5\n"), 8,
               "nondimensional.hinge", {"must lie aft of the elastic axis", "elastic_axis = -0.5 < hinge < 1"});
  expect_error(nd("hinge = 0.6\nflap_frequency_ratio = 1.5\n"), 1, "nondimensional.flap_radius_of_gyration",
               {"missing", "r_beta = sqrt(I_beta / (m b^2)), about the hinge"});
  expect_error(nd("hinge = 0.6\nflap_radius_of_gyration = 0.0\nflap_frequency_ratio = 1.5\n"), 9,
               "nondimensional.flap_radius_of_gyration", {"must be positive"});
  expect_error(nd("hinge = 0.6\nflap_radius_of_gyration = 0.1\n"), 1, "nondimensional.flap_frequency_ratio",
               {"missing", "omega_beta / omega_alpha >= 0"});
  expect_error(nd("hinge = 0.6\nflap_radius_of_gyration = 0.1\nflap_frequency_ratio = -1.5\n"), 10,
               "nondimensional.flap_frequency_ratio", {"must not be negative"});
  expect_error(nd("hinge = 0.6\nflap_radius_of_gyration = 0.1\nflap_frequency_ratio = 1.5\n"
                  "flap_damping_ratio = 1.0\n"),
               11, "nondimensional.flap_damping_ratio", {"outside the allowed range"});
  // Positive-definite mass matrix (common practice, no source): the plunge-flap
  // minor is mu^2 (r_beta^2 - x_beta^2) < 0 for x_beta = 0.5, r_beta = 0.1.
  expect_error(nd("hinge = 0.6\nflap_cg_offset = 0.5\nflap_radius_of_gyration = 0.1\n"
                  "flap_frequency_ratio = 1.5\n"),
               10, "nondimensional.flap_radius_of_gyration", {"indefinite", "positive definite"});
  // [nondimensional.reference]: header at line 8, the value at line 9.
  expect_error(nd("[nondimensional.reference]\nsemichord = 0.0\n"), 9, "nondimensional.reference.semichord",
               {"must be positive", "a positive number, m"});
  expect_error(nd("[nondimensional.reference]\npitch_frequency_hz = -1.0\n"), 9,
               "nondimensional.reference.pitch_frequency_hz", {"must be positive", "a positive number, Hz"});
  expect_error(nd("[nondimensional.reference]\ndensity = 0.0\n"), 9, "nondimensional.reference.density",
               {"is impossible", "0 < density < 100 kg/m^3"});
  expect_error(nd("[nondimensional.reference]\ndensity = 100.0\n"), 9, "nondimensional.reference.density",
               {"is impossible"});
  expect_error(nd("reference = 3\n"), 8, "nondimensional.reference",
               {"must be a table", "a [nondimensional.reference] table"});
}

TEST_CASE("[aerodynamics] errors", "[case][errors]") {
  // Common practice, no source. [aerodynamics] at line 14, keys from 15.
  const std::string base = kSection + kFlow + kSim + "[aerodynamics]\n";
  expect_error(base + "model = 1\n", 15, "aerodynamics.model", {"must be a string", "a quoted string"});
  expect_error(base + "wagner = \"jone\"\n", 15, "aerodynamics.wagner",
               {"did you mean \"jones\"", "\"jones\", \"custom\""});
  {
    const InputError e = error_of(base + "wagner = \"exact\"\n");
    CHECK(e.key() == "aerodynamics.wagner");
    CHECK(e.where().line == 15);
    CHECK(e.problem() == "is not one of the choices");  // nothing close: no hint
    CHECK(e.allowed() == "\"jones\", \"custom\"");
  }
  expect_error(base + "wagner_exponents = [0.05]\n", 15, "aerodynamics.wagner_exponents",
               {"only used with wagner = \"custom\""});
  expect_error(base + "wagner = \"custom\"\nwagner_coefficients = [0.2]\n", 14, "aerodynamics.wagner_exponents",
               {"missing", "1 to 8 poles"});
  expect_error(base + "wagner = \"custom\"\nwagner_coefficients = []\nwagner_exponents = []\n", 16,
               "aerodynamics.wagner_coefficients", {"must have 1 to 8 entries"});
  expect_error(base + "wagner = \"custom\"\nwagner_coefficients = [0.05, 0.05, 0.05, 0.05, 0.05, 0.05, 0.05, "
                      "0.05, 0.05]\nwagner_exponents = [1, 1, 1, 1, 1, 1, 1, 1, 1]\n",
               16, "aerodynamics.wagner_coefficients", {"must have 1 to 8 entries"});
  // numbers(): not an array, an element not a number, an element not finite.
  expect_error(base + "wagner_coefficients = 0.2\n", 15, "aerodynamics.wagner_coefficients",
               {"must be an array of numbers", "an array such as [0.165, 0.335]"});
  expect_error(base + "wagner_coefficients = [0.2, \"x\"]\n", 15, "aerodynamics.wagner_coefficients",
               {"must be an array of numbers", "allowed: finite numbers"});
  expect_error(base + "wagner_coefficients = [true]\n", 15, "aerodynamics.wagner_coefficients",
               {"must be an array of numbers", "allowed: finite numbers"});
  expect_error(base + "wagner_coefficients = [0.2, nan]\n", 15, "aerodynamics.wagner_coefficients",
               {"must hold finite numbers", "allowed: finite numbers"});
}

TEST_CASE("[initial] errors", "[case][errors]") {
  // Common practice, no source. [initial] at line 14, keys from 15.
  const std::string base = kSection + kFlow + kSim + "[initial]\n";
  expect_error(base + "plunge = 0.01\nplunge_semichords = 0.02\n", 16, "initial.plunge_semichords",
               {"conflicts with 'initial.plunge'", "one of plunge, plunge_semichords"});
  expect_error(base + "plunge = \"up\"\n", 15, "initial.plunge", {"must be a number"});
  expect_error(base + "flap_rate_deg_s = 1.0\n", 15, "initial.flap_rate_deg_s",
               {"needs a flap", "flap keys only for a 3-DOF case"});
  // 3-DOF: [flap] 9..13, [flow] 14..16, [simulation] 17..18, [initial] 19.
  expect_error(kSection + kFlapTable + kFlow + kSim + "[initial]\nflap_deg = 100.0\n", 20, "initial.flap_deg",
               {"beyond the theory's small angles", "|flap| <= 90 degrees"});
  {
    const InputError e = error_of(base + "lag_states = \"moving\"\n");
    CHECK(e.key() == "initial.lag_states");
    CHECK(e.where().line == 15);
    CHECK(e.problem() == "is not one of the choices");
    CHECK(e.allowed() == "\"rest\", \"steady\"");
    CHECK_THAT(std::string(e.what()), Contains("bad.toml:15:"));
  }
  expect_error(base + "lag_states = \"stedy\"\n", 15, "initial.lag_states", {"did you mean \"steady\""});
  expect_error(base + "lag_states = true\n", 15, "initial.lag_states", {"must be a string"});
}

TEST_CASE("[simulation] errors", "[case][errors]") {
  // Common practice, no source. [simulation] at line 12, keys from 13.
  const std::string base = kSection + kFlow + "[simulation]\n";
  expect_error(base + "duration = 1.0\nduration_semichords = 100.0\n", 14, "simulation.duration_semichords",
               {"conflicts with 'simulation.duration'"});
  expect_error(base + "duration_semichords = -5.0\n", 13, "simulation.duration_semichords",
               {"must be positive", "a positive duration"});
  expect_error(base + "duration = 1.0\nsample_rate = 100.0\nsample_interval = 0.01\n", 15,
               "simulation.sample_interval",
               {"conflicts with 'simulation.sample_rate'",
                "one of sample_rate, sample_interval, sample_interval_semichords, every_step"});
  expect_error(base + "duration = 1.0\nevery_step = false\n", 14, "simulation.every_step",
               {"false is the default", "every_step = true, or one of sample_rate / sample_interval"});
  CHECK(test::case_from(base + "duration = 1.0\nevery_step = true\n").simulation.output.every_step);
  expect_error(base + "duration = 1.0\nsample_interval = 0.0\n", 14, "simulation.sample_interval",
               {"must be positive", "a positive number"});
  expect_error(base + "duration = 1.0\nsample_rate = -10.0\n", 14, "simulation.sample_rate",
               {"must be positive"});
  expect_error(base + "duration = 1.0\nsample_interval_semichords = 0.0\n", 14,
               "simulation.sample_interval_semichords", {"must be positive"});
  expect_error(kSection + "[flow]\ndensity = 1.2\nairspeed = 0.0\n[simulation]\nduration = 1.0\n"
                          "sample_interval_semichords = 0.1\n",
               14, "simulation.sample_interval_semichords", {"needs a positive airspeed", "sample_interval (s)"});
  // Default schedule: 50 samples per 0.2 s shortest period over 1e12 s.
  expect_error(base + "duration = 1e12\n", 13, "simulation.duration", {"asks for", "at most 2e9 samples"});
  expect_error(base + "duration = 1.0\nstepper = \"rk4\"\n", 14, "simulation.stepper",
               {"is not one of the choices", "\"dopri5\", \"bulirsch-stoer\""});
  expect_error(base + "duration = 1.0\nabsolute_tolerance = 0.0\n", 14, "simulation.absolute_tolerance",
               {"outside the useful range", "0 < absolute_tolerance <= 1"});
  expect_error(base + "duration = 1.0\nmax_step = -1.0\n", 14, "simulation.max_step",
               {"must not be negative", "seconds, 0 for no limit"});
  expect_error(base + "duration = 1.0\ninitial_step = -0.001\n", 14, "simulation.initial_step",
               {"must not be negative", "seconds, 0 for automatic"});
  expect_error(base + "duration = 1.0\nhold = [1]\n", 14, "simulation.hold",
               {"must be an array of strings", "allowed: strings"});
  // 3-DOF: [simulation] 17..18.
  expect_error(kSection + kFlapTable + kFlow + kSim + "hold = [\"yaw\"]\n", 19, "simulation.hold",
               {"unknown degree of freedom \"yaw\"", "\"plunge\", \"pitch\", \"flap\""});
}

TEST_CASE("[springs] errors", "[case][errors]") {
  // Common practice, no source. [springs.*] at line 14, keys from 15.
  const std::string base = kSection + kFlow + kSim;
  const std::string pitch = base + "[springs.pitch]\n";
  const std::string plunge = base + "[springs.plunge]\n";
  // A key of another law.
  expect_error(pitch + "law = \"linear\"\ninner_stiffness = 1.0\n", 16, "springs.pitch.inner_stiffness",
               {"does not belong to law = \"linear\"", "no other keys for a linear spring"});
  expect_error(pitch + "cubic_coefficient = 1.0\n", 15, "springs.pitch.cubic_coefficient",
               {"does not belong to law = \"linear\""});
  expect_error(pitch + "law = \"freeplay\"\nhalf_gap_deg = 0.5\nhalf_width_deg = 1.0\n", 17,
               "springs.pitch.half_width_deg",
               {"does not belong to law = \"freeplay\"",
                "keys of this law: half_gap_deg, total_gap_deg, gap_below_deg, gap_above_deg, offset_deg"});
  expect_error(pitch + "law = 3\n", 15, "springs.pitch.law", {"must be a string"});
  // Free play.
  expect_error(pitch + "law = \"freeplay\"\ngap_below_deg = 0.5\n", 14, "springs.pitch.gap_above_deg",
               {"missing", "gap_above_deg with gap_below_deg"});
  expect_error(pitch + "law = \"freeplay\"\nhalf_gap_deg = 0.5\ngap_above_deg = 0.5\n", 17,
               "springs.pitch.gap_above_deg",
               {"conflicts with 'springs.pitch.half_gap_deg'",
                "gap_below_deg with gap_above_deg, or one symmetric gap"});
  expect_error(pitch + "law = \"freeplay\"\ngap_above_deg = 0.5\n", 14,
               "springs.pitch.half_gap_deg | springs.pitch.total_gap_deg | springs.pitch.gap_below_deg",
               {"missing: give one of", "gap_below_deg with gap_above_deg (asymmetric"});
  expect_error(pitch + "law = \"freeplay\"\ngap_below_deg = -0.1\ngap_above_deg = 0.2\n", 16,
               "springs.pitch.gap_below_deg", {"must not be negative", "degrees, >= 0"});
  expect_error(pitch + "law = \"freeplay\"\ngap_below_deg = 0.1\ngap_above_deg = -0.2\n", 17,
               "springs.pitch.gap_above_deg", {"must not be negative", "degrees, >= 0"});
  expect_error(plunge + "law = \"freeplay\"\ntotal_gap = -0.01\n", 16, "springs.plunge.total_gap",
               {"must not be negative", "m, >= 0"});
  // Bilinear.
  expect_error(pitch + "law = \"bilinear\"\ninner_stiffness = -1.0\nhalf_width_deg = 1.0\n", 16,
               "springs.pitch.inner_stiffness", {"must not be negative", "N m/rad per m span, >= 0"});
  expect_error(plunge + "law = \"bilinear\"\ninner_stiffness = -1.0\nhalf_width = 0.01\n", 16,
               "springs.plunge.inner_stiffness", {"must not be negative", "N/m per m span, >= 0"});
  expect_error(pitch + "law = \"bilinear\"\ninner_stiffness = 0.0\n", 14, "springs.pitch.half_width_deg",
               {"missing", "distance from offset to each breakpoint"});
  expect_error(pitch + "law = \"bilinear\"\ninner_stiffness = 0.0\nhalf_width_deg = 0.0\n", 17,
               "springs.pitch.half_width_deg", {"must be positive", "degrees, > 0"});
  expect_error(plunge + "law = \"bilinear\"\ninner_stiffness = 0.0\nhalf_width = -0.01\n", 17,
               "springs.plunge.half_width", {"must be positive", "m, > 0"});
  // Cubic and polynomial.
  expect_error(pitch + "law = \"cubic\"\n", 14, "springs.pitch.cubic_coefficient",
               {"missing", "beta in f = k (x + beta x^3), 1/rad^2"});
  expect_error(plunge + "law = \"cubic\"\n", 14, "springs.plunge.cubic_coefficient",
               {"missing", "beta, 1/m^2"});
  expect_error(pitch + "law = \"polynomial\"\n", 14, "springs.pitch.coefficients",
               {"missing", "[c2, c3, ...] of f = k (x + c2 x^2 + c3 x^3 + ...), x in rad"});
  expect_error(plunge + "law = \"polynomial\"\n", 14, "springs.plunge.coefficients",
               {"missing", "x in m"});
  expect_error(pitch + "law = \"polynomial\"\ncoefficients = [1, 1, 1, 1, 1, 1, 1, 1, 1]\n", 16,
               "springs.pitch.coefficients", {"must have 1 to 8 entries"});
  // Table.
  expect_error(pitch + "law = \"table\"\nforces = [0.0, 1.0]\n", 14, "springs.pitch.displacements_deg",
               {"missing", "displacements_deg (degrees, strictly increasing)"});
  expect_error(pitch + "law = \"table\"\ndisplacements_deg = [0.0, 1.0]\n", 14, "springs.pitch.forces",
               {"missing", "forces (N m per m span) of the same length, 2 to 256 points"});
  expect_error(plunge + "law = \"table\"\ndisplacements = [0.0, 0.1]\n", 14, "springs.plunge.forces",
               {"missing", "displacements (m, strictly increasing) and forces (N per m span)"});
  expect_error(pitch + "law = \"table\"\ndisplacements_deg = [0.0]\nforces = [0.0]\n", 16,
               "springs.pitch.displacements_deg", {"must have 2 to 256 points"});
  // [springs.flap] without a flap and without a law: located at its header.
  expect_error(base + "[springs.flap]\ncubic_coefficient = 1.0\n", 14, "springs.flap.law",
               {"needs a flap", "[springs.flap] only for a 3-DOF case"});
  // A value where a [springs.<dof>] table belongs.
  expect_error(base + "[springs]\npitch = 3\n", 15, "springs.pitch", {"must be a table", "a [springs.pitch] table"});
}

TEST_CASE("[envelope] errors", "[case][errors]") {
  // Common practice, no source. [envelope] at line 14.
  const std::string base = kSection + kFlow + kSim + "[envelope]\n";
  CHECK(test::case_from(base + "dive_speed_eas = 150.0\n").dive_speed_eas == 150.0);
  expect_error(base + "dive_speed_eas = 0.0\n", 15, "envelope.dive_speed_eas",
               {"is impossible", "design dive speed V_D, m/s equivalent airspeed, 0 < V_D < 1000"});
  expect_error(base + "dive_speed_eas = 1000.0\n", 15, "envelope.dive_speed_eas", {"is impossible"});
  expect_error(base + "dive_speed_eas = \"fast\"\n", 15, "envelope.dive_speed_eas", {"must be a number"});
}

TEST_CASE("Command-line override (--set) errors", "[case][errors]") {
  // Common practice, no source. Errors from an override are located at it
  // (line 0, "--set KEY=VALUE" in place of the file).
  const std::string ok = kSection + kFlow + kSim;
  expect_error(ok, 0, "", {"--set =3", "is not of the form key=value", "--set section.mass=12.5"}, {"=3"});
  {
    const InputError e = error_of(ok, {"zzzz=1"});
    CHECK(e.key() == "zzzz");
    CHECK(e.problem() == "unknown key");  // nothing close: no hint
    CHECK(e.where().file == "--set zzzz=1");
    CHECK(e.where().line == 0);
  }
  // A path through a value: `title` is no table, so `title.x` is an unknown
  // key (and no far-fetched hint).
  {
    const InputError e = error_of(ok, {"title.x=1"});
    CHECK(e.key() == "title.x");
    CHECK(e.problem() == "unknown key");
    CHECK_THAT(std::string(e.what()), Contains("--set title.x=1"));
  }
  // A known key whose table is a value in the file.
  expect_error("flow = 3\n" + kSection + kSim, 0, "flow.airspeed",
               {"--set flow.airspeed=40", "'flow' is not a table in the case file", "a [flow] table"},
               {"flow.airspeed=40"});
  // A table name given as the key.
  expect_error(ok, 0, "section", {"--set section=3", "is a table, not a key", "--set section.semichord=..."},
               {"section=3"});
  // check_unknown_keys located at the override: a table given for a value.
  {
    const InputError e = error_of(ok, {"flow.airspeed={ x = 1 }"});
    CHECK(e.key() == "flow.airspeed");
    CHECK(e.problem() == "must be a value, not a table");
    CHECK(e.where().file == "--set flow.airspeed={ x = 1 }");
  }
  // A bare word is a string: a type error located at the override.
  expect_error(ok, 0, "section.mass", {"--set section.mass=heavy", "must be a number", "'heavy'"},
               {"section.mass=heavy"});
}

TEST_CASE("read_file errors", "[case][errors]") {
  // Common practice, no source: a directory is not a case file.
  const std::string dir = std::string(AEROSECT_SOURCE_DIR) + "/cases";
  try {
    (void)load_case(dir);
    FAIL("no error");
  } catch (const InputError& e) {
    CHECK(e.where().file == dir);
    CHECK_THAT(std::string(e.what()), Contains(dir + ": cannot read the case file (it is a directory)"));
    CHECK(e.allowed() == "a readable TOML file");
  }
}

// Found by the bad-input corpus (tests/bad_cases) and the case fuzzer; the
// wording and the limits of the message are this project's own (common
// practice, no source).
TEST_CASE("Inputs whose derived quantities leave double precision", "[case][errors]") {
  auto with = [](std::string text, const std::string& from, const std::string& to) {
    text.replace(text.find(from), from.size(), to);
    return text;
  };
  // m (2 pi f_h)^2 overflows: the message points at the mass, not the frequency.
  expect_error(with(kSection, "mass = 10.0", "mass = 1e308") + kFlow + kSim, 3, "section.mass",
               {"gives a plunge stiffness", "= inf", "beyond double precision"});
  expect_error(with(kSection, "pitch_frequency_hz = 5.0", "pitch_frequency_hz = 1e300") + kFlow + kSim,
               8, "section.pitch_frequency_hz", {"gives a pitch stiffness", "beyond double precision"});
  // m r^2 b^2 overflows or underflows to zero (it was a "-nan" message before).
  expect_error(with(kSection, "semichord = 0.5", "semichord = 1e308") + kFlow + kSim, 2,
               "section.semichord", {"gives a pitch inertia", "beyond double precision"});
  expect_error(with(kSection, "semichord = 0.5", "semichord = 1e-308") + kFlow + kSim, 2,
               "section.semichord", {"gives a pitch inertia (kg m^2/m) = 0", "below double precision"});
  // The nondimensional form resolves to an infinite mass.
  expect_error(with(test::benchmark_2dof(kSim), "mass_ratio = 100.0", "mass_ratio = 1e308"), 2,
               "nondimensional.mass_ratio", {"gives a mass (kg/m) = inf"});
}

TEST_CASE("Spring angles stay within the small-angle range", "[case][errors]") {
  // The same 90-degree bound as initial.pitch_deg (the aerodynamics is linear).
  const std::string base = kSection + kFlow + kSim;  // lines 1..13
  expect_error(base + "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 1e308\n", 16,
               "springs.pitch.half_gap_deg", {"small angles", "0 <= angle <= 90 degrees"});
  expect_error(base + "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\noffset_deg = -100\n", 17,
               "springs.pitch.offset_deg", {"small angles", "|offset| <= 90 degrees"});
  expect_error(base + "[springs.pitch]\nlaw = \"bilinear\"\ninner_stiffness = 1.0\nhalf_width_deg = 95\n",
               17, "springs.pitch.half_width_deg", {"small angles"});
  // Plunge gaps are lengths, with no such bound.
  CHECK_NOTHROW(test::case_from(base + "[springs.plunge]\nlaw = \"freeplay\"\nhalf_gap = 100.0\n"));
}

TEST_CASE("Messages show values as written and fit one screen", "[case][errors]") {
  // Shortest round-trip numbers, arrays on one line.
  expect_error(kSection + "cg = 0.0\n" + kFlow + kSim, 5, "section.cg_offset",
               {"key 'section.cg_offset' = 0.1: conflicts"});
  expect_error(kSection + kFlow + kSim + "[aerodynamics]\nwagner = \"custom\"\n"
                   "wagner_coefficients = [0.165, nan]\nwagner_exponents = [0.0455, 0.3]\n",
               16, "aerodynamics.wagner_coefficients", {"= [0.165, nan]: must hold finite numbers"});
  // An unknown table is matched against tables only (it was 'simulation.hold').
  {
    const InputError e = error_of(kSection + kFlow + kSim + "[springs.roll]\nlaw = \"cubic\"\n");
    CHECK(e.key() == "springs.roll");
    CHECK(e.problem() == "unknown key");
  }
  // A 5000-character key is shown shortened; wrapped() keeps every line
  // within 100 columns.
  const InputError e = error_of(kSection + std::string(5000, 'k') + " = 1.0\n" + kFlow + kSim);
  CHECK(e.key().size() == 5000 + 8);
  const std::string msg = e.what();
  CHECK(msg.size() < 300);
  CHECK_THAT(msg, Contains("key 'section.kkkk") && Contains("...' = 1.0: unknown key"));
  const std::string screen = wrapped(msg);
  std::size_t widest = 0, lines = 0;
  for (std::size_t at = 0; at <= screen.size(); ++lines) {
    const std::size_t nl = std::min(screen.find('\n', at), screen.size());
    widest = std::max(widest, nl - at);
    at = nl + 1;
  }
  CHECK(widest <= 100);
  CHECK(lines == 4);
  CHECK(wrapped("a b", 100) == "a b");
  CHECK(wrapped(std::string(60, 'x') + " " + std::string(60, 'y'), 100) ==
        std::string(60, 'x') + "\n    " + std::string(60, 'y'));
}

TEST_CASE("Every numeric case key has its units (README.md, case-file reference)", "[case]") {
  // The units of the README's reference tables (UDUNITS spelling: common
  // practice, no source); text keys and choices have none.
  const std::vector<std::string> text_keys = {
      "title", "description", "aerodynamics.model", "aerodynamics.wagner", "aerodynamics.kussner",
      "simulation.every_step", "simulation.stepper", "simulation.hold", "gust.shape", "gust.design",
      "gust.speed_condition", "gust.label", "gust.file", "gust.base", "gust.base_dataset",
      "gust.velocity_dataset", "gust.model", "gust.severity"};
  for (const std::string& key : known_case_keys()) {
    const bool text = std::find(text_keys.begin(), text_keys.end(), key) != text_keys.end() ||
                      key.ends_with(".law");
    INFO(key);
    CHECK(case_key_units(key).empty() == text);
  }
  CHECK(case_key_units("flow.airspeed") == "m s-1");
  CHECK(case_key_units("section.pitch_stiffness") == "N m rad-1 m-1");
  CHECK(case_key_units("springs.pitch.half_gap_deg") == "degree");
  CHECK(case_key_units("springs.plunge.half_gap") == "m");
  CHECK(case_key_units("springs.flap.inner_stiffness") == "N m rad-1 m-1");
  CHECK(case_key_units("springs.plunge.cubic_coefficient") == "m-2");
  CHECK(case_key_units("gust.2.amplitude") == "m s-1");
  CHECK(case_key_units("nondimensional.reduced_speed") == "1");
  CHECK(case_key_units("no.such_key").empty());
}

TEST_CASE("Overrides reach every gust table by its number (gust.K.KEY)", "[case][gust]") {
  // Common practice, no source: the documented override syntax gust.K.KEY
  // (README, "[[gust]]"), K counted from 1 in file order.
  const std::string gusts = kSection + kFlow + kSim +
                            "[[gust]]\nshape = \"sharp-edged\"\namplitude = 1.0\n"
                            "[[gust]]\nshape = \"sinusoidal\"\namplitude = 2.0\nfrequency_hz = 3.0\n";
  const Case c = parse_case(gusts, "g.toml", {"gust.2.amplitude=4.5", "gust.1.start=0.25"});
  REQUIRE(c.model.gusts.profiles().size() == 2);
  CHECK(c.model.gusts.profiles()[0].amplitude == 1.0);
  CHECK(c.model.gusts.profiles()[0].start == 0.25);
  CHECK(c.model.gusts.profiles()[1].amplitude == 4.5);
  // A value refused by the reader is located at the override that set it.
  {
    const InputError e = error_of(gusts, {"gust.2.amplitude=500"});
    CHECK(e.key() == "gust.amplitude");
    CHECK(e.where().file == "--set gust.2.amplitude=500");
  }
  // A table the case does not have: the message names the tables it has.
  {
    const InputError e = error_of(gusts, {"gust.3.amplitude=1"});
    CHECK(e.key() == "gust.3.amplitude");
    CHECK_THAT(std::string(e.what()), Contains("names [[gust]] table 3, which the case file does not have"));
    CHECK_THAT(std::string(e.what()), Contains("gust.1.KEY to gust.2.KEY"));
  }
  {
    const InputError e = error_of(kSection + kFlow + kSim, {"gust.1.amplitude=1"});
    CHECK_THAT(std::string(e.what()), Contains("the case file has no [[gust]] table"));
  }
  CHECK_THAT(std::string(error_of(gusts, {"gust.0.amplitude=1"}).what()), Contains("does not have"));
  // No number: which table is meant is not said.
  CHECK_THAT(std::string(error_of(gusts, {"gust.amplitude=1"}).what()),
             Contains("does not say which [[gust]] table it sets"));
  // A key no [[gust]] table has, with a hint.
  CHECK_THAT(std::string(error_of(gusts, {"gust.1.amplitud=1"}).what()), Contains("did you mean 'gust.1.amplitude'"));
}

TEST_CASE("A clash of two keys blames the one given last or by --set", "[case][errors]") {
  // This project's messages (common practice, no source): r_alpha > |x_alpha|
  // (theory sheet, section 1) involves two keys; the message names the one
  // the user changed (a --set override, else the later line) and the other.
  const std::string nd = test::benchmark_2dof("[simulation]\nduration = 1.0\n");
  const InputError a = error_of(nd, {"nondimensional.cg_offset=0.6"});
  CHECK(a.key() == "nondimensional.cg_offset");
  CHECK(a.where().file == "--set nondimensional.cg_offset=0.6");
  CHECK_THAT(std::string(a.what()), Contains("with 'nondimensional.radius_of_gyration'"));
  const InputError b = error_of(nd, {"nondimensional.radius_of_gyration=0.2"});
  CHECK(b.key() == "nondimensional.radius_of_gyration");
  CHECK_THAT(std::string(b.what()), Contains("with 'nondimensional.cg_offset'"));
  // --vary's values are checked as overrides but named as --vary (sweep.cpp);
  // a [flow] table made by --set in a nondimensional case is said to be so.
  const InputError c = error_of(nd, {"flow.airspeed=30"});
  CHECK_THAT(std::string(c.what()), Contains("conflicts with [flow] given by a --set override"));
  // A key holding the typed leaf whole is suggested in its own table.
  CHECK_THAT(std::string(error_of(nd, {"flow.speed=30"}).what()), Contains("did you mean 'flow.airspeed'"));
}

TEST_CASE("The [steady] condition: keys, SI values and refusals", "[case][steady]") {
  // This project's rules (README, "[steady]"; common practice, no source).
  const Case c = parse_case(kSection + kFlapTable + kFlow + kSim +
                                "[steady]\nincidence_deg = 2.0\nhinge_moment = -0.25\ngravity = 9.80665\n",
                            "ok.toml");
  CHECK(c.model.steady.incidence == Approx(2.0 * std::numbers::pi / 180).epsilon(1e-15));
  CHECK(c.model.steady.hinge_moment == -0.25);
  CHECK(c.model.steady.gravity == 9.80665);
  CHECK(c.simulation.steady_lag_states);  // the default with a steady condition
  CHECK_FALSE(parse_case(kSection + kFlow + kSim, "ok.toml").simulation.steady_lag_states);
  CHECK_FALSE(parse_case(kSection + kFlow + kSim + "[steady]\nincidence_deg = 1.0\n[initial]\nlag_states = \"rest\"\n",
                         "ok.toml")
                  .simulation.steady_lag_states);
  // Line numbers: kSection is 8 lines, kFlow 3, kSim 2, kFlapTable 5.
  expect_error(kSection + kFlow + kSim + "[steady]\nincidence_deg = 25.0\n", 15, "steady.incidence_deg",
               {"= 25.0", "beyond the theory's attached flow", "|incidence| <= 20 degrees"});
  expect_error(kSection + kFlow + kSim + "[steady]\nflap_trim_deg = 1.0\n", 15, "steady.flap_trim_deg",
               {"needs a flap", "3-DOF"});
  expect_error(kSection + kFlow + kSim + "[steady]\nhinge_moment = 1.0\n", 15, "steady.hinge_moment",
               {"needs a flap"});
  expect_error(kSection + kFlapTable + kFlow + kSim + "[steady]\nflap_trim_deg = 1.0\nhinge_moment = 1.0\n", 21,
               "steady.hinge_moment", {"conflicts with 'steady.flap_trim_deg'"});
  expect_error(kSection + kFlow + kSim + "[steady]\ngravity = 200.0\n", 15, "steady.gravity",
               {"= 200.0", "beyond any flight load", "m/s^2"});
  expect_error(kSection + kFlow + kSim + "[steady]\ngravity = nan\n", 15, "steady.gravity", {"must be finite"});
  expect_error(kSection + kFlow + kSim + "[steady]\nincidence = 2.0\n", 15, "steady.incidence",
               {"did you mean 'steady.incidence_deg'"});
}
