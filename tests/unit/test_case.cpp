// Case-file reading: every validation error names the file, the line, the
// key and what is allowed. Expected messages are this project's own wording
// (common practice for input validation, no outside source); the physical
// limits they enforce cite their source where they have one.
#include <catch2/catch.hpp>

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
