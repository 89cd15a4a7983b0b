#pragma once
// Theodorsen's unsteady thin-aerofoil theory for a typical section with a
// trailing-edge flap (Theodorsen 1935, NACA Report 496), written in the
// time domain with Wagner lag states.
//
// Signs: lift L positive UP, pitching moment M_alpha about the elastic axis
// positive NOSE UP, hinge moment M_beta positive TRAILING EDGE DOWN. The
// generalised aerodynamic force on q = (h, alpha, beta) is
//   F = (-L, M_alpha, M_beta)   (h is positive down).
// Per unit span: L in N/m, moments in N m/m.
//
// Split into a noncirculatory (apparent-mass) part and a circulatory part:
//   F = -M_a q'' - C_a q' - K_a q + f_c w_c
// with
//   Q   = d_q . q + d_v . q'         3/4-chord downwash, m/s:
//         Q = U alpha + h' + b(1/2 - a) alpha' + (U/pi) T10 beta + (b/2pi) T11 beta'
//   w_c = effective (lagged) downwash, m/s: C(k) Q in the frequency domain;
//         in the time domain, with Wagner's function
//         phi(s) = 1 - sum_i psi_i exp(-eps_i s)  (s = U t / b, semichords),
//         w_c = phi(0) Q + sum_i psi_i y_i,   y_i' = (U/b) eps_i (Q - y_i)
//         (the Duhamel integral integrated by parts; y_i in m/s; y_i = Q in
//         steady flow, so w_c = Q there).
//   f_c = 2 pi rho U b (-1, b(a + 1/2), -b T12 / (2 pi))   [N/m per m/s]
// M_a (symmetric, constant), C_a (proportional to U) and K_a (to U^2) are the
// apparent-mass terms of NACA Report 496 with T1..T13 of the hinge c.
//
// Models:
//   kWagner      full theory, Wagner lag states (R. T. Jones two-pole default:
//                psi = (0.165, 0.335), eps = (0.0455, 0.3))
//   kQuasiSteady full noncirculatory terms, C(k) = 1 (w_c = Q, no lag states)
//   kSteady      no apparent mass or damping: Q = d_q . q only, C(k) = 1;
//                the U^2 flap stiffness terms K_a are kept (static effects)

#include <string>
#include <vector>

#include "aerosect/model/section.hpp"

namespace aerosect {

// Theodorsen's flap geometry functions T1..T13 for hinge c and elastic axis a
// (semichords from midchord), NACA Report 496. Index 0 is unused.
struct FlapFunctions {
  double T[14] = {};
  double operator[](int i) const { return T[i]; }
};
FlapFunctions flap_functions(double hinge, double elastic_axis);

// phi(s) = 1 - sum_i coefficients[i] exp(-exponents[i] s), s in semichords.
struct WagnerApproximation {
  std::vector<double> coefficients;  // psi_i
  std::vector<double> exponents;     // eps_i, per semichord travelled
  static WagnerApproximation jones();
  double initial_value() const;      // phi(0) = 1 - sum psi_i
  double operator()(double s) const;
  std::size_t size() const { return coefficients.size(); }
};

enum class AeroModel { kWagner, kQuasiSteady, kSteady };
const char* to_string(AeroModel m);

struct AeroSettings {
  AeroModel model = AeroModel::kWagner;
  WagnerApproximation wagner = WagnerApproximation::jones();
  std::string wagner_name = "jones";  // "jones" or "custom"
};

struct AeroMatrices {
  DofMatrix apparent_mass;  // M_a, kg/m, kg m/m, kg m^2/m blocks
  DofMatrix damping;        // C_a
  DofMatrix stiffness;      // K_a
  DofVector circulation_force;      // f_c
  DofVector downwash_displacement;  // d_q
  DofVector downwash_rate;          // d_v
};

// All zero when rho == 0 (vacuum).
AeroMatrices theodorsen_matrices(const SectionProperties& s, const FlowConditions& f,
                                 AeroModel model);

}  // namespace aerosect
