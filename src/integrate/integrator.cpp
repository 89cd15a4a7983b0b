#include "aerosect/integrate/integrator.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>

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

std::string describe_state(const AeroelasticModel& model, const State& x) {
  std::string s;
  for (std::size_t i = 0; i < x.size(); ++i) {
    (void)model;
    s += fmt::format("{}x[{}] = {:.6g}", i ? ", " : "", i, x[i]);
  }
  return s;
}

bool all_finite(const State& x) {
  return std::all_of(x.begin(), x.end(), [](double v) { return std::isfinite(v); });
}

template <class Stepper>
IntegrationResult run_loop(Stepper& stepper, const AeroelasticModel& model, RunState& run,
                           double t_end, const IntegratorSettings& settings,
                           const OutputSchedule& schedule, const SampleObserver& observer,
                           bool emit_initial, const std::atomic<bool>* cancel) {
  auto system = [&model, &run](const State& x, State& dxdt, double /*t*/) {
    ++run.rhs_evaluations;
    model.rhs(x.data(), dxdt.data(), run.regions);
  };
  IntegrationResult result;
  const double t0 = run.time;
  const double dt0 = settings.initial_step > 0 ? settings.initial_step
                                               : default_initial_step(model);
  auto emit = [&](double t, const State& x) {
    ++run.samples;
    return observer ? observer(t, x) : ObserverAction::kContinue;
  };

  if (emit_initial && emit(t0, run.x) == ObserverAction::kStop) {
    result.reason = StopReason::kObserver;
    result.end_time = t0;
    return result;
  }
  if (t_end <= t0) {
    result.end_time = t0;
    return result;
  }

  stepper.initialize(run.x, t0, std::min(dt0, t_end - t0));
  State sample(run.x.size());
  std::int64_t k = 1;  // next fixed sample index
  const double dt_out = schedule.interval;
  // Tolerance for a sample time to count as reached (round-off in t0 + k dt).
  const double t_eps = 1e-12 * std::max(std::abs(t_end), std::abs(t0) + 1.0);

  while (true) {
    std::pair<double, double> step;
    try {
      step = stepper.do_step(system);
    } catch (const odeint::step_adjustment_error& e) {
      throw NumericalError(stepper.current_time(),
                           fmt::format("step-size control failed ({}); state: {}", e.what(),
                                       describe_state(model, stepper.current_state())));
    }
    ++run.steps;
    const double t_new = step.second;
    const State& xn = stepper.current_state();
    if (!all_finite(xn)) {
      throw NumericalError(step.first, fmt::format("non-finite state after the step to t = "
                                                   "{:.9g} s; state at the step start: {}",
                                                   t_new, describe_state(model, run.x)));
    }
    const double dt = t_new - step.first;
    if (!(dt > 16.0 * std::numeric_limits<double>::epsilon() * std::abs(t_new))) {
      throw NumericalError(t_new, fmt::format("step size collapsed to {:.3g} s", dt));
    }
    const double t_stop = std::min(t_new, t_end);
    ObserverAction action = ObserverAction::kContinue;
    if (schedule.every_step) {
      if (t_new <= t_end + t_eps) {
        action = emit(t_new, xn);
      } else {
        stepper.calc_state(t_end, sample);
        action = emit(t_end, sample);
      }
    } else {
      while (action == ObserverAction::kContinue) {
        const double tk = t0 + static_cast<double>(k) * dt_out;
        if (tk > t_stop + t_eps) break;
        stepper.calc_state(std::min(tk, t_new), sample);
        action = emit(tk, sample);
        ++k;
      }
    }
    // Keep the run state at the last time reached.
    if (t_new >= t_end - t_eps) {
      if (t_new == t_end) {
        run.x = xn;
      } else {
        stepper.calc_state(t_end, run.x);
      }
      run.time = t_end;
      result.end_time = t_end;
      result.reason = StopReason::kEndTime;
      if (action == ObserverAction::kStop) result.reason = StopReason::kObserver;
      return result;
    }
    run.x = xn;
    run.time = t_new;
    if (action == ObserverAction::kStop) {
      result.reason = StopReason::kObserver;
      result.end_time = t_new;
      return result;
    }
    if (cancel && cancel->load(std::memory_order_relaxed)) {
      result.reason = StopReason::kCancelled;
      result.end_time = t_new;
      return result;
    }
  }
}

}  // namespace

IntegrationResult integrate(const AeroelasticModel& model, RunState& run, double t_end,
                            const IntegratorSettings& settings, const OutputSchedule& schedule,
                            const SampleObserver& observer, bool emit_initial,
                            const std::atomic<bool>* cancel) {
  AEROSECT_CHECK(static_cast<int>(run.x.size()) == model.state_size());
  AEROSECT_CHECK(schedule.every_step || schedule.interval > 0);
  if (run.regions.empty()) run.regions = model.regions_of(run.x.data());
  const double atol = settings.absolute_tolerance, rtol = settings.relative_tolerance;
  switch (settings.stepper) {
    case StepperKind::kDopri5: {
      auto stepper = odeint::make_dense_output(atol, rtol, settings.max_step,
                                               odeint::runge_kutta_dopri5<State>());
      return run_loop(stepper, model, run, t_end, settings, schedule, observer, emit_initial,
                      cancel);
    }
    case StepperKind::kBulirschStoer: {
      odeint::bulirsch_stoer_dense_out<State> stepper(atol, rtol, 1.0, 1.0, settings.max_step);
      return run_loop(stepper, model, run, t_end, settings, schedule, observer, emit_initial,
                      cancel);
    }
  }
  throw InternalError(__FILE__, __LINE__, "unknown stepper");
}

}  // namespace aerosect
