#pragma once
// Time integration of an AeroelasticModel with Boost.Odeint's adaptive
// dense-output steppers (Dormand-Prince 5(4) by default, Bulirsch-Stoer as
// an option). Output is taken from the dense output at fixed sample times
// (t0 + k dt, computed from k, never accumulated), at every accepted step,
// or not at all.
//
// Events. Every event is the zero of a witness function of the trajectory,
// crossed in the witness's direction: a spring boundary
// h = +-(q_j - breakpoint) (action: the spring's region changes), an input
// switch time t - t_k (action: the input segment advances) and the
// velocity of a moving DOF (no action: a true extremum, reported to the
// peak observer). The run is a short loop of named stages: take a step and
// check it, locate the earliest event inside it, report peaks and emit
// samples up to there, then apply the event or stop.
//
// Piecewise springs (breakpoints) switch exactly: after each accepted step
// the switching functions h = +-(x_j - breakpoint) of the boundaries of the
// active regions are checked on the dense output — at interior probe points
// and at the extrema of x_j inside the step (velocity zeros), so a
// trajectory that dips out of a region and back within one step (grazing)
// is caught — and the earliest crossing is solved to 1e-12 s (relative to
// max(1, t)) with TOMS 748 on the interpolant, without re-integrating. The
// step ends there, the spring's stored region changes and the stepper
// restarts from the interpolated state; the right-hand side never looks at
// the sign of x. More than 50 switches closer than ~1e-9 of the shortest
// period apart is chattering and stops the run with a NumericalError.
//
// Time-dependent inputs (gusts) are piecewise smooth: the stepper is made to
// land exactly on every input switch time (its next step is shortened to
// reach it), the stored input segment advances there and the stepper
// restarts, so no step straddles a kink or a jump of the input.
//
// Variational flow (monodromy). With RunState::track_monodromy set, the
// stepper integrates the augmented state [x; vec(Phi)] (n + n^2 entries,
// Phi column-major) with Phi' = Df(x(t)) Phi, Df = AeroelasticModel::
// jacobian() in the stored regions; the error control covers both parts.
// Every switching function, input switch time, velocity zero and sample
// uses x alone, so the trajectory's events are those of the plain run (its
// steps, and so its last digits, differ). At a spring switch through
// h = side (q_j - breakpoint) = 0 at time t_s, Phi jumps by the saltation
// matrix (di Bernardo et al., Piecewise-smooth Dynamical Systems):
//   Phi <- S Phi,  S = I + (f+ - f-) grad_h^T / (grad_h^T f-),
// f-/f+ the vector field at x(t_s) in the old/new region, grad_h = side e_q_j.
// f+ - f- = -G_j (f_j(q; new) - f_j(q; old)) is nonzero only when the spring
// force jumps at the breakpoint; freeplay, bilinear and table laws are
// continuous there (SpringLaw::force_jump() == 0), so f+ = f- and S = I: the
// crossing time still moves with x0, but a continuous field makes that move
// invisible to first order. A `piecewise` law with a jump gets S. When such
// a jump meets a grazing crossing, where the normal speed grad_h^T f- =
// side q_j' is below 1e-8 of (|q_j''| + |jump of q_j''|) x the model's
// shortest period, S is unbounded or the flow not differentiable there: the
// run stops with a NumericalError naming the grazing instead of returning a
// meaningless Phi. On return run.monodromy holds Phi(t_end, t_start) times
// the matrix the caller put there (the identity gives the monodromy itself).
// Sample and peak observers still receive the n-vector x only.
//
// The model is shared and const; everything that changes during a run is in
// RunState, so independent runs can proceed on separate threads.

#include <atomic>
#include <cstdint>
#include <functional>
#include <string>
#include <vector>

#include "aerosect/model/system.hpp"

namespace aerosect {

// kExact: exact propagation (exact_flow.hpp) when the model is eligible (no
// gust input, continuous piecewise-linear springs); otherwise Dormand-Prince
// 5(4) at the given tolerances, which then still apply.
enum class StepperKind { kDopri5, kBulirschStoer, kExact };
const char* to_string(StepperKind k);

struct IntegratorSettings {
  StepperKind stepper = StepperKind::kDopri5;
  double relative_tolerance = 1e-8;
  double absolute_tolerance = 1e-10;
  double max_step = 0.0;      // s; 0 = no limit
  double initial_step = 0.0;  // s; 0 = chosen from the model's time scales
};

// Which samples the sample observer receives.
struct OutputSchedule {
  bool every_step = false;    // true: one sample per accepted step (and switch)
  double interval = 0.0;      // s, fixed-rate samples when !every_step; 0: no samples
  bool include_start = true;  // also the state at the start time
  // No samples at all (a run watched by its peaks, or only its end state).
  static OutputSchedule none() { return {false, 0.0, false}; }
  bool any() const { return every_step || interval > 0; }
};

class ExactFlowCache;  // exact_flow.hpp

// Mutable per-run data.
struct RunState {
  double time = 0.0;               // s
  std::vector<double> x;           // state vector (layout of the model)
  std::vector<int> regions;        // active region of each spring
  int input_segment = 0;           // active segment of the gust input (gust.hpp)
  std::int64_t steps = 0;          // accepted steps
  std::int64_t rhs_evaluations = 0;
  std::int64_t samples = 0;        // samples handed to the observer
  std::int64_t switches = 0;       // spring region changes (switching points crossed)
  bool track_monodromy = false;    // integrate Phi' = Df(x(t)) Phi with the state (see above)
  std::vector<double> monodromy;   // n*n, column-major; the caller sets it (identity to
                                   // start); on return Phi(t_end, t_start) applied to it
  // Optional scratch of the exact propagator, owned by the caller: the
  // regions' matrix exponentials kept from one run to the next of the same
  // model on the same thread (exact_flow.hpp). Null: each run builds its own.
  ExactFlowCache* exact_cache = nullptr;
};

enum class ObserverAction { kContinue, kStop };
// Called with each output sample: time (s) and state.
using SampleObserver = std::function<ObserverAction(double t, const std::vector<double>& x)>;

// Called at every true extremum of a moving DOF j (a zero of its velocity,
// located on the dense output to 1e-13 s): time and state there. A witness:
// it never changes the trajectory; returning kStop ends the run after the
// current step (an LCO detector that has seen the cycle settle).
using PeakObserver =
    std::function<ObserverAction(int dof, double t, const std::vector<double>& x)>;

// What watches a run: any member may be empty.
struct RunObservers {
  SampleObserver sample = {};                 // each scheduled sample
  PeakObserver peak = {};                     // each true extremum of a moving DOF
  const std::atomic<bool>* cancel = nullptr;  // polled after every step: true ends the run
  // The state at the end of every accepted step and at every switch (a
  // witness like peak: its return value is ignored). Extremes of derived
  // channels are bracketed between step ends, whatever the sample rate.
  SampleObserver step = {};
  // The DOFs whose peaks are reported (bit j: DOF j; all by default). A
  // run that watches one DOF does not pay for locating the others' peaks.
  unsigned peak_dofs = ~0u;
};

enum class StopReason { kEndTime, kObserver, kCancelled };
const char* to_string(StopReason r);

struct IntegrationResult {
  StopReason reason = StopReason::kEndTime;
  double end_time = 0.0;  // s, time of the last state in RunState
};

// Integrates from run.time to t_end. On return run.time/run.x hold the
// last state reached (t_end, or where it stopped). Throws NumericalError on
// a non-finite state, a step-size collapse or chattering.
IntegrationResult integrate(const AeroelasticModel& model, RunState& run, double t_end,
                            const IntegratorSettings& settings, const OutputSchedule& schedule,
                            const RunObservers& observers = {});

// A default first step: 1/200 of the model's shortest period, s.
double default_initial_step(const AeroelasticModel& model);

}  // namespace aerosect
