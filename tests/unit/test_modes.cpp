#include <catch2/catch.hpp>

#include <cmath>
#include <numbers>

#include "aerosect/analysis/modes.hpp"
#include "helpers.hpp"

using namespace aerosect;

TEST_CASE("In-vacuo frequencies against the closed-form 2x2 eigenproblem", "[modes]") {
  // det(K - w^2 M) = 0 for M = [[m, S], [S, I]], K = diag(Kh, Ka):
  // (m I - S^2) w^4 - (m Ka + I Kh) w^2 + Kh Ka = 0 (common practice, no source).
  const Case c = test::case_from(test::benchmark_2dof("[simulation]\nduration = 1.0\n"));
  const SectionProperties& s = c.model.section;
  const double A = s.mass * s.pitch_inertia - s.static_unbalance * s.static_unbalance;
  const double B = -(s.mass * s.pitch_stiffness + s.pitch_inertia * s.plunge_stiffness);
  const double C = s.plunge_stiffness * s.pitch_stiffness;
  const double disc = std::sqrt(B * B - 4 * A * C);
  const double w1 = std::sqrt((-B - disc) / (2 * A)), w2 = std::sqrt((-B + disc) / (2 * A));
  const auto modes = in_vacuo_modes(s);
  REQUIRE(modes.size() == 2);
  CHECK(modes[0].frequency == Approx(w1).epsilon(1e-12));
  CHECK(modes[1].frequency == Approx(w2).epsilon(1e-12));
  CHECK(modes[0].dominant_dof == kPlunge);
  CHECK(modes[1].dominant_dof == kPitch);
}

TEST_CASE("Divergence speed against the closed form", "[modes]") {
  // Thin-aerofoil quasi-steady divergence (theory sheet, section 4):
  // U_D / (b omega_alpha) = r_alpha sqrt(mu / (1 + 2a)).
  for (double a : {-0.4, -0.2, 0.0, 0.3}) {
    const std::string text =
        "[nondimensional]\nmass_ratio = 20\nelastic_axis = " + std::to_string(a) +
        "\ncg_offset = 0.1\nradius_of_gyration = 0.49\nfrequency_ratio = 0.4\nreduced_speed = 1\n"
        "[simulation]\nduration = 1.0\n";
    const Case c = test::case_from(text);
    const Divergence d = divergence(c.model.section, c.model.flow.density);
    REQUIRE(d.exists);
    const double b_wa = c.model.section.semichord * c.nondimensional.reference.pitch_frequency;
    CHECK(d.speed / b_wa == Approx(0.49 * std::sqrt(20 / (1 + 2 * a))).epsilon(1e-12));
  }
  // Hodges & Pierce, Introduction to Structural Dynamics and Aeroelasticity,
  // ch. 5 (values as transcribed in the theory sheet): a = -1/5, mu = 20,
  // r^2 = 6/25: U_D / (b omega_theta) = 2.828.
  const Case hp = test::case_from(
      "[nondimensional]\nmass_ratio = 20\nelastic_axis = -0.2\ncg_offset = 0.1\n"
      "radius_of_gyration = " + std::to_string(std::sqrt(6.0 / 25.0)) +
      "\nfrequency_ratio = 0.4\nreduced_speed = 1\n[simulation]\nduration = 1.0\n");
  const Divergence d = divergence(hp.model.section, hp.model.flow.density);
  CHECK(d.speed / (hp.model.section.semichord * hp.nondimensional.reference.pitch_frequency) ==
        Approx(2.828).epsilon(2e-4));
  // Elastic axis at the quarter chord: lift produces no moment, no divergence.
  const Case qc = test::case_from(test::benchmark_2dof("[simulation]\nduration = 1.0\n"));
  CHECK_FALSE(divergence(qc.model.section, qc.model.flow.density).exists);
}

TEST_CASE("A very stiff flap leaves the 2-DOF divergence speed", "[modes]") {
  // Theory sheet self-check: K_beta -> infinity reproduces the 2-DOF result.
  const std::string base =
      "[nondimensional]\nmass_ratio = 20\nelastic_axis = -0.2\ncg_offset = 0.1\n"
      "radius_of_gyration = 0.49\nfrequency_ratio = 0.4\nreduced_speed = 1\n";
  const Case two = test::case_from(base + "[simulation]\nduration = 1.0\n");
  const Case three = test::case_from(base +
                                     "hinge = 0.6\nflap_radius_of_gyration = 0.05\n"
                                     "flap_frequency_ratio = 1000\n[simulation]\nduration = 1.0\n");
  const double d2 = divergence(two.model.section, two.model.flow.density).speed;
  const double d3 = divergence(three.model.section, three.model.flow.density).speed;
  CHECK(d3 == Approx(d2).epsilon(1e-3));
}
