#pragma once
// Static equilibrium of the section in its steady flight condition
// (model/system.hpp, SteadyCondition): the state x_e with 0 = f(x_e).
//
// With every velocity zero the lag states settle at the steady downwash
// (y_i = Q, so w_c = Q: Theodorsen's C(0) = 1) and the velocity rows of
// 0 = f(x) become the balance of generalised forces (N/m, N m/m):
//   (K_lin + K_st) q + f_nl(q) = F_0,
//   K_st = K_a - f_c d_q^T     steady aerodynamic stiffness (minus the
//                              derivative of the steady aerodynamic force)
//   F_0  = -K_st q_a0 + f_gravity + f_trim
// with K_lin the linear springs, f_nl the nonlinear ones (spring.hpp),
// q_a0 = (0, alpha_0, beta_0) the incidence and flap trim and
// f_gravity + f_trim the constant loads (AeroelasticModel::steady_force).
// The returned state is x_e = (q_e, 0, y = Q(q_e), gust lag states 0), a
// fixed point of the model's own right-hand side (its residual is reported).
//
// Piecewise-linear springs: every combination of their regions is tried
// (each spring has few), the linear system of each is solved, and the
// solutions that lie inside their regions are kept (one copy of a point on
// a breakpoint, which two neighbouring combinations share). Polynomial
// (cubic) springs: Newton's method from the combination's linear solution;
// a softening spring may have further equilibria that it does not find.
// When a combination's system is singular and consistent (a freeplay spring
// inside its gap with nothing loading it: in vacuum, or with no
// aerodynamic hinge stiffness) every point of a segment is an equilibrium;
// the one reported is the point of that set closest to q = 0 (q = 0 itself
// when the gap contains it), flagged free_directions > 0.
//
// Held DOFs (simulation.hold) are held at 0 here.
// Divergence: beyond the divergence speed the linear system is still
// solvable, but the equilibrium is statically unstable (the tangent static
// stiffness has a real eigenvalue <= 0): reported, not hidden. No
// equilibrium at all (e.g. a load beyond what any region can balance) is an
// empty list with a remark. The engine never prints: the caller reports.

#include <string>
#include <vector>

#include <Eigen/Core>

#include "aerosect/model/system.hpp"

namespace aerosect {

// One spring at the equilibrium.
struct SpringEquilibrium {
  std::string law;          // "linear", "freeplay", ... (SpringLaw::kind)
  int region = 0;           // region index (spring.hpp), 0..region_count-1
  int region_count = 1;
  std::string region_name;  // "gap", "upper stop", "lower stop", "inner", ... ("" for one region)
  double force = 0;         // restoring force f(q), N/m (plunge) or N m/m
  double tangent_stiffness = 0;  // df/dq there, N/m per m or N m/rad per m span
  bool in_contact = false;  // freeplay taken up: force is the contact load against the stop
};

struct Equilibrium {
  DofVector displacement;      // q_e: h m, alpha rad[, beta rad]
  Eigen::VectorXd state;       // x_e (state_size long)
  std::vector<int> regions;    // region of every spring (n_dof long)
  std::vector<SpringEquilibrium> springs;  // n_dof entries
  Loads loads;                 // steady aerodynamic loads at x_e (lift, moments)
  int free_directions = 0;     // > 0: a continuum of equilibria; the reported one is nearest 0
  std::string static_stability;  // "stable", "neutral" (a continuum) or "unstable" (diverged)
  DofMatrix tangent_stiffness; // K_lin + K_st + diag(f_nl'), the static stiffness at x_e
  double residual = 0;         // max |f(x_e)| weighted by state_weights, 1/s
};

struct EquilibriumResult {
  bool steady_condition = false;  // the case gives one (else the loads are zero)
  std::vector<Equilibrium> equilibria;  // ordered: stable first, then by |q| (weighted)
  int combinations = 1;           // region combinations tried
  std::string remark;             // "" or why there is none / several
};

// Static equilibria of the model (see above). Throws InputError-free:
// numerical failures (Newton not converging) are left out and said in the
// remark.
EquilibriumResult static_equilibrium(const AeroelasticModel& model);

// The equilibrium to linearise and start runs about: the first (stable
// first) of result, or nullptr when there is none.
const Equilibrium* principal_equilibrium(const EquilibriumResult& result);

// Where a run starts (simulate; and the fresh starts of sweeps and
// continuation). Without a steady condition: exactly as before,
// model.initial_state(q0, v0, steady_lag_states) with the case's [initial]
// values absolute. With one: the case's [initial] values are a perturbation
// about the principal static equilibrium q_e, so the run starts at
// q_e + q0 with velocities v0 and, with lag_states = "steady" (the default
// then), the lag states in the steady flow of that start. With no
// equilibrium (diverged) the [initial] values are taken as absolute and
// `reference` says so. `equilibrium` may pass a result already computed.
struct RunStart {
  std::vector<double> x;      // state at t = 0
  std::vector<int> regions;   // spring regions of x (those of q_e at a breakpoint)
  std::string reference;      // "absolute" or "perturbation about the static equilibrium" (+ why)
};
RunStart run_start(const AeroelasticModel& model, const DofVector& q0, const DofVector& v0,
                   bool steady_lag_states, const EquilibriumResult* equilibrium = nullptr);

// Name of region r of a law: freeplay "lower stop" / "gap" / "upper stop",
// bilinear "below" / "inner" / "above", others "segment i of n"; "" for a
// law with one region.
std::string region_name(const SpringLaw& law, int region);

}  // namespace aerosect
