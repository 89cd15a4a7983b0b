#include <catch2/catch.hpp>

#include <cmath>
#include <numbers>

#include <Eigen/LU>

#include "aerosect/model/aerodynamics.hpp"

using namespace aerosect;
using std::numbers::pi;

namespace {
SectionProperties flapped_section(double a, double c) {
  SectionProperties s;
  s.dof = 3;
  s.semichord = 0.5;
  s.mass = 10;
  s.elastic_axis = a;
  s.static_unbalance = 0.5;
  s.pitch_inertia = 1.0;
  s.hinge = c;
  s.flap_static_unbalance = 0.02;
  s.flap_inertia = 0.01;
  return s;
}
}  // namespace

TEST_CASE("Apparent-mass matrix is symmetric", "[aerodynamics]") {
  // Theodorsen 1935 (NACA Report 496): the noncirculatory inertia terms
  // derive from a kinetic energy, so the matrix must be symmetric.
  for (double a : {-0.6, -0.2, 0.1}) {
    for (double c : {0.2, 0.5, 0.8}) {
      const AeroMatrices m = theodorsen_matrices(flapped_section(a, c), {1.225, 50.0},
                                                 AeroModel::kWagner);
      const DofMatrix& Ma = m.apparent_mass;
      CHECK(Ma(0, 1) == Approx(Ma(1, 0)).epsilon(1e-14));
      CHECK(Ma(0, 2) == Approx(Ma(2, 0)).epsilon(1e-14));
      CHECK(Ma(1, 2) == Approx(Ma(2, 1)).epsilon(1e-14));
      // Positive definite: the displaced air has positive kinetic energy.
      CHECK(Ma.determinant() > 0);
      CHECK(Ma(2, 2) > 0);
    }
  }
}

TEST_CASE("Flap terms vanish as the hinge goes to the trailing edge", "[aerodynamics]") {
  // NACA Report 496: every T function is zero at c = 1 (a flap of zero chord).
  double previous = 1e300;
  for (double gap : {1e-2, 1e-4, 1e-6}) {
    const double c = 1.0 - gap;
    const AeroMatrices m = theodorsen_matrices(flapped_section(-0.3, c), {1.225, 50.0},
                                               AeroModel::kWagner);
    double largest = 0;
    for (int k = 0; k < 3; ++k) {
      largest = std::max({largest, std::abs(m.apparent_mass(k, 2)), std::abs(m.damping(k, 2)),
                          std::abs(m.damping(2, k)), std::abs(m.stiffness(k, 2))});
    }
    largest = std::max({largest, std::abs(m.circulation_force(2)),
                        std::abs(m.downwash_displacement(2)), std::abs(m.downwash_rate(2))});
    CHECK(largest < previous);
    previous = largest;
  }
  // T10 = sqrt(1 - c^2) + acos(c) ~ 2 sqrt(2 (1 - c)) is the slowest of the
  // T functions; scaled by rho b^2 U^2 the largest flap term is then ~3e-3.
  const double scale = 1.225 * 0.5 * 0.5 * 50.0 * 50.0;
  CHECK(previous / scale < 4e-3);
  const FlapFunctions T = flap_functions(1.0, -0.3);
  for (int i : {1, 3, 4, 5, 7, 8, 10, 11, 12}) CHECK(std::abs(T[i]) < 1e-14);
}

TEST_CASE("Hinge at the leading edge with the axis there: flap rows equal pitch rows",
          "[aerodynamics]") {
  // NACA Report 496 self-check (theory sheet, section 2): with c = -1 and
  // a = -1 a flap rotation is a rotation of the whole aerofoil about the
  // leading edge, so the flap terms reproduce the pitch terms.
  const double c = -1.0, a = -1.0;
  const AeroMatrices m = theodorsen_matrices(flapped_section(a, c), {1.225, 40.0},
                                             AeroModel::kWagner);
  for (int k = 0; k < 3; ++k) {
    CHECK(m.apparent_mass(2, k) == Approx(m.apparent_mass(1, k)).epsilon(1e-12));
    CHECK(m.apparent_mass(k, 2) == Approx(m.apparent_mass(k, 1)).epsilon(1e-12));
  }
  CHECK(m.circulation_force(2) == Approx(m.circulation_force(1)).epsilon(1e-12));
  CHECK(m.downwash_displacement(2) == Approx(m.downwash_displacement(1)).epsilon(1e-12));
  CHECK(m.downwash_rate(2) == Approx(m.downwash_rate(1)).epsilon(1e-12));
  for (int k = 0; k < 3; ++k) {
    CHECK(m.damping(2, k) == Approx(m.damping(1, k)).epsilon(1e-12));
    CHECK(m.damping(k, 2) == Approx(m.damping(k, 1)).epsilon(1e-12));
    CHECK(m.stiffness(2, k) == Approx(m.stiffness(1, k)).margin(1e-9));
  }
}

TEST_CASE("2-DOF Theodorsen coefficients by hand", "[aerodynamics]") {
  // Theory sheet section 2 (NACA Report 496), written out for a = -0.5:
  // L = pi rho b^2 (h'' + U alpha' - b a alpha'') + 2 pi rho U b C Q,
  // Q = U alpha + h' + b (1/2 - a) alpha'.
  SectionProperties s;
  s.semichord = 0.5;
  s.elastic_axis = -0.5;
  const double rho = 1.2, U = 30, b = 0.5, a = -0.5;
  const AeroMatrices m = theodorsen_matrices(s, {rho, U}, AeroModel::kWagner);
  CHECK(m.apparent_mass(0, 0) == Approx(pi * rho * b * b));
  CHECK(m.apparent_mass(0, 1) == Approx(-pi * rho * b * b * b * a));
  CHECK(m.apparent_mass(1, 1) == Approx(pi * rho * b * b * b * b * (0.125 + a * a)));
  CHECK(m.damping(0, 1) == Approx(pi * rho * b * b * U));
  CHECK(m.damping(1, 1) == Approx(pi * rho * b * b * U * b * (0.5 - a)));
  CHECK(m.circulation_force(0) == Approx(-2 * pi * rho * U * b));
  CHECK(m.circulation_force(1) == Approx(0.0).margin(1e-12));  // a = -1/2: lift at the axis
  CHECK(m.downwash_rate(1) == Approx(b * (0.5 - a)));
  const AeroMatrices st = theodorsen_matrices(s, {rho, U}, AeroModel::kSteady);
  CHECK(st.apparent_mass.norm() == 0.0);
  CHECK(st.damping.norm() == 0.0);
  CHECK(st.downwash_rate.norm() == 0.0);
}

TEST_CASE("R. T. Jones' Wagner approximation against exact Wagner values", "[aerodynamics]") {
  // Jones' coefficients (0.165, 0.335; 0.0455, 0.3) and the exact Wagner
  // function values of the theory sheet (phi(0) = 0.5, phi(1) = 0.6006,
  // phi(4) = 0.7580, phi(10) = 0.8750, phi(20) = 0.9366). The approximation's
  // error is about 1 % at s = 1 and below 0.5 % beyond; 1.2 % is allowed.
  const WagnerApproximation w = WagnerApproximation::jones();
  CHECK(w.initial_value() == Approx(0.5).epsilon(1e-15));
  CHECK(w(0.0) == Approx(0.5).epsilon(1e-15));
  CHECK(w(1.0) == Approx(0.6006).epsilon(0.012));
  CHECK(w(4.0) == Approx(0.7580).epsilon(0.006));
  CHECK(w(10.0) == Approx(0.8750).epsilon(0.006));
  CHECK(w(20.0) == Approx(0.9366).epsilon(0.006));
  CHECK(w(1e6) == Approx(1.0).epsilon(1e-15));
}
