#pragma once
// The root-tracking core shared by the stability analyses: the state-space
// eigenvalues of flutter.hpp and the p-k roots of pk.hpp are both followed
// in airspeed here, and every analysis that asks "is this root growing?"
// (flutter, p-k, the LCO tracker's rest check, the describing-function LCO
// prediction) asks growth_margin below.
//
// Roots. One root per structural mode: an eigenvalue lambda = sigma + i omega
// (1/s) of the linear(ised) section at an airspeed U, with
//   frequency         = |Im lambda|, rad/s
//   damping ratio     zeta = -Re lambda / |lambda| (negative = unstable; 0 at lambda = 0)
//   reduced frequency k = omega b / U (+inf at U = 0 for an oscillatory root, 0 for a real one)
//   shape             the displacement part (h/b, alpha[, beta]), largest |component| = 1.
// Modes are numbered like the in-vacuo modes of (K, M_s), ascending
// frequency (a DOF of zero stiffness gives a mode of zero frequency: it is
// seeded and followed like any other).
//
// Growth criterion (the one test of "unstable" in the program): an
// eigenvalue is growing when
//   growth_margin(lambda, rho) = Re lambda - 1e-9 |lambda| - 1e-12 rho > 0,
// rho the spectral radius of the eigenproblem it comes from. The two
// allowances are round-off, not physics: a neutral root of an undamped
// system (Re exactly 0 in theory) comes out of an eigensolver at about
// 1e-16 |lambda|, and a zero root (a free DOF) at about 1e-16 rho. A
// damping ratio below -1e-9 is growing.
//
// Continuation in speed. A method supplies a RootProvider: "the roots at
// speed U continuing these ones, or no answer when the step is too large to
// trust". continue_roots halves the step until the provider answers (at
// most max_halvings times; at the last level the provider must answer).
// Between candidates the one nearest the previous root is taken, and among
// near-equidistant ones (within ambiguity_ratio of the nearest distance) the
// one whose shape correlates best with the previous shape (MAC): never by
// sort order, so modes keep their identity through a frequency coalescence.
//
// Crossings. A tracked oscillatory root crosses between two sweep speeds
// when its growth margin is negative at the lower and non-negative at the
// upper one. The flutter speed is the first such crossing, refined by
// TOMS 748 (refine_crossing) on Re lambda(U), the root re-tracked from the
// lower sweep speed: the neutral point Re lambda = 0 itself, where the p-k
// and state-space methods meet exactly (the margin's round-off allowance
// only decides which interval brackets it; if Re lambda does not change sign
// inside that interval the margin's own zero is taken). A crossing of a root
// whose frequency is below the frequency floor at both ends is a static
// divergence, not flutter, and is skipped.

#include <atomic>
#include <complex>
#include <functional>
#include <optional>
#include <vector>

#include <Eigen/Core>

#include "aerosect/model/section.hpp"

namespace aerosect {

struct Root {
  std::complex<double> eigenvalue;  // lambda, 1/s
  double frequency = 0;             // |Im lambda|, rad/s
  double damping_ratio = 0;         // -Re lambda / |lambda|
  double reduced_frequency = 0;     // omega b / U (+inf at U = 0 for an oscillatory root)
  Eigen::VectorXcd shape;           // (h/b, alpha[, beta]), largest |component| = 1
  double spectral_radius = 0;       // largest |eigenvalue| of the problem, 1/s (growth criterion)
  double separation = 0;            // |lambda - nearest other eigenvalue|, 1/s (step control)
  bool aerodynamic_lag = false;     // state-space: the root is an aerodynamic lag root
                                    // (flutter.hpp), not a structural one
  bool converged = true;            // p-k: the k iteration converged
  int iterations = 0;               // p-k: iterations used
};

struct RootSweep {
  std::vector<double> speeds;            // m/s, ascending
  std::vector<std::vector<Root>> roots;  // [speed][mode]
};

struct Crossing {
  bool found = false;
  double speed = 0;              // m/s (true airspeed)
  double frequency = 0;          // rad/s (0 for divergence)
  double reduced_frequency = 0;  // omega b / U
  int mode = -1;                 // tracked mode (-1 for divergence)
  Eigen::VectorXcd shape;        // (h/b, alpha[, beta]) at the crossing
};

// The growth criterion (see above). `spectral_radius` >= 0, 1/s.
double growth_margin(std::complex<double> eigenvalue, double spectral_radius);
bool growing(std::complex<double> eigenvalue, double spectral_radius);
double growth_margin(const Root& r);
// True when any of a matrix's eigenvalues is growing (its spectral radius
// taken from the same set).
bool any_growing(const Eigen::VectorXcd& eigenvalues);

// A root from its eigenvalue and normalised shape at airspeed U (m/s) for a
// section of semichord b (m): frequency, damping ratio and reduced frequency.
Root make_root(std::complex<double> eigenvalue, Eigen::VectorXcd shape, double airspeed,
               double semichord);

// Index of the candidate continuing (reference, reference_shape): the
// nearest, or among those within ambiguity_ratio x the nearest distance the
// best-correlated shape (MAC). `shapes` are normalised; candidates with
// skip[i] set are not considered (skip may be empty). Returns -1 when no
// candidate is left.
int continuing_candidate(const std::vector<std::complex<double>>& values,
                         const std::vector<Eigen::VectorXcd>& shapes,
                         std::complex<double> reference, const Eigen::VectorXcd& reference_shape,
                         double ambiguity_ratio, const std::vector<bool>& skip = {});

// Starting roots: the in-vacuo modes of (diag(stiffness), M_s), ascending
// frequency, as purely imaginary roots (0 for a DOF without stiffness).
std::vector<Root> in_vacuo_roots(const SectionProperties& section, const DofVector& stiffness);

// 1e-6 x the largest uncoupled in-vacuo frequency of the section, rad/s:
// below it a root counts as non-oscillatory (divergence, lag).
double frequency_floor(const SectionProperties& section);

struct RootProvider {
  // Roots at `speed` continuing `from` (one per mode, same order), or
  // nullopt when the step is too large to trust. With `last_try` (the step
  // cannot be halved further) the provider returns its best assignment.
  std::function<std::optional<std::vector<Root>>(double speed, const std::vector<Root>& from,
                                                 bool last_try)>
      step;
  int max_halvings = 10;
};

// Roots at Ub continued from (Ua, from) with step halving.
std::vector<Root> continue_roots(const RootProvider& provider, double Ua,
                                 const std::vector<Root>& from, double Ub);

// Roots at each speed (>= 0, strictly ascending; AEROSECT_CHECK), continued
// from `start`, the roots at U = 0. A set `cancel` stops the sweep between
// speeds (throws Cancelled).
RootSweep sweep_roots(const RootProvider& provider, std::vector<Root> start,
                      const std::vector<double>& speeds,
                      const std::atomic<bool>* cancel = nullptr);

// Speed in [Ua, Ub] where a root turns from decaying to growing (see
// Crossings above); `root_at(U)` gives the root at U (eigenvalue and
// spectral radius), `at_lo`, `at_hi` the roots at the ends (margin < 0 at
// Ua, >= 0 at Ub); `converged(x, y)` ends the bracketing (at most 200
// iterations).
double refine_crossing(const std::function<Root(double)>& root_at, double Ua, const Root& at_lo,
                       double Ub, const Root& at_hi,
                       const std::function<bool(double, double)>& converged);

// First flutter crossing of a sweep made by sweep_roots with the same
// provider (see above), refined to `relative_tolerance` on speed; roots
// below `frequency_floor` (rad/s) at the crossing are not flutter.
Crossing first_flutter_crossing(const RootProvider& provider, const RootSweep& sweep,
                                double relative_tolerance, double frequency_floor);

}  // namespace aerosect
