#include "aerosect/model/aerodynamics.hpp"

#include <cmath>
#include <numbers>

namespace aerosect {

using std::numbers::pi;

FlapFunctions flap_functions(double c, double a) {
  FlapFunctions f;
  double* T = f.T;
  const double r = std::sqrt(std::max(0.0, 1.0 - c * c));
  const double A = std::acos(c);
  T[1] = -r * (2.0 + c * c) / 3.0 + c * A;
  T[3] = -(0.125 + c * c) * A * A + 0.25 * c * r * A * (7.0 + 2.0 * c * c) -
         0.125 * (1.0 - c * c) * (5.0 * c * c + 4.0);
  T[4] = -A + c * r;
  T[5] = -(1.0 - c * c) - A * A + 2.0 * c * r * A;
  T[7] = -(0.125 + c * c) * A + 0.125 * c * r * (7.0 + 2.0 * c * c);
  T[8] = -r * (2.0 * c * c + 1.0) / 3.0 + c * A;
  T[9] = 0.5 * (r * r * r / 3.0 + a * T[4]);
  T[10] = r + A;
  T[11] = (1.0 - 2.0 * c) * A + r * (2.0 - c);
  T[12] = r * (2.0 + c) - (2.0 * c + 1.0) * A;
  T[13] = 0.5 * (-T[7] - (c - a) * T[1]);
  return f;
}

WagnerApproximation WagnerApproximation::jones() { return {{0.165, 0.335}, {0.0455, 0.3}}; }

double WagnerApproximation::initial_value() const {
  double s = 1.0;
  for (double c : coefficients) s -= c;
  return s;
}

double WagnerApproximation::operator()(double s) const {
  double v = 1.0;
  for (std::size_t i = 0; i < coefficients.size(); ++i)
    v -= coefficients[i] * std::exp(-exponents[i] * s);
  return v;
}

const char* to_string(AeroModel m) {
  switch (m) {
    case AeroModel::kWagner: return "wagner";
    case AeroModel::kQuasiSteady: return "quasi-steady";
    case AeroModel::kSteady: return "steady";
  }
  return "?";
}

AeroMatrices theodorsen_matrices(const SectionProperties& s, const FlowConditions& f,
                                 AeroModel model) {
  const int n = s.dof;
  AeroMatrices m;
  m.apparent_mass = DofMatrix::Zero(n, n);
  m.damping = DofMatrix::Zero(n, n);
  m.stiffness = DofMatrix::Zero(n, n);
  m.circulation_force = DofVector::Zero(n);
  m.downwash_displacement = DofVector::Zero(n);
  m.downwash_rate = DofVector::Zero(n);
  const double rho = f.density, U = f.airspeed, b = s.semichord, a = s.elastic_axis;
  if (rho <= 0.0) return m;

  // Circulatory force per unit effective downwash, and the 3/4-chord downwash.
  const double circ = 2.0 * pi * rho * U * b;
  m.circulation_force(0) = -circ;
  m.circulation_force(1) = circ * b * (a + 0.5);
  m.downwash_displacement(1) = U;
  m.downwash_rate(0) = 1.0;
  m.downwash_rate(1) = b * (0.5 - a);
  FlapFunctions T;
  if (n == 3) {
    T = flap_functions(s.hinge, a);
    m.circulation_force(2) = -circ * b * T[12] / (2.0 * pi);
    m.downwash_displacement(2) = U * T[10] / pi;
    m.downwash_rate(2) = b * T[11] / (2.0 * pi);
  }

  // Noncirculatory U^2 flap stiffness (kept by every model).
  const double rb2 = rho * b * b;
  if (n == 3) {
    m.stiffness(1, 2) = rb2 * U * U * (T[4] + T[10]);
    m.stiffness(2, 2) = rb2 * U * U * (T[5] - T[4] * T[10]) / pi;
  }
  if (model == AeroModel::kSteady) {
    m.downwash_rate.setZero();
    return m;
  }

  // Apparent mass (symmetric).
  const double prb2 = pi * rb2;
  m.apparent_mass(0, 0) = prb2;
  m.apparent_mass(0, 1) = m.apparent_mass(1, 0) = -prb2 * b * a;
  m.apparent_mass(1, 1) = prb2 * b * b * (0.125 + a * a);
  // Noncirculatory damping.
  m.damping(0, 1) = prb2 * U;
  m.damping(1, 1) = prb2 * U * b * (0.5 - a);
  if (n == 3) {
    const double c = s.hinge;
    m.apparent_mass(0, 2) = m.apparent_mass(2, 0) = -rb2 * b * T[1];
    m.apparent_mass(1, 2) = m.apparent_mass(2, 1) = -rb2 * b * b * (T[7] + (c - a) * T[1]);
    m.apparent_mass(2, 2) = -rb2 * b * b * T[3] / pi;
    m.damping(0, 2) = -rb2 * U * T[4];
    m.damping(1, 2) = rb2 * U * b * (T[1] - T[8] - (c - a) * T[4] + 0.5 * T[11]);
    m.damping(2, 1) = rb2 * U * b * (-2.0 * T[9] - T[1] + T[4] * (a - 0.5));
    m.damping(2, 2) = -rb2 * U * b * T[4] * T[11] / (2.0 * pi);
  }
  return m;
}

}  // namespace aerosect
