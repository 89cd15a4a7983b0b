#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <numbers>

#include <fmt/format.h>

#include <Eigen/Eigenvalues>

#include "aerosect/analysis/continuation.hpp"
#include "aerosect/analysis/describing_function.hpp"
#include "aerosect/analysis/flutter.hpp"
#include "aerosect/analysis/flutter_report.hpp"
#include "aerosect/analysis/orbit.hpp"
#include "aerosect/analysis/simulate.hpp"
#include "helpers.hpp"

using namespace aerosect;
using std::numbers::pi;

namespace {

// Late-time LCO amplitude (half peak-to-peak of pitch over the last fifth).
double late_amplitude(const Case& c) {
  const AeroelasticModel model(c.model);
  MemorySink sink;
  REQUIRE(simulate(c, model, sink).completed);
  const auto x = sink.column("pitch");
  const auto from = x.begin() + static_cast<long>(0.8 * x.size());
  const auto [lo, hi] = std::minmax_element(from, x.end());
  return 0.5 * (*hi - *lo);
}

Case cubic_case(double reduced_speed, double duration = 20000) {
  // Benchmark section of Lee, Price & Wong 1999 with a hardening cubic pitch
  // spring M = k (alpha + 3 alpha^3) (beta = 3, as in that paper's cubic
  // examples, recalled from memory).
  return test::case_from(test::benchmark_2dof(
      fmt::format("[springs.pitch]\nlaw = \"cubic\"\ncubic_coefficient = 3.0\n[initial]\n"
                  "pitch_deg = 3.0\n[simulation]\nduration_semichords = {}\n"
                  "sample_interval_semichords = 0.5\nrelative_tolerance = 1e-10\n"
                  "absolute_tolerance = 1e-13\n",
                  duration),
      reduced_speed));
}

constexpr double kFlutterJones = 6.2851;  // U*_L, Lee, Price & Wong 1999

// State-space flutter of every linearisation (no p-k, no LCO curve);
// results 1 and 2 are gap closed and gap open for a gap law.
FlutterReport state_space_only(const Case& c, const std::vector<double>& speeds) {
  FlutterOptions o;
  o.speeds = speeds;
  o.pk = false;
  o.lco_prediction = false;
  return flutter_analysis(c, o);
}
}  // namespace

TEST_CASE("Cubic hardening pitch spring: supercritical LCO above U*_L only", "[df]") {
  // Lee, Price & Wong 1999 report the hardening cubic benchmark as
  // supercritical: no LCO below the linear flutter speed, an LCO whose
  // amplitude grows from zero with speed above it.
  CHECK(late_amplitude(cubic_case(0.95 * kFlutterJones, 8000)) < 1e-4);
  double previous = 0;
  for (double r : {1.02, 1.1, 1.25}) {
    const double a = late_amplitude(cubic_case(r * kFlutterJones));
    INFO("U*/U*_L = " << r << ": LCO pitch amplitude " << a << " rad");
    CHECK(a > previous);
    CHECK(a > 0.01);
    previous = a;
  }
}

TEST_CASE("Every predicted LCO point is a neutral point of the equivalent linear system", "[df]") {
  // The definition in describing_function.hpp: at a reported point
  // (A, U, omega) the linear system with k_j = N (N(A), or N_A(B, A) with a
  // steady condition) has a neutral oscillatory pair at U, frequency omega.
  // Checked independently of the scan's own arithmetic (rank-one
  // polynomials, Newton) with Eigen's EigenSolver (reference library) on the
  // state matrix: a pair at Im lambda = omega (1e-8 relative) with
  // |Re lambda| <= 1e-8 |lambda|. Cases: the benchmark section with pitch
  // freeplay, the demo (aileron freeplay, 3 DOF) and the trimmed demo (the
  // dual-input prediction about a bias).
  auto check = [](const Case& c) {
    const LcoPrediction p = describing_function_lco(c, default_speeds(c), 80);
    REQUIRE(p.available);
    REQUIRE(p.points.size() > 50);
    const AeroelasticModel model = stability_model(c.model);
    DofVector k(c.model.section.dof);
    for (int i = 0; i < k.size(); ++i) k(i) = c.model.springs[static_cast<std::size_t>(i)].nominal_stiffness();
    int bad = 0;
    for (const LcoPredictionPoint& pt : p.points) {
      k(p.spring) = pt.equivalent_stiffness;
      const Eigen::VectorXcd ev =
          Eigen::EigenSolver<Eigen::MatrixXd>(model.state_matrix_at(pt.speed, k), false).eigenvalues();
      const std::complex<double> target(0, pt.frequency);
      Eigen::Index best = 0;
      for (Eigen::Index i = 1; i < ev.size(); ++i)
        if (std::abs(ev(i) - target) < std::abs(ev(best) - target)) best = i;
      const std::complex<double> l = ev(best);
      const bool neutral = std::abs(l.imag() - pt.frequency) <= 1e-8 * pt.frequency &&
                           std::abs(l.real()) <= 1e-8 * std::abs(l);
      if (!neutral) {
        ++bad;
        INFO("A " << pt.amplitude << ", U " << pt.speed << " m/s, omega " << pt.frequency << " rad/s: nearest eigenvalue "
                  << l.real() << " + " << l.imag() << "i");
        CHECK(neutral);
      }
    }
    CHECK(bad == 0);
  };
  SECTION("benchmark section, pitch freeplay") {
    check(test::case_from(test::benchmark_2dof(
        "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n[simulation]\nduration = 1\n", 5.0)));
  }
  SECTION("demo, aileron freeplay") {
    check(load_case(std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron.toml"));
  }
  SECTION("trimmed demo, dual-input about the bias") {
    check(load_case(std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron_trimmed.toml"));
  }
}

TEST_CASE("Describing-function LCO prediction against simulation", "[df]") {
  // Gelb & Vander Velde 1968: for a near-harmonic LCO the equivalent
  // linearisation predicts the amplitude to a few percent. Hardening cubic on
  // the benchmark section: the prediction must be stable, lie above U*_L and
  // agree with the simulated amplitude within 5 %.
  const Case c = cubic_case(1.1 * kFlutterJones);
  const double ref = c.nondimensional.reference.semichord * c.nondimensional.reference.pitch_frequency;
  const LcoPrediction p = describing_function_lco(c, test::grid(0.05, 12.0, 240), 60);
  REQUIRE(p.available);
  CHECK(p.spring == kPitch);
  for (const auto& pt : p.points) {
    CHECK(pt.speed / ref > kFlutterJones * (1 - 1e-6));
    CHECK(pt.stable);
  }
  // Amplitude at U* = 1.1 U*_L by interpolation along the (monotonic) curve.
  const double U = 1.1 * kFlutterJones * ref;
  double predicted = -1;
  for (std::size_t i = 1; i < p.points.size(); ++i) {
    const auto &a = p.points[i - 1], &b = p.points[i];
    if ((a.speed - U) * (b.speed - U) <= 0) {
      predicted = a.amplitude + (b.amplitude - a.amplitude) * (U - a.speed) / (b.speed - a.speed);
      break;
    }
  }
  REQUIRE(predicted > 0);
  const double simulated = late_amplitude(c);
  INFO("predicted " << predicted << " rad, simulated " << simulated << " rad");
  CHECK(predicted == Approx(simulated).epsilon(0.05));
}

TEST_CASE("Freeplay prediction joins the gap-open and gap-closed flutter speeds", "[df]") {
  // N(A) runs from 0 (A -> half-gap: gap open) to k (A -> infinity: gap
  // closed), so the predicted curve must start at the gap-open flutter speed
  // and end near the gap-closed one (Gelb & Vander Velde 1968; theory sheet
  // section 3). Benchmark section, pitch freeplay of half-gap 0.5 deg.
  const Case c = test::case_from(test::benchmark_2dof(
      "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n[simulation]\nduration = 1\n"));
  const std::vector<double> speeds = test::grid(0.02, 10.0, 250);
  const FlutterReport r = state_space_only(c, speeds);
  const Crossing& closed = r.results.at(1).methods.at(0).flutter;
  const Crossing& open = r.results.at(2).methods.at(0).flutter;
  REQUIRE(closed.found);
  REQUIRE(open.found);
  const LcoPrediction all = describing_function_lco(c, speeds, 80);
  REQUIRE(all.available);
  LcoPrediction p = all;  // the lowest neutral speed at each amplitude
  std::erase_if(p.points, [](const LcoPredictionPoint& q) { return q.branch != 0; });
  CHECK(p.points.front().speed == Approx(open.speed).epsilon(1e-3));
  // At the physical amplitude limit, 1 rad = 115 half-gaps, N/k = 0.989:
  // within 1 % of the gap-closed speed.
  CHECK(p.points.back().speed == Approx(closed.speed).epsilon(0.01));
  for (const auto& pt : p.points) CHECK(pt.speed <= closed.speed * (1 + 1e-6));
}

TEST_CASE("Freeplay LCO below the gap-open flutter speed, predicted and simulated", "[df]") {
  // The gap-open / gap-closed band is not a strict bound when the flutter
  // speed is not monotonic in the spring stiffness: on the benchmark section
  // with pitch freeplay U_F(k) dips below U_F(0) for small k, so the
  // describing function predicts a stable LCO below the gap-open flutter
  // speed, and the simulation (exact switching) finds it there.
  const std::string fp = "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n";
  const Case c = test::case_from(test::benchmark_2dof(fp + "[simulation]\nduration = 1\n"));
  const std::vector<double> speeds = test::grid(0.02, 10.0, 250);
  const double U_open = state_space_only(c, speeds).results.at(2).methods.at(0).flutter.speed;
  const LcoPrediction p = describing_function_lco(c, speeds, 80);
  double lowest = 1e300;
  for (const auto& pt : p.points)
    if (pt.stable) lowest = std::min(lowest, pt.speed);
  INFO("gap-open flutter U* " << U_open << ", lowest stable predicted LCO U* " << lowest);
  REQUIRE(lowest < 0.95 * U_open);
  const Case sim = test::case_from(test::benchmark_2dof(
      fp + "[initial]\npitch_deg = 0.6\n[simulation]\nduration_semichords = 20000\n"
           "sample_interval_semichords = 1.0\n",
      0.5 * (lowest + U_open)));
  const double a = late_amplitude(sim) / (0.5 * pi / 180);
  INFO("simulated LCO half peak-to-peak at U* = " << 0.5 * (lowest + U_open) << ": " << a
                                                  << " half-gaps");
  CHECK(a > 1.05);  // a sustained oscillation outside the gap
}

TEST_CASE("Every neutral speed counts: an instability band that closes bounds the LCO", "[df]") {
  // Gelb & Vander Velde 1968: an LCO of amplitude A can exist wherever the
  // equivalent linear system (k = N(A)) is neutral, at every such speed, not
  // only the lowest. The demo scenario (invented data, used here only as a
  // section whose gap-open instability restabilises) has aileron freeplay
  // with a gap-open flutter band of about 11.5..30 m/s and gap-closed flutter
  // at 94 m/s. The band's two neutral speeds close on each other as the
  // amplitude grows: one curve that leaves the gap edge at 11.5 m/s and
  // returns to it at 30 m/s. Joining the band to the 94 m/s flutter
  // predicted a stable LCO at 50 m/s, where the simulation (exact switching,
  // 3 deg aileron start, no gust) dies out completely.
  const Case demo = load_case(std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron.toml");
  const LcoPrediction p = describing_function_lco(demo, default_speeds(demo), 60);
  REQUIRE(p.available);
  REQUIRE(p.branches.size() >= 2);
  const LcoBranch& band = p.branches.front();
  CHECK(band.start == BranchEnd::kGapEdge);
  CHECK(band.end == BranchEnd::kGapEdge);
  CHECK(band.count > 10);
  CHECK(p.points[band.first].speed == Approx(11.5).epsilon(0.02));
  CHECK(p.points[band.first + band.count - 1].speed == Approx(29.8).epsilon(0.02));
  for (std::size_t i = band.first; i < band.first + band.count; ++i) {
    CHECK(p.points[i].speed > 11.0);
    CHECK(p.points[i].speed < 31.0);
  }
  // No stable small-amplitude LCO predicted between the band and 90 m/s.
  for (const auto& pt : p.points)
    if (pt.stable && pt.amplitude < 2 * 0.5 * pi / 180) CHECK((pt.speed < 40.0 || pt.speed > 90.0));
  std::string text = demo.text;
  text = text.substr(0, text.find("[[gust]]"));
  const Case quiet = test::case_from(text + "", {"flow.airspeed=50", "simulation.duration=40",
                                                "initial.flap_deg=3"});
  const AeroelasticModel model(quiet.model);
  MemorySink sink;
  REQUIRE(simulate(quiet, model, sink).completed);
  const auto beta = sink.column("flap");
  const auto from = beta.begin() + static_cast<long>(0.8 * beta.size());
  const auto [lo, hi] = std::minmax_element(from, beta.end());
  CHECK(0.5 * (*hi - *lo) < 1e-6);
}

TEST_CASE("A pair turning real is divergence of the equivalent system, not an LCO", "[df]") {
  // The benchmark section with the elastic axis moved aft of the quarter
  // chord (a_h = -0.3) and pitch freeplay: the equivalent system diverges
  // statically. Thin-aerofoil divergence closed form (theory sheet section
  // 4): U_D / (b w_a) = r_a sqrt(mu (N / k) / (1 + 2 a)), 7.906 at N = k.
  // Above flutter the growing pair of the equivalent system meets the real
  // axis and splits into two real positive eigenvalues before U_D: the
  // growth rate of the oscillatory roots jumps there without any neutral
  // pair. That jump was reported as an unstable LCO branch at ~1e-7 Hz.
  const Case c = test::case_from(test::benchmark_2dof(
      "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n[simulation]\nduration = 1\n", 5.0),
      {"nondimensional.elastic_axis=-0.3"});
  const double ref = c.model.section.semichord * uncoupled_frequencies(c.model.section).pitch;
  const std::vector<double> speeds = test::grid(0.5 * ref, 12.0 * ref, 116);
  const FlutterReport r = state_space_only(c, speeds);
  const Crossing& closed = r.results.at(1).methods.at(0).flutter;
  const Crossing& open = r.results.at(2).methods.at(0).flutter;
  REQUIRE(closed.found);
  REQUIRE(open.found);
  CHECK(r.results.at(1).methods.at(0).divergence.speed / ref == Approx(0.5 * std::sqrt(100 / 0.4)).epsilon(1e-3));

  const LcoPrediction p = describing_function_lco(c, speeds, 80);
  REQUIRE(p.available);
  // One curve: from the gap edge at the gap-open flutter speed to the
  // physical amplitude limit, near the gap-closed flutter speed (N -> k).
  REQUIRE(p.branches.size() == 1);
  CHECK(p.branches[0].start == BranchEnd::kGapEdge);
  CHECK(p.branches[0].end == BranchEnd::kAmplitudeLimit);
  CHECK(p.points.front().speed == Approx(open.speed).epsilon(1e-3));
  CHECK(p.points.back().speed == Approx(closed.speed).epsilon(0.01));
  const double w_h = uncoupled_frequencies(c.model.section).plunge;
  for (const auto& pt : p.points) {
    // Every point is a neutral oscillatory pair of its equivalent system.
    CHECK(pt.frequency > 0.5 * w_h);
    DofVector k(2);
    k << c.model.springs[kPlunge].nominal_stiffness(), pt.equivalent_stiffness;
    const Eigen::VectorXcd ev =
        Eigen::EigenSolver<Eigen::MatrixXd>(stability_model(c.model).state_matrix_at(pt.speed, k), false).eigenvalues();
    double nearest = 1e300;
    for (Eigen::Index i = 0; i < ev.size(); ++i)
      nearest = std::min(nearest, std::abs(ev(i) - std::complex<double>(0, pt.frequency)));
    CHECK(nearest < 1e-6 * pt.frequency);
  }
  // The jumps are counted apart: on one side of each, the equivalent system
  // has two real positive eigenvalues (the pair that turned real).
  REQUIRE(!p.equivalent_divergence.empty());
  for (const auto& d : p.equivalent_divergence) {
    DofVector k(2);
    k << c.model.springs[kPlunge].nominal_stiffness(), c.model.springs[kPitch].describing_function(d.amplitude);
    int real_positive = 0;
    for (double side : {1 - 1e-6, 1 + 1e-6}) {
      const Eigen::VectorXcd ev =
          Eigen::EigenSolver<Eigen::MatrixXd>(stability_model(c.model).state_matrix_at(d.speed * side, k), false)
              .eigenvalues();
      int n = 0;
      for (Eigen::Index i = 0; i < ev.size(); ++i)
        if (ev(i).real() > 0 && std::abs(ev(i).imag()) <= 1e-6 * std::abs(ev(i))) ++n;
      real_positive = std::max(real_positive, n);
    }
    CAPTURE(d.amplitude, d.speed / ref);
    CHECK(real_positive >= 2);
  }
}

TEST_CASE("A stable branch continues to large amplitude: 34 degrees against the shooting orbit", "[df]") {
  // Hardening cubic M = k (alpha + 5 alpha^3) on the benchmark section
  // (the coefficient is ours: large enough that a 0.6 rad LCO lies near
  // three times the linear flutter speed). The amplitude grid used to stop
  // at 30 x the amplitude where N(A) had changed by 0.1 % (14 deg here), so
  // the stable curve ended there; it must now go on until its neutral speed
  // leaves the speed range.
  const std::string cubic = "[springs.pitch]\nlaw = \"cubic\"\ncubic_coefficient = 5.0\n";
  const Case c = test::case_from(test::benchmark_2dof(cubic + "[simulation]\nduration = 1\n", 5.0));
  const double ref = c.model.section.semichord * uncoupled_frequencies(c.model.section).pitch;
  const LcoPrediction p = describing_function_lco(c, test::grid(0.5 * ref, 30.0 * ref, 300), 60);
  REQUIRE(p.available);
  REQUIRE(p.branches.size() == 1);
  CHECK(p.branches[0].start == BranchEnd::kLinearLimit);
  const LcoPredictionPoint* at34 = nullptr;
  for (const auto& pt : p.points) {
    CHECK(pt.stable);  // supercritical: stable throughout (Lee, Price & Wong 1999, hardening)
    if (!at34 || std::abs(pt.amplitude - 0.6) < std::abs(at34->amplitude - 0.6)) at34 = &pt;
  }
  REQUIRE(at34);
  REQUIRE(at34->amplitude == Approx(0.6).epsilon(0.05));
  // The periodic orbit at that speed, by shooting from the describing
  // function's harmonic guess (orbit.hpp).
  const Case at = test::case_from(test::benchmark_2dof(cubic + "[simulation]\nduration = 1\n", at34->speed / ref));
  const AeroelasticModel model(at.model);
  DofVector k(2);
  k << at.model.springs[kPlunge].nominal_stiffness(), at34->equivalent_stiffness;
  const OrbitSeed guess = seed_from_harmonic(model, k, kPitch, at34->amplitude, at34->frequency);
  const auto marched = seed_from_time_march(model, guess.x0, 400 * guess.period, OrbitSettings{}.integrator, kPitch);
  REQUIRE(marched);
  const Orbit o = solve_orbit(model, *marched);
  INFO(o.failure);
  REQUIRE(o.converged);
  CHECK(o.stable);
  const double a = o.dof[kPitch].amplitude;
  const auto& h = o.content[kPitch].harmonics;
  CAPTURE(at34->speed / ref, at34->amplitude, a, at34->frequency, 2 * pi / o.period, h[0], h[1], h[2]);
  // Tolerance: the describing function keeps the first harmonic only, so
  // its error is of the order of the harmonic content it drops (Gelb &
  // Vander Velde 1968, the filtering hypothesis; recalled from memory):
  // here the converged orbit's own third-harmonic ratio h3/h1 (about 0.19
  // at this amplitude), measured on the orbit, not on the prediction.
  const double distortion = h[2] / h[0];
  CHECK(distortion < 0.3);  // still a near-harmonic cycle
  CHECK(at34->amplitude == Approx(a).epsilon(distortion));
  // The describing function's speed at the orbit's amplitude.
  double u_df = -1;
  for (std::size_t i = 1; i < p.points.size(); ++i) {
    const auto &lo = p.points[i - 1], &hi = p.points[i];
    if ((lo.amplitude - a) * (hi.amplitude - a) <= 0)
      u_df = lo.speed + (hi.speed - lo.speed) * (a - lo.amplitude) / (hi.amplitude - lo.amplitude);
  }
  REQUIRE(u_df > 0);
  CAPTURE(u_df / ref);
  CHECK(u_df == Approx(at34->speed).epsilon(distortion));
  CHECK(at34->frequency == Approx(2 * pi / o.period).epsilon(distortion));
}

TEST_CASE("The LCO table shows every branch and every stable/unstable segment", "[df]") {
  // Common practice, no source: a printed table must not drop a branch or a
  // change of stability. The regression 3-DOF section with flap freeplay
  // has several branches, some of a few dozen points beside long ones; the
  // table used to print every n/12-th point of the whole list.
  const Case c = load_case(std::string(AEROSECT_SOURCE_DIR) + "/tests/regression/cases/flap_freeplay_3dof.toml");
  const double ref = c.model.section.semichord * uncoupled_frequencies(c.model.section).pitch;
  const LcoPrediction p = describing_function_lco(c, test::grid(0.5 * ref, 10.0 * ref, 96), 80);
  REQUIRE(p.branches.size() >= 3);
  const std::string text = lco_prediction_text(p);
  INFO(text);
  auto row = [&](const LcoPredictionPoint& pt) {
    return fmt::format("  {:>13.5g} {:>12.5g} {:>10.4g} {:>6}  {}\n", pt.amplitude * 180 / pi, pt.speed,
                       pt.frequency / (2 * pi), pt.branch, pt.stable ? "yes" : "no");
  };
  std::size_t rows = 0;
  for (std::size_t b = 0; b < p.branches.size(); ++b) {
    const LcoBranch& br = p.branches[b];
    std::size_t shown = 0;
    CHECK(text.find(fmt::format("  branch {}: {} points", b, br.count)) != std::string::npos);
    for (std::size_t i = br.first; i < br.first + br.count; ++i) {
      const bool segment_end = i == br.first || i + 1 == br.first + br.count ||
                               p.points[i].stable != p.points[i - 1].stable ||
                               p.points[i].stable != p.points[i + 1].stable;
      const bool printed = text.find(row(p.points[i])) != std::string::npos;
      if (segment_end) CHECK(printed);
      shown += printed;
    }
    if (br.count <= 24) CHECK(shown == br.count);
    rows += shown;
  }
  CHECK(rows < p.points.size());  // long branches are thinned
  // One summary line per stable run, saying where it ends and why; each
  // branch line gives both end reasons.
  std::size_t runs = 0, lines = 0;
  for (const LcoBranch& br : p.branches) {
    runs += stable_speed_ranges(p, br).size();
    CHECK(text.find(fmt::format("({}) .. ", to_string(br.start))) != std::string::npos);
    CHECK(text.find(fmt::format("({})\n", to_string(br.end))) != std::string::npos);
  }
  for (std::size_t at = text.find("    stable from "); at != std::string::npos; at = text.find("    stable from ", at + 1))
    ++lines;
  CHECK(runs > 0);
  CHECK(lines == runs);
}

namespace {

// The dual-input prediction's branch-0 points as (speed, amplitude, bias),
// sorted by speed (the branch is monotone in speed where it is compared).
std::vector<std::array<double, 3>> biased_curve(const LcoPrediction& p) {
  std::vector<std::array<double, 3>> v;
  for (const auto& q : p.points)
    if (q.branch == 0) v.push_back({q.speed, q.amplitude, q.bias});
  std::sort(v.begin(), v.end());
  return v;
}

}  // namespace

TEST_CASE("Dual-input describing function of a trimmed section against its converged orbits", "[df][orbit]") {
  // Gelb & Vander Velde 1968 (bias plus sinusoid): with the steady loads the
  // flap's LCO is x = B + A sin(w t) about a bias B that solves the mean
  // equation. The shipped trimmed demo (2 deg incidence, 1 g) has its
  // static equilibrium inside the gap between about 24.9 and 35.5 m/s, and
  // its gap-open system is unstable up to about 30 m/s; there the flap
  // oscillates through its gap about a mean that is not centred. Reference:
  // converged periodic orbits of the same section (shooting, orbit.hpp,
  // continued in airspeed from a time-marched cycle at 27 m/s), with a
  // second point set with an applied hinge moment of 0.05 N m/m. The
  // first-harmonic method neglects the higher harmonics, so each orbit's
  // own higher-harmonic content a_2 + ... + a_5 (from 13 % of a_1 near the
  // stop edge, where half the cycle is in contact, down to 0.01 % near the
  // grazing end) bounds the prediction's error in the fundamental a_1 and
  // in the mean (common practice, no source); speed at the orbit's
  // amplitude within 1 %. Measured (Release build): amplitude within 5.1 %
  // of a_1 (0.4 x the higher harmonics, on every orbit), mean within 0.6 %
  // of a_1, speed within 0.35 % (17 orbits, 24.90 to 28.91 m/s); with the
  // hinge moment 4.4 %, 0.43 %, 0.24 % (16 orbits, 25.67 to 29.80 m/s).
  for (const std::string hinge : {"0", "0.05"}) {
    const Case c = load_case(std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron_trimmed.toml",
                             {"flow.airspeed=27", "steady.hinge_moment=" + hinge});
    std::vector<double> speeds;
    for (int i = 1; i <= 300; ++i) speeds.push_back(60.0 * i / 300);
    const LcoPrediction df = describing_function_lco(c, speeds);
    REQUIRE(df.available);
    CHECK(df.biased);
    CHECK(df.spring == kFlap);
    const auto curve = biased_curve(df);
    REQUIRE(curve.size() > 10);
    BranchOptions o;
    o.from = 24;
    o.to = 31;
    o.start = BranchStart::kMarch;
    o.max_points = 60;
    const Branch b = continue_branch(c, o);
    INFO("hinge moment " << hinge << " N m/m: " << b.stop_reason);
    int compared = 0;
    double worst_a = 0, worst_b = 0, worst_u = 0;
    for (const auto& p : b.points) {
      if (!p.orbit.stable) continue;
      const auto& h = p.orbit.content[kFlap];
      const double a1 = h.harmonics.at(0), mean = h.mean;
      double higher = 0;
      for (std::size_t k = 1; k < h.harmonics.size(); ++k) higher += h.harmonics[k];
      // The prediction at the orbit's speed (interpolated along the curve).
      auto it = std::lower_bound(curve.begin(), curve.end(), std::array<double, 3>{p.airspeed, 0, 0});
      if (it == curve.begin() || it == curve.end()) continue;
      const auto &lo = *(it - 1), &hi = *it;
      const double w = (p.airspeed - lo[0]) / (hi[0] - lo[0]);
      const double A = lo[1] + w * (hi[1] - lo[1]), B = lo[2] + w * (hi[2] - lo[2]);
      CAPTURE(p.airspeed, a1, A, mean, B);
      CHECK(std::abs(A - a1) <= higher);
      CHECK(std::abs(B - mean) <= higher);
      worst_a = std::max(worst_a, std::abs(A - a1) / a1);
      worst_b = std::max(worst_b, std::abs(B - mean) / a1);
      // The speed the prediction gives for the orbit's amplitude (the curve
      // rises in amplitude with speed here).
      for (std::size_t q = 1; q < curve.size(); ++q)
        if ((curve[q - 1][1] - a1) * (curve[q][1] - a1) <= 0 && curve[q][1] > curve[q - 1][1]) {
          const double u = curve[q - 1][0] + (curve[q][0] - curve[q - 1][0]) * (a1 - curve[q - 1][1]) /
                                                 (curve[q][1] - curve[q - 1][1]);
          CHECK_THAT(u, Catch::Matchers::WithinRel(p.airspeed, 0.01));
          worst_u = std::max(worst_u, std::abs(u - p.airspeed) / p.airspeed);
          break;
        }
      ++compared;
    }
    INFO("largest differences: amplitude " << worst_a << " of a_1, mean " << worst_b << " of a_1, speed "
                                           << worst_u);
    CHECK(compared >= 5);
  }
}

TEST_CASE("The predicted LCOs at one airspeed: linear interpolation on each branch crossing it", "[df]") {
  // A hand-made curve (common practice, no source: linear interpolation
  // between the two samples bracketing the speed; the expected values are
  // worked by hand). Branch 0 folds: its speed rises 10 -> 30 then falls to
  // 20, so 25 m/s is crossed twice; branch 1 runs 40 -> 50.
  LcoPrediction p;
  p.available = true;
  p.spring = kPitch;
  auto pt = [](double a, double u, double w, bool s, int b) {
    LcoPredictionPoint q;
    q.amplitude = a, q.speed = u, q.frequency = w, q.stable = s, q.branch = b;
    return q;
  };
  p.points = {pt(0.01, 10, 60, true, 0), pt(0.02, 30, 62, true, 0), pt(0.04, 20, 64, false, 0),
              pt(0.05, 40, 70, true, 1), pt(0.07, 50, 72, true, 1)};
  p.branches = {{0, 3, BranchEnd::kGapEdge, BranchEnd::kBranchEnds, false},
                {3, 2, BranchEnd::kGapEdge, BranchEnd::kAmplitudeLimit, false}};
  const auto at25 = lco_at_speed(p, 25.0);
  REQUIRE(at25.size() == 2);
  CHECK(at25[0].amplitude == Approx(0.0175).epsilon(1e-14));  // 0.01 + 0.75 * 0.01
  CHECK(at25[0].frequency == Approx(61.5).epsilon(1e-14));
  CHECK(at25[0].stable);
  CHECK(at25[1].amplitude == Approx(0.03).epsilon(1e-14));  // half way from 30 down to 20
  CHECK(at25[1].frequency == Approx(63.0).epsilon(1e-14));
  CHECK_FALSE(at25[1].stable);  // across the stability change (the fold)
  const auto at45 = lco_at_speed(p, 45.0);
  REQUIRE(at45.size() == 1);
  CHECK(at45[0].branch == 1);
  CHECK(at45[0].amplitude == Approx(0.06).epsilon(1e-14));
  // A sample exactly at the speed counts once (the fold's tip at 30 m/s).
  const auto at30 = lco_at_speed(p, 30.0);
  REQUIRE(at30.size() == 1);
  CHECK(at30[0].amplitude == 0.02);
  CHECK(lco_at_speed(p, 35.0).empty());  // between the branches
  CHECK(lco_at_speed(p, 5.0).empty());
  // A closed loop joins its last point to its first: 60 -> 70 -> 65 -> 60.
  LcoPrediction loop;
  loop.available = true;
  loop.points = {pt(0.01, 60, 50, true, 0), pt(0.02, 70, 52, true, 0), pt(0.03, 65, 54, true, 0)};
  loop.branches = {{0, 3, BranchEnd::kBranchEnds, BranchEnd::kBranchEnds, true}};
  const auto at62 = lco_at_speed(loop, 62.0);
  REQUIRE(at62.size() == 2);  // on the way up and on the closing segment 65 -> 60
  CHECK(at62[0].amplitude == Approx(0.012).epsilon(1e-14));
  CHECK(at62[1].amplitude == Approx(0.018).epsilon(1e-14));  // 0.03 + 0.6 * (0.01 - 0.03)
  REQUIRE(lco_at_speed(loop, 60.0).size() == 1);  // the loop's first point, once
}
