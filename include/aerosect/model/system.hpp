#pragma once
// The assembled aeroelastic system: structure + Theodorsen aerodynamics +
// spring laws, as a first-order ODE  x' = A x + b0 - G f_nl(q) (+ B_gust w_g)
// over the state
//
//   x = [ q (n_dof) | q' (n_dof) | y (n_wagner) | g (n_gust) ]
//
//   q   displacements (h m, alpha rad[, beta rad]); slice `displacement`
//   q'  velocities (m/s, rad/s); slice `velocity`
//   y   Wagner lag states, m/s (see aerodynamics.hpp); slice `wagner`
//   g   Küssner gust lag states, m/s (see gust.hpp); slice `gust`, present
//       only when the case has gusts
//
// Equations: (M_s + M_a) q'' = -(C_s + C_a) q' - K_a (q + q_a0) - f_spring(q)
//                               + f_c (w_c + w_hat) + f_gravity + f_trim,
//   w_hat = psi(0) w_g(t) + c . g,  g_i' = (U/b) d_i (w_g(t) - g_i)   (gust, Küssner),
//   w_c = phi(0) Q + psi . y,  y_i' = (U/b) eps_i (Q - y_i),
//   Q = d_q.(q + q_a0) + d_v.q'.
//
// Steady flight condition (SteadyCondition below; all zero by default):
//   q_a0 = (0, alpha_0, beta_0): the rigid section's incidence and the
//     flap's trim deflection (rad), seen by the aerodynamics only: they
//     enter K_a and Q exactly like a displacement, but no spring feels them.
//   f_gravity = g (m, S_alpha, S_beta) (N/m, N m/m, N m/m): gravity g (m/s^2)
//     along +h (down for a level wing). From the kinetic energy's
//     coordinates: a point at x aft of the elastic axis moves down by
//     z = h + x alpha (+ xi beta on the flap, xi aft of the hinge), so the
//     potential -g int z dm gives generalised forces g int dz/dq dm =
//     g (m, S_alpha, S_beta): the first column of M_s times g. With the CG
//     aft of the elastic axis (S_alpha > 0) gravity pitches the nose up.
//   f_trim = (0, 0, M_trim): an applied hinge moment (N m/m, trailing edge
//     down positive), e.g. of a trim tab or an actuator.
// In the first-order form these add one constant vector:
//   x' = A x + b0 - G f_nl(q) + B_gust w_g(t),
//   b0 = A x_a0 + G (K_lin q_a0) + G (f_gravity + f_trim),
// x_a0 = (q_a0, 0, 0, 0) and K_lin = diag of the linear springs that A
// holds: A x_a0 is the aerodynamics (and the linear springs) at the offset
// displacement, and G K_lin q_a0 takes the springs' share back out, so
// b0 = A_aero x_a0 + G (f_gravity + f_trim), A_aero = state_matrix(0): the
// state matrix with every spring removed. Units of b0: those of x'.
// Without a steady condition b0 = 0 and is never added (results stay bit
// for bit what they were).
// The total mass matrix M_s + M_a is constant and is inverted once here.
// A contains every linear spring; each nonlinear spring j (a law with
// breakpoints or polynomial terms) adds -G_j f_j(q_j, region_j), where G_j
// is column j of [0; (M_s+M_a)^-1; 0]. A held DOF keeps its initial
// displacement: its velocity and acceleration are zero, and its generalised
// aerodynamic force is the reaction (used to test a rigidly held section).
//
// This object is immutable after construction and shared by every run;
// per-run data (state vector, spring regions, counters) live elsewhere.

#include <array>
#include <span>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "aerosect/model/aerodynamics.hpp"
#include "aerosect/model/gust.hpp"
#include "aerosect/model/section.hpp"
#include "aerosect/model/spring.hpp"

namespace aerosect {

struct StateLayout {
  int n_dof = 2;
  int displacement = 0;  // offset of q
  int velocity = 2;      // offset of q'
  int wagner = 4;        // offset of y
  int n_wagner = 0;
  int gust = 4;          // offset of g
  int n_gust = 0;
  int size = 4;
};

// Name of state component i, as the time-history file names it: "plunge",
// "pitch", "flap", "plunge_velocity", ..., "wagner_lag_state_1",
// "gust_lag_state_1" (lag states numbered from 1).
std::string state_component_name(const StateLayout& layout, int i);

// Steady flight condition: constant loads the section carries in trimmed
// flight (see the equations above). Angles in rad, SI units.
struct SteadyCondition {
  double incidence = 0;     // alpha_0, rad: angle of attack of the rigid section (aerodynamics only)
  double flap_trim = 0;     // beta_0, rad: trim deflection of the flap, TE down (aerodynamics only)
  double hinge_moment = 0;  // M_trim, N m/m: applied hinge moment, TE down positive
  double gravity = 0;       // g, m/s^2 along +h (down for a level wing); 0 = off
  bool any() const { return incidence != 0 || flap_trim != 0 || hinge_moment != 0 || gravity != 0; }
};

// Everything the model is built from (the resolved case, SI units).
struct ModelDescription {
  SectionProperties section;
  FlowConditions flow;
  AeroSettings aero;
  std::array<SpringLaw, 3> springs;        // plunge, pitch, flap restoring laws
  std::array<bool, 3> held{false, false, false};  // DOFs held at their initial value
  GustField gusts;                                 // gust inputs (may be empty)
  WagnerApproximation kussner = kussner_two_pole();  // Küssner approximation
  std::string kussner_name = "two-pole";
  SteadyCondition steady;                          // trim incidence, gravity, hinge preload
};

// Sectional loads at one instant (per unit span; signs of aerodynamics.hpp).
struct Loads {
  double lift = 0;             // N/m, positive up
  double pitching_moment = 0;  // N m/m about the elastic axis, nose up
  double hinge_moment = 0;     // N m/m about the hinge, trailing edge down
  double effective_downwash = 0;  // w_c, m/s
  double gust_velocity = 0;       // w_g at the leading edge, m/s, up positive
  double gust_effective = 0;      // w_hat, Küssner-weighted, m/s
};

class AeroelasticModel {
 public:
  explicit AeroelasticModel(ModelDescription description);

  const ModelDescription& description() const { return d_; }
  const StateLayout& layout() const { return layout_; }
  int n_dof() const { return layout_.n_dof; }
  int state_size() const { return layout_.size; }
  const AeroMatrices& aero() const { return aero_; }
  const DofMatrix& total_mass() const { return total_mass_; }
  // The shortest natural time scale, s: 2 pi over the largest of the
  // uncoupled structural frequencies and the Wagner lag rates eps_i U / b.
  // A model with neither (no stiffness, no flow) gets 0.2 s, an arbitrary
  // scale that keeps the integrator's step heuristics finite.
  double shortest_period() const;

  // x' = f(x, t; regions, input segment) = A x + b0 - G f_nl(q) + B_gust w_g(t).
  // regions[j] is the active region of spring j; input_segment the active
  // segment of the gust field.
  void rhs(const double* x, double* dxdt, double t, std::span<const int> regions,
           int input_segment = 0) const;

  // State-space Jacobian of rhs() at x (n x n, n = state_size()), written
  // into J:
  //   Df = A - sum_j G_j f_j'(q_j; region_j) e_{q_j}^T   (b0 is constant: no term)
  // over the nonlinear springs j, f_j' their tangent stiffness in the stored
  // region (N/m or N m/rad per unit span), e_{q_j} the unit vector of
  // displacement j; J(r, c) = d x'_r / d x_c (units of x_r / (s x_c)). The
  // gust input enters rhs() additively (B_gust w_g(t)), so neither t nor the
  // input segment changes Df; both are taken for symmetry with rhs(). At a
  // breakpoint Df is one-sided: the stored region decides, as in rhs().
  void jacobian(const double* x, double t, std::span<const int> regions, int input_segment,
                Eigen::Ref<Eigen::MatrixXd> J) const;

  // Loads from a state and its derivative (accelerations are dxdt[velocity..]).
  // They include the steady part: the aerodynamics sees q + q_a0, so a
  // section at incidence alpha_0 in steady flow (lag states steady, at rest)
  // carries lift 2 pi rho U^2 b alpha_0. Aerodynamic loads only: gravity and
  // the applied hinge moment are not in them.
  Loads loads(const double* x, const double* dxdt, double t = 0, int input_segment = 0) const;
  const GustField& gusts() const { return d_.gusts; }
  // B_gust: x' = f(x; regions) + B_gust w_g(t) (state_size long; zero
  // without gusts).
  const Eigen::VectorXd& gust_input() const { return B_gust_; }

  // Linear state matrix with spring j replaced by a linear spring of
  // stiffness k[j] (N/m or N m/rad); nonlinear springs use k[j] as given.
  Eigen::MatrixXd state_matrix(const DofVector& spring_stiffness) const;
  // Linear state matrix with every spring at its nominal stiffness.
  Eigen::MatrixXd nominal_state_matrix() const;
  // state_matrix(spring_stiffness) of the same model at another true
  // airspeed (m/s, >= 0), from speed-independent blocks stored at
  // construction (no copy of the description: a model with a long gust
  // record gives it as fast as one without). With Theodorsen's terms
  // f_c, d_q, C_a proportional to U and K_a to U^2:
  //   K(U) = diag(k) + U^2 K_1,   K_1 = K_a/U^2 - phi(0) (f_c/U)(d_q/U)^T
  //   C(U) = C_s + U C_1,         C_1 = C_a/U   - phi(0) (f_c/U) d_v^T
  // and the Wagner and Küssner rates (U/b) eps_i. Equals the matrix of a
  // model built at that airspeed to round-off (about 1e-16 relative).
  Eigen::MatrixXd state_matrix_at(double airspeed, const DofVector& spring_stiffness) const;

  // The linear part A (nonlinear springs excluded) and the input map G
  // (state_size x n_dof): x' = A x + b0 - G f(q) for the nonlinear springs' f.
  const Eigen::MatrixXd& linear_part() const { return A_; }
  const Eigen::MatrixXd& force_input() const { return G_; }

  // Indices of springs that are not linear (handled outside A).
  std::span<const int> nonlinear_springs() const { return nonlinear_; }

  // The steady condition's constant term b0 (state_size long, units of x';
  // zero without a steady condition), the aerodynamic offset x_a0 =
  // (0, alpha_0[, beta_0], 0...) and the constant generalised force
  // f_gravity + f_trim (n_dof long, N/m and N m/m; held DOFs included).
  bool has_steady_condition() const { return steady_; }
  const Eigen::VectorXd& steady_input() const { return b0_; }
  const Eigen::VectorXd& aerodynamic_offset() const { return x_a0_; }
  const DofVector& steady_force() const { return f_steady_; }

  // Initial state: displacements q0, velocities v0 (held DOFs get v = 0);
  // lag states at rest (y = 0, a section released into the flow at t = 0)
  // or steady (y = Q(0) = d_q.(q0 + q_a0) + d_v.v0, a section held in
  // steady flow before release).
  std::vector<double> initial_state(const DofVector& q0, const DofVector& v0,
                                    bool steady_lag_states) const;

  // Initial spring regions for a state.
  std::vector<int> regions_of(const double* x) const;

 private:
  ModelDescription d_;
  StateLayout layout_;
  AeroMatrices aero_;
  DofMatrix total_mass_;
  DofMatrix mass_inverse_;  // of the active block, zero rows/cols for held DOFs
  double phi0_ = 1.0;
  Eigen::MatrixXd A_;       // linear part, nonlinear springs excluded
  Eigen::MatrixXd G_;       // state_size x n_dof: maps generalised force to x'
  Eigen::VectorXd B_gust_;  // x' += B_gust w_g(t)
  // Per unit airspeed (state_matrix_at): K_1, C_1, f_c/U, d_q/U; d_v and
  // the structural damping C_s do not depend on U.
  DofMatrix unit_stiffness_, unit_damping_, structural_damping_;
  DofVector unit_circulation_, unit_downwash_displacement_, downwash_rate_;
  Eigen::MatrixXd assemble(double airspeed, const DofMatrix& K, const DofMatrix& C,
                           const DofVector& circulation_force,
                           const DofVector& downwash_displacement,
                           const DofVector& downwash_rate) const;
  double psi0_ = 0;         // Küssner psi(0)
  bool steady_ = false;     // a steady condition is given (b0 may still be 0 in vacuum)
  Eigen::VectorXd b0_;      // x' += b0 (steady condition)
  Eigen::VectorXd x_a0_;    // aerodynamic offset (q_a0, 0, ...)
  DofVector f_steady_;      // f_gravity + f_trim
  std::vector<int> nonlinear_;
  std::vector<double> g_velocity_rows_;  // per nonlinear spring, its G_ column's velocity rows
};

// Per-component weights that make a state's components comparable
// (radians-like): plunge per semichord, velocities per b omega_alpha or
// omega_alpha (omega_alpha the uncoupled pitch frequency, 1 rad/s when it is
// zero), lag states per the larger of the airspeed and b omega_alpha. Used
// by the scaled norms of the orbit solver and the scaling of the exact
// propagator (integrate/exact_flow.hpp).
Eigen::VectorXd state_weights(const AeroelasticModel& model);

}  // namespace aerosect
