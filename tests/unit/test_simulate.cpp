#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <numbers>

#include <fmt/format.h>

#include "aerosect/analysis/simulate.hpp"
#include "helpers.hpp"

using namespace aerosect;
using std::numbers::pi;

namespace {
MemorySink run_case(const Case& c) {
  const AeroelasticModel model(c.model);
  MemorySink sink;
  const SimulationSummary s = simulate(c, model, sink);
  REQUIRE(s.completed);
  return sink;
}

double max_abs(const std::vector<double>& v) {
  double m = 0;
  for (double x : v) m = std::max(m, std::abs(x));
  return m;
}

double max_abs_diff(const std::vector<double>& a, const std::vector<double>& b) {
  REQUIRE(a.size() == b.size());
  double m = 0;
  for (std::size_t i = 0; i < a.size(); ++i) m = std::max(m, std::abs(a[i] - b[i]));
  return m;
}
}  // namespace

TEST_CASE("Lift after a step in pitch follows Wagner's function", "[simulate]") {
  // A section held at alpha0 from t = 0 in a flow of U = b = 1: the
  // circulatory lift is 2 pi rho U^2 b alpha0 phi(s), s = U t / b.
  // Against R. T. Jones' phi(s) (the model's own approximation) to 1e-7, and
  // against the exact Wagner values of the theory sheet (phi(1) = 0.6006,
  // phi(4) = 0.7580, phi(10) = 0.8750, phi(20) = 0.9366) within the
  // approximation's error (1.2 %).
  const Case c = test::case_from(R"(
[section]
semichord = 1.0
mass = 10.0
elastic_axis = -0.3
cg_offset = 0.1
radius_of_gyration = 0.5
plunge_frequency_hz = 1.0
pitch_frequency_hz = 2.0
[flow]
density = 1.2
airspeed = 1.0
[initial]
pitch_deg = 1.0
[simulation]
duration = 20.0
sample_interval = 0.5
hold = ["plunge", "pitch"]
relative_tolerance = 1e-11
absolute_tolerance = 1e-14
)");
  const MemorySink sink = run_case(c);
  const std::vector<double> t = sink.time(), lift = sink.column("lift");
  const double L_steady = 2 * pi * 1.2 * 1.0 * 1.0 * (pi / 180.0);
  const WagnerApproximation jones = WagnerApproximation::jones();
  for (std::size_t i = 1; i < t.size(); ++i)
    CHECK(lift[i] / L_steady == Approx(jones(t[i])).epsilon(1e-7));
  const std::pair<double, double> exact[] = {{1, 0.6006}, {4, 0.7580}, {10, 0.8750}, {20, 0.9366}};
  for (auto [s, phi] : exact) {
    const auto k = static_cast<std::size_t>(std::lround(s / 0.5));
    REQUIRE(t[k] == Approx(s));
    CHECK(lift[k] / L_steady == Approx(phi).epsilon(0.012));
  }
}

TEST_CASE("SI and nondimensional forms give the same response", "[simulate]") {
  // Common practice, no source: the two input forms describe one system.
  const std::string si_text = R"(
[section]
semichord = 0.4
mass = 12.0
elastic_axis = -0.3
cg = -0.1
pitch_inertia_cg = 0.05
plunge_frequency_hz = 3.0
pitch_frequency_hz = 7.0
pitch_damping_ratio = 0.01
[flap]
hinge = 0.5
mass = 1.0
cg_offset = 0.1
inertia_cg = 0.004
frequency_hz = 12.0
[flow]
density = 1.1
airspeed = 35.0
[initial]
pitch_deg = 1.0
plunge_rate = 0.1
[simulation]
duration = 1.0
sample_rate = 500.0
relative_tolerance = 1e-10
absolute_tolerance = 1e-13
)";
  const Case si = test::case_from(si_text);
  const NondimensionalParameters& n = si.nondimensional;
  const std::string nd_text = fmt::format(
      "[nondimensional]\nmass_ratio = {:.17g}\nelastic_axis = {:.17g}\ncg_offset = {:.17g}\n"
      "radius_of_gyration = {:.17g}\nfrequency_ratio = {:.17g}\nreduced_speed = {:.17g}\n"
      "pitch_damping_ratio = 0.01\n"
      "hinge = {:.17g}\nflap_cg_offset = {:.17g}\nflap_radius_of_gyration = {:.17g}\n"
      "flap_frequency_ratio = {:.17g}\n"
      "[nondimensional.reference]\nsemichord = {:.17g}\npitch_frequency_hz = {:.17g}\n"
      "density = {:.17g}\n"
      "[initial]\npitch_deg = 1.0\nplunge_semichords = 0.0\nplunge_rate = 0.1\n"
      "[simulation]\nduration = 1.0\nsample_rate = 500.0\nrelative_tolerance = 1e-10\n"
      "absolute_tolerance = 1e-13\n",
      n.mass_ratio, n.elastic_axis, n.cg_offset, n.radius_of_gyration, n.frequency_ratio,
      n.reduced_speed, n.hinge, n.flap_cg_offset, n.flap_radius_of_gyration,
      n.flap_frequency_ratio, n.reference.semichord, n.reference.pitch_frequency / (2 * pi),
      n.reference.density);
  const Case nd = test::case_from(nd_text);
  const MemorySink a = run_case(si), b = run_case(nd);
  REQUIRE(a.rows() == b.rows());
  for (const char* ch : {"plunge", "pitch", "flap", "lift", "hinge_moment"}) {
    const auto x = a.column(ch), y = b.column(ch);
    INFO(ch);
    CHECK(max_abs_diff(x, y) <= 1e-7 * max_abs(x));
  }
}

TEST_CASE("A very stiff flap reproduces the 2-DOF response", "[simulate]") {
  // Theory sheet self-check: as K_beta grows the flap stops moving and the
  // 3-DOF section becomes the 2-DOF one (same total m, S_alpha, I_alpha).
  // Benchmark section of Lee, Price & Wong 1999 at U* = 4 (below flutter).
  const std::string sim =
      "[initial]\npitch_deg = 2.0\n[simulation]\nduration_semichords = 200.0\n"
      "sample_interval_semichords = 1.0\nrelative_tolerance = 1e-10\nabsolute_tolerance = 1e-13\n";
  const MemorySink two = run_case(test::case_from(test::benchmark_2dof(sim)));
  double previous = 1e300;
  for (double ratio : {20.0, 60.0, 180.0}) {
    const std::string flap = fmt::format(
        "hinge = 0.5\nflap_cg_offset = 0.0\nflap_radius_of_gyration = 0.05\n"
        "flap_frequency_ratio = {}\n",
        ratio);
    const MemorySink three = run_case(test::case_from(test::benchmark_2dof(flap + sim)));
    const double d = max_abs_diff(two.column("pitch"), three.column("pitch")) /
                     max_abs(two.column("pitch"));
    const double dh = max_abs_diff(two.column("plunge"), three.column("plunge")) /
                      max_abs(two.column("plunge"));
    INFO("flap frequency ratio " << ratio << ": pitch difference " << d << ", plunge " << dh);
    CHECK(d < previous);
    previous = d;
    if (ratio == 180.0) {
      CHECK(d < 2e-3);
      CHECK(dh < 2e-3);
    }
  }
}

TEST_CASE("The demo case runs to completion", "[simulate]") {
  const Case c = load_case(std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron.toml");
  const AeroelasticModel model(c.model);
  MemorySink sink;
  const SimulationSummary s = simulate(c, model, sink);
  CHECK(s.completed);
  CHECK(s.samples == 3001);
  CHECK(sink.rows() == 3001);
  // The rows announced to the sink before the run (3 s at 1000 Hz, both
  // ends: 3001), with the one extra row allowed for rounding.
  CHECK(sink.metadata().expected_rows >= 3001);
  CHECK(sink.metadata().expected_rows <= 3002);
  CHECK(sink.outcome().completed);
  for (double v : sink.column("hinge_moment")) CHECK(std::isfinite(v));
}

TEST_CASE("Result files keep the nonlinear spring as numbers", "[simulate]") {
  // The cubic law f = k (x + beta x^3) (README, "[springs.*]"; common
  // practice, no source) is kept as its stiffness k and the coefficient
  // k beta of x^3; a freeplay law as its breakpoints and the stiffness and
  // intercept of each region (the force is continuous at the breakpoints).
  const Case cubic = test::case_from(test::benchmark_2dof(
      "[springs.pitch]\nlaw = \"cubic\"\ncubic_coefficient = 300.0\n[simulation]\nduration = 1.0\n"));
  auto value = [](const RunMetadata& m, const std::string& name) {
    for (const auto& p : m.parameters)
      if (p.group == "springs" && p.name == name) return p.value;
    FAIL("no parameter " << name);
    return 0.0;
  };
  const RunMetadata mc = case_metadata(cubic, "simulation");
  const double k = cubic.model.section.pitch_stiffness;
  CHECK(value(mc, "pitch_stiffness_1") == Approx(k).epsilon(1e-14));
  CHECK(value(mc, "pitch_force_x3") == Approx(300.0 * k).epsilon(1e-14));
  const Case fp = test::case_from(test::benchmark_2dof(
      "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n[simulation]\nduration = 1.0\n"));
  const RunMetadata mf = case_metadata(fp, "simulation");
  const double gap = 0.5 * std::numbers::pi / 180;
  CHECK(value(mf, "pitch_breakpoint_1") == Approx(-gap).epsilon(1e-14));
  CHECK(value(mf, "pitch_breakpoint_2") == Approx(gap).epsilon(1e-14));
  CHECK(value(mf, "pitch_stiffness_2") == 0.0);
  // Continuity at the upper breakpoint: k (gap) + intercept_3 = 0.
  CHECK(value(mf, "pitch_stiffness_3") * gap + value(mf, "pitch_intercept_3") == Approx(0.0).margin(1e-9 * k));
}

TEST_CASE("Reported extremes are the trajectory's, not the samples'", "[simulate][peaks]") {
  // 1. Closed form (textbook, common practice, no source): a pitch
  //    oscillator in vacuum with a 1 degree freeplay half gap, plunge held,
  //    released from 3 degrees at rest: its minimum is -3 degrees at
  //    t = t2 + pi / (2 w), t2 = pi / (2 w) + 2 delta / ((alpha0 - delta) w).
  //    Sampled every 0.037 s (no sample near that time), the reported
  //    minimum and its time must be the closed form's.
  const std::string vacuum =
      "[section]\nsemichord = 0.5\nmass = 10.0\nelastic_axis = 0.0\ncg = 0.0\nradius_of_gyration = 0.5\n"
      "plunge_frequency_hz = 1.0\npitch_frequency_hz = 2.0\n[flow]\ndensity = 0.0\nairspeed = 10.0\n"
      "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 1.0\n[initial]\npitch_deg = 3.0\n"
      "[simulation]\nduration = 0.6\nsample_interval = 0.037\nhold = [\"plunge\"]\n";
  for (const char* stepper : {"auto", "dopri5"}) {
    CAPTURE(stepper);
    const Case c = test::case_from(vacuum, {fmt::format("simulation.stepper=\"{}\"", stepper),
                                            "simulation.relative_tolerance=1e-12",
                                            "simulation.absolute_tolerance=1e-15"});
    const AeroelasticModel m(c.model);
    NullSink sink;
    const SimulationSummary s = simulate(c, m, sink);
    const double w = std::sqrt(c.model.section.pitch_stiffness / c.model.section.pitch_inertia);
    const double d = pi / 180, a0 = 3 * pi / 180;
    const double t_min = pi / w + 2 * d / ((a0 - d) * w);
    const auto it = std::find_if(s.extremes.begin(), s.extremes.end(), [](const Extreme& e) { return e.channel == "pitch"; });
    REQUIRE(it != s.extremes.end());
    CHECK_THAT(it->min, Catch::Matchers::WithinRel(-a0, 1e-10));
    // Brent's method locates the time to about sqrt(eps) of the bracket.
    CHECK_THAT(it->time_of_min, Catch::Matchers::WithinAbs(t_min, 1e-6));
    // The same run with only its first and last states sampled (0 and
    // 0.6 s, the period about 0.58 s): the extremes come from the
    // integrator's steps, not the two samples, so the minimum is the same.
    const Case sparse = test::case_from(vacuum, {fmt::format("simulation.stepper=\"{}\"", stepper),
                                                 "simulation.relative_tolerance=1e-12",
                                                 "simulation.absolute_tolerance=1e-15",
                                                 "simulation.sample_interval=0.6"});
    NullSink sparse_sink;
    const SimulationSummary ss = simulate(sparse, AeroelasticModel(sparse.model), sparse_sink);
    CHECK(ss.samples == 2);
    const auto is = std::find_if(ss.extremes.begin(), ss.extremes.end(), [](const Extreme& e) { return e.channel == "pitch"; });
    REQUIRE(is != ss.extremes.end());
    CHECK_THAT(is->min, Catch::Matchers::WithinRel(-a0, 1e-10));
    CHECK_THAT(is->time_of_min, Catch::Matchers::WithinAbs(t_min, 1e-6));
  }
  // 2. A short one-minus-cosine gust (H = 2 m) on the demo section sampled
  //    at its default 1 ms: the lift peak must equal the peak of the same
  //    run sampled every 1e-5 s (an independent estimate: the largest of
  //    dense samples, low by at most L'' dt^2 / 8, about 1e-7 relative here)
  //    to 1e-6, and be at least the coarse run's largest sample.
  const std::string demo = std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron.toml";
  const std::vector<std::string> gust = {"gust.1.gradient=2.0"};
  auto lift = [](const SimulationSummary& s) {
    for (const auto& e : s.extremes)
      if (e.channel == "lift") return e;
    FAIL("no lift");
    return Extreme{};
  };
  const Case coarse = load_case(demo, gust);
  std::vector<std::string> dense_ov = gust;
  dense_ov.push_back("simulation.sample_rate=100000.0");
  const Case dense = load_case(demo, dense_ov);
  MemorySink cs;
  NullSink ds;
  const Extreme ec = lift(simulate(coarse, AeroelasticModel(coarse.model), cs));
  const Extreme ed = lift(simulate(dense, AeroelasticModel(dense.model), ds));
  const std::vector<double> samples = cs.column("lift");
  const double sample_max = *std::max_element(samples.begin(), samples.end());
  CAPTURE(ec.max, ed.max, sample_max, ec.time_of_max, ed.time_of_max);
  CHECK(ec.max >= sample_max);
  CHECK_THAT(ec.max, Catch::Matchers::WithinRel(ed.max, 1e-6));
  CHECK_THAT(ec.time_of_max, Catch::Matchers::WithinAbs(ed.time_of_max, 2e-5));
  // 3. The same gust sampled every 1.3 s (samples at 0, 1.3 and 2.6 s, many
  //    periods apart, none near the peak): the same lift peak, found from
  //    the integrator's steps.
  std::vector<std::string> sparse_ov = gust;
  sparse_ov.push_back("simulation.sample_rate=0.7692307692307693");  // 1 / (1.3 s)
  const Case sparse = load_case(demo, sparse_ov);
  NullSink ss;
  const Extreme es = lift(simulate(sparse, AeroelasticModel(sparse.model), ss));
  CAPTURE(es.max, es.time_of_max);
  CHECK_THAT(es.max, Catch::Matchers::WithinRel(ed.max, 1e-6));
  CHECK_THAT(es.time_of_max, Catch::Matchers::WithinAbs(ed.time_of_max, 2e-5));
  // 4. Every reported extreme of the demo's release transient (0.08 s, the
  //    flap crossing its gap, before the gust) at the default 1 ms samples,
  //    exact and Dormand-Prince, against the largest and smallest of the
  //    same run sampled at 1 MHz: never short of the dense samples' extreme
  //    (1e-9 of the range: the two runs' trajectories agree to round-off),
  //    and beyond it by at most 1e-5 of the range (the dense samples miss
  //    an extremum by |y''| dt^2 / 8 where it is smooth, the sampling
  //    error of a quadratic near its peak, common practice, no source; by
  //    up to |y'| dt / 2 where a load channel has a kink at a switch:
  //    measured up to 1.2e-6 of the range). A restart of
  //    the extreme search from a step end on a breakpoint once took the
  //    other side's region and reported a flap-rate minimum 0.3 % beyond
  //    the trajectory's (it showed at 30 m/s, flap released from 1 and 2
  //    degrees, with either stepper).
  for (const char* stepper : {"exact", "dopri5"}) {
    for (const char* speed : {"30", "60"}) {
      for (const char* flap : {"1.0", "2.0"}) {
        CAPTURE(stepper, speed, flap);
        const std::vector<std::string> base = {"simulation.duration=0.08", fmt::format("simulation.stepper=\"{}\"", stepper),
                                               "simulation.relative_tolerance=1e-12", "simulation.absolute_tolerance=1e-14",
                                               fmt::format("flow.airspeed={}", speed), fmt::format("initial.flap_deg={}", flap)};
        std::vector<std::string> fine_ov = base;
        fine_ov.push_back("simulation.sample_rate=1000000.0");
        const Case run = load_case(demo, base), fine = load_case(demo, fine_ov);
        NullSink rs;
        MemorySink fs;
        const SimulationSummary r = simulate(run, AeroelasticModel(run.model), rs);
        (void)simulate(fine, AeroelasticModel(fine.model), fs);
        CHECK(r.extremes.size() >= 9);
        for (const Extreme& e : r.extremes) {
          const std::vector<double> y = fs.column(e.channel);
          const double hi = *std::max_element(y.begin(), y.end()), lo = *std::min_element(y.begin(), y.end());
          const double range = std::max(hi - lo, 1e-300);
          CAPTURE(e.channel, e.max, hi, e.min, lo);
          CHECK(e.max >= hi - 1e-9 * range);
          CHECK(e.max <= hi + 1e-5 * range);
          CHECK(e.min <= lo + 1e-9 * range);
          CHECK(e.min >= lo - 1e-5 * range);
        }
      }
    }
  }
  // 5. A long-stepping integrator: the cubic-spring regression section
  //    (1500 semichords, samples every 100) with Bulirsch-Stoer at rtol
  //    1e-8 takes steps of about a fifth of a period; its pitch and plunge
  //    extremes must still be the trajectory's: equal to Dormand-Prince's at
  //    rtol 1e-12 sampled every 0.5 semichord, to 1e-7 relative (the looser
  //    run's own accuracy). Taken from step ends alone they were 1.5 % low.
  const std::string cubic = std::string(AEROSECT_SOURCE_DIR) + "/tests/regression/cases/lpw_cubic.toml";
  auto extremes_of = [&](const std::vector<std::string>& ov) {
    const Case c = load_case(cubic, ov);
    NullSink sink;
    return simulate(c, AeroelasticModel(c.model), sink).extremes;
  };
  const std::vector<Extreme> bs = extremes_of({"simulation.stepper=\"bulirsch-stoer\"", "simulation.relative_tolerance=1e-8",
                                               "simulation.absolute_tolerance=1e-10",
                                               "simulation.sample_interval_semichords=100.0"});
  const std::vector<Extreme> ref = extremes_of({"simulation.stepper=\"dopri5\"", "simulation.relative_tolerance=1e-12",
                                                "simulation.absolute_tolerance=1e-14"});
  for (const char* ch : {"plunge", "pitch"}) {
    auto find = [&](const std::vector<Extreme>& v) {
      return *std::find_if(v.begin(), v.end(), [&](const Extreme& e) { return e.channel == ch; });
    };
    const Extreme a = find(bs), b = find(ref);
    CAPTURE(ch, a.max, b.max, a.min, b.min);
    CHECK_THAT(a.max, Catch::Matchers::WithinRel(b.max, 1e-7));
    CHECK_THAT(a.min, Catch::Matchers::WithinRel(b.min, 1e-7));
  }
}
