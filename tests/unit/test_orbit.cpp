#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <vector>

#include "aerosect/analysis/continuation.hpp"
#include "aerosect/analysis/describing_function.hpp"
#include "aerosect/analysis/orbit.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/error.hpp"
#include "helpers.hpp"

using namespace aerosect;
using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;

namespace {

// The 2-DOF benchmark section (helpers.hpp) with a pitch spring law and a
// release from 2 degrees of pitch.
Case benchmark_with(const std::string& spring, double reduced_speed) {
  return test::case_from(test::benchmark_2dof(spring + "[initial]\npitch_deg = 2.0\n"
                                              "[simulation]\nduration = 4000.0\nsample_rate = 1.0\n",
                                              reduced_speed));
}

const std::string kHardeningCubic = "[springs.pitch]\nlaw = \"cubic\"\ncubic_coefficient = 3.0\n";

// A time-marched seed for the case's own initial state.
OrbitSeed marched_seed(const AeroelasticModel& model, const Case& c) {
  const auto x0 = model.initial_state(c.simulation.initial_displacement,
                                      c.simulation.initial_velocity, false);
  const auto s = seed_from_time_march(model, x0, c.simulation.duration, c.simulation.integrator, -1);
  REQUIRE(s);
  return *s;
}

}  // namespace

TEST_CASE("Shooting converges on the hardening-cubic LCO of the benchmark section", "[orbit]") {
  const Case c = benchmark_with(kHardeningCubic, 7.0);
  const AeroelasticModel model(c.model);
  const OrbitSeed seed = marched_seed(model, c);
  const Orbit o = solve_orbit(model, seed);
  INFO(o.failure);
  REQUIRE(o.converged);
  CAPTURE(o.iterations, o.residual, o.period, o.dof[kPitch].amplitude, o.trivial_multiplier_error,
          o.largest_nontrivial, o.peaks_per_period, o.switches);
  CHECK(o.residual <= 1e-10);
  // Floquet theory (Kuznetsov, Elements of Applied Bifurcation Theory, the
  // multiplier along the flow is 1): accuracy of the monodromy matrix.
  CHECK(o.trivial_multiplier_error < 1e-8);
  CHECK(o.stable);
  CHECK(o.peaks_per_period == 1);
  CHECK(o.switches == 0);
}

TEST_CASE("A converged orbit is the cycle a long time march settles on", "[orbit]") {
  // A stable orbit attracts: marched from a perturbed start for N periods with
  // |mu|^N < 1e-12 (mu the largest nontrivial Floquet multiplier, at most
  // 20 000 periods), at the orbit's own tolerance rtol 1e-12, the state at
  // the next maximum of the watched DOF must be the orbit's x0 to 1e-8
  // (scaled): the perturbation has decayed below that, the integrator's
  // error over N periods (rtol 1e-12 per step) stays well below it, and the
  // phase drift is removed by comparing at a maximum. Floquet theory
  // (Kuznetsov, Elements of Applied Bifurcation Theory); the tolerance is
  // the one the issue sets.
  const Case c = benchmark_with(kHardeningCubic, 7.0);
  const AeroelasticModel model(c.model);
  const Orbit o = solve_orbit(model, marched_seed(model, c));
  REQUIRE(o.converged);
  REQUIRE(o.stable);
  const int periods = std::min(20000, static_cast<int>(std::ceil(std::log(1e-12) / std::log(o.largest_nontrivial))) + 1);
  CAPTURE(o.largest_nontrivial, periods);
  RunState run;
  run.x = o.x0;
  for (double& v : run.x) v *= 1.0 + 1e-4;
  run.regions = model.regions_of(run.x.data());
  const OrbitSettings s;
  integrate(model, run, periods * o.period - 0.25 * o.period, s.integrator, OutputSchedule::none());
  const StateLayout& L = model.layout();
  std::vector<double> at_max;
  integrate(model, run, run.time + o.period, s.integrator, OutputSchedule::none(),
            {{}, [&](int dof, double, const std::vector<double>& x) {
              if (dof == o.watched_dof && x[L.displacement + dof] > 0 && at_max.empty()) at_max = x;
              return ObserverAction::kContinue;
            }});
  REQUIRE(!at_max.empty());
  const Eigen::VectorXd W = state_weights(model);
  double err = 0, scale = o.dof[o.watched_dof].amplitude;
  for (int i = 0; i < L.size; ++i) err = std::max(err, std::abs(W(i) * (at_max[i] - o.x0[i])));
  CHECK(err / scale < 1e-8);
  CHECK_THAT(at_max[L.displacement + o.watched_dof], WithinRel(o.dof[o.watched_dof].max, 1e-8));
}

TEST_CASE("Freeplay orbits scale exactly with the gap", "[orbit]") {
  // Theory sheet section 7 / Gelb & Vander Velde (describing functions): with
  // one freeplay spring, no preload and no other length scale, the motion at
  // gap 2d is the motion at gap d scaled by 2 (the equations are linear in
  // each region and the breakpoints scale with d). Orbits solved from the
  // scaled seed: amplitudes x2 and equal periods to 1e-10 (the Newton
  // tolerance; the flows are integrated at rtol 1e-12).
  const std::string fp = "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n";
  const std::string fp2 = "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 1.0\n";
  for (double us : {4.5, 5.5}) {
    CAPTURE(us);
    const Case c1 = benchmark_with(fp, us), c2 = benchmark_with(fp2, us);
    const AeroelasticModel m1(c1.model), m2(c2.model);
    const Orbit o1 = solve_orbit(m1, marched_seed(m1, c1));
    INFO(o1.failure);
    REQUIRE(o1.converged);
    OrbitSeed s2{o1.x0, o1.period * (1 + 1e-6)};
    for (double& v : s2.x0) v *= 2.0 * (1 + 1e-6);
    const Orbit o2 = solve_orbit(m2, s2);
    INFO(o2.failure);
    REQUIRE(o2.converged);
    CAPTURE(o1.residual, o2.residual, o1.switches, o1.trivial_multiplier_error);
    CHECK(o1.switches >= 2);
    CHECK_THAT(o2.period, WithinRel(o1.period, 1e-10));
    for (int j = 0; j < 2; ++j) {
      CHECK_THAT(o2.dof[j].amplitude, WithinRel(2.0 * o1.dof[j].amplitude, 1e-10));
      CHECK_THAT(o2.dof[j].max, WithinRel(2.0 * o1.dof[j].max, 1e-10));
    }
    CHECK(o1.trivial_multiplier_error < 1e-8);
  }
}

TEST_CASE("The airspeed family equals the case read at each airspeed", "[orbit][continuation]") {
  // The fast path (airspeed set on the resolved model) must be the case
  // reader's own result at that value (self-consistency, no source).
  const Case c = benchmark_with(kHardeningCubic, 4.0);
  const ParameterFamily f = parameter_family(c, "");
  CHECK(f.key == "nondimensional.reduced_speed");
  CHECK(f.value == 4.0);
  const Case c7 = test::case_from(c.text, {"nondimensional.reduced_speed=6.5"});
  const Eigen::MatrixXd a = AeroelasticModel(f.model_at(6.5)).nominal_state_matrix();
  const Eigen::MatrixXd b = AeroelasticModel(c7.model).nominal_state_matrix();
  CHECK((a - b).cwiseAbs().maxCoeff() <= 1e-14 * b.cwiseAbs().maxCoeff());
  CHECK_THROWS_AS(parameter_family(c, "flow.no_such_key"), InputError);
}

TEST_CASE("Hardening cubic: supercritical branch from the Hopf point", "[orbit][continuation]") {
  // Kuznetsov (Elements of Applied Bifurcation Theory, ch. 3): with a
  // hardening cubic the first Lyapunov coefficient is negative: the cycles
  // exist above the linear flutter speed and are stable. The Hopf point is
  // the benchmark's linear flutter speed with Jones' Wagner function,
  // U*_L = 6.2851 (Lee, Price & Wong 1999; theory sheet section 4, 4 digits).
  const Case c = benchmark_with(kHardeningCubic, 6.0);
  BranchOptions o;
  o.from = 5.0;
  o.to = 8.0;
  o.max_points = 12;
  const Branch b = continue_branch(c, o);
  INFO(b.stop_reason);
  REQUIRE(b.hopf_parameter);
  CHECK_THAT(*b.hopf_parameter, WithinAbs(6.2851, 0.5e-4));
  REQUIRE(b.points.size() >= 8);
  double last_amp = 0;
  for (const auto& p : b.points) {
    CAPTURE(p.parameter, p.orbit.dof[kPitch].amplitude, p.orbit.trivial_multiplier_error);
    CHECK(p.parameter > *b.hopf_parameter);
    CHECK(p.orbit.stable);
    CHECK(p.orbit.trivial_multiplier_error < 1e-8);
    CHECK(p.orbit.dof[kPitch].amplitude > last_amp);
    last_amp = p.orbit.dof[kPitch].amplitude;
  }
  CHECK(b.bifurcations.empty());
}

TEST_CASE("Softening cubic with a hardening quintic: subcritical branch and its fold", "[orbit][continuation]") {
  // f = k (x - 3 x^3 + 50 x^5) (polynomial law, c3 < 0 < c5). Kuznetsov, ch. 3
  // and 5: l1 > 0, so the small cycles exist below the flutter speed and are
  // unstable; the branch turns at a fold (a multiplier through +1) into the
  // stable large-amplitude branch. Between the fold and the Hopf point a
  // march from just inside the unstable cycle decays and one from just
  // outside grows (the unstable cycle is the threshold; Seydel, Practical
  // Bifurcation and Stability Analysis, hysteresis).
  const std::string law = "[springs.pitch]\nlaw = \"polynomial\"\ncoefficients = [0.0, -3.0, 0.0, 50.0]\n";
  const Case c = benchmark_with(law, 6.0);
  BranchOptions o;
  o.from = 5.0;
  o.to = 7.0;
  o.max_points = 40;
  o.max_amplitude = 0.4;
  const Branch b = continue_branch(c, o);
  INFO(b.stop_reason);
  REQUIRE(b.hopf_parameter);
  REQUIRE(b.points.size() > 5);
  const BranchPoint& p0 = b.points.front();
  CHECK(p0.parameter < *b.hopf_parameter);
  CHECK_FALSE(p0.orbit.stable);
  for (const auto& p : b.points) CHECK(p.orbit.trivial_multiplier_error < 1e-8);
  std::vector<Bifurcation> folds;
  for (const auto& f : b.bifurcations)
    if (f.kind == BifurcationKind::kFold) folds.push_back(f);
  REQUIRE(folds.size() == 1);
  const Bifurcation& fold = folds.front();
  CHECK(fold.parameter < *b.hopf_parameter);
  // Unstable before the fold, stable after it.
  CHECK_FALSE(b.points[static_cast<std::size_t>(fold.after)].orbit.stable);
  CHECK(b.points[static_cast<std::size_t>(fold.after) + 2].orbit.stable);
  // The threshold: an unstable point between the fold and the Hopf point.
  const BranchPoint* u = nullptr;
  const double mid = 0.5 * (fold.parameter + *b.hopf_parameter);
  for (const auto& p : b.points)
    if (!p.orbit.stable && (!u || std::abs(p.parameter - mid) < std::abs(u->parameter - mid))) u = &p;
  REQUIRE(u);
  const ParameterFamily fam = parameter_family(c, "");
  const AeroelasticModel m(fam.model_at(u->parameter));
  const double A = u->orbit.dof[kPitch].amplitude;
  for (double factor : {0.97, 1.03}) {
    RunState run;
    run.x = u->orbit.x0;
    for (double& v : run.x) v *= factor;
    run.regions = m.regions_of(run.x.data());
    double late_max = 0;
    const double t_end = 150 * u->orbit.period;
    integrate(m, run, t_end, OrbitSettings{}.integrator, OutputSchedule::none(),
              {{}, [&](int dof, double t, const std::vector<double>& x) {
                if (dof == kPitch && t > t_end - 3 * u->orbit.period) late_max = std::max(late_max, std::abs(x[kPitch]));
                return ObserverAction::kContinue;
              }});
    CAPTURE(factor, A, late_max, u->parameter);
    if (factor < 1) CHECK(late_max < 0.5 * A);
    else CHECK(late_max > 1.5 * A);
  }
}

TEST_CASE("The monodromy of a freeplay orbit needs no saltation matrix", "[orbit]") {
  // di Bernardo et al. (Piecewise-smooth Dynamical Systems): at a switch the
  // monodromy jumps by S = I + (f+ - f-) grad_h^T / (grad_h^T f-); freeplay
  // is continuous at its breakpoints, so f+ = f- and S = I. The variational
  // flow (no saltation applied for this law) must then equal central
  // differences of the flow across the switches, to their accuracy
  // (h = 1e-6 relative, flows at rtol 1e-12: about 1e-6 of the largest
  // entry).
  const Case c = benchmark_with("[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n", 5.0);
  const AeroelasticModel model(c.model);
  const Orbit o = solve_orbit(model, marched_seed(model, c));
  REQUIRE(o.converged);
  REQUIRE(o.switches == 4);
  const Eigen::MatrixXd fd = finite_difference_monodromy(model, o.x0, o.period, OrbitSettings{}.integrator);
  const Eigen::MatrixXd var = orbit_flow(model, o.x0, o.period, OrbitSettings{}.integrator, true).monodromy;
  const Eigen::VectorXd W = state_weights(model);
  // Compare in the scaled coordinates (W Phi W^-1), where entries are O(1).
  const Eigen::MatrixXd a = W.asDiagonal() * fd * W.cwiseInverse().asDiagonal();
  const Eigen::MatrixXd b = W.asDiagonal() * var * W.cwiseInverse().asDiagonal();
  CAPTURE((a - b).cwiseAbs().maxCoeff(), b.cwiseAbs().maxCoeff());
  CHECK((a - b).cwiseAbs().maxCoeff() < 1e-5 * b.cwiseAbs().maxCoeff());
}

TEST_CASE("Flap-freeplay branch of the demo: describing function and time marching", "[orbit][continuation]") {
  // The demo's aileron freeplay (3-DOF). Its branch runs from a grazing
  // orbit (flap amplitude = the half gap) at one gap-open flutter speed, down
  // through a fold into the stable branch and up to a grazing orbit at the
  // other gap-open flutter speed. Checks:
  //  - the unstable part lies on the describing function's unstable branch
  //    (Gelb & Vander Velde: equivalent linearisation, first harmonic only):
  //    the speed at equal flap amplitude within 1 % (the orbits there are
  //    nearly harmonic: a_3/a_1 < 1 %, checked; the method drops those
  //    harmonics);
  //  - the fold is bracketed by time-marched runs (Seydel, hysteresis):
  //    0.5 % below the fold a march from the fold orbit falls into the gap,
  //    at the first orbit above it that attracts fast (multipliers below
  //    0.9: 400 periods shrink a deviation below 1e-18) a march from a 1 %
  //    larger start settles back onto the orbit (to 1e-6 of its largest
  //    flap angle).
  const Case c = load_case(std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron.toml",
                           {"flow.airspeed=25"});
  BranchOptions o;
  o.from = 10;
  o.to = 90;
  o.start = BranchStart::kMarch;
  const Branch b = continue_branch(c, o);
  INFO(b.stop_reason);
  REQUIRE(b.points.size() > 5);
  for (const auto& p : b.points) CHECK(p.orbit.trivial_multiplier_error < 1e-8);
  const Bifurcation* fold = nullptr;
  int grazing = 0;
  for (const auto& f : b.bifurcations) {
    if (f.kind == BifurcationKind::kFold) fold = &f;
    if (f.kind == BifurcationKind::kGrazing) ++grazing;
  }
  REQUIRE(fold);
  CHECK(grazing == 2);
  // Describing function's unstable branch, amplitude (deg) -> speed.
  std::vector<double> speeds;
  for (int i = 1; i <= 400; ++i) speeds.push_back(40.0 * i / 400);
  const LcoPrediction df = describing_function_lco(c, speeds);
  REQUIRE(df.available);
  std::vector<std::pair<double, double>> unstable;  // (amplitude rad, speed)
  for (const auto& q : df.points)
    if (!q.stable && q.branch == 0) unstable.emplace_back(q.amplitude, q.speed);
  std::sort(unstable.begin(), unstable.end());
  REQUIRE(unstable.size() >= 2);
  int compared = 0;
  for (const auto& p : b.points) {
    if (p.orbit.stable) continue;
    const double a = p.orbit.dof[kFlap].amplitude;
    const auto& h = p.orbit.content[kFlap].harmonics;
    CHECK(h[2] < 0.01 * h[0]);
    auto it = std::lower_bound(unstable.begin(), unstable.end(), std::make_pair(a, 0.0));
    if (it == unstable.begin() || it == unstable.end()) continue;
    const auto& lo = *(it - 1);
    const auto& hi = *it;
    const double u_df = lo.second + (hi.second - lo.second) * (a - lo.first) / (hi.first - lo.first);
    CAPTURE(p.parameter, a, u_df);
    CHECK_THAT(p.parameter, WithinRel(u_df, 0.01));
    ++compared;
  }
  CHECK(compared >= 1);
  // The fold bracketed by marches.
  const ParameterFamily fam = parameter_family(c, "");
  const BranchPoint& pf = b.points[static_cast<std::size_t>(fold->after)];
  const BranchPoint* ps = nullptr;
  for (const auto& p : b.points)
    if (p.orbit.largest_nontrivial < 0.9 && p.parameter > fold->parameter && (!ps || p.parameter < ps->parameter)) ps = &p;
  REQUIRE(ps);
  const double gap = 0.5 * std::numbers::pi / 180;  // half of the demo's 1 degree free play
  auto march_amplitude = [&](double speed, std::vector<double> x, double periods, double period) {
    const AeroelasticModel m(fam.model_at(speed));
    RunState run;
    run.x = std::move(x);
    run.regions = m.regions_of(run.x.data());
    double late = 0;
    const double t_end = periods * period;
    integrate(m, run, t_end, OrbitSettings{}.integrator, OutputSchedule::none(),
              {{}, [&](int dof, double t, const std::vector<double>& xs) {
                if (dof == kFlap && t > t_end - 3 * period) late = std::max(late, std::abs(xs[kFlap]));
                return ObserverAction::kContinue;
              }});
    return late;
  };
  const double below = march_amplitude(fold->parameter * 0.995, pf.orbit.x0, 400, pf.orbit.period);
  std::vector<double> x_up = ps->orbit.x0;
  for (double& v : x_up) v *= 1.01;
  const double above = march_amplitude(ps->parameter, x_up, 400, ps->orbit.period);
  CAPTURE(fold->parameter, ps->parameter, below, above, ps->orbit.dof[kFlap].max);
  CHECK(below < gap);
  CHECK_THAT(above, WithinRel(ps->orbit.dof[kFlap].max, 1e-6));
}

TEST_CASE("A cycle with two unequal maxima per period is solved over its full period", "[orbit]") {
  // Pitch freeplay (half gap 0.5 deg) of the 2-DOF benchmark section at
  // U* = 4: the settled cycle has two unequal pitch maxima per period (the
  // scipy peer of tests/integration/test_peer_scipy.py finds the same). The
  // shooting unknown T is the full period (both maxima), so:
  //  - the orbit converges with peaks_per_period = 2 and its trivial
  //    multiplier within 1e-8 of 1 (Floquet theory, Kuznetsov, Elements of
  //    Applied Bifurcation Theory: Phi f = f along the flow);
  //  - solved from a seed at either of its two maxima it is the same cycle
  //    (equal period, amplitude, max and min to 1e-9: the tolerance is the
  //    Newton tolerance 1e-10 with margin), with x0 at the seed's maximum;
  //  - half the period is not a period: the flow over T/2 from x0 misses
  //    x0 by far more than the residual (common practice, no source).
  const Case c = benchmark_with("[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n", 4.0);
  const AeroelasticModel model(c.model);
  const Orbit o = solve_orbit(model, marched_seed(model, c));
  INFO(o.failure);
  REQUIRE(o.converged);
  CAPTURE(o.period, o.peaks_per_period, o.dof[kPitch].amplitude, o.largest_nontrivial, o.residual);
  REQUIRE(o.peaks_per_period == 2);
  CHECK(o.trivial_multiplier_error < 1e-8);
  // The other maximum of the cycle: the state at the second maximum of the
  // watched DOF inside the period.
  const StateLayout& L = model.layout();
  RunState run;
  run.x = o.x0;
  run.regions = model.regions_of(run.x.data());
  std::vector<std::vector<double>> maxima;
  integrate(model, run, 0.999 * o.period, OrbitSettings{}.integrator, OutputSchedule::none(),
            {{}, [&](int dof, double, const std::vector<double>& x) {
              if (dof != kPitch) return ObserverAction::kContinue;
              std::vector<double> dx(x.size());
              model.rhs(x.data(), dx.data(), 0.0, model.regions_of(x.data()), 0);
              if (dx[L.velocity + kPitch] < 0) maxima.push_back(x);  // a maximum: pitch acceleration < 0
              return ObserverAction::kContinue;
            }});
  REQUIRE(maxima.size() == 1);  // the second maximum (the first is x0 at t = 0)
  CHECK(std::abs(maxima[0][L.displacement + kPitch] - o.x0[L.displacement + kPitch]) >
        1e-3 * o.dof[kPitch].amplitude);
  const Orbit o2 = solve_orbit(model, OrbitSeed{maxima[0], o.period});
  INFO(o2.failure);
  REQUIRE(o2.converged);
  CHECK(o2.peaks_per_period == 2);
  CHECK_THAT(o2.period, WithinRel(o.period, 1e-9));
  CHECK_THAT(o2.dof[kPitch].amplitude, WithinRel(o.dof[kPitch].amplitude, 1e-9));
  CHECK_THAT(o2.dof[kPitch].max, WithinRel(o.dof[kPitch].max, 1e-9));
  CHECK_THAT(o2.dof[kPitch].min, WithinRel(o.dof[kPitch].min, 1e-9));
  CHECK_THAT(o2.x0[L.displacement + kPitch], WithinRel(maxima[0][L.displacement + kPitch], 1e-6));
  // Half the period is not a period.
  const Flow half = orbit_flow(model, o.x0, 0.5 * o.period, OrbitSettings{}.integrator, false);
  const Eigen::VectorXd W = state_weights(model);
  double miss = 0;
  for (int i = 0; i < L.size; ++i) miss = std::max(miss, std::abs(W(i) * (half.x[i] - o.x0[i])));
  CHECK(miss / o.dof[kPitch].amplitude > 1e-3);
}
