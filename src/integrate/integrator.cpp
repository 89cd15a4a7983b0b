#include "aerosect/integrate/integrator.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <numbers>
#include <optional>
#include <span>

#include <boost/math/tools/toms748_solve.hpp>
#include <boost/numeric/odeint.hpp>
#include <fmt/format.h>

#include "aerosect/error.hpp"

namespace aerosect {

namespace odeint = boost::numeric::odeint;
using State = std::vector<double>;

const char* to_string(StepperKind k) {
  switch (k) {
    case StepperKind::kDopri5: return "dopri5";
    case StepperKind::kBulirschStoer: return "bulirsch-stoer";
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
  const auto w = uncoupled_frequencies(model.description().section);
  double wmax = std::max({w.plunge, w.pitch, w.flap});
  const auto& d = model.description();
  if (model.layout().n_wagner > 0 && d.flow.airspeed > 0) {
    for (double e : d.aero.wagner.exponents)
      wmax = std::max(wmax, e * d.flow.airspeed / d.section.semichord);
  }
  if (!(wmax > 0) || !std::isfinite(wmax)) return 1e-3;
  return 2.0 * std::numbers::pi / wmax / 200.0;
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

// A boundary of the active region of one spring: the switching function
// h(t) = side * (x_j(t) - position) is <= 0 inside the region and the
// trajectory leaves it where h turns positive.
struct Boundary {
  int spring = 0;       // DOF index
  double position = 0;  // breakpoint, m or rad
  int side = 1;         // +1: upper boundary, -1: lower boundary
  int next_region = 0;  // region entered on crossing
};

const char* dof_name(int j) { return j == kPlunge ? "plunge" : j == kPitch ? "pitch" : "flap"; }

// The watched switching functions h = +-(x_j - breakpoint) at state x,
// nearest first: "h = pitch - 0.00872665 = -1.2e-09 (the pitch spring's
// upper breakpoint, rad)", or a note that none is watched.
std::string describe_switching(const StateLayout& L, const std::vector<Boundary>& boundaries,
                               const State& x) {
  if (boundaries.empty()) return "no switching function is watched (no spring breakpoint)";
  std::vector<std::pair<double, std::string>> items;
  for (const Boundary& b : boundaries) {
    const char* name = dof_name(b.spring);
    const double h = b.side * (x[L.displacement + b.spring] - b.position);
    const std::string f = b.side > 0 ? fmt::format("{} - {:.9g}", name, b.position)
                                     : fmt::format("{:.9g} - {}", b.position, name);
    items.emplace_back(std::abs(h), fmt::format("h = {} = {:.3g} (the {} spring's {} breakpoint, {})",
                                                f, h, name, b.side > 0 ? "upper" : "lower",
                                                b.spring == kPlunge ? "m" : "rad"));
  }
  std::sort(items.begin(), items.end());
  std::string s = items.size() > 1 ? "switching functions, nearest first: " : "switching function: ";
  for (std::size_t k = 0; k < items.size(); ++k) s += (k ? "; " : "") + items[k].second;
  return s;
}

std::vector<Boundary> watched_boundaries(const AeroelasticModel& model,
                                         const std::vector<int>& regions) {
  std::vector<Boundary> out;
  for (int j : model.nonlinear_springs()) {
    const auto bp = model.description().springs[j].breakpoints();
    const int r = regions[j];
    if (r > 0) out.push_back({j, bp[r - 1], -1, r - 1});
    if (r < static_cast<int>(bp.size())) out.push_back({j, bp[r], +1, r + 1});
  }
  return out;
}

// The monodromy's jump at a switch through boundary b at time t: with x
// the augmented state [x; vec(Phi)] at the crossing and `regions` still the
// old ones, Phi <- S Phi, S = I + (f+ - f-) grad_h^T / (grad_h^T f-),
// grad_h = side e_{q_j} (integrator.hpp). S = I when the spring force is
// continuous at the breakpoint; a grazing crossing with a force jump throws.
void apply_saltation(const AeroelasticModel& model, const Boundary& b, double t,
                     std::span<const int> regions, int input_segment, double shortest_period,
                     State& x) {
  const StateLayout& L = model.layout();
  const int from = regions[static_cast<std::size_t>(b.spring)];
  const SpringLaw& law = model.description().springs[static_cast<std::size_t>(b.spring)];
  const double jump = law.force_jump(std::min(from, b.next_region));
  if (jump == 0.0) return;
  const auto n = static_cast<std::size_t>(L.size);
  std::vector<int> to(regions.begin(), regions.end());
  to[static_cast<std::size_t>(b.spring)] = b.next_region;
  State f_minus(n), f_plus(n);
  model.rhs(x.data(), f_minus.data(), t, regions, input_segment);
  model.rhs(x.data(), f_plus.data(), t, to, input_segment);
  const auto q = static_cast<std::size_t>(L.displacement + b.spring);
  const auto v = static_cast<std::size_t>(L.velocity + b.spring);
  const double normal_speed = b.side * f_minus[q];  // grad_h^T f-
  const double accel = std::abs(f_minus[v]), accel_jump = std::abs(f_plus[v] - f_minus[v]);
  if (!(std::abs(normal_speed) > 1e-8 * (accel + accel_jump) * shortest_period)) {
    const char* name = dof_name(b.spring);
    throw NumericalError(t, fmt::format(
        "grazing crossing of the {} spring's breakpoint {:.9g}, where its force jumps by {:.6g}: "
        "the speed across it ({}_velocity = {:.3g}) is too small for the saltation matrix of the "
        "monodromy (grad_h^T f- ~ 0: the flow is not differentiable there); state: {}",
        name, law.breakpoints()[static_cast<std::size_t>(std::min(from, b.next_region))], jump,
        name, f_minus[q], describe_state(L, x)));
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

// Earliest crossing time of any watched boundary inside (ta, tb] on the
// stepper's dense output, or nullopt. For each boundary the switching
// function h and the velocity of its DOF are compared at the ends of each
// sub-interval: a sign change of h brackets a crossing; a sign change of the
// velocity with h <= 0 at both ends brackets an extremum of x_j, and h there
// decides whether the trajectory dipped out of the region and back within
// the interval (grazing), which end values alone would miss. Steps are
// split into sub-intervals only when longer than 1/8 of the shortest
// period (a step that long could hold two extrema); otherwise the step ends
// are enough and no interpolant is evaluated unless something is bracketed.
template <class Stepper>
std::optional<std::pair<double, const Boundary*>> first_crossing(
    const Stepper& stepper, const StateLayout& L, const std::vector<Boundary>& boundaries,
    double ta, double tb, const State& xa, const State& xb, double long_step, State& work,
    State& probe) {
  if (boundaries.empty()) return std::nullopt;
  const int pieces = (tb - ta) > long_step ? 4 : 1;
  const double time_tol = 1e-12 * std::max(1.0, std::abs(tb));
  auto h_of = [&](const Boundary& b, const State& x) {
    return b.side * (x[L.displacement + b.spring] - b.position);
  };
  auto h_at = [&](const Boundary& b, double t) {
    stepper.calc_state(t, work);
    return h_of(b, work);
  };
  auto v_at = [&](const Boundary& b, double t) {
    stepper.calc_state(t, work);
    return work[L.velocity + b.spring];
  };
  auto refine = [&](auto&& f, double a, double b, double fa, double fb) {
    std::uintmax_t iters = 100;
    auto tol = [time_tol](double x, double y) { return std::abs(y - x) <= time_tol; };
    const auto br = boost::math::tools::toms748_solve(f, a, b, fa, fb, tol, iters);
    return br.second;  // the side where h >= 0: the state has left the region
  };
  const std::size_t nb = boundaries.size();
  std::array<double, 6> h_prev{}, v_prev{};  // at most 3 springs x 2 boundaries
  AEROSECT_CHECK(nb <= h_prev.size());
  for (std::size_t i = 0; i < nb; ++i) {
    h_prev[i] = h_of(boundaries[i], xa);
    v_prev[i] = xa[L.velocity + boundaries[i].spring];
  }
  double t_prev = ta;
  for (int p = 1; p <= pieces; ++p) {
    const double t = p == pieces ? tb : ta + (tb - ta) * p / pieces;
    const State* xt = &xb;
    if (p != pieces) {
      stepper.calc_state(t, probe);
      xt = &probe;
    }
    std::optional<std::pair<double, const Boundary*>> best;
    for (std::size_t i = 0; i < nb; ++i) {
      const Boundary& b = boundaries[i];
      const double h = h_of(b, *xt), v = (*xt)[L.velocity + b.spring];
      // An excursion past the breakpoint smaller than this is a touch, not a
      // switch (a peak that sits on the breakpoint to round-off would
      // otherwise flip the region back and forth at one instant).
      const double h_tol = 1e-10 * std::max(std::abs(b.position), 1e-9);
      double crossing = -1;
      const bool extremum = v_prev[i] * v < 0;
      if (h_prev[i] <= 0 && h > h_tol) {
        auto f = [&](double s) { return h_at(b, s); };
        double hi = t, h_hi = h;
        if (extremum) {
          // Out, back in and out again? The first crossing precedes the extremum
          // when the extremum is outside.
          auto fv = [&](double s) { return v_at(b, s); };
          const double te = refine(fv, t_prev, t, v_prev[i], v);
          const double he = h_at(b, te);
          if (he > h_tol) {
            hi = te;
            h_hi = he;
          }
        }
        crossing = refine(f, t_prev, hi, h_prev[i], h_hi);
      } else if (h <= h_tol && extremum) {
        auto fv = [&](double s) { return v_at(b, s); };
        const double te = refine(fv, t_prev, t, v_prev[i], v);
        const double he = h_at(b, te);
        if (he > h_tol) {
          auto f = [&](double s) { return h_at(b, s); };
          crossing = refine(f, t_prev, te, h_prev[i], he);
        }
      }
      if (crossing >= 0) {
        // The restart state must lie strictly beyond the breakpoint: a root
        // that lands exactly on it (h == 0 in floating point) would start the
        // next region on its own boundary and switch back at once.
        double bump = 4 * std::numeric_limits<double>::epsilon() * std::max(1.0, std::abs(crossing));
        for (int k = 0; k < 40 && h_at(b, crossing) <= 0 && crossing < t; ++k) {
          crossing = std::min(t, crossing + bump);
          bump *= 2;
        }
      }
      if (crossing >= 0 && (!best || crossing < best->first)) best = std::make_pair(crossing, &b);
      h_prev[i] = h;
      v_prev[i] = v;
    }
    if (best) return best;  // sub-intervals are in time order: the first with a crossing wins
    t_prev = t;
  }
  return std::nullopt;
}

// True extrema (velocity zeros) of every moving DOF inside (ta, tb], located
// on the dense output and handed to the peak observer.
template <class Stepper>
ObserverAction report_peaks(const Stepper& stepper, const AeroelasticModel& model, double ta,
                            const State& xa, double tb, const State& xb,
                            const PeakObserver& peaks, State& work, State& view) {
  const StateLayout& L = model.layout();
  ObserverAction action = ObserverAction::kContinue;
  for (int j = 0; j < L.n_dof; ++j) {
    if (model.description().held[j]) continue;
    const double va = xa[L.velocity + j], vb = xb[L.velocity + j];
    if (!(va * vb < 0) && !(vb == 0 && va != 0)) continue;
    double te = tb;
    if (vb != 0) {
      auto f = [&](double s) {
        stepper.calc_state(s, work);
        return work[L.velocity + j];
      };
      std::uintmax_t iters = 100;
      const double tol_t = 1e-13 * std::max(1.0, std::abs(tb));
      const auto br = boost::math::tools::toms748_solve(
          f, ta, tb, va, vb, [tol_t](double x, double y) { return std::abs(y - x) <= tol_t; },
          iters);
      te = 0.5 * (br.first + br.second);
    }
    stepper.calc_state(te, work);
    const State& x = state_part(work, static_cast<std::size_t>(L.size), view);
    if (peaks(j, te, x) == ObserverAction::kStop) action = ObserverAction::kStop;
  }
  return action;
}

template <class Stepper>
IntegrationResult run_loop(Stepper& stepper, const AeroelasticModel& model, RunState& run,
                           double t_end, const IntegratorSettings& settings,
                           const OutputSchedule& schedule, const SampleObserver& observer,
                           bool emit_initial, const std::atomic<bool>* cancel,
                           const PeakObserver& peaks) {
  // The integrated vector: run.x itself, or [x; vec(Phi)] when the
  // monodromy is tracked (written back to run.x / run.monodromy on every
  // exit, exceptions included).
  const bool track = run.track_monodromy;
  const auto n = static_cast<std::size_t>(model.state_size());
  State augmented;
  if (track) {
    augmented = run.x;
    augmented.insert(augmented.end(), run.monodromy.begin(), run.monodromy.end());
  }
  State& cur = track ? augmented : run.x;
  struct WriteBack {
    RunState& run;
    const State& cur;
    bool track;
    std::size_t n;
    ~WriteBack() {
      if (!track) return;
      std::copy(cur.begin(), cur.begin() + static_cast<std::ptrdiff_t>(n), run.x.begin());
      std::copy(cur.begin() + static_cast<std::ptrdiff_t>(n), cur.end(), run.monodromy.begin());
    }
  } write_back{run, cur, track, n};
  Eigen::MatrixXd jac;
  if (track) jac.resize(static_cast<Eigen::Index>(n), static_cast<Eigen::Index>(n));
  auto system = [&model, &run, &jac, track, n](const State& x, State& dxdt, double t) {
    ++run.rhs_evaluations;
    model.rhs(x.data(), dxdt.data(), t, run.regions, run.input_segment);
    if (track) {
      // Phi' = Df(x) Phi.
      const auto N = static_cast<Eigen::Index>(n);
      model.jacobian(x.data(), t, run.regions, run.input_segment, jac);
      Eigen::Map<const Eigen::MatrixXd> Phi(x.data() + n, N, N);
      Eigen::Map<Eigen::MatrixXd> dPhi(dxdt.data() + n, N, N);
      dPhi.noalias() = jac * Phi;
    }
  };
  State view;  // the state part handed to observers
  const auto input_breaks = model.gusts().breakpoints();
  run.input_segment = model.gusts().segment_of(run.time);
  const StateLayout& L = model.layout();
  IntegrationResult result;
  const double t0 = run.time;
  const double dt0 = settings.initial_step > 0 ? settings.initial_step
                                               : default_initial_step(model);
  auto emit = [&](double t, const State& x) {
    ++run.samples;
    return observer ? observer(t, state_part(x, n, view)) : ObserverAction::kContinue;
  };

  if (emit_initial && emit(t0, cur) == ObserverAction::kStop) {
    result.reason = StopReason::kObserver;
    result.end_time = t0;
    return result;
  }
  if (t_end <= t0) {
    result.end_time = t0;
    return result;
  }

  stepper.initialize(cur, t0, std::min(dt0, t_end - t0));
  State sample(cur.size()), work(cur.size()), probe(cur.size());
  // A step longer than this (1/8 of the shortest uncoupled period) is split
  // when looking for switching points.
  const double shortest_period = 200.0 * default_initial_step(model);
  const double long_step = shortest_period / 8.0;
  std::int64_t k = 1;  // next fixed sample index
  const double dt_out = schedule.interval;
  // Tolerance for a sample time to count as reached (round-off in t0 + k dt).
  const double t_eps = 1e-12 * std::max(std::abs(t_end), std::abs(t0) + 1.0);
  std::vector<Boundary> boundaries = watched_boundaries(model, run.regions);
  // Chattering: switches piling up at one boundary with vanishing spacing.
  const double chatter_dt = 1e-9 * default_initial_step(model) * 200.0;
  int close_switches = 0;
  double last_switch = -std::numeric_limits<double>::infinity();

  while (true) {
    // Land exactly on the next input switch time.
    double t_break = std::numeric_limits<double>::infinity();
    if (run.input_segment < static_cast<int>(input_breaks.size()))
      t_break = input_breaks[static_cast<std::size_t>(run.input_segment)];
    bool landing = false;
    if (std::isfinite(t_break) && stepper.current_time() + stepper.current_time_step() > t_break) {
      const double dt_b = t_break - stepper.current_time();
      if (dt_b > 0) stepper.initialize(cur, stepper.current_time(), dt_b);
      landing = true;
    }
    std::pair<double, double> step;
    try {
      step = stepper.do_step(system);
    } catch (const odeint::step_adjustment_error& e) {
      throw NumericalError(stepper.current_time(),
                           fmt::format("step-size control failed ({}); {}; state: {}; {}", e.what(),
                                       describe_switching(L, boundaries, cur),
                                       describe_state(L, cur), kCollapseHint));
    }
    ++run.steps;
    const double t_old = step.first, t_new = step.second;
    const State& xn = stepper.current_state();
    if (!all_finite(xn)) {
      throw NumericalError(t_old, fmt::format("non-finite state after the step to t = {:.9g} s: {}; "
                                              "state at the step start: {}",
                                              t_new, non_finite_components(L, xn),
                                              describe_state(L, cur)));
    }
    // Collapse: a step of a few round-offs of the time, or of the model's
    // shortest period near t = 0 (where round-off of t alone would allow
    // ever smaller steps and the run would crawl instead of stopping). A
    // step cut short to land on an input switch time is exempt.
    const double dt = t_new - t_old;
    if (!landing && !(dt > 16.0 * std::numeric_limits<double>::epsilon() *
                               std::max(std::abs(t_new), shortest_period))) {
      throw NumericalError(t_new, fmt::format("step size collapsed to {:.3g} s; {}; state: {}; {}", dt,
                                              describe_switching(L, boundaries, xn),
                                              describe_state(L, xn), kCollapseHint));
    }

    // A switching point inside the step ends the step there.
    const double t_check = std::min(t_new, t_end);
    const State* x_check = &xn;
    if (!boundaries.empty() && t_check != t_new) {
      stepper.calc_state(t_check, sample);
      x_check = &sample;
    }
    const auto event = first_crossing(stepper, L, boundaries, t_old, t_check, cur, *x_check,
                                      long_step, work, probe);
    const double t_seg = event ? event->first : t_new;
    const double t_stop = std::min(t_seg, t_end);
    ObserverAction peak_action = ObserverAction::kContinue;
    if (peaks) {
      const double tp = std::min(t_seg, t_end);
      if (tp == t_new) {
        peak_action = report_peaks(stepper, model, t_old, cur, t_new, xn, peaks, work, view);
      } else {
        stepper.calc_state(tp, sample);
        peak_action = report_peaks(stepper, model, t_old, cur, tp, sample, peaks, work, view);
      }
    }

    ObserverAction action = peak_action;
    if (action == ObserverAction::kStop) {
      // The peak observer ends the run at the end of this segment.
    } else if (schedule.every_step) {
      if (t_seg <= t_end + t_eps) {
        if (t_seg == t_new) {
          action = emit(t_new, xn);
        } else {
          stepper.calc_state(t_seg, sample);
          action = emit(t_seg, sample);
        }
      } else {
        stepper.calc_state(t_end, sample);
        action = emit(t_end, sample);
      }
    } else {
      while (action == ObserverAction::kContinue) {
        const double tk = t0 + static_cast<double>(k) * dt_out;
        if (tk > t_stop + t_eps) break;
        stepper.calc_state(std::min(tk, t_seg), sample);
        action = emit(tk, sample);
        ++k;
      }
    }
    // Reached the end time before any switch.
    if (t_seg >= t_end - t_eps) {
      if (t_new == t_end) {
        cur = xn;
      } else {
        stepper.calc_state(t_end, cur);
      }
      run.time = t_end;
      result.end_time = t_end;
      result.reason = action == ObserverAction::kStop ? StopReason::kObserver : StopReason::kEndTime;
      return result;
    }
    if (event) {
      // Switch: the state at the crossing starts a new smooth segment in
      // the next region; the stepper restarts there with the last step size.
      const Boundary& b = *event->second;
      stepper.calc_state(event->first, cur);
      run.time = event->first;
      if (track)
        apply_saltation(model, b, run.time, run.regions, run.input_segment, shortest_period, cur);
      run.regions[b.spring] = b.next_region;
      ++run.switches;
      if (run.time - last_switch < chatter_dt) {
        if (++close_switches > 50)
          throw NumericalError(run.time, fmt::format(
              "chattering: {} switches within {:.3g} s at the {} spring's breakpoint {:.9g} (the "
              "state is trapped on a switching surface: the spring force jumps there and both "
              "sides push the state back onto it); state: {}",
              close_switches, run.time - last_switch, dof_name(b.spring), b.position,
              describe_state(L, cur)));
      } else {
        close_switches = 0;
      }
      last_switch = run.time;
      boundaries = watched_boundaries(model, run.regions);
      stepper.initialize(cur, run.time, std::max(dt, 1e-6 * dt0));
    } else {
      cur = xn;
      run.time = t_new;
      if (std::isfinite(t_break) &&
          t_new >= t_break - 4 * std::numeric_limits<double>::epsilon() * std::abs(t_break)) {
        // Input switch: the next segment's formulas from here on.
        run.time = t_break;
        run.input_segment = model.gusts().segment_of(t_break);
        stepper.initialize(cur, run.time, std::max(dt, 1e-6 * dt0));
      }
    }
    if (action == ObserverAction::kStop) {
      result.reason = StopReason::kObserver;
      result.end_time = run.time;
      return result;
    }
    if (cancel && cancel->load(std::memory_order_relaxed)) {
      result.reason = StopReason::kCancelled;
      result.end_time = run.time;
      return result;
    }
  }
}

}  // namespace

IntegrationResult integrate(const AeroelasticModel& model, RunState& run, double t_end,
                            const IntegratorSettings& settings, const OutputSchedule& schedule,
                            const SampleObserver& observer, bool emit_initial,
                            const std::atomic<bool>* cancel, const PeakObserver& peaks) {
  AEROSECT_CHECK(static_cast<int>(run.x.size()) == model.state_size());
  AEROSECT_CHECK(schedule.every_step || schedule.interval > 0);
  AEROSECT_CHECK(!run.track_monodromy ||
                 run.monodromy.size() == run.x.size() * run.x.size());
  if (run.regions.empty()) run.regions = model.regions_of(run.x.data());
  const double atol = settings.absolute_tolerance, rtol = settings.relative_tolerance;
  switch (settings.stepper) {
    case StepperKind::kDopri5: {
      auto stepper = odeint::make_dense_output(atol, rtol, settings.max_step,
                                               odeint::runge_kutta_dopri5<State>());
      return run_loop(stepper, model, run, t_end, settings, schedule, observer, emit_initial,
                      cancel, peaks);
    }
    case StepperKind::kBulirschStoer: {
      odeint::bulirsch_stoer_dense_out<State> stepper(atol, rtol, 1.0, 1.0, settings.max_step);
      return run_loop(stepper, model, run, t_end, settings, schedule, observer, emit_initial,
                      cancel, peaks);
    }
  }
  throw InternalError(__FILE__, __LINE__, "unknown stepper");
}

}  // namespace aerosect
