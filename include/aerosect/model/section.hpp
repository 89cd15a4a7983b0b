#pragma once
// Typical section: rigid aerofoil on a plunge spring and a pitch spring at the
// elastic axis, optionally with a trailing-edge control surface (flap) on a
// hinge spring.
//
// Conventions (also in the README and in every HDF5 file):
//   h  plunge, m, positive DOWN;  alpha pitch, rad, positive NOSE UP;
//   beta flap, rad, positive TRAILING EDGE DOWN.
//   b semichord (m). Chordwise positions in semichords from midchord,
//   positive aft: elastic axis a, hinge c; x_alpha = CG offset from the
//   elastic axis (positive aft), x_beta = flap CG offset from the hinge.
//   All masses, inertias and stiffnesses are per unit span.
//
// Structural equations (generalised forces Q = (-L, M_alpha, M_beta)):
//   M_s q'' + C_s q' + K_s q = Q,   q = (h, alpha[, beta])
//   M_s = [[m,  S_a,              S_b             ],
//          [S_a, I_a,             I_b + b(c-a)S_b ],
//          [S_b, I_b + b(c-a)S_b, I_b             ]]
//   S_a = m x_alpha b, I_a about the elastic axis (parallel axis theorem
//   I_a = I_cg + m (x_alpha b)^2), S_b and I_b of the flap about its hinge.
//   K_s = diag(K_h, K_a, K_b) (nominal linear stiffness of each spring law);
//   C_s = diag(2 zeta_h sqrt(K_h m), 2 zeta_a sqrt(K_a I_a), 2 zeta_b sqrt(K_b I_b)).
//
// Nondimensional form of the literature: mu = m / (pi rho b^2),
//   x_alpha = S_a/(m b), r_alpha^2 = I_a/(m b^2), omega_bar = omega_h/omega_alpha,
//   x_beta = S_b/(m b), r_beta^2 = I_b/(m b^2), omega_beta/omega_alpha,
//   U* = U/(b omega_alpha), with omega_h = sqrt(K_h/m), omega_alpha =
//   sqrt(K_a/I_a), omega_beta = sqrt(K_b/I_b) (uncoupled, in vacuo).

#include <Eigen/Core>

namespace aerosect {

// Matrices and vectors over the degrees of freedom (2 or 3); fixed maximum
// size so they never allocate.
using DofMatrix = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, 0, 3, 3>;
using DofVector = Eigen::Matrix<double, Eigen::Dynamic, 1, 0, 3, 1>;

enum Dof : int { kPlunge = 0, kPitch = 1, kFlap = 2 };

// Dimensional section, SI units, per unit span. The single resolved form the
// model is built from.
struct SectionProperties {
  int dof = 2;                      // 2 (plunge, pitch) or 3 (+ flap)
  double semichord = 0;             // b, m
  double mass = 0;                  // m, kg/m (whole section including flap)
  double elastic_axis = 0;          // a, semichords from midchord, aft +
  double static_unbalance = 0;      // S_a = m x_alpha b, kg m/m (CG aft +)
  double pitch_inertia = 0;         // I_a about the elastic axis, kg m^2/m
  double plunge_stiffness = 0;      // K_h, N/m per m span
  double pitch_stiffness = 0;       // K_a, N m/rad per m span
  double plunge_damping_ratio = 0;  // zeta_h
  double pitch_damping_ratio = 0;   // zeta_a
  // Flap (dof == 3 only)
  double hinge = 1;                      // c, semichords from midchord
  double flap_static_unbalance = 0;      // S_b about the hinge, kg m/m (CG aft +)
  double flap_inertia = 0;               // I_b about the hinge, kg m^2/m
  double flap_stiffness = 0;             // K_b, N m/rad per m span
  double flap_damping_ratio = 0;         // zeta_b
};

struct FlowConditions {
  double density = 0;   // rho, kg/m^3 (0 = vacuum)
  double airspeed = 0;  // U, true airspeed, m/s
};

// Reference scales that turn a nondimensional case into SI.
struct ReferenceScales {
  double semichord = 1.0;        // b, m
  double pitch_frequency = 1.0;  // omega_alpha, rad/s
  double density = 1.225;        // rho, kg/m^3
};

struct NondimensionalParameters {
  int dof = 2;
  double mass_ratio = 0;        // mu (infinite in vacuum)
  double elastic_axis = 0;      // a_h
  double cg_offset = 0;         // x_alpha
  double radius_of_gyration = 0;  // r_alpha (about the elastic axis)
  double frequency_ratio = 0;   // omega_bar = omega_h / omega_alpha
  double plunge_damping_ratio = 0;
  double pitch_damping_ratio = 0;
  double reduced_speed = 0;     // U* = U / (b omega_alpha)
  double hinge = 1;             // c
  double flap_cg_offset = 0;    // x_beta = S_b / (m b)
  double flap_radius_of_gyration = 0;  // r_beta = sqrt(I_b / (m b^2))
  double flap_frequency_ratio = 0;     // omega_beta / omega_alpha
  double flap_damping_ratio = 0;
  ReferenceScales reference;    // b, omega_alpha, rho
};

NondimensionalParameters to_nondimensional(const SectionProperties& s, const FlowConditions& f);
void from_nondimensional(const NondimensionalParameters& n, SectionProperties& s,
                         FlowConditions& f);

// Uncoupled in-vacuo natural frequencies, rad/s.
struct UncoupledFrequencies {
  double plunge = 0, pitch = 0, flap = 0;
};
UncoupledFrequencies uncoupled_frequencies(const SectionProperties& s);

DofMatrix structural_mass(const SectionProperties& s);
DofMatrix structural_stiffness(const SectionProperties& s);
DofMatrix structural_damping(const SectionProperties& s);

}  // namespace aerosect
