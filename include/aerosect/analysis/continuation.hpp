#pragma once
// Branches of periodic orbits against one numeric case key, by
// pseudo-arclength continuation (Seydel, "Practical Bifurcation and
// Stability Analysis"), through folds, stable and unstable alike.
//
// Unknowns y = (x0, T, lambda): the orbit's state on the section, its period
// (s) and the parameter (the case key's value, in the case file's units).
// Distances are measured in scaled coordinates z = (W x0 / A_ref,
// T / T_ref, lambda / lambda_ref) (W of orbit.hpp; A_ref, T_ref the first
// orbit's weighted amplitude and period; lambda_ref the width of the
// parameter window) so that every unknown counts alike.
//   Predictor:  z_pred = z_k + ds t_k, t_k the unit tangent (the null vector
//               of the shooting Jacobian [Phi - I, f, dr/dlambda; e_v^T, 0, 0],
//               oriented along the previous tangent);
//   Corrector:  Newton on r = 0, g = 0 and t_k . (z - z_pred) = 0, with
//               dr/dlambda by a forward difference of the flow;
//   Step:       ds grows by 1.5 after a corrector of <= 2 iterations, by 1.2
//               after 3, shrinks by 0.7 after 6 or more; a failed corrector
//               or a tangent turning by more than ~37 degrees halves ds;
//               below min_step the branch ends.
// Bifurcations between consecutive points (Kuznetsov, "Elements of Applied
// Bifurcation Theory"): a fold where dlambda/ds changes sign (a multiplier
// passes +1 there; located on the cubic Hermite interpolant of lambda(s));
// a branch point where a real positive multiplier leaves or enters the unit
// circle without a fold; period doubling where a real negative multiplier
// crosses -1; a torus (Neimark-Sacker) bifurcation where a complex pair
// crosses the unit circle (located by linear interpolation of the largest
// modulus of that kind). Only when one kind's count outside the circle
// changes between the points: where real multipliers meet and turn complex
// in the same interval the crossing is not attributed (a finer step would). A change of the number of switches per period
// between two orbits means a grazing point lies between them (an extremum
// of a spring DOF passes a breakpoint with zero normal velocity; the
// return map is not differentiable there): that end of the branch stops
// at the last orbit before it, recorded as a grazing bifurcation (beyond a
// freeplay branch's grazing point lies the linear motion inside the gap, a
// vertical family of orbits at the gap-open flutter speed).
//
// Starts:
//   hopf       the linear system's flutter (Hopf) point in lambda, from the
//              eigenvalues of the nominal state matrix; the first orbit has
//              a small amplitude of the watched DOF (start_amplitude, or
//              where the nonlinear terms are 1e-3 of the linear one) and the
//              branch runs to larger amplitudes (smooth laws: cubic,
//              polynomial);
//   march      the case marched in time from its initial state at its own
//              lambda, or from BranchOptions::march_state at march_parameter
//              (at the case's own tolerances: it only seeds Newton)
//              until the LCO tracker sees a periodic cycle (lco.hpp);
//              the branch runs both ways from there;
//   describing the describing-function prediction (describing_function.hpp)
//              at the case's airspeed: its orbit nearest in speed, solved at
//              that speed; both ways from there (key flow.airspeed or
//              nondimensional.reduced_speed only);
//   auto       hopf for smooth laws, else march, else describing.
// The model of every point is the case at that parameter value with its
// gusts removed (an orbit needs an autonomous system).

#include <atomic>
#include <complex>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "aerosect/analysis/orbit.hpp"
#include "aerosect/io/case.hpp"

namespace aerosect {

// The model as a function of one case key.
struct ParameterFamily {
  std::string key;    // dotted case key
  double value = 0;   // the case's own value
  // The model description at `lambda` (gusts removed). Throws InputError
  // for a value the case reader refuses.
  std::function<ModelDescription(double)> model_at;
};

// `key` empty: flow.airspeed for an SI case, nondimensional.reduced_speed
// for a nondimensional one. Throws InputError for a key that is not a
// numeric entry of the case.
ParameterFamily parameter_family(const Case& c, const std::string& key);

enum class BranchStart { kAuto, kHopf, kMarch, kDescribing };
const char* to_string(BranchStart s);

struct BranchOptions {
  std::string key;                 // "" = default (see parameter_family)
  std::optional<double> from, to;  // parameter window (default: [value/10, 4 value])
  BranchStart start = BranchStart::kAuto;
  double start_amplitude = 0;      // hopf start: watched DOF amplitude, m or rad (0: automatic)
  int max_points = 200;
  double initial_step = 0.02;      // scaled arclength
  double min_step = 1e-7;
  double max_step = 0.25;
  int max_corrector_iterations = 10;
  double max_amplitude = 0;        // watched DOF, m or rad; 0: 1 rad, 10 semichords for plunge
  // march start: the march begins from `march_state` (full state, SI) at
  // lambda = `march_parameter` (e.g. a settled sweep point's final state);
  // unset: from the case's initial state at its own value.
  std::optional<double> march_parameter;
  std::vector<double> march_state;
  OrbitSettings orbit;
};

struct BranchPoint {
  double parameter = 0;          // lambda, case-file units
  double airspeed = 0;           // m/s, true airspeed of the model at lambda
  double arclength = 0;          // scaled, from the first point
  double tangent_parameter = 0;  // d lambda / ds (scaled), in branch order
  Orbit orbit;
};

enum class BifurcationKind { kFold = 1, kPeriodDoubling = 2, kTorus = 3, kBranchPoint = 4, kGrazing = 5 };
const char* to_string(BifurcationKind k);

struct Bifurcation {
  BifurcationKind kind = BifurcationKind::kFold;
  int after = 0;             // between points after and after + 1 (grazing: the end
                             // point of the branch it lies beyond; -1 before the first)
  double parameter = 0;      // located lambda
  double amplitude = 0;      // watched DOF amplitude there (interpolated)
  double period = 0;         // s (interpolated)
};

struct Branch {
  std::string key;
  BranchStart start = BranchStart::kAuto;  // the start used
  std::string start_detail;                // e.g. "Hopf point at 6.2851 (omega 0.54 rad/s)"
  std::optional<double> hopf_parameter;    // lambda of the linear flutter point, when known
  int watched_dof = kPitch;
  std::vector<BranchPoint> points;         // along the branch
  std::vector<Bifurcation> bifurcations;
  std::string stop_reason;                 // why each end of the branch ended
  bool cancelled = false;
};

// True when the model has a nonlinear spring and every nonlinear spring is
// smooth (cubic, polynomial: no breakpoints); the auto start is then hopf.
bool smooth_spring_laws(const ModelDescription& d);

// Called after every accepted point with the number of points so far (for
// progress output).
using BranchProgress = std::function<void(const BranchPoint& latest, int points)>;

// Traces the branch. Numerical trouble ends the branch (stop_reason says
// where and why); InputError for bad options; a cancelled run returns the
// points so far with cancelled = true.
Branch continue_branch(const Case& c, const BranchOptions& options,
                       const std::atomic<bool>* cancel = nullptr,
                       const BranchProgress& progress = {});

// Bifurcations between consecutive points of a finished list (used by
// continue_branch; exposed for tests).
std::vector<Bifurcation> locate_bifurcations(const std::vector<BranchPoint>& points, int watched_dof);

}  // namespace aerosect
