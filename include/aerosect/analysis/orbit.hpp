#pragma once
// Periodic orbits (limit cycles) of an autonomous model, solved by shooting,
// with their Floquet multipliers (Seydel, "Practical Bifurcation and
// Stability Analysis", shooting; Kuznetsov, "Elements of Applied Bifurcation
// Theory", Floquet theory).
//
// Unknowns: x0, the full state (displacements, velocities, Wagner lag
// states) at a point of the section S = { x : x'_w = 0 } (the watched DOF w
// at rest, chosen at one of its maxima), and the full period T (s). With
// phi_T the flow of the model over T:
//   r(x0, T) = phi_T(x0) - x0 = 0      (n equations)
//   g(x0)    = x0[velocity + w] = 0    (the section, 1 equation)
// Newton's method on the bordered system
//   [ Phi(T) - I   f(phi_T(x0)) ] [dx]   [ r ]
//   [ e_v^T        0            ] [dT] = -[ g ]
// where Phi(T) = d phi_T / d x0 (the monodromy matrix) comes from the
// variational equations integrated with the state (integrator.hpp). A
// held DOF's displacement and velocity are constants of the flow: they stay
// at their given values and are left out of the unknowns.
//
// Switching. At a crossing of a spring breakpoint at t_s the monodromy jumps
// by the saltation matrix S = I + (f+ - f-) grad(h)^T / (grad(h)^T f-)
// (di Bernardo et al., "Piecewise-smooth Dynamical Systems"). The spring
// laws freeplay, bilinear and table are continuous at their breakpoints, so
// the force, hence f, is the same on both sides (f+ = f-) and S = I: the
// crossing time's sensitivity drops out. A law with a force jump (a
// "piecewise" law with unequal pieces) gets its saltation matrix from the
// integrator. A grazing orbit (an extremum of a spring's DOF on one of its
// breakpoints: the crossing has zero normal velocity) makes S singular and
// the return map non-differentiable: it is detected (grazing_margin below)
// and Newton stops with a message rather than iterate on it.
//
// Per orbit: the residual, the period, per-DOF amplitude (half peak to
// peak), max, min (the true extrema, located on the dense output), mean and
// harmonics (one period sampled at N instants, lco.hpp), switches per
// period, maxima of the watched DOF per period (period-2 and beyond: one
// period holds several maxima; T is always the full period), and every
// Floquet multiplier (eigenvalue of Phi(T)). One multiplier is 1 exactly
// (along the flow, Phi f(x0) = f(x0)): the distance of the nearest
// eigenvalue to 1 is a free accuracy check (trivial_multiplier_error). The
// orbit is stable when every other multiplier lies inside the unit circle.
//
// Scaled norms. States mix m, rad, m/s and rad/s: every norm here weighs
// the components by state_weights() (plunge per semichord, velocities per
// b omega_alpha or omega_alpha, lag states per the larger of U and
// b omega_alpha) so that all are in radians-like units, and residuals are
// relative to the orbit's largest weighted amplitude.

#include <atomic>
#include <complex>
#include <optional>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "aerosect/analysis/lco.hpp"
#include "aerosect/integrate/integrator.hpp"
#include "aerosect/model/system.hpp"

namespace aerosect {

struct OrbitSettings {
  // Tight tolerances: the orbit is as accurate as the flow it is built on.
  // Exact propagation where the model allows it (integrate/exact_flow.hpp),
  // else Dormand-Prince at these tolerances.
  IntegratorSettings integrator{StepperKind::kExact, 1e-12, 1e-15, 0.0, 0.0};
  double tolerance = 1e-10;   // on the scaled residual |W r|_inf / A_w
  int max_iterations = 25;
  int watched_dof = -1;       // -1: the first nonlinear spring's DOF, else pitch
  double grazing_threshold = 1e-7;  // grazing_margin below this: grazing
  CycleSettings cycle;        // samples and harmonics of the content
  // Chord iteration: the monodromy is integrated at the first iterate only
  // and its Newton matrix reused; later iterates integrate the state alone
  // (several times cheaper). Converges linearly, by about the seed's
  // relative distance per iteration, so it suits seeds close to the orbit
  // (a settled time-marched cycle); the multipliers are then those of the
  // seed's monodromy (as accurate as the seed is close).
  bool chord = false;
};

// A starting guess: a state near the section and a period guess.
struct OrbitSeed {
  std::vector<double> x0;  // full state
  double period = 0;       // s
};

struct Orbit {
  bool converged = false;
  std::string failure;     // why not, when !converged
  bool grazing = false;    // an extremum of a spring DOF sits on a breakpoint
  double grazing_margin = 0;  // min over spring DOFs' extrema of |x - breakpoint| / amplitude (inf: none)
  int iterations = 0;
  double residual = 0;     // scaled |phi_T(x0) - x0| (see above)
  std::vector<double> x0;  // state on the section (watched DOF at a maximum)
  double period = 0;       // s
  int watched_dof = kPitch;
  int peaks_per_period = 1;   // maxima of the watched DOF per period
  std::int64_t switches = 0;  // spring switches per period
  std::array<DofCycle, 3> dof{};          // amplitude, max, min (m or rad)
  std::array<DofHarmonics, 3> content{};  // mean, RMS, harmonics (m or rad)
  std::array<std::vector<double>, 3> trace;  // the N samples of one period per DOF (lco.hpp)
  Eigen::MatrixXd monodromy;              // Phi(T), state_size square
  std::vector<std::complex<double>> multipliers;  // all, by decreasing modulus
  double trivial_multiplier_error = 0;    // min |mu - 1|
  double largest_nontrivial = 0;          // |mu| of the largest other multiplier
  bool stable = false;
  double frequency() const { return period > 0 ? 1.0 / period : 0.0; }  // Hz
};

// Watched DOF: `requested` when >= 0, else the first nonlinear spring's, else pitch.
int orbit_watched_dof(const AeroelasticModel& model, int requested);

// Per-component weights of the scaled norms (see above): state_weights()
// of model/system.hpp.

// The flow over one period from x0, with the monodromy when asked (the
// variational equations integrated with the state, integrator.hpp).
struct Flow {
  std::vector<double> x;          // phi_T(x0)
  std::vector<int> regions;       // spring regions at T
  Eigen::MatrixXd monodromy;      // when asked, else empty
  std::int64_t switches = 0;
  // Extrema of each DOF inside (0, T]: (t, value).
  std::array<std::vector<std::pair<double, double>>, 3> extrema;
};
// `cache` (optional): the exact propagator's regions kept between calls on
// the same model (exact_flow.hpp).
Flow orbit_flow(const AeroelasticModel& model, const std::vector<double>& x0, double period,
                const IntegratorSettings& settings, bool monodromy,
                const std::atomic<bool>* cancel = nullptr, ExactFlowCache* cache = nullptr);

// The monodromy by central differences of the flow, column i =
// (phi_T(x0 + h e_i) - phi_T(x0 - h e_i)) / 2h, h = 1e-6 of the largest
// weighted state component (per component weight): an independent check of
// the variational flow (about 1e-6 relative accuracy at rtol 1e-12).
Eigen::MatrixXd finite_difference_monodromy(const AeroelasticModel& model,
                                            const std::vector<double>& x0, double period,
                                            const IntegratorSettings& settings,
                                            const std::atomic<bool>* cancel = nullptr);

// Newton shooting from a seed. Never throws for numerical trouble on the
// way (it is the failure reason); throws InternalError on a broken seed.
Orbit solve_orbit(const AeroelasticModel& model, const OrbitSeed& seed,
                  const OrbitSettings& settings = {}, const std::atomic<bool>* cancel = nullptr);

// Fills the per-orbit figures (extrema, content, multipliers, stability,
// grazing) of an orbit whose x0, period, residual and monodromy are set.
void describe_orbit(const AeroelasticModel& model, Orbit& orbit, const Flow& flow,
                    const OrbitSettings& settings);

// A seed from a time-marched cycle: integrates from `start` for at most
// `duration` s with the LCO tracker (lco.hpp) until the cycle is periodic,
// then on to the next maximum of the watched DOF. The period is the
// tracker's full period (peaks_per_period maxima). nullopt when the run
// does not settle on a periodic cycle.
std::optional<OrbitSeed> seed_from_time_march(const AeroelasticModel& model,
                                              const std::vector<double>& start, double duration,
                                              const IntegratorSettings& settings, int watched_dof,
                                              const std::atomic<bool>* cancel = nullptr);

// A seed from a harmonic guess: the linear model with spring j's stiffness
// `stiffness` (its describing function N(A), or the nominal one at a Hopf
// point) is solved for its oscillatory eigenvalue nearest `frequency`
// (rad/s); the eigenvector, scaled so that DOF `dof` moves as
// amplitude * cos(omega t), is the state at t = 0 (a maximum of that DOF).
OrbitSeed seed_from_harmonic(const AeroelasticModel& model, const DofVector& stiffness, int dof,
                             double amplitude, double frequency);

}  // namespace aerosect
