#include <catch2/catch.hpp>

#include <cmath>
#include <map>
#include <complex>
#include <filesystem>
#include <fstream>
#include <numbers>

#include <Eigen/QR>
#include <fmt/format.h>

#include "aerosect/analysis/gust_sweep.hpp"
#include "aerosect/error.hpp"
#include "aerosect/analysis/simulate.hpp"
#include "aerosect/model/gust.hpp"
#include "aerosect/model/theodorsen_function.hpp"
#include "helpers.hpp"

using namespace aerosect;
using std::numbers::pi;

namespace {
// A rigidly held section (U = b = 1, rho = 1.2) in a gust.
std::string held(const std::string& gust, const std::string& extra = "", double duration = 20,
                 double dt = 0.5) {
  return fmt::format(
      "[section]\nsemichord = 1.0\nmass = 10.0\nelastic_axis = -0.3\ncg_offset = 0.1\n"
      "radius_of_gyration = 0.5\nplunge_frequency_hz = 1.0\npitch_frequency_hz = 2.0\n"
      "[flow]\ndensity = 1.2\nairspeed = 1.0\n{}"
      "[simulation]\nduration = {}\nsample_interval = {}\nhold = [\"plunge\", \"pitch\"]\n"
      "relative_tolerance = 1e-11\nabsolute_tolerance = 1e-14\n[[gust]]\n{}",
      extra, duration, dt, gust);
}
MemorySink run(const Case& c) {
  const AeroelasticModel model(c.model);
  MemorySink sink;
  REQUIRE(simulate(c, model, sink).completed);
  return sink;
}
}  // namespace

TEST_CASE("Design gust velocity by the CS-25.341(a) formula", "[gust]") {
  // Worked by hand from CS-25.341(a)(5) / 14 CFR 25.341(a)(5) with R1 = 0.9,
  // R2 = 0.8, Z_mo = 12 500 m (41 010 ft):
  //   F_gz = 1 - 41 010/250 000 = 0.835958; F_gm = sqrt(0.8 tan(0.225 pi)) = 0.826598;
  //   F_g(0) = 0.831278, rising linearly to 1 at Z_mo.
  //   U_ref = 56 ft/s = 17.0688 m/s at sea level; 14.6688 m/s at 3000 m
  //   (56 - 12 * 3000/4572 ft/s); 10.6200 m/s at 10 000 m (44 - 23.14 *
  //   (10 000 - 4572)/13 716 ft/s).
  //   (H / 350 ft)^(1/6) = 0.664012 at H = 30 ft, 1 at H = 350 ft.
  RegulationGustInputs in;
  in.landing_weight_ratio = 0.9;
  in.zero_fuel_weight_ratio = 0.8;
  in.max_operating_altitude = 12500;
  const struct { double h, H, uds; } cases[] = {
      {0, 9.144, 17.0688 * 0.831278 * 0.664012},
      {0, 106.68, 17.0688 * 0.831278},
      {3000, 9.144, 14.6688 * (0.831278 + 0.168722 * 3000 / 12500) * 0.664012},
      {3000, 106.68, 14.6688 * (0.831278 + 0.168722 * 3000 / 12500)},
      {10000, 9.144, 10.6200 * (0.831278 + 0.168722 * 10000 / 12500) * 0.664012},
      {10000, 106.68, 10.6200 * (0.831278 + 0.168722 * 10000 / 12500)},
  };
  for (const auto& c : cases) {
    in.altitude = c.h;
    in.gradient = c.H;
    INFO("altitude " << c.h << " m, H " << c.H << " m");
    CHECK(cs25_design_gust_velocity(in) == Approx(c.uds).epsilon(2e-6));
  }
  in.at_dive_speed = true;
  in.altitude = 0;
  in.gradient = 106.68;
  CHECK(cs25_design_gust_velocity(in) == Approx(0.5 * 17.0688 * 0.831278).epsilon(2e-6));
}

TEST_CASE("Sharp-edged gust on a held section follows Küssner's function", "[gust]") {
  // Lift of a rigidly held section entering a sharp-edged gust W:
  // 2 pi rho U b W psi(s). Against the approximation used (to integrator
  // precision) and against the exact Küssner values of the theory sheet
  // (psi(2) = 0.551, psi(4) = 0.6945, psi(10) = 0.856) within the
  // approximation's error: two-pole (0.5, 0.13; 0.5, 1.0) within 1.5 %, the
  // three-pole set (recalled from memory in the theory sheet) within 2 %.
  for (const char* kind : {"two-pole", "three-pole"}) {
    const Case c = test::case_from(held("shape = \"sharp-edged\"\namplitude = 0.5\n",
                                        fmt::format("[aerodynamics]\nkussner = \"{}\"\n", kind)));
    const MemorySink s = run(c);
    const auto t = s.time();
    const auto lift = s.column("lift"), moment = s.column("pitching_moment");
    const double L1 = 2 * pi * 1.2 * 1.0 * 1.0 * 0.5;
    const WagnerApproximation psi = std::string(kind) == "two-pole" ? kussner_two_pole() : kussner_three_pole();
    for (std::size_t i = 1; i < t.size(); ++i) {
      CHECK(lift[i] / L1 == Approx(psi(t[i])).epsilon(1e-7));
      CHECK(moment[i] == Approx((0.5 - 0.3) * 1.0 * lift[i]).epsilon(1e-9));  // quarter chord
    }
    const double tol = std::string(kind) == "two-pole" ? 0.015 : 0.02;
    const std::pair<double, double> exact[] = {{2, 0.551}, {4, 0.6945}, {10, 0.856}};
    for (auto [sv, v] : exact) {
      INFO(kind << " s = " << sv);
      CHECK(lift[static_cast<std::size_t>(sv / 0.5)] / L1 == Approx(v).epsilon(tol));
    }
  }
}

TEST_CASE("An upward gust lifts a free section", "[gust]") {
  // Theory sheet section 2: positive (upward) gust, plunge (down positive) goes negative.
  const Case c = test::case_from(
      "[section]\nsemichord = 0.5\nmass = 10.0\nelastic_axis = -0.2\ncg_offset = 0.1\n"
      "radius_of_gyration = 0.5\nplunge_frequency_hz = 2.0\npitch_frequency_hz = 5.0\n"
      "[flow]\ndensity = 1.2\nairspeed = 30.0\n[simulation]\nduration = 0.1\n"
      "[[gust]]\nshape = \"one-minus-cosine\"\ngradient = 10.0\namplitude = 5.0\n");
  const MemorySink s = run(c);
  const auto h = s.column("plunge"), w = s.column("gust_velocity");
  CHECK(h.back() < 0);
  // The 1-cos profile: (U_ds/2)(1 - cos(pi U t / H)) for U t <= 2H.
  const auto t = s.time();
  for (std::size_t i = 0; i < t.size(); ++i)
    CHECK(w[i] == Approx(2.5 * (1 - std::cos(pi * 30.0 * t[i] / 10.0))).margin(1e-12));
}

TEST_CASE("Sinusoidal gust: steady lift against the Sears function", "[gust]") {
  // The held section in a sinusoidal gust reaches a steady lift
  // L = 2 pi rho U b W_mid S(k) (Sears; S(k) = [J0 - i J1] C + i J1 from
  // Boost.Math Bessel and Hankel functions, gust referenced to midchord). The
  // model's gust is given at the leading edge (W_mid = W_le e^{-ik}), so the
  // simulated ratio must equal the approximation's own rational function
  // K(ik) e^{ik} to integrator precision, and S(k) within the
  // approximation's error (measured against scipy/Boost over k = 0.05..2:
  // two-pole 9.4 % and 25 deg at k = 2; three-pole 4.3 % and 2.3 deg).
  for (const char* kind : {"two-pole", "three-pole"}) {
    const WagnerApproximation psi = std::string(kind) == "two-pole" ? kussner_two_pole() : kussner_three_pole();
    for (double k : {0.05, 0.1, 0.5, 1.0, 2.0}) {
      const double period = 2 * pi / k;  // U = b = 1
      const double settle = 60.0 / 0.058 + 20 * period;  // slowest lag decayed
      const double duration = settle + 4 * period;
      const Case c = test::case_from(held(
          fmt::format("shape = \"sinusoidal\"\namplitude = 0.1\nreduced_frequency = {}\n", k),
          fmt::format("[aerodynamics]\nkussner = \"{}\"\n", kind), duration, period / 64));
      const MemorySink s = run(c);
      const auto t = s.time();
      const auto lift = s.column("lift");
      // Least-squares fit L = a sin(k t) + b cos(k t) over the last 4 periods.
      std::vector<std::size_t> idx;
      for (std::size_t i = 0; i < t.size(); ++i)
        if (t[i] >= settle) idx.push_back(i);
      Eigen::MatrixXd A(idx.size(), 2);
      Eigen::VectorXd y(idx.size());
      for (std::size_t r = 0; r < idx.size(); ++r) {
        A(r, 0) = std::sin(k * t[idx[r]]);
        A(r, 1) = std::cos(k * t[idx[r]]);
        y(r) = lift[idx[r]];
      }
      const Eigen::Vector2d ab = A.colPivHouseholderQr().solve(y);
      // W sin(kt) = Im(W e^{ikt}); L = Im(L_hat e^{ikt}) with L_hat = a + i b;
      // referred to the midchord gust W_mid = W_le e^{-ik}.
      const std::complex<double> ratio = std::complex<double>(ab(0), ab(1)) / (2 * pi * 1.2 * 0.1) *
                                         std::exp(std::complex<double>(0, k));
      const std::complex<double> model = wagner_rational(psi, k) * std::exp(std::complex<double>(0, k));
      const std::complex<double> exact = sears_function(k);
      INFO(kind << " k = " << k << ": simulated " << ratio << ", model " << model << ", Sears " << exact);
      CHECK(std::abs(ratio - model) < 1e-5 * std::abs(model));
      const double mag_tol = std::string(kind) == "two-pole" ? 0.095 : 0.045;
      const double ph_tol = (std::string(kind) == "two-pole" ? 25.0 : 2.4) * pi / 180;
      CHECK(std::abs(std::abs(ratio) / std::abs(exact) - 1) < mag_tol);
      CHECK(std::abs(std::arg(ratio / exact)) < ph_tol);
    }
  }
}

namespace {
const std::string kFree =
    "[section]\nsemichord = 0.5\nmass = 10.0\nelastic_axis = -0.2\ncg_offset = 0.1\n"
    "radius_of_gyration = 0.5\nplunge_frequency_hz = 2.0\npitch_frequency_hz = 5.0\n"
    "[flow]\ndensity = 1.2\nairspeed = 30.0\n";
}

TEST_CASE("A recorded gust equal to a built-in profile gives the same response", "[gust]") {
  // Common practice, no source: the same gust given as a record (CSV, and an
  // HDF5 file written by aerosect itself) must give the response of the
  // built-in 1-cos profile, up to the linear interpolation between samples:
  // |w - w_lin| <= dt^2/8 max|w''| = (pi U dt / H)^2 / 8 * U_ds/2 ~ 1e-5 of U_ds here.
  const std::string sim = "[simulation]\nduration = 1.0\nsample_interval = 0.005\n"
                          "relative_tolerance = 1e-10\nabsolute_tolerance = 1e-13\n";
  const Case builtin = test::case_from(kFree + sim +
                                       "[[gust]]\nshape = \"one-minus-cosine\"\nstart = 0.1\n"
                                       "gradient = 10.0\namplitude = 4.0\n");
  const MemorySink ref = run(builtin);
  // CSV, time base, sampled every 1 ms over the gust (2H/U = 0.667 s).
  const std::string dir =
      (std::filesystem::temp_directory_path() / "aerosect_test_gust_record").string();
  std::filesystem::create_directories(dir);
  {
    std::ofstream csv(dir + "/gust.csv");
    csv << "# time s, velocity m/s\ntime,velocity\n";
    for (int i = 0; i <= 667; ++i) {
      const double t = i * 1e-3;
      csv << fmt::format("{:.17g},{:.17g}\n", t, t <= 2 * 10.0 / 30.0 ? 2.0 * (1 - std::cos(pi * 30.0 * t / 10.0)) : 0.0);
    }
  }
  const Case rec = parse_case(kFree + sim + "[[gust]]\nshape = \"recorded\"\nstart = 0.1\nfile = \"gust.csv\"\n",
                              dir + "/case.toml");
  const MemorySink got = run(rec);
  REQUIRE(got.rows() == ref.rows());
  for (const char* ch : {"plunge", "pitch", "lift"}) {
    const auto a = ref.column(ch), b = got.column(ch);
    double peak = 0, err = 0;
    for (std::size_t i = 0; i < a.size(); ++i) {
      peak = std::max(peak, std::abs(a[i]));
      err = std::max(err, std::abs(a[i] - b[i]));
    }
    INFO(ch << ": max difference " << err << " of peak " << peak);
    CHECK(err < 1e-4 * peak);
  }
  // Distance base: the same record in metres (x = U t).
  {
    std::ofstream csv(dir + "/gust_distance.csv");
    for (int i = 0; i <= 667; ++i) {
      const double t = i * 1e-3;
      csv << fmt::format("{:.17g} {:.17g}\n", 30.0 * t, t <= 2 * 10.0 / 30.0 ? 2.0 * (1 - std::cos(pi * 30.0 * t / 10.0)) : 0.0);
    }
  }
  const Case recd = parse_case(kFree + sim + "[[gust]]\nshape = \"recorded\"\nstart = 0.1\n"
                                              "file = \"gust_distance.csv\"\nbase = \"distance\"\n",
                               dir + "/case.toml");
  const auto lift_d = run(recd).column("lift"), lift_t = got.column("lift");
  for (std::size_t i = 0; i < lift_t.size(); ++i) CHECK(lift_d[i] == Approx(lift_t[i]).margin(1e-9));
}

TEST_CASE("Gradient sweep re-sizes regulation gusts and names the critical gradient", "[gust]") {
  // CS-25.341(a): U_ds grows as H^(1/6); every point's design velocity must be
  // the rule's value at that H (converted to true airspeed at the case's
  // altitude), and the critical H of a channel is where its peak is largest.
  const Case c = test::case_from(
      "[section]\nsemichord = 0.5\nmass = 10.0\nelastic_axis = -0.2\ncg_offset = 0.1\n"
      "radius_of_gyration = 0.5\nplunge_frequency_hz = 2.0\npitch_frequency_hz = 5.0\n"
      "[flow]\naltitude = 3000.0\nairspeed = 60.0\n[simulation]\nduration = 0.5\n"
      "[[gust]]\nshape = \"one-minus-cosine\"\ndesign = \"cs-25\"\ngradient = 30.0\n"
      "landing_weight_ratio = 0.9\nzero_fuel_weight_ratio = 0.8\nmax_operating_altitude = 12500.0\n");
  // The files keep the sized U_ds as a number, not only inside the case text.
  {
    const RunMetadata meta = case_metadata(c, "gust-sweep");
    const RegulationGustInputs in{3000.0, 30.0, 0.9, 0.8, 12500.0, false};
    bool found = false;
    for (const auto& p : meta.parameters)
      if (p.group == "gusts" && p.name == "gust_1_amplitude") {
        found = true;
        CHECK(p.value == Approx(cs25_design_gust_velocity(in) * std::sqrt(1.225 / c.model.flow.density)).epsilon(1e-12));
        CHECK(p.units == "m s-1");
      }
    CHECK(found);
  }
  const std::vector<double> H = {9.144, 30.0, 106.68};
  const GustSweep s = gust_gradient_sweep(c, H);
  REQUIRE(s.points.size() == 3);
  const double eas_to_tas = std::sqrt(1.225 / c.model.flow.density);
  for (const auto& p : s.points) {
    RegulationGustInputs in{3000.0, p.gradient, 0.9, 0.8, 12500.0, false};
    CHECK(p.design_velocity == Approx(cs25_design_gust_velocity(in) * eas_to_tas).epsilon(1e-12));
  }
  for (const auto& cr : s.critical) {
    if (cr.channel != "lift") continue;
    double best = 0, at = 0;
    for (const auto& p : s.points)
      for (const auto& e : p.summary.extremes)
        if (e.channel == "lift" && std::max(std::abs(e.max), std::abs(e.min)) > best) {
          best = std::max(std::abs(e.max), std::abs(e.min));
          at = p.gradient;
        }
    CHECK(cr.gradient == at);
    CHECK(std::abs(cr.value) == Approx(best));
  }
  // The time history at each distinct critical gradient is kept: every
  // channel names exactly one history, at its own critical H; its largest
  // sample is never above the channel's true extreme (located between
  // samples, simulate.hpp) and lies within one sample interval of its time.
  std::size_t named = 0;
  for (const auto& h : s.histories) {
    REQUIRE(h.record.rows() > 10);
    CHECK(h.design_velocity > 0);
    for (const auto& ch : h.critical_for) {
      ++named;
      for (const auto& cr : s.critical)
        if (cr.channel == ch) {
          CHECK(cr.gradient == h.gradient);
          const std::vector<double> v = h.record.column(ch);
          std::size_t at = 0;
          for (std::size_t i = 0; i < v.size(); ++i)
            if (std::abs(v[i]) > std::abs(v[at])) at = i;
          const double dt = h.record.time()[1] - h.record.time()[0];
          CHECK(std::abs(v[at]) <= std::abs(cr.value) * (1 + 1e-12));
          CHECK(std::abs(h.record.time()[at] - cr.time) <= dt * (1 + 1e-9));
        }
    }
  }
  CHECK(named == s.critical.size());
  // The sizing inputs are numbers in the file, with what they give, worked
  // by hand from CS-25.341(a)(5)(i) and (a)(6): U_ref 56 ft/s EAS at sea
  // level falling linearly to 44 ft/s at 15 000 ft; F_g = (F_gz + F_gm) / 2
  // at sea level, F_gz = 1 - Z_mo / 250 000 ft = 0.835958, F_gm =
  // sqrt(R2 tan(pi R1 / 4)) = 0.826598, rising linearly to 1 at Z_mo:
  // 0.831278 + (1 - 0.831278) * 3000 / 12500 = 0.871771.
  const RunMetadata meta = case_metadata(c, "gust-sweep");
  std::map<std::string, double> sizing;
  for (const auto& p : meta.parameters)
    if (p.group == "gust_sizing") sizing[p.name] = p.value;
  CHECK(sizing.at("altitude") == 3000.0);
  CHECK(sizing.at("landing_weight_ratio") == 0.9);
  CHECK(sizing.at("zero_fuel_weight_ratio") == 0.8);
  CHECK(sizing.at("max_operating_altitude") == 12500.0);
  CHECK(sizing.at("at_dive_speed") == 0.0);
  CHECK(sizing.at("reference_gust_velocity") ==
        Approx((56.0 - 12.0 * 3000.0 / (15000 * 0.3048)) * 0.3048).epsilon(1e-12));
  CHECK(sizing.at("flight_profile_alleviation") == Approx(0.871771).epsilon(1e-6));
}

TEST_CASE("Gradient sweep starts from rest unless asked: peaks are the gust's own", "[gust]") {
  // Common practice, no source (a linear section at rest stays at rest until
  // the gust front arrives; superposition of a linear system's responses):
  // a section released from 2 degrees of pitch with a gust arriving at
  // 0.3 s (20 m/s, below the divergence speed 32.7 m/s). From rest, every peak comes after the gust arrives, and the
  // gust sweep's peaks equal a simulation of the same gust from rest. From
  // the case's initial conditions, the pitch-rate peak is the release
  // transient's, before the gust.
  const std::string text =
      "[section]\nsemichord = 0.5\nmass = 10.0\nelastic_axis = -0.2\ncg_offset = 0.1\n"
      "radius_of_gyration = 0.5\nplunge_frequency_hz = 2.0\npitch_frequency_hz = 5.0\n"
      "pitch_damping_ratio = 0.02\n[flow]\naltitude = 0.0\nairspeed = 20.0\n[simulation]\nduration = 1.0\n"
      "[initial]\npitch_deg = 2.0\n"
      "[[gust]]\nshape = \"one-minus-cosine\"\namplitude = 0.1\ngradient = 10.0\nstart = 0.3\n";
  const Case c = test::case_from(text);
  const GustSweep rest = gust_gradient_sweep(c, {10.0});
  CHECK(rest.start == GustStart::kRest);
  REQUIRE(rest.points.size() == 1);
  for (const auto& e : rest.points[0].summary.extremes) {
    INFO(e.channel);
    if (e.max > 0) CHECK(e.time_of_max >= 0.3);
    if (e.min < 0) CHECK(e.time_of_min >= 0.3);
  }
  const Case at_rest = test::case_from(text, {"initial.pitch_deg=0.0"});
  const GustSweep same = gust_gradient_sweep(at_rest, {10.0});
  for (std::size_t k = 0; k < same.points[0].summary.extremes.size(); ++k) {
    CHECK(rest.points[0].summary.extremes[k].max == same.points[0].summary.extremes[k].max);
    CHECK(rest.points[0].summary.extremes[k].min == same.points[0].summary.extremes[k].min);
  }
  // The text of a 2-DOF sweep: no flap columns (no NaN), angles in degrees
  // in the table and the critical lines, the files' units vocabulary.
  const std::string report = gust_sweep_text(c, rest, "");
  CHECK(report.find("nan") == std::string::npos);
  CHECK(report.find("hinge_moment") == std::string::npos);
  CHECK(report.find("pitch degree") != std::string::npos);
  CHECK(report.find("N m m-1") != std::string::npos);
  CHECK(report.find(" rad") == std::string::npos);
  CHECK(report.find("from rest") != std::string::npos);
  const GustSweep released = gust_gradient_sweep(c, {10.0}, nullptr, GustStart::kCaseInitial);
  CHECK(released.start == GustStart::kCaseInitial);
  bool early = false;
  for (const auto& e : released.points[0].summary.extremes)
    if (e.channel == "pitch_velocity") early = std::min(e.time_of_max, e.time_of_min) < 0.3;
  CHECK(early);
}

namespace {
// The case text is refused naming `key`, the message containing `part`.
void expect_gust_refusal(const std::string& text, const std::string& key, const std::string& part) {
  try {
    (void)test::case_from(text);
    FAIL("no error");
  } catch (const InputError& e) {
    INFO(e.what());
    CHECK(e.key() == key);
    CHECK_THAT(std::string(e.what()), Catch::Matchers::Contains(part));
  }
}
}  // namespace

TEST_CASE("Gust keys are validated", "[gust][case][errors]") {
  // Common practice, no source: this project's messages.
  const std::string base = kFree + "[simulation]\nduration = 1.0\n";
  expect_gust_refusal(base + "[[gust]]\namplitude = 3.0\n", "gust.shape", "missing");
  expect_gust_refusal(base + "[[gust]]\nshape = \"one-minus-cosine\"\namplitude = 3.0\n", "gust.gradient", "missing");
  expect_gust_refusal(base + "[[gust]]\nshape = \"sharp-edged\"\namplitude = 3.0\ngradient = 5.0\n", "gust.gradient",
         "only used by one-minus-cosine");
  expect_gust_refusal(base + "[[gust]]\nshape = \"sinusoidal\"\namplitude = 3.0\n",
         "gust.frequency_hz | gust.reduced_frequency", "missing: give one of");
  expect_gust_refusal(base + "[[gust]]\nshape = \"one-minus-cosine\"\ngradient = 5.0\ndesign = \"cs-25\"\n"
                "landing_weight_ratio = 0.9\nzero_fuel_weight_ratio = 0.8\nmax_operating_altitude = 9000.0\n",
         "gust.gradient", "outside the rule's range");
  expect_gust_refusal(base + "[[gust]]\nshape = \"one-minus-cosine\"\ngradient = 30.0\ndesign = \"cs-25\"\n"
                "landing_weight_ratio = 0.9\nzero_fuel_weight_ratio = 0.8\nmax_operating_altitude = 9000.0\n",
         "gust.altitude", "needed when [flow] gives a density");
  expect_gust_refusal(base + "[[gust]]\nshape = \"recorded\"\nfile = \"/nonexistent/g.csv\"\n", "gust.file",
         "cannot open the recorded gust file");
  expect_gust_refusal(base + "[[gust]]\nshape = \"sharp-edged\"\namplitude = 3.0\nfrequncy_hz = 2\n", "gust.frequncy_hz",
         "did you mean 'gust.frequency_hz'");
  expect_gust_refusal(base + "[aerodynamics]\nkussner = \"custom\"\nkussner_coefficients = [0.5, 0.6]\n"
                "kussner_exponents = [0.1, 1.0]\n",
         "aerodynamics.kussner_coefficients", "sum to 1.1");
  expect_gust_refusal("gust = 3\n" + base, "gust", "must be an array of tables");
  expect_gust_refusal(base + "[[gust]]\nshape = \"sharp-edged\"\namplitude = 1.0\nstart = 0.1\nstart_distance = 3.0\n",
         "gust.start_distance", "conflicts with 'gust.start'");
  // start_distance in m flown: 3 m at 30 m/s is 0.1 s.
  const Case d = test::case_from(base + "[[gust]]\nshape = \"sharp-edged\"\namplitude = 1.0\nstart_distance = 3.0\n");
  CHECK(d.model.gusts.profiles().front().start == Approx(0.1));
}

TEST_CASE("Continuous turbulence in a case: seeded, reproducible, of the given intensity", "[gust]") {
  // The record's statistics are tested in test_turbulence.cpp against the
  // MIL-F-8785C spectra; here the case wiring: the same seed gives the same
  // bits, another seed differs, and the sampled gust velocity has an RMS
  // near sigma (50 scale lengths of record: within 15 %, about 3 standard
  // deviations of the RMS estimate for that length, common practice).
  auto make = [](int seed) {
    return test::case_from(kFree + fmt::format(
        "[simulation]\nduration = 40.0\nsample_interval = 0.01\n"
        "[[gust]]\nshape = \"turbulence\"\nmodel = \"dryden\"\nintensity = 1.5\n"
        "scale_length = 24.0\nseed = {}\n", seed));
  };
  const MemorySink a = run(make(7)), b = run(make(7)), c = run(make(8));
  CHECK(a.column("gust_velocity") == b.column("gust_velocity"));
  CHECK(a.column("lift") == b.column("lift"));
  CHECK(a.column("gust_velocity") != c.column("gust_velocity"));
  const auto w = a.column("gust_velocity");
  double ss = 0;
  for (double v : w) ss += v * v;
  const double rms = std::sqrt(ss / static_cast<double>(w.size()));
  INFO("gust velocity RMS " << rms << " m/s for sigma 1.5");
  CHECK(rms == Approx(1.5).epsilon(0.15));
  // The case keeps the specification as typed data, not only as a label.
  const Case typed = make(7);
  const GustProfile& p = typed.model.gusts.profiles().front();
  REQUIRE(p.turbulence.has_value());
  CHECK(p.turbulence->model == TurbulenceModel::kDryden);
  CHECK(p.turbulence->intensity == 1.5);
  CHECK(p.turbulence->scale_length == 24.0);
  CHECK(p.turbulence->seed == 7u);
  // A deterministic gust is not turbulence, whatever its label says.
  const Case d = test::case_from(kFree + "[simulation]\nduration = 1.0\n"
                                         "[[gust]]\nshape = \"sharp-edged\"\namplitude = 1.0\n"
                                         "label = \"turbulence-like step\"\n");
  CHECK_FALSE(d.model.gusts.profiles().front().turbulence.has_value());
}

TEST_CASE("Small-aircraft derived gust velocity (design = cs-23)", "[gust]") {
  // Values recalled from memory by the author (#18; no copy of the
  // rule was at hand: check against the rule's text); linear interpolation
  // worked by hand. U_de EAS at V_C: 50 ft/s up to 20 000 ft, linear to
  // 25 ft/s at 50 000 ft; at V_D half of each. 1 ft = 0.3048 m (exact).
  //   sea level:  50 ft/s = 15.24 m/s;         V_D 25 ft/s = 7.62 m/s
  //   20 000 ft:  50 ft/s = 15.24 m/s;         V_D 25 ft/s = 7.62 m/s
  //   35 000 ft:  50 - 25 (15 000/30 000) = 37.5 ft/s = 11.43 m/s;
  //                                            V_D 18.75 ft/s = 5.715 m/s
  //   50 000 ft:  25 ft/s = 7.62 m/s;          V_D 12.5 ft/s = 3.81 m/s
  // Tolerance: the same arithmetic in double (only rounding differs).
  const struct { double feet, vc, vd; } cases[] = {
      {0, 15.24, 7.62}, {20000, 15.24, 7.62}, {35000, 11.43, 5.715}, {50000, 7.62, 3.81}};
  for (const auto& c : cases) {
    INFO(c.feet << " ft");
    CHECK(cs23_derived_gust_velocity(c.feet * 0.3048, false) == Approx(c.vc).epsilon(1e-12));
    CHECK(cs23_derived_gust_velocity(c.feet * 0.3048, true) == Approx(c.vd).epsilon(1e-12));
  }
  // The rule's gust length: 2H = 25 mean chords.
  CHECK(2 * kCs23GustGradientChords == 25.0);
  CHECK(kCs23MaxAltitude == Approx(50000 * 0.3048).epsilon(1e-15));
}

namespace {
// The free section of kFree with its chord 2b = 1.5 m (a chord exact in
// binary, so n chords in metres are exact), at 3000 m ISA.
const std::string kChord15 =
    "[section]\nsemichord = 0.75\nmass = 10.0\nelastic_axis = -0.2\ncg_offset = 0.1\n"
    "radius_of_gyration = 0.5\nplunge_frequency_hz = 2.0\npitch_frequency_hz = 5.0\n"
    "[flow]\naltitude = 3000.0\nairspeed = 60.0\n[simulation]\nduration = 0.5\n";
}  // namespace

TEST_CASE("A cs-23 gust is 1-cos of peak U_de over 25 mean chords, and is reported", "[gust]") {
  // U_de from the rule's values recalled from memory (see the test above):
  // at 3000 m (9843 ft, below 20 000 ft) 50 ft/s = 15.24 m/s EAS at V_C,
  // 7.62 m/s at V_D; converted to TAS by sqrt(rho0 / rho) at the case's
  // density. H = 12.5 chords: 12.5 * 1.5 m = 18.75 m (the section's 2b),
  // 12.5 * 1.2 m = 15 m with mean_chord = 1.2.
  const std::string gust = "[[gust]]\nshape = \"one-minus-cosine\"\ndesign = \"cs-23\"\n";
  const Case vc = test::case_from(kChord15 + gust + "speed_condition = \"VC\"\n");
  const double eas_to_tas = std::sqrt(1.225 / vc.model.flow.density);
  REQUIRE(vc.model.gusts.profiles().size() == 1);
  const GustProfile& p = vc.model.gusts.profiles().front();
  CHECK(p.rule == GustRule::kCs23);
  CHECK(p.regulation_sized);
  CHECK(p.gradient == 18.75);
  CHECK(p.amplitude == Approx(15.24 * eas_to_tas).epsilon(1e-12));
  REQUIRE(vc.small_aircraft_gust);
  CHECK(!vc.gust_regulation);
  const Case vd = test::case_from(kChord15 + gust + "speed_condition = \"VD\"\nmean_chord = 1.2\naltitude = 10668.0\n");
  const GustProfile& q = vd.model.gusts.profiles().front();
  CHECK(q.gradient == Approx(15.0).epsilon(1e-15));
  CHECK(q.amplitude == Approx(5.715 * eas_to_tas).epsilon(1e-12));  // 35 000 ft at V_D, TAS at the case's density
  // The files carry the sizing as numbers (HDF5 /parameters/gust_sizing and
  // `check --json` parameters) and name the rule.
  const RunMetadata meta = case_metadata(vc, "simulation");
  std::map<std::string, double> sizing;
  for (const auto& m : meta.parameters)
    if (m.group == "gust_sizing") sizing[m.name] = m.value;
  CHECK(sizing.at("altitude") == 3000.0);
  CHECK(sizing.at("at_dive_speed") == 0.0);
  CHECK(sizing.at("mean_chord") == 1.5);
  CHECK(sizing.at("gust_length_chords") == 25.0);
  CHECK(sizing.at("gradient") == 18.75);
  CHECK(sizing.at("derived_gust_velocity_eas") == Approx(15.24).epsilon(1e-12));
  CHECK(sizing.at("derived_gust_velocity") == Approx(15.24 * eas_to_tas).epsilon(1e-12));
  std::map<std::string, std::string> text;
  for (const auto& [k, v] : meta.text_attributes) text[k] = v;
  CHECK(text.at("gust_1_design") == "cs-23");
  CHECK_THAT(text.at("gust_sizing_note"), Catch::Matchers::Contains("recalled from memory"));
  // The gust sweep keeps U_de at every H (it does not depend on H) and its
  // reports say which rule sized the gust, with the condition, altitude,
  // U_de EAS and TAS and H, and keep the caution.
  const GustSweep s = gust_gradient_sweep(vc, {9.144, 18.75});
  REQUIRE(s.points.size() == 2);
  for (const auto& pt : s.points) CHECK(pt.design_velocity == p.amplitude);
  const nlohmann::json j = gust_sweep_json(vc, s, "");
  REQUIRE(j.at("gust_sizing").size() == 1);
  const nlohmann::json& g = j.at("gust_sizing")[0];
  CHECK(g.at("rule") == "cs-23");
  CHECK(g.at("speed_condition") == "VC");
  CHECK(g.at("altitude_m").get<double>() == 3000.0);
  CHECK(g.at("gradient_m").get<double>() == 18.75);
  CHECK(g.at("derived_gust_velocity_eas_m_s").get<double>() == Approx(15.24).epsilon(1e-12));
  CHECK(g.at("derived_gust_velocity_tas_m_s").get<double>() == Approx(15.24 * eas_to_tas).epsilon(1e-12));
  CHECK_THAT(g.at("note").get<std::string>(), Catch::Matchers::Contains("recalled from memory"));
  CHECK_THAT(j.at("caution").get<std::string>(), Catch::Matchers::Contains("safety-critical"));
  const std::string t = gust_sweep_text(vc, s, "");
  CHECK_THAT(t, Catch::Matchers::Contains("sized by cs-23"));
  CHECK_THAT(t, Catch::Matchers::Contains("U_de 15.24 m s-1 EAS"));
  CHECK_THAT(t, Catch::Matchers::Contains("recalled from memory"));
  CHECK_THAT(t, Catch::Matchers::Contains("safety-critical"));
}

TEST_CASE("gradient_chords gives H = n mean chords, the same as gradient = n 2b", "[gust]") {
  // Common practice, no source: a length in chords is n times the chord;
  // 12.5 * 1.5 m = 18.75 m exactly.
  const std::string amp = "[[gust]]\nshape = \"one-minus-cosine\"\namplitude = 3.0\n";
  const Case in_chords = test::case_from(kChord15 + amp + "gradient_chords = 12.5\n");
  const Case in_metres = test::case_from(kChord15 + amp + "gradient = 18.75\n");
  CHECK(in_chords.model.gusts.profiles().front().gradient == 18.75);
  CHECK(in_chords.model.gusts.profiles().front().gradient == in_metres.model.gusts.profiles().front().gradient);
  CHECK(in_chords.model.gusts.profiles().front().amplitude == in_metres.model.gusts.profiles().front().amplitude);
  // With a mean chord given: n c-bar.
  const Case mean = test::case_from(kChord15 + amp + "gradient_chords = 10\nmean_chord = 2.5\n");
  CHECK(mean.model.gusts.profiles().front().gradient == 25.0);
  // A CS-25 gust may give H in chords: the same U_ds as in metres.
  const std::string cs25 = "[[gust]]\nshape = \"one-minus-cosine\"\ndesign = \"cs-25\"\nlanding_weight_ratio = 0.9\n"
                           "zero_fuel_weight_ratio = 0.8\nmax_operating_altitude = 12500.0\n";
  const Case a = test::case_from(kChord15 + cs25 + "gradient_chords = 12.5\n");
  const Case b = test::case_from(kChord15 + cs25 + "gradient = 18.75\n");
  CHECK(a.model.gusts.profiles().front().amplitude == b.model.gusts.profiles().front().amplitude);
  CHECK(a.model.gusts.profiles().front().rule == GustRule::kCs25);
}

TEST_CASE("Small-aircraft and gradient_chords keys are validated", "[gust][case][errors]") {
  // Common practice, no source: this project's messages (file, line, key,
  // value and what is allowed).
  const std::string one = kChord15 + "[[gust]]\nshape = \"one-minus-cosine\"\n";
  const std::string cs23 = one + "design = \"cs-23\"\n";
  expect_gust_refusal(one + "amplitude = 3.0\ngradient = 10.0\ngradient_chords = 5.0\n", "gust.gradient_chords",
         "conflicts with 'gust.gradient'");
  expect_gust_refusal(one + "amplitude = 3.0\ngradient_chords = 0.0\n", "gust.gradient_chords", "must be positive");
  expect_gust_refusal(one + "amplitude = 3.0\ngradient_chords = -2.0\n", "gust.gradient_chords", "mean chords");
  expect_gust_refusal(cs23 + "speed_condition = \"VC\"\namplitude_eas = 10.0\n", "gust.amplitude_eas",
         "conflicts with design = \"cs-23\"");
  expect_gust_refusal(cs23 + "altitude = 1000.0\n", "gust.speed_condition", "missing");
  expect_gust_refusal(cs23 + "speed_condition = \"VB\"\n", "gust.speed_condition", "\"VC\"");
  expect_gust_refusal(cs23 + "speed_condition = \"VC\"\ngradient = 10.0\n", "gust.gradient", "rule sets the gust length");
  expect_gust_refusal(cs23 + "speed_condition = \"VC\"\ngradient_chords = 12.5\n", "gust.gradient_chords",
         "rule sets the gust length");
  expect_gust_refusal(cs23 + "speed_condition = \"VC\"\nlanding_weight_ratio = 0.9\n", "gust.landing_weight_ratio",
         "only used with design = \"cs-25\"");
  expect_gust_refusal(cs23 + "speed_condition = \"VC\"\naltitude = 16000.0\n", "gust.altitude", "0 to 15240 m");
  expect_gust_refusal(cs23 + "speed_condition = \"VC\"\nmean_chord = 0.0\n", "gust.mean_chord", "must be positive");
  expect_gust_refusal(one + "amplitude = 3.0\ngradient = 10.0\nmean_chord = 1.2\n", "gust.mean_chord",
         "only used with gradient_chords or design = \"cs-23\"");
  expect_gust_refusal(kChord15 + "[[gust]]\nshape = \"sharp-edged\"\namplitude = 3.0\ngradient_chords = 5.0\n",
         "gust.gradient_chords", "only used by one-minus-cosine");
  expect_gust_refusal(one + "amplitude = 3.0\ngradient = 10.0\nspeed_condition = \"VD\"\n", "gust.speed_condition",
         "only used with a design rule");
  // CS-25 with H in chords: the rule's range said in chords (9.144 / 1.5 =
  // 6.096 to 106.68 / 1.5 = 71.12).
  expect_gust_refusal(one + "design = \"cs-25\"\ngradient_chords = 80\nlanding_weight_ratio = 0.9\n"
               "zero_fuel_weight_ratio = 0.8\nmax_operating_altitude = 12500.0\n",
         "gust.gradient_chords", "6.096 to 71.12 chords");
  // One rule per case.
  expect_gust_refusal(cs23 + "speed_condition = \"VC\"\n[[gust]]\nshape = \"one-minus-cosine\"\ndesign = \"cs-25\"\n"
                "gradient = 30.0\nlanding_weight_ratio = 0.9\nzero_fuel_weight_ratio = 0.8\n"
                "max_operating_altitude = 12500.0\n",
         "gust.design", "mixes rules");
  // Above the rule's table with no gust.altitude: the [flow] altitude is named.
  expect_gust_refusal("[section]\nsemichord = 0.75\nmass = 10.0\nelastic_axis = -0.2\ncg_offset = 0.1\n"
         "radius_of_gyration = 0.5\nplunge_frequency_hz = 2.0\npitch_frequency_hz = 5.0\n"
         "[flow]\naltitude = 16000.0\nairspeed = 60.0\n[simulation]\nduration = 0.5\n"
         "[[gust]]\nshape = \"one-minus-cosine\"\ndesign = \"cs-23\"\nspeed_condition = \"VC\"\n",
         "gust.altitude", "[flow] altitude 16000 m is above the rule's range");
}
