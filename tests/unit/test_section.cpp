#include <catch2/catch.hpp>

#include <cmath>
#include <numbers>

#include "aerosect/model/section.hpp"
#include "helpers.hpp"

using namespace aerosect;
using std::numbers::pi;

TEST_CASE("2-DOF mass matrix and the parallel-axis theorem", "[section]") {
  // Hand calculation (common practice, no source): m = 10 kg/m, b = 0.5 m,
  // a = -0.2, CG at +0.1 (x_alpha = 0.3), I_cg = 0.4 kg m^2/m:
  // S_alpha = m x_alpha b = 1.5; I_alpha = I_cg + m (x_alpha b)^2 = 0.4 + 0.225.
  const Case c = test::case_from(R"(
[section]
semichord = 0.5
mass = 10.0
elastic_axis = -0.2
cg = 0.1
pitch_inertia_cg = 0.4
plunge_stiffness = 1000.0
pitch_stiffness = 500.0
[flow]
density = 1.225
airspeed = 10.0
[simulation]
duration = 1.0
)");
  const DofMatrix M = structural_mass(c.model.section);
  REQUIRE(M.rows() == 2);
  CHECK(M(0, 0) == Approx(10.0).epsilon(1e-15));
  CHECK(M(0, 1) == Approx(1.5).epsilon(1e-14));
  CHECK(M(1, 0) == Approx(1.5).epsilon(1e-14));
  CHECK(M(1, 1) == Approx(0.625).epsilon(1e-14));
  CHECK(c.nondimensional.cg_offset == Approx(0.3).epsilon(1e-14));
  CHECK(c.nondimensional.radius_of_gyration == Approx(std::sqrt(0.625 / (10 * 0.25))).epsilon(1e-14));
}

TEST_CASE("3-DOF mass matrix coupling term", "[section]") {
  // Hand calculation from the kinetic energy (common practice; the matrix of
  // the theory sheet): M(alpha, beta) = I_beta + b (c - a) S_beta.
  SectionProperties s;
  s.dof = 3;
  s.semichord = 0.4;
  s.mass = 8.0;
  s.elastic_axis = -0.3;
  s.static_unbalance = 0.2;
  s.pitch_inertia = 0.5;
  s.hinge = 0.6;
  s.flap_static_unbalance = 0.05;
  s.flap_inertia = 0.01;
  const DofMatrix M = structural_mass(s);
  CHECK(M(0, 2) == Approx(0.05));
  CHECK(M(1, 2) == Approx(0.01 + 0.4 * 0.9 * 0.05).epsilon(1e-14));
  CHECK(M(2, 1) == M(1, 2));
  CHECK(M(2, 2) == Approx(0.01));
}

TEST_CASE("Nondimensional and SI forms convert both ways", "[section]") {
  // Common practice, no source: the definitions of mu, x_alpha, r_alpha,
  // omega_bar and U* applied forward and back reproduce the inputs.
  NondimensionalParameters n;
  n.dof = 3;
  n.mass_ratio = 40;
  n.elastic_axis = -0.4;
  n.cg_offset = 0.2;
  n.radius_of_gyration = 0.5;
  n.frequency_ratio = 0.3;
  n.reduced_speed = 3.5;
  n.hinge = 0.6;
  n.flap_cg_offset = 0.0125;
  n.flap_radius_of_gyration = 0.0791;
  n.flap_frequency_ratio = 1.5;
  n.reference = {0.3, 2 * pi * 8.0, 0.9};
  SectionProperties s;
  FlowConditions f;
  from_nondimensional(n, s, f);
  CHECK(s.mass == Approx(40 * pi * 0.9 * 0.09).epsilon(1e-14));
  CHECK(f.airspeed == Approx(3.5 * 0.3 * 2 * pi * 8.0).epsilon(1e-14));
  const NondimensionalParameters back = to_nondimensional(s, f);
  CHECK(back.mass_ratio == Approx(n.mass_ratio).epsilon(1e-13));
  CHECK(back.cg_offset == Approx(n.cg_offset).epsilon(1e-13));
  CHECK(back.radius_of_gyration == Approx(n.radius_of_gyration).epsilon(1e-13));
  CHECK(back.frequency_ratio == Approx(n.frequency_ratio).epsilon(1e-13));
  CHECK(back.reduced_speed == Approx(n.reduced_speed).epsilon(1e-13));
  CHECK(back.flap_cg_offset == Approx(n.flap_cg_offset).epsilon(1e-13));
  CHECK(back.flap_radius_of_gyration == Approx(n.flap_radius_of_gyration).epsilon(1e-13));
  CHECK(back.flap_frequency_ratio == Approx(n.flap_frequency_ratio).epsilon(1e-13));
}

TEST_CASE("Damping coefficients from damping ratios", "[section]") {
  // Common practice, no source: c = 2 zeta sqrt(k m) for an uncoupled DOF.
  SectionProperties s;
  s.semichord = 1;
  s.mass = 4;
  s.pitch_inertia = 1;
  s.plunge_stiffness = 100;
  s.pitch_stiffness = 25;
  s.plunge_damping_ratio = 0.05;
  s.pitch_damping_ratio = 0.1;
  const DofMatrix C = structural_damping(s);
  CHECK(C(0, 0) == Approx(2 * 0.05 * 20.0));
  CHECK(C(1, 1) == Approx(2 * 0.1 * 5.0));
  CHECK(C(0, 1) == 0.0);
}
