#include <catch2/catch.hpp>

#include <algorithm>
#include <atomic>
#include <cmath>
#include <numbers>
#include <mutex>

#include "aerosect/analysis/sweep.hpp"
#include "helpers.hpp"

using namespace aerosect;

namespace {
SweepRequest request(int n, int jobs) {
  SweepRequest r;
  r.case_text = test::benchmark_2dof(
      "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n[initial]\npitch_deg = 2.0\n"
      "[simulation]\nduration_semichords = 3000\n");
  r.case_path = "inline.toml";
  SweepAxis ax{"nondimensional.reduced_speed", {}};
  for (int i = 0; i < n; ++i) ax.values.push_back(0.5 + 5.0 * i / (n - 1));
  r.options.axes = {ax};
  r.options.jobs = jobs;
  r.options.traces = true;
  return r;
}
}  // namespace

TEST_CASE("Sweep results do not depend on the job count", "[sweep]") {
  // Common practice, no source: chains are independent and deterministic.
  const auto a = run_sweep(request(8, 1), {}, {});
  const auto b = run_sweep(request(8, 2), {}, {});
  REQUIRE(a.size() == 16);
  REQUIRE(b.size() == a.size());
  for (std::size_t k = 0; k < a.size(); ++k) {
    CHECK(a[k].direction == b[k].direction);
    CHECK(a[k].i == b[k].i);
    CHECK(a[k].lco.response == b[k].lco.response);
    CHECK(a[k].lco.dof[kPitch].amplitude == b[k].lco.dof[kPitch].amplitude);  // bit for bit
    CHECK(a[k].final_state == b[k].final_state);
    CHECK(a[k].cycle.samples == b[k].cycle.samples);
    for (int d = 0; d < 2; ++d) {
      CHECK(a[k].cycle.trace[d] == b[k].cycle.trace[d]);
      CHECK(a[k].cycle.dof[d].harmonics == b[k].cycle.dof[d].harmonics);
      CHECK(a[k].cycle.dof[d].rms == b[k].cycle.dof[d].rms);
    }
  }
}

TEST_CASE("A resumed sweep recomputes nothing it already has", "[sweep]") {
  // Common practice, no source: points handed in as done are reused (and
  // their final states continue the chain), so the result equals the
  // uninterrupted sweep.
  const SweepRequest r = request(8, 1);
  const auto full = run_sweep(r, {}, {});
  std::vector<SweepPoint> done;
  for (const auto& p : full)
    if (p.i < 4 && p.direction == 0) done.push_back(point_from_json(point_json(p)));  // via the journal form
  std::mutex mu;
  int computed = 0;
  const auto resumed = run_sweep(r, done, [&](const SweepPoint& p) {
    std::lock_guard<std::mutex> lock(mu);
    ++computed;
    CHECK_FALSE((p.direction == 0 && p.i < 4));
  });
  CHECK(computed == 12);
  REQUIRE(resumed.size() == full.size());
  for (std::size_t k = 0; k < full.size(); ++k) {
    CHECK(resumed[k].lco.response == full[k].lco.response);
    CHECK(resumed[k].lco.dof[kPitch].amplitude == full[k].lco.dof[kPitch].amplitude);
    // the cycle content and traces survive the journal's JSON form bit for bit
    CHECK(resumed[k].cycle.samples == full[k].cycle.samples);
    CHECK(resumed[k].cycle.trace[kPitch] == full[k].cycle.trace[kPitch]);
    CHECK(resumed[k].cycle.dof[kPitch].harmonics == full[k].cycle.dof[kPitch].harmonics);
    CHECK(resumed[k].cycle.dof[kPitch].thd == full[k].cycle.dof[kPitch].thd);
  }
}

TEST_CASE("Sweep classes: decay at low speed, LCO with freeplay, divergence past flutter", "[sweep]") {
  // Linear section below flutter decays (class decayed); the same section
  // with pitch freeplay settles on a periodic LCO in the band the flutter
  // analysis predicts; beyond the gap-closed flutter speed U*_L = 6.2851
  // (Lee, Price & Wong 1999) the response diverges.
  SweepRequest lin = request(3, 1);
  lin.case_text = test::benchmark_2dof("[initial]\npitch_deg = 2.0\n[simulation]\n"
                                       "duration_semichords = 3000\n");
  lin.options.axes[0].values = {2.0, 4.0, 6.0};
  lin.options.down = false;
  for (const auto& p : run_sweep(lin, {}, {})) CHECK(p.lco.response == ResponseClass::kDecayed);
  SweepRequest fp = request(3, 1);
  fp.options.axes[0].values = {4.0, 5.0, 7.0};
  fp.options.down = false;
  const auto pts = run_sweep(fp, {}, {});
  CHECK(pts[0].lco.response == ResponseClass::kPeriodic);
  CHECK(pts[1].lco.response == ResponseClass::kPeriodic);
  CHECK(pts[1].lco.dof[kPitch].amplitude > pts[0].lco.dof[kPitch].amplitude);
  CHECK(pts[2].lco.response == ResponseClass::kDivergent);
}

TEST_CASE("A tiny motion about an unstable rest state is not classed decayed", "[sweep]") {
  // Common practice, no source: an equilibrium whose linearisation has an
  // eigenvalue with a positive real part is left by any disturbance, however
  // small, so a motion below the decay floor there must not end the run as
  // decayed. Benchmark section (Lee, Price & Wong 1999): linear flutter at
  // U*_L = 6.2851, so at U* = 7 a 1e-12 rad start grows until it diverges;
  // with pitch freeplay (gap-open flutter speed U* = 1.063, measured in
  // test_flutter.cpp) rest inside the gap is unstable at U* = 4 and the
  // same start grows into the LCO of the 2-degree start of the first test.
  SweepRequest lin = request(2, 1);
  lin.case_text = test::benchmark_2dof("[initial]\npitch_deg = 1e-10\n[simulation]\n"
                                       "duration_semichords = 20000\n");
  lin.options.axes[0].values = {7.0, 7.5};
  lin.options.down = false;
  lin.options.continuation = false;
  for (const auto& p : run_sweep(lin, {}, {})) CHECK(p.lco.response == ResponseClass::kDivergent);

  SweepRequest fp = request(2, 1);
  fp.case_text = test::benchmark_2dof(
      "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n[initial]\npitch_deg = 1e-10\n"
      "[simulation]\nduration_semichords = 20000\n");
  fp.options.axes[0].values = {4.0, 4.5};
  fp.options.down = false;
  fp.options.continuation = false;
  const auto tiny = run_sweep(fp, {}, {});
  SweepRequest big = fp;
  big.case_text = test::benchmark_2dof(
      "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n[initial]\npitch_deg = 2.0\n"
      "[simulation]\nduration_semichords = 20000\n");
  const auto ref = run_sweep(big, {}, {});
  for (std::size_t k = 0; k < tiny.size(); ++k) {
    CHECK(tiny[k].lco.response == ResponseClass::kPeriodic);
    CHECK(tiny[k].lco.dof[kPitch].amplitude ==
          Approx(ref[k].lco.dof[kPitch].amplitude).epsilon(1e-3));
  }
}

TEST_CASE("A periodic point carries one sampled settled cycle", "[sweep]") {
  // Consistency (common practice, no source): the samples of the settled
  // cycle lie within the true peaks the tracker found (the peaks are the
  // extrema of the same trajectory, to the integrator's tolerance) and
  // come within the sampling resolution of them; mean^2 + rms_about_mean^2
  // = rms^2 (an identity of the definitions); non-periodic and decayed
  // points carry no cycle. The harmonics themselves are checked against
  // scipy/numpy in tests/integration/test_peer_scipy.py.
  SweepRequest fp = request(3, 1);
  fp.options.axes[0].values = {2.0, 5.0};
  fp.options.down = false;
  const auto pts = run_sweep(fp, {}, {});
  REQUIRE(pts.size() == 2);
  CHECK(pts[0].lco.response != ResponseClass::kPeriodic);
  CHECK(pts[0].cycle.samples == 0);
  const SweepPoint& p = pts[1];
  REQUIRE(p.lco.response == ResponseClass::kPeriodic);
  REQUIRE(p.cycle.samples == 128);
  CHECK_THAT(p.cycle.period, Catch::Matchers::WithinRel(1.0 / p.lco.frequency, 1e-15));
  for (int d : {kPlunge, kPitch}) {
    const auto& t = p.cycle.trace[d];
    REQUIRE(t.size() == 128);
    const double hi = *std::max_element(t.begin(), t.end()), lo = *std::min_element(t.begin(), t.end());
    const double A = p.lco.dof[d].amplitude;
    CHECK(hi <= p.lco.dof[d].max + 1e-6 * A);
    CHECK(lo >= p.lco.dof[d].min - 1e-6 * A);
    // a sample lies within T/(2N) of each peak: |x - x_peak| <= x''max (T/2N)^2/2,
    // x''max <= (2 pi/T)^2 sum k^2 a_k (five harmonics; the rest is ~1e-3 of a_1)
    double curv = 0;
    for (int k = 1; k <= 5; ++k) curv += k * k * p.cycle.dof[d].harmonics[k - 1];
    const double resolution = 1.1 * curv * std::pow(std::numbers::pi / 128, 2) / 2;
    CHECK(hi >= p.lco.dof[d].max - resolution);
    CHECK(lo <= p.lco.dof[d].min + resolution);
    const DofHarmonics& h = p.cycle.dof[d];
    CHECK_THAT(h.mean * h.mean + h.rms_about_mean * h.rms_about_mean,
               Catch::Matchers::WithinRel(h.rms * h.rms, 1e-12));
    if (d == p.lco.watched_dof) CHECK(t[0] == hi);  // phase origin at the watched DOF's largest sample
  }
}
