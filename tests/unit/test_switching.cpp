// Exact switching at spring breakpoints (integrator event location).
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdint>
#include <numbers>

#include <boost/math/tools/toms748_solve.hpp>
#include <fmt/format.h>
#include <unsupported/Eigen/MatrixFunctions>

#include "aerosect/analysis/simulate.hpp"
#include "aerosect/error.hpp"
#include "aerosect/integrate/integrator.hpp"
#include "helpers.hpp"

using namespace aerosect;
using std::numbers::pi;

namespace {

// Reference: a piecewise-linear system is linear between switches, so
// x(t) = expm(Ahat t) [x0; 1] exactly in each region (Ahat the affine
// system matrix augmented with its constant term). Switching times are
// found by root-finding on that exact solution (common practice for
// piecewise-linear systems; the matrix exponential from Eigen's
// MatrixFunctions module).
struct ExactPiecewise {
  const AeroelasticModel& model;
  int spring;
  Eigen::MatrixXd augmented(int region) const {
    const int N = model.state_size();
    const SpringLaw& law = model.description().springs[spring];
    // f = slope x + intercept in the region: x' = A0 x - G (slope x_j + intercept).
    std::vector<double> e(N, 0.0), dx(N);
    Eigen::MatrixXd Ah = Eigen::MatrixXd::Zero(N + 1, N + 1);
    std::vector<int> regions(3, region);
    for (int c = 0; c <= N; ++c) {
      std::fill(e.begin(), e.end(), 0.0);
      if (c < N) e[c] = 1.0;
      // Column c of the affine map: rhs(e_c) - rhs(0) for c < N, rhs(0) for the constant.
      std::vector<double> zero(N, 0.0), d0(N);
      model.rhs(zero.data(), d0.data(), 0.0, regions);
      if (c < N) {
        model.rhs(e.data(), dx.data(), 0.0, regions);
        for (int r = 0; r < N; ++r) Ah(r, c) = dx[r] - d0[r];
      } else {
        for (int r = 0; r < N; ++r) Ah(r, c) = d0[r];
      }
    }
    (void)law;
    return Ah;
  }
  // States at times `samples` from x0 at t = 0; counts the switches.
  std::vector<Eigen::VectorXd> solve(Eigen::VectorXd x0, const std::vector<double>& samples,
                                     double scan, std::int64_t& switches) const {
    const SpringLaw& law = model.description().springs[spring];
    const int N = model.state_size();
    const int j = model.layout().displacement + spring;
    int region = law.region_of(x0(j));
    double t = 0;
    Eigen::VectorXd z(N + 1);
    z << x0, 1.0;
    std::vector<Eigen::VectorXd> out;
    std::size_t next = 0;
    switches = 0;
    while (next < samples.size()) {
      const Eigen::MatrixXd Ah = augmented(region);
      const Eigen::MatrixXd step = (Ah * scan).exp();
      auto at = [&](double s) { return Eigen::VectorXd((Ah * s).exp() * z); };
      const auto bp = law.breakpoints();
      auto h = [&](const Eigen::VectorXd& y) {
        double v = -1e300;
        if (region > 0) v = std::max(v, bp[region - 1] - y(j));
        if (region < static_cast<int>(bp.size())) v = std::max(v, y(j) - bp[region]);
        return v;
      };
      // March in exact steps of `scan` until a boundary is crossed.
      double s0 = 0;
      Eigen::VectorXd y0 = z;
      while (true) {
        const Eigen::VectorXd y1 = step * y0;
        while (next < samples.size() && samples[next] <= t + s0 + scan) {
          out.push_back(at(samples[next] - t).head(N));
          ++next;
        }
        if (h(y1) > 0 || next >= samples.size()) {
          if (next >= samples.size() && h(y1) <= 0) return out;
          auto f = [&](double s) { return h(at(s)); };
          std::uintmax_t it = 200;
          const auto br = boost::math::tools::toms748_solve(
              f, s0, s0 + scan, h(y0), h(y1),
              [](double a, double b) { return std::abs(b - a) < 1e-15; }, it);
          const double ts = br.second;
          // Samples after the switch belong to the next region.
          while (!out.empty() && next > 0 && samples[next - 1] > t + ts) {
            out.pop_back();
            --next;
          }
          z = at(ts);
          t += ts;
          const double xj = z(j);
          region = (region > 0 && xj <= bp[region - 1]) ? region - 1 : region + 1;
          ++switches;
          break;
        }
        y0 = y1;
        s0 += scan;
      }
    }
    return out;
  }
};

std::vector<double> times(double dt, int n) {
  std::vector<double> t(n);
  for (int i = 0; i < n; ++i) t[i] = dt * (i + 1);
  return t;
}

}  // namespace

TEST_CASE("Freeplay response against the exact piecewise-linear solution", "[switching]") {
  // Benchmark section (Lee, Price & Wong 1999) with a pitch freeplay of
  // half-gap 0.5 deg, below the linear flutter speed; the integrated
  // response must match expm-between-switches to 1e-9 (relative to the
  // amplitude) at rtol 1e-12.
  const Case c = test::case_from(test::benchmark_2dof(
      "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n"
      "[initial]\npitch_deg = 3.0\n[simulation]\nduration = 1\n", 4.0));
  const AeroelasticModel model(c.model);
  RunState run;
  run.x = model.initial_state(c.simulation.initial_displacement, c.simulation.initial_velocity, false);
  const Eigen::VectorXd x0 = Eigen::Map<Eigen::VectorXd>(run.x.data(), model.state_size());
  IntegratorSettings s;
  s.relative_tolerance = 1e-12;
  s.absolute_tolerance = 1e-15;
  const std::vector<double> ts = times(0.5, 400);  // 200 s = 800 semichords
  std::vector<std::vector<double>> got;
  integrate(model, run, ts.back(), s, {false, 0.5},
            {[&](double t, const std::vector<double>& x) {
              if (t > 0) got.push_back(x);
              return ObserverAction::kContinue;
            }});
  std::int64_t ref_switches = 0;
  const ExactPiecewise exact{model, kPitch};
  const auto ref = exact.solve(x0, ts, 0.05, ref_switches);
  REQUIRE(ref.size() == ts.size());
  REQUIRE(got.size() == ts.size());
  double amp = 0, err = 0;
  for (std::size_t i = 0; i < ts.size(); ++i) {
    amp = std::max(amp, std::abs(ref[i](kPitch)));
    err = std::max(err, std::abs(got[i][kPitch] - ref[i](kPitch)));
    err = std::max(err, std::abs(got[i][kPlunge] - ref[i](kPlunge)));
  }
  INFO("switches " << run.switches << " (exact " << ref_switches << "), max error " << err
                   << ", amplitude " << amp);
  CHECK(run.switches == ref_switches);
  CHECK(run.switches > 10);
  CHECK(err < 1e-9 * amp);
}

TEST_CASE("A trajectory that grazes a breakpoint within one step is caught", "[switching]") {
  // Undamped pitch oscillator in vacuum (x_alpha = 0) of amplitude A with a
  // bilinear spring stiffening beyond 0.99999 A: each peak spends about
  // 2 acos(0.99999) / omega = 9e-3 / omega beyond the breakpoint, far less
  // than one step (max_step = 1/8 of a period), and each graze must give two
  // switches; the response must match the exact solution (common practice).
  ModelDescription d;
  d.section.semichord = 1;
  d.section.mass = 1;
  d.section.pitch_inertia = 1;
  d.section.plunge_stiffness = 1;
  d.section.pitch_stiffness = 1;
  d.springs[kPlunge] = SpringLaw::linear(1);
  const double A = 0.1, b = 0.99999 * A;
  d.springs[kPitch] = SpringLaw::bilinear(1.0, 4.0, b, 0.0);
  d.flow = {0.0, 0.0};
  const AeroelasticModel model(d);
  RunState run;
  run.x = {0.0, A, 0.0, 0.0};
  IntegratorSettings s;
  s.relative_tolerance = 1e-11;
  s.absolute_tolerance = 1e-14;
  s.max_step = 2 * pi / 8;
  const double T = 2 * pi * 10;  // ten periods (omega = 1)
  // The run starts at the peak, inside the region below the breakpoint.
  integrate(model, run, T, s, {false, T / 40});
  std::int64_t ref_switches = 0;
  const ExactPiecewise exact{model, kPitch};
  const Eigen::VectorXd x0 = (Eigen::VectorXd(4) << 0.0, A, 0.0, 0.0).finished();
  const auto ref = exact.solve(x0, {T}, 1e-3, ref_switches);
  INFO("switches " << run.switches << " exact " << ref_switches);
  // 20 peaks (10 upper, 10 lower) after the start, 2 switches each.
  CHECK(ref_switches == 40);
  CHECK(run.switches == ref_switches);
  CHECK(run.x[kPitch] == Approx(ref[0](kPitch)).margin(1e-9 * A));
}

TEST_CASE("Freeplay LCO amplitude scales exactly with the gap", "[switching]") {
  // With a single freeplay and no preload the system is piecewise linear and
  // homogeneous: doubling the gap and the initial state doubles the whole
  // response (similarity; theory sheet section 3). Checked to 1e-7 relative
  // at rtol 1e-11 on a sustained oscillation below the linear flutter speed.
  auto run_with = [](double gap_deg, double pitch_deg) {
    const Case c = test::case_from(test::benchmark_2dof(
        fmt::format("[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = {}\n[initial]\n"
                    "pitch_deg = {}\n[simulation]\nduration_semichords = 3000\n"
                    "sample_interval_semichords = 1.0\nrelative_tolerance = 1e-11\n"
                    "absolute_tolerance = 1e-16\n",
                    gap_deg, pitch_deg),
        4.5));
    const AeroelasticModel model(c.model);
    MemorySink sink;
    REQUIRE(simulate(c, model, sink).completed);
    return sink.column("pitch");
  };
  const auto a = run_with(0.25, 1.5), b = run_with(0.5, 3.0);
  REQUIRE(a.size() == b.size());
  double amp = 0, err = 0;
  for (std::size_t i = a.size() / 2; i < a.size(); ++i) {
    amp = std::max(amp, std::abs(b[i]));
    err = std::max(err, std::abs(b[i] - 2 * a[i]));
  }
  INFO("late amplitude " << amp << " rad, max |b - 2a| " << err);
  CHECK(amp > 0.5 * 0.5 * pi / 180);  // a sustained oscillation, not a decay into the gap
  CHECK(err < 1e-7 * amp);
}

TEST_CASE("Breakpoints that do not change the law reproduce the linear response", "[switching]") {
  // A zero gap and a table of collinear points are the linear spring
  // (common practice); the table still makes the integrator switch.
  const std::string sim =
      "[initial]\npitch_deg = 2.0\n[simulation]\nduration_semichords = 400\n"
      "sample_interval_semichords = 1.0\nrelative_tolerance = 1e-11\nabsolute_tolerance = 1e-15\n";
  auto pitch = [](const Case& c) {
    const AeroelasticModel model(c.model);
    MemorySink sink;
    const SimulationSummary s = simulate(c, model, sink);
    REQUIRE(s.completed);
    return std::make_pair(sink.column("pitch"), s.switches);
  };
  const auto lin = pitch(test::case_from(test::benchmark_2dof(sim)));
  const auto zero = pitch(test::case_from(
      test::benchmark_2dof("[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.0\n" + sim)));
  const Case tc = test::case_from(test::benchmark_2dof(sim));
  const double k = tc.model.section.pitch_stiffness;
  const auto table = pitch(test::case_from(test::benchmark_2dof(
      fmt::format("[springs.pitch]\nlaw = \"table\"\ndisplacements_deg = [-10.0, -0.5, 0.5, 10.0]\n"
                  "forces = [{}, {}, {}, {}]\n",
                  -10 * k * pi / 180, -0.5 * k * pi / 180, 0.5 * k * pi / 180, 10 * k * pi / 180) +
      sim)));
  CHECK(table.second > 4);
  double err_zero = 0, err_table = 0, amp = 0;
  for (std::size_t i = 0; i < lin.first.size(); ++i) {
    amp = std::max(amp, std::abs(lin.first[i]));
    err_zero = std::max(err_zero, std::abs(zero.first[i] - lin.first[i]));
    err_table = std::max(err_table, std::abs(table.first[i] - lin.first[i]));
  }
  CHECK(err_zero == 0.0);
  CHECK(err_table < 1e-9 * amp);
}

TEST_CASE("A preloaded spring released on its breakpoint chatters and is stopped", "[switching]") {
  // Pitch held by a preloaded centring spring f = k x + F sign(x) (a force
  // jump of 2F at x = 0), released at rest at x = 0: either side of the
  // breakpoint the spring pushes the state back across it, so the exact
  // solution stays there (Filippov sliding; common practice, no source),
  // which a run switching between smooth regions cannot follow. Each switch
  // lies a few 1e-10 s after the previous one (the excursion must exceed the
  // 1e-19 rad touch tolerance at acceleration F / I = 10 rad/s^2), well
  // inside the guard's 1e-9 of the shortest period (2 pi s here).
  ModelDescription d;
  d.section.semichord = 1;
  d.section.mass = 1;
  d.section.pitch_inertia = 1;
  d.section.plunge_stiffness = 1;
  d.section.pitch_stiffness = 1;
  d.springs[kPlunge] = SpringLaw::linear(1);
  const double F = 10.0;
  d.springs[kPitch] = SpringLaw::piecewise_linear({0.0}, {1.0, 1.0}, {-F, F});
  d.flow = {0.0, 0.0};
  const AeroelasticModel model(d);
  RunState run;
  run.x = {0.0, 0.0, 0.0, 0.0};
  try {
    integrate(model, run, 1.0, {}, {false, 0.01});
    FAIL("no NumericalError");
  } catch (const NumericalError& e) {
    const std::string m = e.what();
    INFO(m);
    CHECK(m.find("chattering: 51 switches") != std::string::npos);
    CHECK(m.find("pitch spring's breakpoint 0") != std::string::npos);
    CHECK(m.find("trapped on a switching surface") != std::string::npos);
    CHECK(e.time() < 1e-6);  // at the release, not after a long crawl
    CHECK(run.switches == 52);  // the first switch, then 51 close ones
  }
}
