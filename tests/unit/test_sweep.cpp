#include <catch2/catch.hpp>

#include <algorithm>
#include <atomic>
#include <cmath>
#include <numbers>
#include <limits>
#include <filesystem>
#include <fstream>
#include <mutex>
#include <string_view>
#include <tuple>

#include "aerosect/analysis/orbit.hpp"
#include "aerosect/analysis/sweep.hpp"
#include "aerosect/analysis/sweep_store.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/journal.hpp"
#include "aerosect/io/text_file.hpp"
#include "hdf5_helpers.hpp"
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
  const SweepTables t = sweep_tables(r, 2);
  for (const auto& p : full)
    if (p.i < 4 && p.direction == 0)
      done.push_back(point_from_record(point_record(p, t), r, t, {"journal", 1, 0}));  // via the journal form
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
  for (const auto& p : run_sweep(lin, {}, {})) {
    CHECK(p.lco.response == ResponseClass::kDecayed);
    CHECK(p.lco.decay_reason == DecayReason::kToRest);  // a linear section has no gap
  }
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

TEST_CASE("A journal record that is not a point of the sweep is refused, naming the journal and line", "[sweep]") {
  // Common practice, no source: every number, size and index read from a
  // file is checked against what was written before use; a hostile or
  // damaged record gives InputError, never a crash or a read past an end.
  const SweepRequest r = request(4, 1);
  const SweepTables t = sweep_tables(r, 2);
  const auto pts = run_sweep(r, {}, {});
  const SweepPoint* periodic = nullptr;
  for (const auto& p : pts)
    if (p.cycle.samples > 0) periodic = &p;
  REQUIRE(periodic != nullptr);
  const nlohmann::json good = point_record(*periodic, t);
  const SourceLocation where{"map.h5.journal", 7, 0};
  // Round trip first: the record reads back as the point.
  const SweepPoint back = point_from_record(good, r, t, where);
  CHECK(back.cycle.dof[kPitch].harmonics == periodic->cycle.dof[kPitch].harmonics);
  CHECK(back.final_regions == periodic->final_regions);

  auto refused = [&](const nlohmann::json& j, const std::string& key) {
    try {
      (void)point_from_record(j, r, t, where);
    } catch (const InputError& e) {
      CHECK(e.where().file == "map.h5.journal");
      CHECK(e.where().line == 7);
      CHECK(e.key() == key);
      return true;
    }
    return false;
  };
  nlohmann::json j = good;
  j["watched_dof"] = 7;  // out-of-range DOF index
  CHECK(refused(j, "watched_dof"));
  j = good;
  j["pitch_harmonics"] = nlohmann::json::array();  // empty harmonics
  CHECK(refused(j, "pitch_harmonics"));
  j = good;
  j["i"] = 4;  // past the axis
  CHECK(refused(j, "i"));
  j = good;
  j["i"] = -1;
  CHECK(refused(j, "i"));
  j = good;
  j["response_class"] = 99;  // no such class
  CHECK(refused(j, "response_class"));
  j = good;
  j["pitch_cycle"] = nlohmann::json::array({1.0, 2.0});  // short trace
  CHECK(refused(j, "pitch_cycle"));
  j = good;
  j.erase("frequency");
  CHECK(refused(j, "frequency"));
  j = good;
  j["direction"] = "up";
  CHECK(refused(j, "direction"));
  CHECK(refused(nlohmann::json::object(), "direction"));  // a line "{}"
  CHECK(refused(nlohmann::json::array({1, 2}), ""));
}

TEST_CASE("A sweep request read from a file is checked before use", "[sweep]") {
  // Common practice, no source: a request declaring absurd sizes is refused
  // before anything is allocated for it.
  const SweepRequest r = request(4, 1);
  nlohmann::json j = request_json(r);
  const SourceLocation where{"part1.h5", 0, 0};
  CHECK_NOTHROW(request_from_json(j, where));
  nlohmann::json bad = j;
  bad["shard"] = {3, 2};
  CHECK_THROWS_AS(request_from_json(bad, where), InputError);
  bad = j;
  bad["harmonics"] = 0;
  CHECK_THROWS_AS(request_from_json(bad, where), InputError);
  bad = j;
  bad["cycle_samples"] = 2000000000;
  CHECK_THROWS_AS(request_from_json(bad, where), InputError);
  bad = j;
  bad["axes"] = "none";
  CHECK_THROWS_AS(request_from_json(bad, where), InputError);
}

TEST_CASE("Every point of a sweep reads back from its journal record unchanged", "[sweep]") {
  // Common practice, no source: the journal form of a point (generated from
  // the layout) loses nothing the map or the --json summary shows, so a
  // resumed sweep writes what an uninterrupted one writes. Non-finite
  // numbers are written as text and read back exactly.
  const SweepRequest r = request(6, 1);
  const SweepTables t = sweep_tables(r, 2);
  auto pts = run_sweep(r, {}, {});
  REQUIRE(!pts.empty());
  pts.front().lco.spread = std::numeric_limits<double>::infinity();
  pts.front().lco.frequency = std::numeric_limits<double>::quiet_NaN();
  int periodic = 0;
  for (const auto& p : pts) {
    const nlohmann::json line = nlohmann::json::parse(point_record(p, t).dump());  // through the text
    const SweepPoint back = point_from_record(line, r, t, {"map.h5.journal", 2, 0});
    CHECK(point_json(back).dump() == point_json(p).dump());
    CHECK(back.value1 == p.value1);
    CHECK(back.final_state == p.final_state);
    CHECK(back.final_regions == p.final_regions);
    CHECK(std::isinf(back.lco.spread) == std::isinf(p.lco.spread));
    for (int d = 0; d < 2; ++d) CHECK(back.cycle.trace[d] == p.cycle.trace[d]);
    periodic += p.cycle.samples > 0;
  }
  CHECK(periodic > 0);  // the settled-cycle fields were exercised
}

TEST_CASE("The sweep layout names each field once and gives its units", "[sweep]") {
  // Common practice, no source (CF conventions: every variable has units and
  // a long_name).
  const SweepTables t = sweep_tables(request(4, 1), 3);
  std::vector<std::string> names;
  for (const auto* layout : {&t.point, &t.cycle})
    for (const auto& f : *layout) {
      CHECK(!f.units.empty());
      CHECK(!f.long_name.empty());
      names.push_back(f.name);
    }
  std::sort(names.begin(), names.end());
  CHECK(std::adjacent_find(names.begin(), names.end()) == names.end());
  CHECK(t.field("flap_harmonics").width == 5);
  CHECK(t.cite("pitch_amplitude", SweepPoint{}) == "pitch_amplitude[direction 0, nondimensional_reduced_speed index 0]");
  CHECK_THROWS_AS(t.field("no_such_table"), InternalError);
}

TEST_CASE("The map's tables are the layout's fields, written through the sink handed over", "[sweep]") {
  // Common practice, no source (CF conventions: units and long_name on every
  // variable): every field of the layout is one table over (direction,
  // the swept axis) with the layout's units, each point's value in its cell; with
  // no flutter overlay handed over the writer adds none (it runs no
  // analysis itself).
  const SweepRequest r = request(4, 1);
  const auto pts = run_sweep(r, {}, {});
  const Case c = parse_case(r.case_text, r.case_path, r.overrides);
  MemoryTables m;
  write_sweep_tables(m, c, r, pts, nullptr);
  const SweepTables t = sweep_tables(r, 2);
  for (const auto* layout : {&t.point, &t.cycle})
    for (const auto& f : *layout) {
      REQUIRE(m.tables.count(f.name) == 1);
      const auto& table = m.tables.at(f.name);
      CHECK(table.units == f.units);
      CHECK(table.long_name == f.long_name);
      CHECK(table.data.size() == 2 * 4 * f.width);
    }
  for (const auto& p : pts)
    CHECK(m.tables.at("pitch_amplitude").data[t.cell(p)] == p.lco.dof[kPitch].amplitude);
  CHECK(m.tables.count("lco_prediction/value") == 0);
  CHECK(m.numbers.count("@linear_flutter_value") == 0);
  // The swept axis is named after its key (CF 1.10 §2.3: letters, digits,
  // underscores) and carries the key's units (a reduced speed is a pure number).
  CHECK(m.tables.at("nondimensional_reduced_speed").units == "1");
  SweepRequest airspeed = r;
  airspeed.case_text = read_file_bytes(AEROSECT_SOURCE_DIR "/cases/demo_aileron.toml");
  airspeed.options.axes = {SweepAxis{"flow.airspeed", {20.0, 30.0}}, SweepAxis{"springs.flap.half_gap_deg", {0.5, 1.0}}};
  const Case ca = parse_case(airspeed.case_text, airspeed.case_path, airspeed.overrides);
  MemoryTables ma;
  write_sweep_tables(ma, ca, airspeed, {}, nullptr);
  CHECK(ma.tables.at("flow_airspeed").units == "m s-1");
  CHECK(ma.tables.at("springs_flap_half_gap_deg").units == "degree");
  CHECK(ma.tables.at("cycles").dims == std::vector<std::string>{"direction", "flow_airspeed", "springs_flap_half_gap_deg"});
}

TEST_CASE("A sweep leaves the case's gusts out unless asked", "[sweep][gust]") {
  // Common practice, no source: a gust response is no limit cycle
  // (README, "LCO sweeps"). With a strong sharp-edged gust the default
  // sweep's points equal those of the same case without the gust; with
  // with_gusts they differ. Gust keys of a sweep without gusts are refused.
  SweepRequest plain = request(3, 1);
  SweepRequest gusty = plain;
  gusty.case_text += "[[gust]]\nshape = \"sharp-edged\"\namplitude = 3.0\nstart_semichords = 20\n";
  const auto a = run_sweep(plain, {}, {});
  const auto b = run_sweep(gusty, {}, {});
  REQUIRE(a.size() == b.size());
  for (std::size_t k = 0; k < a.size(); ++k) CHECK(a[k].final_state == b[k].final_state);
  CHECK(sweep_gust_note(parse_case(gusty.case_text, "g.toml"), gusty).rfind("left out", 0) == 0);
  gusty.options.with_gusts = true;
  const auto g = run_sweep(gusty, {}, {});
  REQUIRE(g.size() == a.size());
  CHECK(g[0].final_state.size() > a[0].final_state.size());  // the Küssner lag states ride along
  gusty.options.with_gusts = false;
  gusty.overrides = {"gust.1.amplitude=2"};
  CHECK_THROWS_AS(check_swept_values(gusty), InputError);
  gusty.options.with_gusts = true;
  CHECK_NOTHROW(check_swept_values(gusty));
}

TEST_CASE("A run that has not settled is extended, then classed unsettled, never decayed", "[sweep]") {
  // Hopf normal form (Kuznetsov, Elements of Applied Bifurcation Theory,
  // ch. 3): just above the linear flutter speed U*_L = 6.2851 (Lee, Price &
  // Wong 1999) a hardening cubic pitch spring holds a small stable cycle and
  // the approach to it is slow (the cycle's multiplier tends to 1 at the
  // Hopf point). At U* = 6.3 a 1-degree start has not settled within 10 x
  // 100 semichords (the cap, kSweepRunCap): class unsettled, with the run
  // extended to the cap and the warning counted; with a 3000-semichord run
  // the same point settles on its LCO (periodic).
  SweepRequest r = request(2, 1);
  r.case_text = test::benchmark_2dof(
      "[springs.pitch]\nlaw = \"cubic\"\ncubic_coefficient = 3.0\n[initial]\npitch_deg = 1.0\n"
      "[simulation]\nduration_semichords = 100\n");
  r.options.axes[0].values = {6.3, 6.35};
  r.options.down = false;
  r.options.continuation = false;
  const auto pts = run_sweep(r, {}, {});
  const Case c = parse_case(r.case_text, "u.toml", {"nondimensional.reduced_speed=6.3"});
  for (const auto& p : pts) {
    CHECK(p.lco.response == ResponseClass::kUnsettled);
    CHECK(p.end_time == Approx(kSweepRunCap * c.simulation.duration).epsilon(0.05));
  }
  CHECK(unsettled_points(pts) == 2);
  CHECK(sweep_json(c, r, pts, "")["unsettled_points"] == 2);
  CHECK(sweep_json(c, r, pts, "")["warnings"].size() == 1);
  CHECK(sweep_text(c, r, pts, "").find("warning: 2 points did not settle") != std::string::npos);
  r.case_text = test::benchmark_2dof(
      "[springs.pitch]\nlaw = \"cubic\"\ncubic_coefficient = 3.0\n[initial]\npitch_deg = 1.0\n"
      "[simulation]\nduration_semichords = 3000\n");
  for (const auto& p : run_sweep(r, {}, {})) CHECK(p.lco.response == ResponseClass::kPeriodic);
}

TEST_CASE("Stationary motion: a trend is not stationary, scatter about a level is", "[lco]") {
  // Common practice, no source: the stationarity test of lco.hpp (window
  // means within three standard errors) on synthetic peak sequences fed to
  // the tracker: a sawtooth-modulated cycle about a fixed level is
  // stationary, an exponentially growing one is not.
  const Case c = test::case_from(test::benchmark_2dof("[simulation]\nduration_semichords = 10\n", 7.0));
  const AeroelasticModel model(c.model);
  auto feed = [&](auto amplitude_of) {
    LcoTracker t(model, {});
    std::vector<double> x(static_cast<std::size_t>(model.state_size()), 0.0);
    const int at = model.layout().displacement + kPitch;
    for (int n = 0; n < 60; ++n) {
      x[static_cast<std::size_t>(at)] = amplitude_of(n);
      t.on_peak(kPitch, 2.0 * n, x);
      x[static_cast<std::size_t>(at)] = -amplitude_of(n);
      t.on_peak(kPitch, 2.0 * n + 1.0, x);
    }
    return t.stationary();
  };
  CHECK(feed([](int n) { return 0.01 * (1.0 + 0.3 * ((n * 7) % 5 - 2) / 2.0); }));
  CHECK_FALSE(feed([](int n) { return 0.01 * std::exp(0.02 * n); }));
}

TEST_CASE("A periodic point is refined to its orbit: the orbit solver's and a long march's amplitude", "[sweep][orbit]") {
  // Periodic orbits by shooting (Seydel, Practical Bifurcation and
  // Stability Analysis); a stable cycle is the limit of a long time march.
  // Benchmark section with pitch freeplay (Lee, Price & Wong 1999) at
  // U* = 4 and 5: the sweep's refined point (chord iterations, rtol 1e-10,
  // residual 1e-8) must equal
  //  - solve_orbit with its own defaults (full Newton, rtol 1e-12, residual
  //    1e-10) from the same seed, to 1e-8 relative in amplitude and period;
  //  - a time march from the case's 2-degree start at rtol 1e-12 (atol
  //    1e-15) until successive cycles agree to 1e-11 (the LCO detector with
  //    that tolerance; at least 300 cycles, far past the transient, the
  //    orbit's multipliers being well inside the unit circle), to 1e-7
  //    relative: the march's cycles agree to 1e-11 but its peaks are located
  //    on the dense output to about the integrator's tolerance.
  SweepRequest r = request(2, 1);
  r.options.axes[0].values = {4.0, 5.0};
  r.options.down = false;
  r.options.continuation = false;
  r.options.traces = false;
  const auto pts = run_sweep(r, {}, {});
  for (const auto& p : pts) {
    INFO("U* = " << p.value1);
    REQUIRE(p.lco.response == ResponseClass::kPeriodic);
    REQUIRE(p.refined);
    CHECK(p.refinement_failure.empty());
    CHECK(p.orbit_residual <= 1e-8);
    CHECK(p.floquet_multiplier < 1.0);
    const Case c = parse_case(r.case_text, r.case_path, {fmt::format("nondimensional.reduced_speed={}", p.value1)});
    const AeroelasticModel model(c.model);
    // The orbit solver from the point's state on its section.
    const Orbit o = solve_orbit(model, {p.final_state, 1.0 / p.lco.frequency});
    REQUIRE(o.converged);
    CHECK(p.lco.dof[kPitch].amplitude == Approx(o.dof[kPitch].amplitude).epsilon(1e-8));
    CHECK(1.0 / p.lco.frequency == Approx(o.period).epsilon(1e-8));
    CHECK(p.floquet_multiplier == Approx(o.largest_nontrivial).epsilon(1e-3));
    // A long march.
    LcoSettings ls;
    ls.tolerance = 1e-11;
    ls.min_cycles = 300;
    LcoTracker tracker(model, ls);
    RunState run;
    run.x = model.initial_state(c.simulation.initial_displacement, c.simulation.initial_velocity,
                                c.simulation.steady_lag_states);
    run.regions = model.regions_of(run.x.data());
    integrate(model, run, 400.0 * o.period, {StepperKind::kDopri5, 1e-12, 1e-15, 0.0, 0.0}, OutputSchedule::none(),
              {{}, [&tracker](int dof, double t, const std::vector<double>& x) { return tracker.on_peak(dof, t, x); }});
    const LcoResult march = tracker.result();
    REQUIRE(march.response == ResponseClass::kPeriodic);
    CHECK(p.lco.dof[kPitch].amplitude == Approx(march.dof[kPitch].amplitude).epsilon(1e-7));
    CHECK(p.lco.frequency == Approx(march.frequency).epsilon(1e-7));
  }
}

TEST_CASE("A bad swept key is named as the --vary that gave it", "[sweep][errors]") {
  // This project's messages (common practice, no source): the swept values
  // are applied as overrides, but the message names the --vary option.
  SweepRequest r = request(3, 1);
  r.options.axes = {SweepAxis{"nondimensional.reduced_sped", {1.0, 2.0}}};
  try {
    check_swept_values(r);
    FAIL("no error");
  } catch (const InputError& e) {
    CHECK(e.where().file == "--vary nondimensional.reduced_sped=1");
    CHECK_THAT(std::string(e.what()), Catch::Matchers::Contains("did you mean 'nondimensional.reduced_speed'"));
  }
}

TEST_CASE("The sweep text names every swept key with its units", "[sweep]") {
  // This project's report (common practice, no source): a two-key table has a
  // column per key, headed with the key's units; amplitudes and onset values
  // state their units (degree for an angle, the key's units for a value).
  SweepRequest r = request(2, 1);
  r.options.axes.push_back(SweepAxis{"springs.pitch.half_gap_deg", {0.5, 1.0}});
  const auto pts = run_sweep(r, {}, {});
  const Case c = parse_case(r.case_text, r.case_path, r.overrides);
  const std::string text = sweep_text(c, r, pts, "");
  CHECK_THAT(text, Catch::Matchers::Contains("springs.pitch.half_gap_deg degree"));
  CHECK_THAT(text, Catch::Matchers::Contains("nondimensional.reduced_speed"));
  CHECK(text.find("nan") == std::string::npos);
  if (text.find("largest LCO amplitude") != std::string::npos)
    CHECK_THAT(text, Catch::Matchers::Contains(" degree at "));
}

TEST_CASE("A flap preloaded onto its stop decays to rest there", "[lco][equilibrium]") {
  // The rest a decay is judged against is the static equilibrium of the
  // steady condition, linearised in the region it lies in (lco.hpp): the
  // trimmed demo at 27 m/s with a 0.3 N m/m hinge moment rests on its upper
  // stop, where the gap-closed section is stable (its flutter speed is
  // 94 m/s), although the gap-open one is unstable at 27 m/s. A released
  // disturbance dies out on the stop: "decayed, to rest" (common practice,
  // no source), not "non-periodic" as when rest was taken in the gap.
  // Unloaded, the same flap keeps oscillating through its gap.
  const Case c = load_case(std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron_trimmed.toml");
  SweepRequest r;
  r.case_text = c.text;
  r.case_path = c.path;
  r.overrides = {"flow.airspeed=27", "simulation.duration=60"};
  r.options.axes = {SweepAxis{"steady.hinge_moment", {0.0, 0.3}}};
  r.options.up = true;
  r.options.down = false;
  r.options.continuation = false;
  const auto pts = run_sweep(r, {}, {});
  REQUIRE(pts.size() == 2);
  CHECK(pts[0].lco.response == ResponseClass::kPeriodic);
  CHECK(pts[1].lco.response == ResponseClass::kDecayed);
  CHECK(pts[1].lco.decay_reason == DecayReason::kToRest);
}

TEST_CASE("A sweep's points kept in a scratch file give the map, JSON and text of the points in memory", "[sweep]") {
  // Common practice, no source: the sweep command keeps its finished points
  // in an unlinked scratch file (sweep_store.hpp) instead of memory; every
  // table, the --json summary and the text summary must be those of the
  // library's form from the vector of points, on a 2-D sweep with sampled
  // cycles (tables of width 1, 5 and 128), and the folder is left as found.
  SweepRequest r = request(5, 2);
  r.options.axes.push_back(SweepAxis{"springs.pitch.half_gap_deg", {0.25, 0.5, 1.0}});
  const auto pts = run_sweep(r, {}, {});
  REQUIRE(pts.size() == 30);
  const Case c = parse_case(r.case_text, r.case_path, r.overrides);
  const SweepTables t = sweep_tables(r, 2);
  test::TempDir dir;
  const std::filesystem::path folder = std::filesystem::path(dir.file("x")).parent_path();
  {
    SweepStore store(r, t, folder.string(), dir.file("map.h5"));
    // Put in another order than run_sweep's (the chains finish in any order).
    for (auto it = pts.rbegin(); it != pts.rend(); ++it) store.put(*it);
    CHECK(std::filesystem::is_empty(folder));  // unlinked from the start
    CHECK(store.size() == pts.size());
    MemoryTables from_file, from_memory;
    write_sweep_tables(from_file, c, r, store, nullptr);
    write_sweep_tables(from_memory, c, r, pts, nullptr);
    REQUIRE(from_file.tables.size() == from_memory.tables.size());
    for (const auto& [name, table] : from_memory.tables) {
      const auto& other = from_file.tables.at(name);
      REQUIRE(other.data.size() == table.data.size());
      for (std::size_t k = 0; k < table.data.size(); ++k)
        REQUIRE((other.data[k] == table.data[k] || (std::isnan(other.data[k]) && std::isnan(table.data[k]))));
    }
    CHECK(from_file.text == from_memory.text);
    std::string text, json;
    write_sweep_text(c, r, store, "map.h5", [&](std::string_view s) { text += s; });
    CHECK(text == sweep_text(c, r, pts, "map.h5"));
    write_sweep_json(sweep_json_head(c, r, store, "map.h5"), store, [&](std::string_view s) { json += s; });
    CHECK(json == sweep_json(c, r, pts, "map.h5").dump(2));
    CHECK(store.tally().summary.onset_up == summarize(pts).onset_up);
    std::size_t visited = 0;
    store.visit([&](const SweepPoint& p) {
      const SweepPoint& q = pts[visited++];  // run_sweep's order
      CHECK(std::tie(p.direction, p.j, p.i) == std::tie(q.direction, q.j, q.i));
      CHECK(p.error == q.error);
      CHECK(p.refinement_failure == q.refinement_failure);
      CHECK(p.lco.dof[kPitch].amplitude == q.lco.dof[kPitch].amplitude);
      CHECK(p.cycle.trace[kPitch] == q.cycle.trace[kPitch]);
    });
    CHECK(visited == pts.size());
  }
  CHECK(std::filesystem::is_empty(folder));
}

TEST_CASE("A resumed sweep needs only the points whose successor is to run", "[sweep]") {
  // Common practice, no source: finished points kept elsewhere (`held`)
  // are neither run nor reported, and only those whose successor in their
  // chain is still to run are handed in (their final states start it, read
  // back from a scratch file); the points run are those of the
  // uninterrupted sweep, bit for bit, with a gap in a chain (a damaged
  // journal line) as well as an interrupted tail.
  const SweepRequest r = request(8, 2);
  const auto full = run_sweep(r, {}, {});
  const SweepTables t = sweep_tables(r, 2);
  test::TempDir dir;
  SweepStore store(r, t, std::filesystem::path(dir.file("x")).parent_path().string(), dir.file("map.h5"));
  // Up: 0..4 finished but 2 (a gap); down (from the top, i = 7 first): 7..5.
  auto finished = [](const SweepPoint& p) {
    return p.direction == 0 ? (p.i <= 4 && p.i != 2) : p.i >= 5;
  };
  for (const auto& p : full)
    if (finished(p)) store.put(p);
  const std::vector<SweepPoint> starts = continuation_starts(
      r, [&](int d, int i, int j) { return store.held(d, i, j); },
      [&](int d, int i, int j) { return store.get(d, i, j); });
  REQUIRE(starts.size() == 3);  // up 1 and 4, down 5
  std::mutex mu;
  std::vector<SweepPoint> run;
  sweep_each(
      r, starts,
      [&](const SweepPoint& p, bool computed) {
        const std::lock_guard<std::mutex> lock(mu);
        if (computed) run.push_back(p);
      },
      nullptr, {}, [&](int d, int i, int j) { return store.held(d, i, j); });
  REQUIRE(run.size() == full.size() - 7);  // 4 up and 3 down finished
  for (const auto& p : run) {
    CHECK_FALSE(finished(p));
    const auto& q = *std::find_if(full.begin(), full.end(), [&](const SweepPoint& f) {
      return f.direction == p.direction && f.i == p.i;
    });
    CHECK(p.lco.dof[kPitch].amplitude == q.lco.dof[kPitch].amplitude);
    CHECK(p.final_state == q.final_state);
  }
}

TEST_CASE("A journal read back through a callback hands over every intact record and keeps none", "[sweep]") {
  // Common practice, no source: the records read back on opening go to the
  // callback in file order with their line numbers (a damaged line skipped
  // and counted, as when they are kept), and the journal holds none of them.
  test::TempDir dir;
  const std::string path = dir.file("map.h5.journal");
  JournalHead head;
  head.kind = "test";
  head.identity = {{"sweep", 1}};
  {
    Journal j(path, head);
    for (int k = 0; k < 4; ++k) j.append({{"k", k}});
  }
  std::string text = read_file_bytes(path);
  const std::size_t third = text.find("\"k\":2");
  REQUIRE(third != std::string::npos);
  text[third + 4] = '7';  // line 4 (the record k = 2) no longer matches its digest
  std::ofstream(path, std::ios::binary | std::ios::trunc) << text;
  std::vector<std::pair<int, int>> got;  // (line, k)
  Journal j(path, head, [&](JournalRecord&& rec) { got.emplace_back(rec.line, rec.value.at("k").get<int>()); });
  CHECK(got == std::vector<std::pair<int, int>>{{2, 0}, {3, 1}, {5, 3}});
  CHECK(j.records().empty());
  CHECK(j.size() == 3);
  CHECK(j.damaged_lines() == 1);
  REQUIRE(j.notes().size() == 1);
  CHECK(j.notes()[0].find("the 3 intact points are kept") != std::string::npos);
}
