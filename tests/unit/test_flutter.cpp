#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <numbers>

#include <fmt/format.h>

#include "aerosect/analysis/flutter.hpp"
#include "aerosect/analysis/flutter_report.hpp"
#include "aerosect/analysis/modes.hpp"
#include "aerosect/analysis/pk.hpp"
#include "aerosect/analysis/simulate.hpp"
#include "helpers.hpp"

using namespace aerosect;
using std::numbers::pi;

namespace {
// Hodges & Pierce, Introduction to Structural Dynamics and Aeroelasticity,
// ch. 5 (values as transcribed in the theory sheet): a = -1/5, x_theta = 0.1,
// mu = 20, r^2 = 6/25, sigma = omega_h / omega_theta = 2/5, no damping.
std::string textbook(const std::string& extra = "") {
  return fmt::format(
      "[nondimensional]\nmass_ratio = 20\nelastic_axis = -0.2\ncg_offset = 0.1\n"
      "radius_of_gyration = {:.17g}\nfrequency_ratio = 0.4\nreduced_speed = 1.0\n"
      "[simulation]\nduration = 1.0\n{}",
      std::sqrt(6.0 / 25.0), extra);
}

const MethodResult& method(const FlutterReport& r, std::size_t lin, const std::string& name) {
  for (const auto& m : r.results.at(lin).methods)
    if (m.method == name) return m;
  FAIL("no method " << name);
  throw;
}

// Largest |pitch| over the fractions [a, b) of a run.
double window_peak(const std::vector<double>& x, double a, double b) {
  const auto n = x.size();
  double m = 0;
  for (auto i = static_cast<std::size_t>(a * n); i < static_cast<std::size_t>(b * n); ++i)
    m = std::max(m, std::abs(x[i]));
  return m;
}

FlutterOptions options(double from, double to, int n) {
  FlutterOptions o;
  o.speeds = test::grid(from, to, n);
  return o;
}
}  // namespace

TEST_CASE("Benchmark section: linear flutter speed with Jones' Wagner function", "[flutter]") {
  // Lee, Price & Wong 1999 (Prog. Aerospace Sci. 35): mu = 100, a_h = -0.5,
  // x_alpha = 0.25, r_alpha = 0.5, omega_bar = 0.2, zeta = 0, Jones Wagner:
  // U*_L = 6.2851; to 1e-4 relative (the paper's printed digits).
  const Case c = test::case_from(test::benchmark_2dof("[simulation]\nduration = 1.0\n"));
  const FlutterReport r = flutter_analysis(c, options(0.05, 10.0, 200));
  const MethodResult& ss = method(r, 0, "state-space");
  REQUIRE(ss.flutter.found);
  CHECK(ss.flutter.speed / r.reference_speed == Approx(6.2851).epsilon(1e-4));
  // Exact Theodorsen by p-k: 6.2566 (computed with scipy, theory sheet section 4).
  const MethodResult& pk = method(r, 0, "p-k");
  REQUIRE(pk.flutter.found);
  CHECK(pk.flutter.speed / r.reference_speed == Approx(6.2566).epsilon(1e-4));
  // a_h = -1/2 puts the elastic axis at the quarter chord: no divergence.
  CHECK_FALSE(ss.divergence.found);
}

TEST_CASE("Textbook section: steady, Jones-Wagner and exact Theodorsen flutter", "[flutter]") {
  // Hodges & Pierce ch. 5 as transcribed in the theory sheet: steady
  // aerodynamics flutter 1.843 at 0.5568 omega_theta, divergence 2.828;
  // Jones-Wagner flutter 2.170 at 0.6443 omega_theta; exact Theodorsen
  // 2.1839 at 0.6490 omega_theta (computed with scipy). Tolerances: half a
  // unit of the last printed digit.
  const Case steady = test::case_from(textbook("[aerodynamics]\nmodel = \"steady\"\n"));
  FlutterOptions o = options(0.02, 3.5, 176);
  o.pk = false;
  const FlutterReport rs = flutter_analysis(steady, o);
  const MethodResult& s = method(rs, 0, "state-space");
  REQUIRE(s.flutter.found);
  CHECK(s.flutter.speed / rs.reference_speed == Approx(1.843).margin(5e-4));
  CHECK(s.flutter.frequency / rs.reference_frequency == Approx(0.5568).margin(5e-5));
  REQUIRE(s.divergence.found);
  CHECK(s.divergence.speed / rs.reference_speed == Approx(2.828).margin(5e-4));

  const Case jones = test::case_from(textbook());
  const FlutterReport rj = flutter_analysis(jones, options(0.02, 3.5, 176));
  const MethodResult& j = method(rj, 0, "state-space");
  REQUIRE(j.flutter.found);
  CHECK(j.flutter.speed / rj.reference_speed == Approx(2.170).margin(5e-4));
  CHECK(j.flutter.frequency / rj.reference_frequency == Approx(0.6443).margin(5e-5));
  const MethodResult& p = method(rj, 0, "p-k");
  REQUIRE(p.flutter.found);
  CHECK(p.flutter.speed / rj.reference_speed == Approx(2.1839).margin(5e-5));
  CHECK(p.flutter.frequency / rj.reference_frequency == Approx(0.6490).margin(5e-5));
  // Divergence: closed form r sqrt(mu / (1 + 2a)) (theory sheet section 4),
  // the same for every aerodynamic model since phi(inf) = 1.
  REQUIRE(j.divergence.found);
  const double closed = std::sqrt(6.0 / 25.0) * std::sqrt(20.0 / (1 - 0.4));
  CHECK(j.divergence.speed / rj.reference_speed == Approx(closed).epsilon(1e-8));
  CHECK(p.divergence.speed / rj.reference_speed == Approx(closed).epsilon(1e-8));
}

TEST_CASE("Modes are tracked continuously through the sweep", "[flutter]") {
  // Common practice, no source: between neighbouring speeds of a fine sweep
  // a tracked root moves little compared with the distance between modes;
  // sort-order tracking would jump at the frequency coalescence.
  const Case c = test::case_from(textbook());
  const RootSweep sw = state_space_sweep(c.model, nominal_spring_stiffness(c.model.section),
                                              test::grid(0.01, 2.6, 260));
  for (std::size_t i = 1; i < sw.speeds.size(); ++i) {
    for (std::size_t j = 0; j < 2; ++j) {
      const double step = std::abs(sw.roots[i][j].eigenvalue - sw.roots[i - 1][j].eigenvalue);
      const double gap = std::abs(sw.roots[i - 1][0].eigenvalue - sw.roots[i - 1][1].eigenvalue);
      INFO("speed " << sw.speeds[i] << " mode " << j);
      CHECK(step < 0.5 * std::max(gap, 0.05));
    }
  }
  // Mode 1 starts plunge-like and mode 2 pitch-like (in-vacuo order).
  CHECK(std::abs(sw.roots[0][0].shape(0)) > std::abs(sw.roots[0][0].shape(1)));
  CHECK(std::abs(sw.roots[0][1].shape(1)) > std::abs(sw.roots[0][1].shape(0)));
}

TEST_CASE("Time domain decays just below and grows just above the flutter speed", "[flutter]") {
  // The two parts of the program agree: the eigenvalue crossing found from
  // the state matrix is where the integrated response changes from
  // decaying to growing (benchmark section, Jones Wagner).
  const Case c = test::case_from(test::benchmark_2dof("[simulation]\nduration = 1.0\n"));
  FlutterOptions o = options(0.05, 10.0, 200);
  o.pk = false;
  const FlutterReport r = flutter_analysis(c, o);
  const double Uf = method(r, 0, "state-space").flutter.speed / r.reference_speed;
  for (double factor : {0.98, 1.02}) {
    const Case run = test::case_from(
        test::benchmark_2dof("[initial]\npitch_deg = 1.0\n[simulation]\nduration_semichords = "
                             "4000\nsample_interval_semichords = 1.0\n",
                             factor * Uf));
    const AeroelasticModel model(run.model);
    MemorySink sink;
    REQUIRE(simulate(run, model, sink).completed);
    const auto pitch = sink.column("pitch");
    const double early = window_peak(pitch, 0.2, 0.4), late = window_peak(pitch, 0.8, 1.0);
    INFO("U/U_F = " << factor << ": peak pitch early " << early << ", late " << late);
    if (factor < 1)
      CHECK(late < 0.9 * early);
    else
      CHECK(late > 1.1 * early);
  }
}

namespace {
const std::string kFlapped =
    "[nondimensional]\nmass_ratio = 40\nelastic_axis = -0.4\ncg_offset = 0.2\n"
    "radius_of_gyration = 0.5\nfrequency_ratio = 0.4\nreduced_speed = 1.0\n"
    "hinge = 0.5\nflap_cg_offset = 0.01\nflap_radius_of_gyration = 0.08\n";
}

TEST_CASE("3-DOF: state-space and p-k agree to the Wagner approximation's error", "[flutter]") {
  // Invented 3-DOF section (demo data, no source). The exact-Theodorsen p-k
  // and the Jones state-space flutter speeds differ by the error of Jones'
  // C(k) (up to 2.3 % in C over k = 0.01..2, measured against Boost.Math);
  // the p-k solver fed Jones' own rational C(k) must reproduce the
  // state-space crossing exactly (same aerodynamics, two methods).
  const Case c = test::case_from(kFlapped + "flap_frequency_ratio = 1.5\n[simulation]\nduration = 1\n");
  const FlutterReport r = flutter_analysis(c, options(0.02, 8.0, 200));
  const MethodResult& ss = method(r, 0, "state-space");
  const MethodResult& pk = method(r, 0, "p-k");
  REQUIRE(ss.flutter.found);
  REQUIRE(pk.flutter.found);
  INFO("state-space " << ss.flutter.speed << " p-k " << pk.flutter.speed);
  CHECK(std::abs(ss.flutter.speed / pk.flutter.speed - 1) < 0.03);

  PkProblem pr;
  pr.section = c.model.section;
  pr.density = c.model.flow.density;
  pr.aerodynamics = PkAerodynamics::kWagnerApproximation;
  const RootSweep sw = pk_sweep(pr, test::grid(0.02, 8.0, 200));
  const Crossing x = pk_flutter(pr, sw, 1e-10);
  REQUIRE(x.found);
  CHECK(x.speed == Approx(ss.flutter.speed).epsilon(1e-7));
  CHECK(x.frequency == Approx(ss.flutter.frequency).epsilon(1e-6));
}

TEST_CASE("3-DOF: a very stiff flap reproduces the 2-DOF flutter speed", "[flutter]") {
  // Theory sheet self-check (K_beta -> infinity gives the 2-DOF section).
  const std::string two =
      "[nondimensional]\nmass_ratio = 40\nelastic_axis = -0.4\ncg_offset = 0.2\n"
      "radius_of_gyration = 0.5\nfrequency_ratio = 0.4\nreduced_speed = 1.0\n"
      "[simulation]\nduration = 1\n";
  FlutterOptions o = options(0.02, 8.0, 200);
  const FlutterReport r2 = flutter_analysis(test::case_from(two), o);
  const FlutterReport r3 = flutter_analysis(
      test::case_from(kFlapped + "flap_frequency_ratio = 300\n[simulation]\nduration = 1\n"), o);
  for (const char* m : {"state-space", "p-k"}) {
    INFO(m);
    REQUIRE(method(r3, 0, m).flutter.found);
    CHECK(method(r3, 0, m).flutter.speed == Approx(method(r2, 0, m).flutter.speed).epsilon(1e-3));
  }
}

TEST_CASE("Flap freeplay: gap-open and gap-closed flutter speeds bound the LCO band",
          "[flutter]") {
  // Theory sheet section 3: freeplay LCO lives between the flutter speed
  // with the spring removed (gap open) and with it fully engaged (gap closed).
  // The time-domain response with the hinge spring removed grows above the
  // gap-open speed and decays below it.
  const Case c = test::case_from(kFlapped +
                                 "flap_frequency_ratio = 1.5\n[springs.flap]\nlaw = \"freeplay\"\n"
                                 "half_gap_deg = 0.5\n[simulation]\nduration = 1\n");
  FlutterOptions o = options(0.02, 8.0, 200);
  o.pk = false;
  const FlutterReport r = flutter_analysis(c, o);
  REQUIRE(r.has_gap);
  REQUIRE(r.results.size() == 3);
  CHECK(r.results[1].linearisation == Linearisation::kGapClosed);
  CHECK(r.results[2].linearisation == Linearisation::kGapOpen);
  CHECK(r.results[2].stiffness(kFlap) == 0.0);
  const Crossing& closed = method(r, 1, "state-space").flutter;
  const Crossing& open = method(r, 2, "state-space").flutter;
  REQUIRE(closed.found);
  REQUIRE(open.found);
  CHECK(closed.speed == Approx(method(r, 0, "state-space").flutter.speed));
  const double U_open = open.speed / r.reference_speed;
  INFO("gap-open flutter U* = " << U_open << ", gap-closed U* = " << closed.speed / r.reference_speed);
  for (double factor : {0.97, 1.03}) {
    const Case run = test::case_from(
        kFlapped + "flap_frequency_ratio = 0.0\n[initial]\nflap_deg = 1.0\n"
                   "[simulation]\nduration_semichords = 3000\nsample_interval_semichords = 0.5\n",
        {fmt::format("nondimensional.reduced_speed={:.17g}", factor * U_open)});
    const AeroelasticModel model(run.model);
    MemorySink sink;
    REQUIRE(simulate(run, model, sink).completed);
    const auto flap = sink.column("flap");
    const double early = window_peak(flap, 0.2, 0.4), late = window_peak(flap, 0.8, 1.0);
    INFO("U/U_open = " << factor << ": early " << early << ", late " << late);
    if (factor < 1)
      CHECK(late < early);
    else
      CHECK(late > early);
  }
}

TEST_CASE("The flutter file's tables are the layout's fields, written through the sink handed over",
          "[flutter]") {
  // Common practice, no source (CF conventions: units and long_name on every
  // variable): each root field is one table over (speed, mode) per method
  // group with the layout's units, each tracked root's value in its cell;
  // each crossing fact is an attribute of the method's group; the study's
  // provenance strings name only attributes the file holds.
  const Case c = test::case_from(test::benchmark_2dof("[simulation]\nduration = 1.0\n"));
  const FlutterReport r = flutter_analysis(c, options(0.05, 10.0, 40));
  MemoryTables m;
  write_flutter_tables(m, c, r);
  const std::size_t nm = r.mode_names.size();
  for (const char* name : {"state-space", "p-k"}) {
    const MethodResult& mr = method(r, 0, name);
    const std::string g = flutter_group(Linearisation::kNominal, name);
    const std::size_t ns = mr.sweep.speeds.size();
    for (const auto& f : flutter_root_layout()) {
      REQUIRE(m.tables.count(g + "/" + f.name) == 1);
      const auto& table = m.tables.at(g + "/" + f.name);
      CHECK(table.units == f.units);
      CHECK(table.long_name == f.long_name);
      CHECK(table.dims == std::vector<std::string>{"speed", "mode"});
      REQUIRE(table.data.size() == ns * nm);
      for (std::size_t i = 0; i < ns; i += 7)
        for (std::size_t j = 0; j < nm; ++j) CHECK(table.data[i * nm + j] == f.get(mr.sweep.roots[i][j], 0));
    }
    CHECK(m.tables.at(g + "/damping_ratio").data[nm + 1] == mr.sweep.roots[1][1].damping_ratio);
    for (const auto& a : flutter_method_attributes()) {
      REQUIRE(m.numbers.count(g + "@" + a.name) == 1);
      const double v = m.numbers.at(g + "@" + a.name);
      if (std::isnan(a.get(mr)))
        CHECK(std::isnan(v));
      else
        CHECK(v == a.get(mr));
    }
    REQUIRE(mr.flutter.found);
    CHECK(m.numbers.at(g + "@flutter_speed") == mr.flutter.speed);
    CHECK(flutter_source(Linearisation::kNominal, name, "flutter_speed") == "flutter.h5: /" + g + "@flutter_speed");
  }
  CHECK_THROWS_AS(flutter_source(Linearisation::kNominal, "p-k", "no_such_fact"), std::logic_error);
}
