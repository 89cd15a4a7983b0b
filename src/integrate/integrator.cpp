#include "aerosect/integrate/integrator.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <span>

#include <boost/math/tools/toms748_solve.hpp>
#include <boost/numeric/odeint.hpp>
#include <fmt/format.h>

#include "aerosect/error.hpp"
#include "aerosect/integrate/exact_flow.hpp"
#include "aerosect/units.hpp"

namespace aerosect {

namespace odeint = boost::numeric::odeint;
using State = std::vector<double>;

const char* to_string(StepperKind k) {
  switch (k) {
    case StepperKind::kDopri5: return "dopri5";
    case StepperKind::kBulirschStoer: return "bulirsch-stoer";
    case StepperKind::kExact: return "exact";
  }
  return "?";
}

const char* to_string(StopReason r) {
  switch (r) {
    case StopReason::kEndTime: return "end-time";
    case StopReason::kObserver: return "observer";
    case StopReason::kCancelled: return "cancelled";
  }
  return "?";
}

double default_initial_step(const AeroelasticModel& model) {
  return model.shortest_period() / 200.0;
}

namespace {

// "plunge = 0.01, pitch = ..., wagner_lag_state_1 = ..." (the model's
// layout; the monodromy entries of an augmented state are left out).
std::string describe_state(const StateLayout& L, const State& x) {
  std::string s;
  for (std::size_t i = 0; i < x.size() && i < static_cast<std::size_t>(L.size); ++i)
    s += fmt::format("{}{} = {:.6g}", i ? ", " : "", state_component_name(L, static_cast<int>(i)), x[i]);
  return s;
}

// Name of component i of the (possibly augmented) integrated vector:
// the state's own names, then "monodromy(r, c)" (0-based) past them.
std::string component_name(const StateLayout& L, std::size_t i) {
  const auto n = static_cast<std::size_t>(L.size);
  if (i < n) return state_component_name(L, static_cast<int>(i));
  return fmt::format("monodromy({}, {})", (i - n) % n, (i - n) / n);
}

// The components of x that are NaN or infinite, by name.
std::string non_finite_components(const StateLayout& L, const State& x) {
  std::string s;
  for (std::size_t i = 0; i < x.size(); ++i)
    if (!std::isfinite(x[i]))
      s += fmt::format("{}{} = {}", s.empty() ? "" : ", ", component_name(L, i), x[i]);
  return s;
}

// The leading n entries of s (the state x of an augmented [x; vec(Phi)]),
// copied into buf only when s is longer.
const State& state_part(const State& s, std::size_t n, State& buf) {
  if (s.size() == n) return s;
  buf.assign(s.begin(), s.begin() + static_cast<std::ptrdiff_t>(n));
  return buf;
}

constexpr const char* kCollapseHint =
    "the state may be growing without bound (a softening spring past its turning point) or a "
    "discontinuity may be crossed that no switching function handles, or the tolerances "
    "(simulation.relative_tolerance, absolute_tolerance) cannot be met in double precision";

bool all_finite(const State& x) {
  return std::all_of(x.begin(), x.end(), [](double v) { return std::isfinite(v); });
}

// ---------------------------------------------------------------------------
// Witnesses. Every event of a run is a zero of a witness function of the
// trajectory, crossed in the witness's direction:
//
//   spring boundary    w = side (q_j - breakpoint), upward     region of spring j changes
//   input switch time  w = t - t_k, upward                     input segment advances
//   velocity zero      w = q_j', either way                    a peak is reported (no action)
//
// The state witnesses are located on the dense output (bracket, then
// refine_bracket); the time witness is known in advance, so the step is
// made to land on it instead.
struct Witness {
  enum class Kind { kSpringBoundary, kInputSwitch, kVelocityZero };
  Kind kind = Kind::kSpringBoundary;
  int dof = 0;          // spring or watched DOF (unused for an input switch)
  double position = 0;  // breakpoint (m or rad), or switch time (s)
  int side = 1;         // spring boundary: +1 upper, -1 lower
  int next = 0;         // the action: spring region / input segment entered

  double value(const StateLayout& L, const State& x, double t) const {
    switch (kind) {
      case Kind::kSpringBoundary: return side * (x[L.displacement + dof] - position);
      case Kind::kInputSwitch: return t - position;
      case Kind::kVelocityZero: return x[L.velocity + dof];
    }
    return 0.0;
  }
  bool is_spring() const { return kind == Kind::kSpringBoundary; }
};

// The witnesses watched from the run's present regions and input segment:
// the boundaries adjacent to each nonlinear spring's region, the next input
// switch time, and the velocity of every moving DOF whose peaks are wanted
// (bit j of peak_dofs).
std::vector<Witness> watched_witnesses(const AeroelasticModel& model, const RunState& run,
                                       unsigned peak_dofs) {
  using K = Witness::Kind;
  std::vector<Witness> out;
  for (int j : model.nonlinear_springs()) {
    const auto bp = model.description().springs[j].breakpoints();
    const int r = run.regions[static_cast<std::size_t>(j)];
    if (r > 0) out.push_back({K::kSpringBoundary, j, bp[r - 1], -1, r - 1});
    if (r < static_cast<int>(bp.size())) out.push_back({K::kSpringBoundary, j, bp[r], +1, r + 1});
  }
  const auto breaks = model.gusts().breakpoints();
  if (run.input_segment < static_cast<int>(breaks.size())) {
    const double t = breaks[static_cast<std::size_t>(run.input_segment)];
    out.push_back({K::kInputSwitch, 0, t, +1, model.gusts().segment_of(t)});
  }
  for (int j = 0; j < model.n_dof(); ++j)
    if ((peak_dofs >> j & 1u) && !model.description().held[static_cast<std::size_t>(j)])
      out.push_back({K::kVelocityZero, j, 0.0, 0, 0});
  return out;
}

// A root of f bracketed in [a, b] (fa, fb of opposite signs) refined with
// TOMS 748 (Alefeld, Potra & Shi 1995; Boost.Math) until the bracket is no
// wider than tol, s. Returns the final bracket.
template <class F>
std::pair<double, double> refine_bracket(F&& f, double a, double b, double fa, double fb,
                                         double tol) {
  std::uintmax_t iters = 100;
  return boost::math::tools::toms748_solve(
      f, a, b, fa, fb, [tol](double x, double y) { return std::abs(y - x) <= tol; }, iters);
}

// The watched switching functions h = +-(x_j - breakpoint) at state x,
// nearest first: "h = pitch - 0.00872665 = -1.2e-09 (the pitch spring's
// upper breakpoint, rad)", or a note that none is watched.
std::string describe_switching(const StateLayout& L, const std::vector<Witness>& witnesses,
                               const State& x) {
  std::vector<std::pair<double, std::string>> items;
  for (const Witness& w : witnesses) {
    if (!w.is_spring()) continue;
    const char* name = dof_name(w.dof);
    const double h = w.value(L, x, 0.0);
    const std::string f = w.side > 0 ? fmt::format("{} - {:.9g}", name, w.position)
                                     : fmt::format("{:.9g} - {}", w.position, name);
    items.emplace_back(std::abs(h), fmt::format("h = {} = {:.3g} (the {} spring's {} breakpoint, {})",
                                                f, h, name, w.side > 0 ? "upper" : "lower",
                                                w.dof == kPlunge ? "m" : "rad"));
  }
  if (items.empty()) return "no switching function is watched (no spring breakpoint)";
  std::sort(items.begin(), items.end());
  std::string s = items.size() > 1 ? "switching functions, nearest first: " : "switching function: ";
  for (std::size_t k = 0; k < items.size(); ++k) s += (k ? "; " : "") + items[k].second;
  return s;
}

// The monodromy's jump at a switch through spring boundary w at time t: with
// x the augmented state [x; vec(Phi)] at the crossing and `regions` still
// the old ones, Phi <- S Phi, S = I + (f+ - f-) grad_h^T / (grad_h^T f-),
// grad_h = side e_{q_j} (integrator.hpp). S = I when the spring force is
// continuous at the breakpoint; a grazing crossing with a force jump throws.
void apply_saltation(const AeroelasticModel& model, const Witness& w, double t,
                     std::span<const int> regions, int input_segment, double shortest_period,
                     State& x) {
  const StateLayout& L = model.layout();
  const int from = regions[static_cast<std::size_t>(w.dof)];
  const int breakpoint = std::min(from, w.next);
  const SpringLaw& law = model.description().springs[static_cast<std::size_t>(w.dof)];
  const double jump = law.force_jump(breakpoint);
  if (jump == 0.0) return;
  const auto n = static_cast<std::size_t>(L.size);
  std::vector<int> to(regions.begin(), regions.end());
  to[static_cast<std::size_t>(w.dof)] = w.next;
  State f_minus(n), f_plus(n);
  model.rhs(x.data(), f_minus.data(), t, regions, input_segment);
  model.rhs(x.data(), f_plus.data(), t, to, input_segment);
  const auto q = static_cast<std::size_t>(L.displacement + w.dof);
  const auto v = static_cast<std::size_t>(L.velocity + w.dof);
  const double normal_speed = w.side * f_minus[q];  // grad_h^T f-
  const double accel = std::abs(f_minus[v]), accel_jump = std::abs(f_plus[v] - f_minus[v]);
  if (!(std::abs(normal_speed) > 1e-8 * (accel + accel_jump) * shortest_period)) {
    const char* name = dof_name(w.dof);
    throw NumericalError(t, fmt::format(
        "grazing crossing of the {} spring's breakpoint {:.9g}, where its force jumps by {:.6g}: "
        "the speed across it ({}_velocity = {:.3g}) is too small for the saltation matrix of the "
        "monodromy (grad_h^T f- ~ 0: the flow is not differentiable there); state: {}",
        name, law.breakpoints()[static_cast<std::size_t>(breakpoint)], jump, name, f_minus[q],
        describe_state(L, x)));
  }
  // S Phi = Phi + (f+ - f-) (side e_q^T Phi) / (side f-_q); f+ - f- is zero
  // outside the velocity rows, so row q of Phi is read before it could change.
  const auto N = static_cast<Eigen::Index>(n);
  Eigen::Map<Eigen::MatrixXd> Phi(x.data() + n, N, N);
  const Eigen::RowVectorXd row = Phi.row(static_cast<Eigen::Index>(q)) / f_minus[q];
  for (std::size_t i = 0; i < n; ++i) {
    const double df = f_plus[i] - f_minus[i];
    if (df != 0.0) Phi.row(static_cast<Eigen::Index>(i)) += df * row;
  }
}

// One run: the stepper, the integrated vector and the watched witnesses,
// advanced by named stages (operator() tells the story).
template <class Stepper>
class Run {
 public:
  Run(Stepper& stepper, const AeroelasticModel& model, RunState& run, double t_end,
      const IntegratorSettings& settings, const OutputSchedule& schedule,
      const RunObservers& observers)
      : stepper_(stepper), model_(model), L_(model.layout()), run_(run), t_end_(t_end),
        schedule_(schedule), obs_(observers), track_(run.track_monodromy),
        n_(static_cast<std::size_t>(model.state_size())),
        cur_(track_ ? augmented_ : run.x), t0_(run.time),
        dt0_(settings.initial_step > 0 ? settings.initial_step : default_initial_step(model)),
        shortest_period_(model.shortest_period()),
        long_step_(shortest_period_ / 8.0),
        t_eps_(1e-12 * std::max(std::abs(t_end), std::abs(t0_) + 1.0)),
        chatter_dt_(1e-9 * default_initial_step(model) * 200.0) {
    if (track_) {
      augmented_ = run.x;
      augmented_.insert(augmented_.end(), run.monodromy.begin(), run.monodromy.end());
      jac_.resize(static_cast<Eigen::Index>(n_), static_cast<Eigen::Index>(n_));
    }
    run_.input_segment = model.gusts().segment_of(run.time);
    witnesses_ = watched_witnesses(model_, run_, obs_.peak ? obs_.peak_dofs : 0u);
  }
  Run(const Run&) = delete;
  Run& operator=(const Run&) = delete;
  // The monodromy run's vector goes back to run.x / run.monodromy on every
  // exit, exceptions included.
  ~Run() {
    if (!track_) return;
    const auto mid = cur_.begin() + static_cast<std::ptrdiff_t>(n_);
    std::copy(cur_.begin(), mid, run_.x.begin());
    std::copy(mid, cur_.end(), run_.monodromy.begin());
  }

  IntegrationResult operator()() {
    // The start sample, then nothing to do when the end time is reached.
    if (schedule_.include_start && schedule_.any() &&
        emit(t0_, cur_) == ObserverAction::kStop)
      return finish(StopReason::kObserver, t0_);
    if (t_end_ <= t0_) return finish(StopReason::kEndTime, t0_);
    stepper_.initialize(cur_, t0_, std::min(dt0_, t_end_ - t0_));
    sample_.resize(cur_.size());
    work_.resize(cur_.size());
    probe_.resize(cur_.size());
    while (true) {
      // Take one step, landing on the next input switch time, and check it.
      const Step step = take_step();
      // The earliest spring crossing inside it ends the segment there.
      const Segment seg = locate_crossing(step);
      // Peaks (velocity zeros, no action), then samples, up to the segment end.
      ObserverAction action = report_peaks(step, seg);
      if (action == ObserverAction::kContinue) action = emit_samples(step, seg);
      // The end time reached: stop there.
      if (seg.end >= t_end_ - t_eps_) {
        if (step.t_new == t_end_) {
          cur_ = stepper_.current_state();
        } else {
          stepper_.calc_state(t_end_, cur_);
        }
        run_.time = t_end_;
        if (obs_.step) obs_.step(run_.time, state_part(cur_, n_, view_));
        return finish(action == ObserverAction::kStop ? StopReason::kObserver : StopReason::kEndTime,
                      t_end_);
      }
      // Apply the event (spring switch or input switch) or move on.
      if (seg.event) {
        switch_spring(seg, step);
      } else {
        advance(step);
      }
      if (obs_.step) obs_.step(run_.time, state_part(cur_, n_, view_));
      if (action == ObserverAction::kStop) return finish(StopReason::kObserver, run_.time);
      if (obs_.cancel && obs_.cancel->load(std::memory_order_relaxed))
        return finish(StopReason::kCancelled, run_.time);
    }
  }

 private:
  struct Step {
    double t_old = 0, t_new = 0;
    bool landing = false;  // cut short to land on an input switch time
  };
  struct Segment {
    double end = 0;                   // s: the crossing, or the step end
    const Witness* event = nullptr;   // the spring boundary crossed, if any
  };

  IntegrationResult finish(StopReason reason, double t) const {
    IntegrationResult r;
    r.reason = reason;
    r.end_time = t;
    return r;
  }

  ObserverAction emit(double t, const State& x) {
    ++run_.samples;
    return obs_.sample ? obs_.sample(t, state_part(x, n_, view_)) : ObserverAction::kContinue;
  }

  // The state at time t inside step s: the step's end state, or the dense
  // output interpolated into sample_.
  const State& state_at(double t, const Step& s) {
    if (t == s.t_new) return stepper_.current_state();
    stepper_.calc_state(t, sample_);
    return sample_;
  }

  const Witness* input_switch() const {
    for (const Witness& w : witnesses_)
      if (w.kind == Witness::Kind::kInputSwitch) return &w;
    return nullptr;
  }

  // The right-hand side of the integrated vector: x' = f(x) and, with the
  // monodromy, Phi' = Df(x) Phi.
  void system(const State& x, State& dxdt, double t) {
    ++run_.rhs_evaluations;
    model_.rhs(x.data(), dxdt.data(), t, run_.regions, run_.input_segment);
    if (track_) {
      const auto N = static_cast<Eigen::Index>(n_);
      model_.jacobian(x.data(), t, run_.regions, run_.input_segment, jac_);
      Eigen::Map<const Eigen::MatrixXd> Phi(x.data() + n_, N, N);
      Eigen::Map<Eigen::MatrixXd> dPhi(dxdt.data() + n_, N, N);
      dPhi.noalias() = jac_ * Phi;
    }
  }

  // One accepted step. A step that would pass the next input switch time is
  // shortened to end on it. Throws on a failed step-size control, a
  // non-finite state, or a collapse: a step of a few round-offs of the time,
  // or of the model's shortest period near t = 0 (where round-off of t
  // alone would allow ever smaller steps and the run would crawl instead of
  // stopping); a step cut short for an input switch is exempt.
  Step take_step() {
    Step s;
    if (const Witness* in = input_switch();
        in && std::isfinite(in->position) &&
        stepper_.current_time() + stepper_.current_time_step() > in->position) {
      const double dt_b = in->position - stepper_.current_time();
      if (dt_b > 0) stepper_.initialize(cur_, stepper_.current_time(), dt_b);
      s.landing = true;
    }
    std::pair<double, double> step;
    try {
      step = stepper_.do_step([this](const State& x, State& dxdt, double t) { system(x, dxdt, t); });
    } catch (const odeint::step_adjustment_error& e) {
      throw NumericalError(stepper_.current_time(),
                           fmt::format("step-size control failed ({}); {}; state: {}; {}", e.what(),
                                       describe_switching(L_, witnesses_, cur_),
                                       describe_state(L_, cur_), kCollapseHint));
    }
    ++run_.steps;
    s.t_old = step.first;
    s.t_new = step.second;
    const State& xn = stepper_.current_state();
    if (!all_finite(xn)) {
      throw NumericalError(s.t_old, fmt::format("non-finite state after the step to t = {:.9g} s: {}; "
                                                "state at the step start: {}",
                                                s.t_new, non_finite_components(L_, xn),
                                                describe_state(L_, cur_)));
    }
    const double dt = s.t_new - s.t_old;
    if (!s.landing && !(dt > 16.0 * std::numeric_limits<double>::epsilon() *
                                 std::max(std::abs(s.t_new), shortest_period_))) {
      throw NumericalError(s.t_new, fmt::format("step size collapsed to {:.3g} s; {}; state: {}; {}",
                                                dt, describe_switching(L_, witnesses_, xn),
                                                describe_state(L_, xn), kCollapseHint));
    }
    return s;
  }

  // The earliest spring-boundary crossing in (t_old, min(t_new, t_end)] on
  // the dense output. For each boundary the switching function h and the
  // velocity of its DOF are compared at the ends of each sub-interval: a
  // sign change of h brackets a crossing; a sign change of the velocity
  // with h <= 0 at both ends brackets an extremum of x_j, and h there
  // decides whether the trajectory dipped out of the region and back within
  // the interval (grazing), which end values alone would miss. Steps are
  // split into sub-intervals only when longer than 1/8 of the shortest
  // period (a step that long could hold two extrema); otherwise the step
  // ends are enough and no interpolant is evaluated unless something is
  // bracketed. Crossings are solved to 1e-12 s (relative to max(1, t)).
  Segment locate_crossing(const Step& s) {
    std::array<const Witness*, 6> springs{};  // at most 3 springs x 2 boundaries
    std::size_t nb = 0;
    for (const Witness& w : witnesses_)
      if (w.is_spring()) {
        AEROSECT_CHECK(nb < springs.size());
        springs[nb++] = &w;
      }
    Segment none{s.t_new, nullptr};
    if (nb == 0) return none;
    const double ta = s.t_old, tb = std::min(s.t_new, t_end_);
    const State& xa = cur_;
    const State* xb = &state_at(tb, s);
    const int pieces = (tb - ta) > long_step_ ? 4 : 1;
    const double time_tol = 1e-12 * std::max(1.0, std::abs(tb));
    auto h_at = [&](const Witness& w, double t) {
      stepper_.calc_state(t, work_);
      return w.value(L_, work_, t);
    };
    auto v_at = [&](const Witness& w, double t) {
      stepper_.calc_state(t, work_);
      return work_[L_.velocity + w.dof];
    };
    // Refined crossing time: the side of the bracket where h >= 0 (the
    // state has left the region).
    auto refine = [&](auto&& f, double a, double b, double fa, double fb) {
      return refine_bracket(f, a, b, fa, fb, time_tol).second;
    };
    // The extremum of x_j inside [a, b] (its velocity's zero).
    auto extremum_time = [&](const Witness& w, double a, double b, double va, double vb) {
      return refine([&](double t) { return v_at(w, t); }, a, b, va, vb);
    };
    std::array<double, 6> h_prev{}, v_prev{};
    for (std::size_t i = 0; i < nb; ++i) {
      h_prev[i] = springs[i]->value(L_, xa, ta);
      v_prev[i] = xa[L_.velocity + springs[i]->dof];
    }
    double t_prev = ta;
    for (int p = 1; p <= pieces; ++p) {
      const double t = p == pieces ? tb : ta + (tb - ta) * p / pieces;
      const State* xt = xb;
      if (p != pieces) {
        stepper_.calc_state(t, probe_);
        xt = &probe_;
      }
      Segment best = none;
      for (std::size_t i = 0; i < nb; ++i) {
        const Witness& w = *springs[i];
        const double h = w.value(L_, *xt, t), v = (*xt)[L_.velocity + w.dof];
        // An excursion past the breakpoint smaller than this is a touch, not a
        // switch (a peak that sits on the breakpoint to round-off would
        // otherwise flip the region back and forth at one instant).
        const double h_tol = 1e-10 * std::max(std::abs(w.position), 1e-9);
        auto h_of_t = [&](double s) { return h_at(w, s); };
        double crossing = -1;
        const bool extremum = v_prev[i] * v < 0;
        if (h_prev[i] <= 0 && h > h_tol) {
          double hi = t, h_hi = h;
          if (extremum) {
            // Out, back in and out again? The first crossing precedes the
            // extremum when the extremum is outside.
            const double te = extremum_time(w, t_prev, t, v_prev[i], v);
            const double he = h_at(w, te);
            if (he > h_tol) {
              hi = te;
              h_hi = he;
            }
          }
          crossing = refine(h_of_t, t_prev, hi, h_prev[i], h_hi);
        } else if (h <= h_tol && extremum) {
          const double te = extremum_time(w, t_prev, t, v_prev[i], v);
          const double he = h_at(w, te);
          if (he > h_tol) crossing = refine(h_of_t, t_prev, te, h_prev[i], he);
        }
        if (crossing >= 0) {
          // The restart state must lie strictly beyond the breakpoint: a root
          // that lands exactly on it (h == 0 in floating point) would start the
          // next region on its own boundary and switch back at once.
          double bump = 4 * std::numeric_limits<double>::epsilon() * std::max(1.0, std::abs(crossing));
          for (int k = 0; k < 40 && h_at(w, crossing) <= 0 && crossing < t; ++k) {
            crossing = std::min(t, crossing + bump);
            bump *= 2;
          }
        }
        if (crossing >= 0 && (!best.event || crossing < best.end)) best = {crossing, &w};
        h_prev[i] = h;
        v_prev[i] = v;
      }
      if (best.event) return best;  // sub-intervals are in time order: the first with a crossing wins
      t_prev = t;
    }
    return none;
  }

  // True extrema (velocity zeros) of every watched DOF inside
  // (t_old, min(segment end, t_end)], located on the dense output to
  // 1e-13 s (relative to max(1, t)) and handed to the peak observer.
  ObserverAction report_peaks(const Step& s, const Segment& seg) {
    if (!obs_.peak) return ObserverAction::kContinue;
    const double ta = s.t_old, tb = std::min(seg.end, t_end_);
    const State& xa = cur_;
    const State* xb = &state_at(tb, s);
    ObserverAction action = ObserverAction::kContinue;
    for (const Witness& w : witnesses_) {
      if (w.kind != Witness::Kind::kVelocityZero) continue;
      const double va = w.value(L_, xa, ta), vb = w.value(L_, *xb, tb);
      if (!(va * vb < 0) && !(vb == 0 && va != 0)) continue;
      double te = tb;
      if (vb != 0) {
        auto f = [&](double t) {
          stepper_.calc_state(t, work_);
          return w.value(L_, work_, t);
        };
        const auto br = refine_bracket(f, ta, tb, va, vb, 1e-13 * std::max(1.0, std::abs(tb)));
        te = 0.5 * (br.first + br.second);
      }
      stepper_.calc_state(te, work_);
      if (obs_.peak(w.dof, te, state_part(work_, n_, view_)) == ObserverAction::kStop)
        action = ObserverAction::kStop;
    }
    return action;
  }

  // Samples inside the segment: one at its end (every step), or every
  // t0 + k dt up to min(segment end, t_end) (computed from k, never
  // accumulated), from the dense output.
  ObserverAction emit_samples(const Step& s, const Segment& seg) {
    ObserverAction action = ObserverAction::kContinue;
    if (!schedule_.any()) return action;
    if (schedule_.every_step) {
      if (seg.end <= t_end_ + t_eps_) {
        if (seg.end == s.t_new) return emit(s.t_new, stepper_.current_state());
        stepper_.calc_state(seg.end, sample_);
        return emit(seg.end, sample_);
      }
      stepper_.calc_state(t_end_, sample_);
      return emit(t_end_, sample_);
    }
    const double t_stop = std::min(seg.end, t_end_);
    while (action == ObserverAction::kContinue) {
      const double tk = t0_ + static_cast<double>(next_sample_) * schedule_.interval;
      if (tk > t_stop + t_eps_) break;
      stepper_.calc_state(std::min(tk, seg.end), sample_);
      action = emit(tk, sample_);
      ++next_sample_;
    }
    return action;
  }

  // Switch: the state at the crossing starts a new smooth segment in the
  // next region (the monodromy jumps by the saltation matrix); the stepper
  // restarts there with the last step size. More than 50 switches closer
  // than 1e-9 of the shortest period apart is chattering.
  void switch_spring(const Segment& seg, const Step& s) {
    const Witness w = *seg.event;  // a copy: witnesses_ is rebuilt below
    stepper_.calc_state(seg.end, cur_);
    run_.time = seg.end;
    if (track_)
      apply_saltation(model_, w, run_.time, run_.regions, run_.input_segment, shortest_period_,
                      cur_);
    run_.regions[static_cast<std::size_t>(w.dof)] = w.next;
    ++run_.switches;
    if (run_.time - last_switch_ < chatter_dt_) {
      if (++close_switches_ > 50)
        throw NumericalError(run_.time, fmt::format(
            "chattering: {} switches within {:.3g} s at the {} spring's breakpoint {:.9g} (the "
            "state is trapped on a switching surface: the spring force jumps there and both "
            "sides push the state back onto it); state: {}",
            close_switches_, run_.time - last_switch_, dof_name(w.dof), w.position,
            describe_state(L_, cur_)));
    } else {
      close_switches_ = 0;
    }
    last_switch_ = run_.time;
    witnesses_ = watched_witnesses(model_, run_, obs_.peak ? obs_.peak_dofs : 0u);
    stepper_.initialize(cur_, run_.time, std::max(s.t_new - s.t_old, 1e-6 * dt0_));
  }

  // No event inside the step: its end is the new state. At an input switch
  // time the input segment advances (the next segment's formulas from here
  // on) and the stepper restarts, so no step straddles the kink.
  void advance(const Step& s) {
    cur_ = stepper_.current_state();
    run_.time = s.t_new;
    const Witness* in = input_switch();
    if (in && std::isfinite(in->position) &&
        s.t_new >= in->position - 4 * std::numeric_limits<double>::epsilon() * std::abs(in->position)) {
      run_.time = in->position;
      run_.input_segment = in->next;
      witnesses_ = watched_witnesses(model_, run_, obs_.peak ? obs_.peak_dofs : 0u);
      stepper_.initialize(cur_, run_.time, std::max(s.t_new - s.t_old, 1e-6 * dt0_));
    }
  }

  Stepper& stepper_;
  const AeroelasticModel& model_;
  const StateLayout& L_;
  RunState& run_;
  const double t_end_;
  const OutputSchedule& schedule_;
  const RunObservers& obs_;
  const bool track_;
  const std::size_t n_;
  State augmented_;  // [x; vec(Phi)] when the monodromy is tracked
  State& cur_;       // the integrated vector at run_.time: run.x or augmented_
  const double t0_, dt0_;
  const double shortest_period_;
  const double long_step_;    // a step longer than this is split when looking for crossings
  const double t_eps_;        // a sample time within this counts as reached (round-off of t0 + k dt)
  const double chatter_dt_;   // switches closer than this count towards chattering
  Eigen::MatrixXd jac_;       // Df, the monodromy's right-hand side
  std::vector<Witness> witnesses_;
  State sample_, work_, probe_, view_;  // interpolated states; view_: the state part for observers
  std::int64_t next_sample_ = 1;        // index k of the next fixed-rate sample
  int close_switches_ = 0;
  double last_switch_ = -std::numeric_limits<double>::infinity();
};

}  // namespace

IntegrationResult integrate(const AeroelasticModel& model, RunState& run, double t_end,
                            const IntegratorSettings& settings, const OutputSchedule& schedule,
                            const RunObservers& observers) {
  AEROSECT_CHECK(static_cast<int>(run.x.size()) == model.state_size());
  AEROSECT_CHECK(schedule.every_step || (schedule.interval >= 0 && std::isfinite(schedule.interval)));
  AEROSECT_CHECK(!run.track_monodromy ||
                 run.monodromy.size() == run.x.size() * run.x.size());
  if (run.regions.empty()) run.regions = model.regions_of(run.x.data());
  const double atol = settings.absolute_tolerance, rtol = settings.relative_tolerance;
  switch (settings.stepper) {
    case StepperKind::kExact:
      if (exact_propagation_eligible(model)) return integrate_exact(model, run, t_end, schedule, observers);
      [[fallthrough]];  // not eligible: Dormand-Prince at the given tolerances
    case StepperKind::kDopri5: {
      auto stepper = odeint::make_dense_output(atol, rtol, settings.max_step,
                                               odeint::runge_kutta_dopri5<State>());
      return Run(stepper, model, run, t_end, settings, schedule, observers)();
    }
    case StepperKind::kBulirschStoer: {
      odeint::bulirsch_stoer_dense_out<State> stepper(atol, rtol, 1.0, 1.0, settings.max_step);
      return Run(stepper, model, run, t_end, settings, schedule, observers)();
    }
  }
  throw InternalError(__FILE__, __LINE__, "unknown stepper");
}

}  // namespace aerosect
