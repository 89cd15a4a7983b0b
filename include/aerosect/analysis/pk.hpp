#pragma once
// Frequency-domain p-k flutter method for the typical section.
//
// Equations. With q = q_hat e^{p t}, p = sigma + i omega (1/s), the
// structure M_s q'' + C_s q' + K q = F and the aerodynamic force of
// aerodynamics.hpp, F = -M_a q'' - C_a q' - K_a q + f_c w_c with
// w_c = C(k) Q, Q = d_q.q + d_v.q', give the flutter determinant
//
//   [ p^2 (M_s + M_a) + p (C_s + C_a - C(k) f_c d_v^T)
//                     + (K + K_a - C(k) f_c d_q^T) ] q_hat = 0,
//
// with the noncirculatory terms evaluated at the complex p and the
// circulatory term at the real reduced frequency k = omega b / U (the p-k
// approximation; exact on the flutter boundary, where sigma = 0).
//   K    = diag(spring_stiffness): the caller's spring stiffness per DOF
//          (nominal, gap-open, gap-closed, describing-function N(A), ...);
//   C_s  = structural_damping(section), i.e. from the section's nominal
//          stiffnesses whatever spring_stiffness is.
//   C(k) = the exact Theodorsen function (kExactTheodorsen), or the rational
//          C_approx(k) of a Wagner exponential approximation
//          (kWagnerApproximation, theodorsen_function.hpp). For negative
//          omega C(-k) = conj C(k) is used, so roots just below the real axis
//          are handled consistently.
// With kWagnerApproximation the flutter point (sigma = 0) is exactly that of
// the time-domain state-space model AeroelasticModel with the same lag
// states (the two share the same rational transfer function at p = i omega).
//
// Solution. The quadratic eigenproblem is linearised to the 2n x 2n complex
// standard eigenproblem  [0 I; -M^-1 K(k), -M^-1 C(k)] z = p z  (M = M_s + M_a)
// and the chosen eigenvalue is polished by Newton (nonlinear inverse)
// iteration on the n x n quadratic matrix. For each structural mode k is
// iterated (k <- Im(p) b / U, secant-accelerated) until
// |k_new - k| <= tolerance * |p| b / U (1e-12 by default; the same as
// relative to k for a lightly damped root, and still meaningful for a root
// that becomes overdamped and reaches the real axis, k -> 0). At every iteration the eigenvalue nearest the previous
// iterate is taken; when another candidate is nearly as near (within
// `ambiguity_ratio` of the nearest distance) the one whose shape correlates
// best with the previous shape (modal assurance criterion) is taken instead.
//
// Mode tracking. Modes are numbered like the in-vacuo modes of (K, M_s) in
// ascending frequency and are followed in speed by continuation from the
// previous speed's root, never by sort order. A sweep starts at U = 0 (still
// air: apparent mass only, one eigensolve) and steps to each requested speed;
// a step is halved (up to `max_step_halvings` times) while any root would
// move by more than `max_step_fraction` of its distance to the nearest other
// eigenvalue, fails to converge, or lands on another mode's root.
//
// Units: SI (p in 1/s, frequencies in rad/s). With the reference scales
// b = 1 m, omega_alpha = 1 rad/s of from_nondimensional, speeds are U* and
// frequencies omega/omega_alpha directly.
//
// Damping ratio zeta = -Re(p) / |p| (negative = unstable; 0 when p = 0).
// At U = 0 the circulatory terms vanish and k = omega b / U is reported as
// +infinity for an oscillatory root (0 for a real root).

#include <atomic>
#include <complex>
#include <vector>

#include <Eigen/Core>

#include "aerosect/analysis/root_tracking.hpp"
#include "aerosect/model/aerodynamics.hpp"
#include "aerosect/model/section.hpp"

namespace aerosect {

enum class PkAerodynamics { kExactTheodorsen, kWagnerApproximation };
const char* to_string(PkAerodynamics a);

// Numerical settings of the p-k iteration and the sweep continuation.
struct PkSettings {
  double tolerance = 1e-12;        // on k, relative to |p| b / U
  int max_iterations = 200;        // per mode and speed
  double ambiguity_ratio = 1.5;    // candidates within this x nearest distance: use shape
  double max_step_fraction = 0.5;  // of the root's separation from other eigenvalues
  int max_step_halvings = 10;      // per requested speed interval
};

// Everything a p-k analysis is built from.
struct PkProblem {
  SectionProperties section;
  double density = 0;          // rho, kg/m^3
  DofVector spring_stiffness;  // per DOF, N/m, N m/rad; empty = nominal (section)
  PkAerodynamics aerodynamics = PkAerodynamics::kExactTheodorsen;
  WagnerApproximation wagner = WagnerApproximation::jones();  // for kWagnerApproximation
  PkSettings settings;
};

// Nominal spring stiffness per DOF: (K_h, K_alpha[, K_beta]) of the section.
DofVector nominal_spring_stiffness(const SectionProperties& s);

// Roots (Root: eigenvalue p, frequency, damping ratio, reduced frequency k
// at which C was evaluated, shape, separation from the nearest other
// eigenvalue at the same C(k), converged, iterations), sweeps and crossings
// are the shared types of root_tracking.hpp.

// Roots at one airspeed U >= 0, one per mode, continuing from `previous`
// (one root per mode, as returned for a nearby speed; the order is kept).
// An empty `previous` starts from the still-air roots (themselves seeded by
// the in-vacuo modes of (K, M_s)). Single step: no step control; use
// pk_sweep to follow roots over a speed range.
std::vector<Root> pk_roots(const PkProblem& problem, double airspeed,
                             const std::vector<Root>& previous = {});

// Convenience form of the same with the problem spelt out.
std::vector<Root> pk_roots(const SectionProperties& s, double density, double airspeed,
                             const DofVector& spring_stiffness, PkAerodynamics aero,
                             const WagnerApproximation& wagner,
                             const std::vector<Root>& previous);

// Roots at each speed (speeds >= 0, strictly ascending; AEROSECT_CHECK),
// followed from still air with the step control described above.
// A set `cancel` stops the sweep between speeds (throws Cancelled).
RootSweep pk_sweep(const PkProblem& problem, const std::vector<double>& speeds,
                   const std::atomic<bool>* cancel = nullptr);

// First flutter crossing of root_tracking.hpp (the shared growth criterion
// decides the bracketing interval; TOMS 748 on Re(p) re-tracked from the
// lower speed refines it to `relative_tolerance`). When several modes cross
// in the same interval the lowest refined speed wins. A crossing whose
// frequency stays below frequency_floor(section) is a static divergence of
// the tracked mode and is skipped. `sweep` must come from pk_sweep on the
// same problem.
Crossing pk_flutter(const PkProblem& problem, const RootSweep& sweep,
                      double relative_tolerance = 1e-6);

}  // namespace aerosect
