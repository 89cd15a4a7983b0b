#include <catch2/catch.hpp>

#include <cmath>
#include <string>
#include <vector>

#include <Eigen/Eigenvalues>
#include <fmt/format.h>

#include "aerosect/analysis/describing_function.hpp"
#include "aerosect/analysis/flutter.hpp"
#include "aerosect/analysis/preload.hpp"
#include "aerosect/analysis/root_tracking.hpp"
#include "aerosect/analysis/sweep.hpp"
#include "aerosect/units.hpp"
#include "helpers.hpp"

using namespace aerosect;

namespace {

// The sweep request of a map: the case's text and overrides, nothing else.
SweepRequest base_request(const Case& c) {
  SweepRequest r;
  r.case_text = c.text;
  r.case_path = c.path;
  r.overrides = c.overrides;
  r.options.jobs = 2;
  return r;
}

// True when the linearisation with every gap open has a growing root at
// the case's airspeed (the rest in the gap is unstable).
bool gap_open_unstable(const Case& c) {
  DofVector k(c.model.section.dof);
  for (int j = 0; j < k.size(); ++j) k(j) = c.model.springs[static_cast<std::size_t>(j)].gap_open_stiffness();
  const AeroelasticModel m = stability_model(c.model);
  return any_growing(Eigen::EigenSolver<Eigen::MatrixXd>(m.state_matrix(k), false).eigenvalues());
}

// Two checks of a map that do not come from the map itself (common
// practice, no source):
// - a surface whose equilibrium lies in its gap, where the gap-open
//   linearisation is unstable, cannot come to rest: the motion grows until
//   the stops bound it, so every level below the one that brings it onto a
//   stop has an LCO;
// - the hold-off criterion: once the steady contact load exceeds the
//   oscillating spring force of the unloaded LCO, the cycle's dynamic load
//   cannot take the surface off its stop, so no level at or above the
//   hold-off level has an LCO.
void check_against_criteria(const Case& c, const PreloadMap& m) {
  REQUIRE(m.available);
  const bool open_unstable = gap_open_unstable(c);
  for (std::size_t i = 0; i < m.levels.size(); ++i) {
    const double level = std::abs(m.levels[i]);
    CAPTURE(m.levels[i], m.lco[i], m.contact_level, m.hold_off_level);
    if (open_unstable && level < m.contact_level && !m.against_stop[i]) CHECK(m.lco[i]);
    if (std::isfinite(m.hold_off_level) && level >= m.hold_off_level) CHECK_FALSE(m.lco[i]);
    // The equilibrium of a level past the contact level lies on a stop.
    if (level > m.contact_level * (1 + 1e-6)) CHECK(m.against_stop[i]);
  }
}

}  // namespace

TEST_CASE("Preload map of the trimmed demo where its flap oscillates through the gap", "[preload]") {
  // The shipped trimmed demo at 27 m/s: the trim loads leave the aileron in
  // its gap (+0.2 deg), and the gap-open section is unstable there, so the
  // unloaded flap keeps oscillating; an applied hinge moment (trailing edge
  // down, towards the nearer, upper stop) moves it onto the stop.
  const Case c = load_case(std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron_trimmed.toml",
                           {"flow.airspeed=27", "simulation.duration=60"});
  const PreloadHold h = preload_hold(c);
  REQUIRE(h.applicable);
  CHECK(h.steady_condition);
  CHECK(h.spring == kFlap);
  CHECK(h.region == "gap");
  CHECK_FALSE(h.against_stop);
  CHECK_FALSE(h.held);
  const PreloadMap m = preload_map(c, base_request(c));
  CHECK(m.key == "steady.hinge_moment");
  CHECK(m.direction == 1.0);
  REQUIRE(std::isfinite(m.hold_off_level));
  CHECK(m.hold_off_level >= m.contact_level);
  check_against_criteria(c, m);
  // Measured (Release build): LCO up to 0.1231 N m/m, none from 0.1641;
  // the flap reaches its stop at 0.1592 and the hold-off estimate is 0.2051.
  REQUIRE(m.outcome == PreloadOutcome::kBracketed);
  CHECK(m.bracket_low < m.hold_off_level);
  CHECK_THAT(m.verdict, Catch::Contains("disappears between"));
  // The dual-input describing function (Gelb & Vander Velde 1968, bias plus
  // sinusoid; an independent method: no time march) at the bracket's two
  // levels: a stable LCO predicted at 27 m/s at the lower level, none at
  // the upper one (measured: its stable range starts at 27.06 m/s at
  // 0.1641 N m/m, and at 27.003 m/s at 0.1592).
  auto stable_at_case_speed = [&](double level) {
    const Case cl = load_case(std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron_trimmed.toml",
                              {"flow.airspeed=27", fmt::format("steady.hinge_moment={:.17g}", level)});
    std::vector<double> speeds;
    for (int i = 1; i <= 200; ++i) speeds.push_back(40.0 * i / 200);
    const LcoPrediction p = describing_function_lco(cl, speeds);
    REQUIRE(p.biased);
    for (const LcoBranch& b : p.branches)
      for (const auto& [lo, hi] : stable_speed_ranges(p, b))
        if (lo <= 27.0 && hi >= 27.0) return true;
    return false;
  };
  CHECK(stable_at_case_speed(m.bracket_low));
  CHECK_FALSE(stable_at_case_speed(m.bracket_high));
}

TEST_CASE("The trimmed demo at its own airspeed is held against its stop", "[preload]") {
  // At 60 m/s the trim loads press the aileron on its lower stop (contact
  // load about -1.01 N m/m, README) and the gap-closed section is stable
  // there (its flutter speed is 94 m/s); the gap-open section is stable at
  // 60 m/s too (its instability ends near 30 m/s), so no level of preload
  // gives an LCO. The hinge moment sweeps downwards (towards the stop it is on).
  const Case c = load_case(std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron_trimmed.toml",
                           {"simulation.duration=30"});
  const PreloadHold h = preload_hold(c);
  REQUIRE(h.applicable);
  CHECK(h.region == "lower stop");
  CHECK(h.against_stop);
  CHECK(h.linearisation_stable);
  CHECK(h.held);
  CHECK(h.spring_force == Approx(-1.01).margin(0.01));
  CHECK_FALSE(gap_open_unstable(c));
  const PreloadMap m = preload_map(c, base_request(c));
  REQUIRE(m.available);
  CHECK(m.direction == -1.0);
  CHECK(m.contact_level == 0.0);
  check_against_criteria(c, m);
  CHECK(m.outcome == PreloadOutcome::kNone);
  CHECK_THAT(m.verdict, Catch::Contains("no LCO at any level"));
}

TEST_CASE("Preload map of a 2-DOF section with pitch freeplay, by incidence", "[preload]") {
  // A case the map was not written for: the nonlinear-aerofoil benchmark's
  // section (Lee, Price & Wong 1999, numbers as in helpers.hpp) with the
  // elastic axis moved ahead of the quarter chord (a = -0.6, so the steady
  // lift pitches the nose down about it), pitch freeplay of 0.5 deg half-gap,
  // no [steady] condition, at U* = 4 (between its gap-open and gap-closed
  // flutter speeds, U* 0.94 and 7.7). The preload key is the incidence; a
  // positive incidence moves the pitch down, so the map sweeps it towards
  // the stop the unloaded section is (equally) near to: the upper one,
  // with negative incidence.
  const Case c = test::case_from(
      "[nondimensional]\nmass_ratio = 100.0\nelastic_axis = -0.6\ncg_offset = 0.25\n"
      "radius_of_gyration = 0.5\nfrequency_ratio = 0.2\nreduced_speed = 4.0\n"
      "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n[initial]\npitch_deg = 2.0\n"
      "[simulation]\nduration_semichords = 3000\n");
  const PreloadHold h = preload_hold(c);
  REQUIRE(h.applicable);
  CHECK_FALSE(h.steady_condition);
  CHECK(h.spring == kPitch);
  CHECK_FALSE(h.held);
  const PreloadMap m = preload_map(c, base_request(c));
  REQUIRE(m.available);
  CHECK(m.key == "steady.incidence_deg");
  CHECK(m.direction == -1.0);
  REQUIRE(m.lco.size() == 11);
  CHECK(m.lco.front());  // the unloaded section has its freeplay LCO
  check_against_criteria(c, m);
}

TEST_CASE("A preload map needs one gap law", "[preload]") {
  // Common practice, no source: a cubic spring has no stop to be held on.
  const Case c = test::case_from(test::benchmark_2dof(
      "[springs.pitch]\nlaw = \"cubic\"\ncubic_coefficient = 3.0\n[simulation]\nduration = 1\n"));
  CHECK_FALSE(preload_hold(c).applicable);
  const PreloadMap m = preload_map(c, base_request(c));
  CHECK_FALSE(m.available);
  CHECK_THAT(m.reason, Catch::Contains("no gap"));
}
