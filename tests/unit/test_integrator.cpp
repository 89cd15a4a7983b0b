#include <catch2/catch.hpp>

#include <cmath>
#include <limits>
#include <numbers>

#include <boost/math/quadrature/exp_sinh.hpp>
#include <unsupported/Eigen/MatrixFunctions>

#include "aerosect/error.hpp"
#include "aerosect/integrate/integrator.hpp"
#include "aerosect/model/system.hpp"
#include "helpers.hpp"

using namespace aerosect;
using std::numbers::pi;

namespace {
// Two uncoupled undamped oscillators in vacuum: h = h0 cos(omega_h t),
// alpha = alpha0 cos(omega_alpha t) (x_alpha = 0, rho = 0).
ModelDescription uncoupled_vacuum() {
  ModelDescription d;
  d.section.semichord = 0.5;
  d.section.mass = 2.0;
  d.section.static_unbalance = 0.0;
  d.section.pitch_inertia = 0.5;
  d.section.plunge_stiffness = 2.0 * std::pow(2 * pi * 1.0, 2);  // 1 Hz
  d.section.pitch_stiffness = 0.5 * std::pow(2 * pi * 2.5, 2);   // 2.5 Hz
  d.springs[0] = SpringLaw::linear(d.section.plunge_stiffness);
  d.springs[1] = SpringLaw::linear(d.section.pitch_stiffness);
  d.flow = {0.0, 0.0};
  return d;
}

double final_error(const AeroelasticModel& model, double h, StepperKind kind) {
  RunState run;
  run.x = {0.01, 0.02, 0.0, 0.0};
  IntegratorSettings s;
  s.stepper = kind;
  s.relative_tolerance = 1e-2;  // loose: the step is set by max_step alone
  s.absolute_tolerance = 1e-2;
  s.max_step = h;
  s.initial_step = h;
  const double T = 2.0;
  integrate(model, run, T, s, OutputSchedule::none());
  const auto& sec = model.description().section;
  const double wh = std::sqrt(sec.plunge_stiffness / sec.mass);
  const double wa = std::sqrt(sec.pitch_stiffness / sec.pitch_inertia);
  return std::max(std::abs(run.x[0] - 0.01 * std::cos(wh * T)),
                  std::abs(run.x[1] - 0.02 * std::cos(wa * T)));
}
}  // namespace

TEST_CASE("Dormand-Prince shows fifth-order convergence on an analytic solution", "[integrator]") {
  // Dormand & Prince 1980: the propagated solution of RK5(4) is fifth
  // order, so halving a fixed step divides the global error by 2^5 = 32.
  const AeroelasticModel model(uncoupled_vacuum());
  const double e1 = final_error(model, 0.02, StepperKind::kDopri5);
  const double e2 = final_error(model, 0.01, StepperKind::kDopri5);
  const double e3 = final_error(model, 0.005, StepperKind::kDopri5);
  const double p1 = std::log2(e1 / e2), p2 = std::log2(e2 / e3);
  INFO("errors " << e1 << " " << e2 << " " << e3 << " orders " << p1 << " " << p2);
  CHECK(p1 > 4.6);
  CHECK(p1 < 5.4);
  CHECK(p2 > 4.6);
  CHECK(p2 < 5.4);
}

TEST_CASE("Adaptive steppers meet their tolerance on the analytic solution", "[integrator]") {
  // Common practice: global error of the order of the tolerance over a few periods.
  const AeroelasticModel model(uncoupled_vacuum());
  for (StepperKind kind : {StepperKind::kDopri5, StepperKind::kBulirschStoer}) {
    RunState run;
    run.x = {0.01, 0.02, 0.0, 0.0};
    IntegratorSettings s;
    s.stepper = kind;
    s.relative_tolerance = 1e-10;
    s.absolute_tolerance = 1e-13;
    double max_err = 0;
    const auto& sec = model.description().section;
    const double wh = std::sqrt(sec.plunge_stiffness / sec.mass);
    const double wa = std::sqrt(sec.pitch_stiffness / sec.pitch_inertia);
    integrate(model, run, 3.0, s, {false, 0.01},
              {[&](double t, const std::vector<double>& x) {
                max_err = std::max({max_err, std::abs(x[0] - 0.01 * std::cos(wh * t)) / 0.01,
                                    std::abs(x[1] - 0.02 * std::cos(wa * t)) / 0.02});
                return ObserverAction::kContinue;
              }});
    INFO(to_string(kind) << " max relative error " << max_err);
    CHECK(max_err < 1e-7);
  }
}

TEST_CASE("Undamped structure in vacuum conserves energy", "[integrator]") {
  // Common practice, no source: with rho = 0 and zero damping the energy
  // T + V = 1/2 q'^T M q' + 1/2 q^T K q of the coupled 2-DOF section is constant.
  ModelDescription d = uncoupled_vacuum();
  d.section.static_unbalance = 0.2;  // couple the DOFs: x_alpha = 0.2
  const AeroelasticModel model(d);
  const DofMatrix M = structural_mass(d.section), K = structural_stiffness(d.section);
  auto energy = [&](const std::vector<double>& x) {
    Eigen::Vector2d q(x[0], x[1]), v(x[2], x[3]);
    return 0.5 * v.dot(M * v) + 0.5 * q.dot(K * q);
  };
  RunState run;
  run.x = {0.02, 0.05, 0.1, -0.3};
  const double E0 = energy(run.x);
  IntegratorSettings s;
  s.relative_tolerance = 1e-11;
  s.absolute_tolerance = 1e-14;
  double worst = 0;
  integrate(model, run, 20.0, s, {false, 0.005}, {[&](double, const std::vector<double>& x) {
    worst = std::max(worst, std::abs(energy(x) - E0) / E0);
    return ObserverAction::kContinue;
  }});
  INFO("worst relative energy drift " << worst);
  CHECK(worst < 1e-8);
}

TEST_CASE("Fixed-rate output lands exactly on k dt; every-step output on each step",
          "[integrator]") {
  // Common practice, no source.
  const AeroelasticModel model(uncoupled_vacuum());
  RunState run;
  run.x = {0.01, 0.0, 0.0, 0.0};
  std::vector<double> times;
  integrate(model, run, 1.0, {}, {false, 0.1}, {[&](double t, const std::vector<double>&) {
    times.push_back(t);
    return ObserverAction::kContinue;
  }});
  REQUIRE(times.size() == 11);
  for (std::size_t k = 0; k < times.size(); ++k) CHECK(times[k] == Approx(0.1 * k).margin(1e-15));
  CHECK(run.time == 1.0);

  RunState run2;
  run2.x = {0.01, 0.0, 0.0, 0.0};
  std::int64_t samples = 0;
  integrate(model, run2, 1.0, {}, {true, 0.0}, {[&](double, const std::vector<double>&) {
    ++samples;
    return ObserverAction::kContinue;
  }});
  CHECK(samples == run2.steps + 1);
}

TEST_CASE("Observer stop and cancellation end the run where they happen", "[integrator]") {
  // Common practice, no source.
  const AeroelasticModel model(uncoupled_vacuum());
  RunState run;
  run.x = {0.01, 0.0, 0.0, 0.0};
  const IntegrationResult r = integrate(model, run, 10.0, {}, {false, 0.1},
                                        {[&](double t, const std::vector<double>&) {
                                          return t >= 0.5 ? ObserverAction::kStop
                                                          : ObserverAction::kContinue;
                                        }});
  CHECK(r.reason == StopReason::kObserver);
  CHECK(r.end_time < 1.0);
  std::atomic<bool> cancel{true};
  RunState run2;
  run2.x = {0.01, 0.0, 0.0, 0.0};
  const IntegrationResult r2 = integrate(model, run2, 10.0, {}, {false, 0.1}, {{}, {}, &cancel});
  CHECK(r2.reason == StopReason::kCancelled);
  CHECK(run2.time < 10.0);
}

TEST_CASE("Peak observer finds the true extrema on the dense output", "[integrator]") {
  // Analytic solution (common practice): h = h0 cos(omega_h t) has its
  // extrema at t = k pi / omega_h with value +-h0, whatever the step size.
  const AeroelasticModel model(uncoupled_vacuum());
  const auto& sec = model.description().section;
  const double wh = std::sqrt(sec.plunge_stiffness / sec.mass);
  RunState run;
  run.x = {0.01, 0.02, 0.0, 0.0};
  IntegratorSettings s;
  s.relative_tolerance = 1e-11;
  s.absolute_tolerance = 1e-14;
  std::vector<std::pair<double, double>> peaks;
  integrate(model, run, 4.75, s, OutputSchedule::none(),
            {{}, [&](int dof, double t, const std::vector<double>& x) {
               if (dof == kPlunge) peaks.emplace_back(t, x[kPlunge]);
               return ObserverAction::kContinue;
             }});
  REQUIRE(peaks.size() == 9);  // 1 Hz: extrema every 0.5 s up to 4.75 s, the start excluded
  for (std::size_t k = 0; k < peaks.size(); ++k) {
    CHECK(peaks[k].first == Approx((k + 1) * pi / wh).margin(1e-9));
    CHECK(std::abs(peaks[k].second) == Approx(0.01).epsilon(1e-9));
  }
}

TEST_CASE("A non-finite state stops the run naming the time and the components", "[integrator]") {
  // A hardening cubic pitch spring f = k (x + x^3) released from 1e120 rad:
  // x^3 overflows to inf in the first right-hand side (IEEE 754 double
  // range ~1.8e308), so the first step yields a non-finite state.
  ModelDescription d = uncoupled_vacuum();
  d.springs[kPitch] = SpringLaw::cubic(d.section.pitch_stiffness, 1.0);
  const AeroelasticModel model(d);
  RunState run;
  run.x = {0.0, 1e120, 0.0, 0.0};
  try {
    integrate(model, run, 1.0, {}, {false, 0.01, false});
    FAIL("no NumericalError");
  } catch (const NumericalError& e) {
    const std::string m = e.what();
    INFO(m);
    CHECK(e.time() == 0.0);
    CHECK(m.find("non-finite state") != std::string::npos);
    CHECK(m.find("pitch_velocity = ") != std::string::npos);
    CHECK((m.find("inf") != std::string::npos || m.find("nan") != std::string::npos));
    // The start state, by name, for the user to see where it came from.
    CHECK(m.find("pitch = 1e+120") != std::string::npos);
    CHECK(m.find("x[") == std::string::npos);
  }
}

TEST_CASE("A finite-time blow-up is reported as a step-size collapse at the blow-up time",
          "[integrator]") {
  // Softening cubic pitch spring, x'' = -w^2 (x - x^3), released at rest from
  // x0 = 2 (beyond the turning point x = 1): energy conservation gives
  // x'^2 = w^2 (x^2/2 + 1)(x^2 - 4), and with x = 2 cosh u the escape time is
  // t* = (1/w) int_0^inf du / sqrt(2 cosh^2 u + 1) (common practice, no
  // source), evaluated with Boost.Math's exp_sinh quadrature. The step size
  // collapses within a few round-offs of t*, so the reported time agrees to
  // the integrator's tolerance (rtol 1e-8; 1e-6 allowed).
  ModelDescription d = uncoupled_vacuum();
  d.springs[kPitch] = SpringLaw::cubic(d.section.pitch_stiffness, -1.0);
  const AeroelasticModel model(d);
  const double w = std::sqrt(d.section.pitch_stiffness / d.section.pitch_inertia);
  boost::math::quadrature::exp_sinh<double> q;
  const double t_star =
      q.integrate([](double u) { return 1.0 / std::sqrt(2 * std::cosh(u) * std::cosh(u) + 1); }, 0.0,
                  std::numeric_limits<double>::infinity()) /
      w;
  RunState run;
  run.x = {0.0, 2.0, 0.0, 0.0};
  try {
    integrate(model, run, 10.0, {}, {false, 0.01, false});
    FAIL("no NumericalError");
  } catch (const NumericalError& e) {
    const std::string m = e.what();
    INFO(m << "\nt* = " << t_star);
    CHECK(e.time() == Approx(t_star).epsilon(1e-6));
    CHECK((m.find("step size collapsed") != std::string::npos ||
           m.find("step-size control failed") != std::string::npos));
    CHECK(m.find("no switching function is watched") != std::string::npos);
    CHECK(m.find("pitch = ") != std::string::npos);
    CHECK(m.find("softening spring") != std::string::npos);
  }
}

TEST_CASE("A step-size collapse near a breakpoint names the switching function", "[integrator]") {
  // Pitch freeplay (gap +-0.01 rad) and a tolerance no step can meet (1e-300
  // relative and absolute, far below double round-off): the step size
  // collapses at once, next to the upper breakpoint the state starts on.
  ModelDescription d = uncoupled_vacuum();
  d.springs[kPitch] = SpringLaw::freeplay(d.section.pitch_stiffness, 0.01, 0.01, 0.0);
  const AeroelasticModel model(d);
  RunState run;
  run.x = {0.0, 0.0100001, 0.0, 0.0};
  IntegratorSettings s;
  s.relative_tolerance = 1e-300;
  s.absolute_tolerance = 1e-300;
  try {
    integrate(model, run, 1.0, s, {false, 0.01, false});
    FAIL("no NumericalError");
  } catch (const NumericalError& e) {
    const std::string m = e.what();
    INFO(m);
    CHECK((m.find("step size collapsed") != std::string::npos ||
           m.find("step-size control failed") != std::string::npos));
    // Region 2 (beyond the gap) watches its lower boundary h = 0.01 - pitch.
    CHECK(m.find("switching function: h = 0.01 - pitch = ") != std::string::npos);
    CHECK(m.find("the pitch spring's lower breakpoint, rad") != std::string::npos);
  }
}

// ---------------------------------------------------------------------------
// Variational flow: the monodromy Phi(T) = d x(T) / d x0 integrated with
// the state (RunState::track_monodromy).

namespace {

// A run from x0 to T with the monodromy tracked from the identity; `scale`
// collects max |x_i(t)| over 200 samples (the state's natural scales, for
// comparing matrices whose entries carry different units).
struct VariationalRun {
  std::vector<double> x;           // x(T)
  std::vector<int> regions;        // spring regions at T
  Eigen::MatrixXd phi;             // Phi(T, 0)
  std::vector<double> scale;       // max |x_i| along the run
  std::int64_t switches = 0;
};

VariationalRun run_variational(const AeroelasticModel& model, const std::vector<double>& x0,
                               double T, const IntegratorSettings& s) {
  const int n = model.state_size();
  RunState run;
  run.x = x0;
  run.track_monodromy = true;
  const Eigen::MatrixXd I = Eigen::MatrixXd::Identity(n, n);
  run.monodromy.assign(I.data(), I.data() + n * n);
  VariationalRun out;
  out.scale.assign(static_cast<std::size_t>(n), 0.0);
  integrate(model, run, T, s, {false, T / 200}, {[&](double, const std::vector<double>& x) {
    REQUIRE(static_cast<int>(x.size()) == n);  // observers see the state only
    for (int i = 0; i < n; ++i) out.scale[i] = std::max(out.scale[i], std::abs(x[i]));
    return ObserverAction::kContinue;
  }});
  out.x = run.x;
  out.regions = run.regions;
  out.phi = Eigen::Map<const Eigen::MatrixXd>(run.monodromy.data(), n, n);
  out.switches = run.switches;
  return out;
}

// Phi by central differences of the flow, column c from x0 +- eps_c e_c,
// eps_c = 1e-6 scale_c; every perturbed run must cross as many breakpoints
// as the reference (the same switching sequence, so the flow is smooth there).
Eigen::MatrixXd central_differences(const AeroelasticModel& model, const std::vector<double>& x0,
                                    double T, const IntegratorSettings& s,
                                    const std::vector<double>& scale, std::int64_t switches) {
  const int n = model.state_size();
  Eigen::MatrixXd fd(n, n);
  for (int c = 0; c < n; ++c) {
    const double eps = 1e-6 * scale[c];
    std::vector<double> end[2];
    for (int k = 0; k < 2; ++k) {
      RunState run;
      run.x = x0;
      run.x[c] += k == 0 ? eps : -eps;
      integrate(model, run, T, s, OutputSchedule::none());
      CHECK(run.switches == switches);
      end[k] = run.x;
    }
    for (int r = 0; r < n; ++r) fd(r, c) = (end[0][r] - end[1][r]) / (2 * eps);
  }
  return fd;
}

// max |P - R| / max |R| after scaling entry (r, c) by scale_c / scale_r,
// which makes both dimensionless (d x_r / d x_c in units of the state's
// own amplitudes).
double scaled_difference(const Eigen::MatrixXd& P, const Eigen::MatrixXd& R,
                         const std::vector<double>& scale) {
  double diff = 0, ref = 0;
  for (int r = 0; r < P.rows(); ++r)
    for (int c = 0; c < P.cols(); ++c) {
      const double w = scale[c] / scale[r];
      diff = std::max(diff, std::abs(P(r, c) - R(r, c)) * w);
      ref = std::max(ref, std::abs(R(r, c)) * w);
    }
  return diff / ref;
}

// Phi(T) f(x0) = f(x(T)): a perturbation along the flow is carried along
// it (the multiplier 1 of a periodic orbit; Kuznetsov, Elements of Applied
// Bifurcation Theory, ch. 1). Returns the scaled relative mismatch.
double along_flow_mismatch(const AeroelasticModel& model, const std::vector<double>& x0,
                           const VariationalRun& v) {
  const int n = model.state_size();
  std::vector<double> f0(n), f1(n);
  model.rhs(x0.data(), f0.data(), 0.0, model.regions_of(x0.data()));
  model.rhs(v.x.data(), f1.data(), 0.0, v.regions);
  const Eigen::VectorXd carried = v.phi * Eigen::Map<const Eigen::VectorXd>(f0.data(), n);
  double diff = 0, ref = 0;
  for (int r = 0; r < n; ++r) {
    diff = std::max(diff, std::abs(carried(r) - f1[r]) / v.scale[r]);
    ref = std::max(ref, std::abs(f1[r]) / v.scale[r]);
  }
  return diff / ref;
}

IntegratorSettings tight() {
  IntegratorSettings s;
  s.relative_tolerance = 1e-12;
  s.absolute_tolerance = 1e-15;
  return s;
}

}  // namespace

TEST_CASE("Monodromy of a linear model equals the matrix exponential", "[integrator][monodromy]") {
  // Benchmark section (Lee, Price & Wong 1999), linear springs, Jones'
  // Wagner lag states (6 states), below flutter: x' = A x, so Phi(T) =
  // exp(A T) exactly. Reference: Eigen's unsupported MatrixFunctions
  // exp() (scaling and squaring with Pade; Higham 2005). At rtol 1e-12 over
  // about five pitch periods the integrated matrix agrees to ~1e-10 of its
  // largest scaled entry; 1e-8 leaves room for the error's growth.
  const Case c = test::case_from(test::benchmark_2dof("[initial]\npitch_deg = 3.0\n[simulation]\nduration = 30\n", 4.0));
  const AeroelasticModel model(c.model);
  REQUIRE(model.nonlinear_springs().empty());
  const std::vector<double> x0 =
      model.initial_state(c.simulation.initial_displacement, c.simulation.initial_velocity, false);
  const double T = 30.0;  // s (omega_alpha = 1 rad/s in this nondimensional section)
  const VariationalRun v = run_variational(model, x0, T, tight());
  const Eigen::MatrixXd ref = (model.linear_part() * T).exp();
  // The Jacobian of a linear model is its state matrix.
  Eigen::MatrixXd J(model.state_size(), model.state_size());
  model.jacobian(x0.data(), 0.0, model.regions_of(x0.data()), 0, J);
  CHECK(J == model.linear_part());
  const double err = scaled_difference(v.phi, ref, v.scale);
  INFO("scaled |Phi - exp(A T)| / |exp(A T)| = " << err);
  CHECK(err < 1e-8);
  CHECK(along_flow_mismatch(model, x0, v) < 1e-8);
}

TEST_CASE("Monodromy across several freeplay breakpoints matches central differences of the flow",
          "[integrator][monodromy]") {
  // Pitch freeplay of half-gap 0.5 deg on the benchmark section (Lee, Price &
  // Wong 1999), from 3 deg: the force is continuous at the breakpoints, so
  // the saltation matrix is the identity (integrator.hpp) and Phi jumps only
  // in its derivative. Reference: central differences of the flow map
  // (common practice, no source), perturbations 1e-6 of each component's
  // amplitude. Their error: truncation ~(1e-6)^2, integration error of the
  // perturbed runs (rtol 1e-12) over the perturbation ~1e-6; 1e-5 allows
  // ten times that. Phi f(x0) = f(x(T)) to 1e-8 (rtol 1e-12 accumulated).
  const Case c = test::case_from(test::benchmark_2dof(
      "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n[initial]\npitch_deg = 3.0\n"
      "[simulation]\nduration = 30\n", 4.0));
  const AeroelasticModel model(c.model);
  const std::vector<double> x0 =
      model.initial_state(c.simulation.initial_displacement, c.simulation.initial_velocity, false);
  const double T = 30.0;
  const VariationalRun v = run_variational(model, x0, T, tight());
  INFO("switches " << v.switches);
  CHECK(v.switches >= 4);
  const Eigen::MatrixXd fd = central_differences(model, x0, T, tight(), v.scale, v.switches);
  const double err = scaled_difference(v.phi, fd, v.scale);
  INFO("scaled |Phi - FD| / |FD| = " << err);
  CHECK(err < 1e-5);
  const double along = along_flow_mismatch(model, x0, v);
  INFO("along-flow mismatch " << along);
  CHECK(along < 1e-8);
}

TEST_CASE("Monodromy with a cubic spring matches central differences of the flow",
          "[integrator][monodromy]") {
  // Hardening cubic pitch spring f = k (x + 3 x^3) on the benchmark section
  // from 10 deg (the cubic term changes the stiffness by ~9 %): Df depends
  // on x(t). Reference and tolerances as for the freeplay case above.
  const Case c = test::case_from(test::benchmark_2dof(
      "[springs.pitch]\nlaw = \"cubic\"\ncubic_coefficient = 3.0\n[initial]\npitch_deg = 10.0\n"
      "[simulation]\nduration = 30\n",
      4.0));
  const AeroelasticModel model(c.model);
  const std::vector<double> x0 =
      model.initial_state(c.simulation.initial_displacement, c.simulation.initial_velocity, false);
  const double T = 30.0;
  const VariationalRun v = run_variational(model, x0, T, tight());
  const Eigen::MatrixXd fd = central_differences(model, x0, T, tight(), v.scale, 0);
  const double err = scaled_difference(v.phi, fd, v.scale);
  INFO("scaled |Phi - FD| / |FD| = " << err);
  CHECK(err < 1e-5);
  const double along = along_flow_mismatch(model, x0, v);
  INFO("along-flow mismatch " << along);
  CHECK(along < 1e-8);
}

namespace {
// Coupled section in vacuum (x_alpha = 0.2) whose pitch spring is preloaded:
// f = k x + F sign(x), a force jump of 2F at x = 0 (spring.hpp).
ModelDescription preloaded_pitch(double F) {
  ModelDescription d = uncoupled_vacuum();
  d.section.static_unbalance = 0.2;
  d.springs[kPitch] = SpringLaw::piecewise_linear({0.0}, {d.section.pitch_stiffness,
                                                          d.section.pitch_stiffness}, {-F, F});
  return d;
}
}  // namespace

TEST_CASE("Saltation across a force jump matches central differences of the flow",
          "[integrator][monodromy]") {
  // Preloaded pitch spring (jump 2F = 2 N m/m against k x ~ 12 N m/m at the
  // amplitude) crossed transversally about ten times in 2 s: between
  // switches Df is constant, at each one the saltation matrix (di Bernardo
  // et al., Piecewise-smooth Dynamical Systems) moves Phi by O(1). Reference
  // and tolerances as for the freeplay case above; Phi f(x0) = f(x(T)) holds
  // only with the saltation (S f- = f+), the identity would miss it by O(1).
  const AeroelasticModel model(preloaded_pitch(1.0));
  const std::vector<double> x0 = {0.01, 0.1, 0.0, 0.3};
  const double T = 2.0;
  const VariationalRun v = run_variational(model, x0, T, tight());
  INFO("switches " << v.switches);
  CHECK(v.switches >= 8);
  const Eigen::MatrixXd fd = central_differences(model, x0, T, tight(), v.scale, v.switches);
  const double err = scaled_difference(v.phi, fd, v.scale);
  INFO("scaled |Phi - FD| / |FD| = " << err);
  CHECK(err < 1e-5);
  const double along = along_flow_mismatch(model, x0, v);
  INFO("along-flow mismatch " << along);
  CHECK(along < 1e-8);
}

TEST_CASE("A grazing crossing of a force jump stops a monodromy run", "[integrator][monodromy]") {
  // Released at rest on the jump of the preloaded spring: the first crossing
  // has a vanishing normal speed, where the saltation matrix is unbounded
  // (common practice, no source). The plain run reports chattering instead
  // (test_switching.cpp); the monodromy run must not return a Phi.
  const AeroelasticModel model(preloaded_pitch(10.0));
  RunState run;
  run.x = {0.0, 0.0, 0.0, 0.0};
  run.track_monodromy = true;
  const Eigen::MatrixXd I = Eigen::MatrixXd::Identity(4, 4);
  run.monodromy.assign(I.data(), I.data() + 16);
  try {
    integrate(model, run, 1.0, {}, {false, 0.01});
    FAIL("no NumericalError");
  } catch (const NumericalError& e) {
    const std::string m = e.what();
    INFO(m);
    CHECK(m.find("grazing crossing of the pitch spring's breakpoint 0") != std::string::npos);
    CHECK(m.find("saltation matrix") != std::string::npos);
    CHECK(e.time() < 1e-6);
  }
}
