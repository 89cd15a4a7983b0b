#include <catch2/catch.hpp>

#include <cmath>
#include <numbers>
#include <vector>

#include <fmt/format.h>

#include "aerosect/integrate/exact_flow.hpp"
#include "aerosect/integrate/integrator.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/units.hpp"
#include "helpers.hpp"

using namespace aerosect;
using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;

namespace {

// A pitch oscillator in vacuum (no air: density 0), plunge held, no
// damping: I alpha'' + f(alpha) = 0 with the given pitch spring law.
std::string vacuum_pitch(const std::string& spring, const std::string& initial) {
  return "title = \"pitch oscillator in vacuum\"\n"
         "[section]\nsemichord = 0.5\nmass = 10.0\nelastic_axis = 0.0\ncg = 0.0\n"
         "radius_of_gyration = 0.5\nplunge_frequency_hz = 1.0\npitch_frequency_hz = 2.0\n"
         "[flow]\ndensity = 0.0\nairspeed = 10.0\n"
         "[simulation]\nduration = 1.0\nhold = [\"plunge\"]\n" +
         spring + "[initial]\n" + initial;
}

IntegratorSettings exact() { return {StepperKind::kExact, 1e-12, 1e-15, 0.0, 0.0}; }

RunState start_of(const AeroelasticModel& m, const Case& c) {
  RunState run;
  run.x = m.initial_state(c.simulation.initial_displacement, c.simulation.initial_velocity, false);
  run.regions = m.regions_of(run.x.data());
  return run;
}

}  // namespace

TEST_CASE("Exact propagation: the freeplay oscillator's closed form", "[exact]") {
  // Textbook piecewise solution (common practice, no source): with
  // f = k (alpha - delta) above the gap, 0 inside, and a release from
  // alpha0 > delta at rest, alpha = delta + (alpha0 - delta) cos(w t) until
  // it reaches delta at t1 = pi / (2 w) (a step input's response), then it
  // drifts at the constant rate -(alpha0 - delta) w across the gap to
  // -delta at t2 = t1 + 2 delta / ((alpha0 - delta) w), and the motion is
  // the mirror image after; the period is 2 pi / w + 4 delta / ((alpha0 -
  // delta) w) with 4 switches. The exact flow must give these to round-off.
  const Case c = test::case_from(vacuum_pitch("[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 1.0\n",
                                              "pitch_deg = 3.0\n"));
  const AeroelasticModel m(c.model);
  REQUIRE(exact_propagation_eligible(m));
  const StateLayout& L = m.layout();
  const double w = std::sqrt(c.model.section.pitch_stiffness / c.model.section.pitch_inertia);
  const double d = 1.0 * kRadPerDeg, a0 = 3.0 * kRadPerDeg;
  const double t1 = std::numbers::pi / (2 * w), t2 = t1 + 2 * d / ((a0 - d) * w);
  const double T = 2 * std::numbers::pi / w + 4 * d / ((a0 - d) * w);
  CAPTURE(w, t1, t2, T);
  {
    RunState run = start_of(m, c);
    integrate(m, run, 0.5 * (t1 + t2), exact(), OutputSchedule::none());
    CHECK(run.switches == 1);
    CHECK_THAT(run.x[L.displacement + kPitch], WithinAbs(0.0, 1e-14));
    CHECK_THAT(run.x[L.velocity + kPitch], WithinRel(-(a0 - d) * w, 1e-13));
  }
  {
    RunState run = start_of(m, c);
    std::vector<std::pair<double, double>> peaks;
    integrate(m, run, T, exact(), OutputSchedule::none(),
              {{}, [&](int dof, double t, const std::vector<double>& x) {
                if (dof == kPitch) peaks.emplace_back(t, x[L.displacement + kPitch]);
                return ObserverAction::kContinue;
              }});
    CHECK(run.switches == 4);
    CHECK_THAT(run.x[L.displacement + kPitch], WithinRel(a0, 1e-13));
    CHECK_THAT(run.x[L.velocity + kPitch], WithinAbs(0.0, 1e-12 * a0 * w));
    REQUIRE(peaks.size() >= 1);
    // The minimum: a quarter period of the outer motion after t2.
    // Located to 1e-13 s (exact_flow.hpp: events to 1e-13 max(1, |t|) s).
    CAPTURE(peaks[0].first - (t2 + std::numbers::pi / (2 * w)));
    CHECK_THAT(peaks[0].first, WithinAbs(t2 + std::numbers::pi / (2 * w), 1e-13));
    CHECK_THAT(peaks[0].second, WithinRel(-a0, 1e-13));
  }
}

TEST_CASE("Exact propagation: a trajectory grazing a breakpoint inside one step is caught", "[exact]") {
  // Bilinear pitch spring (inner stiffness k1 = k/4 over |alpha| <= delta),
  // released from alpha = 0 at the rate that gives the inner motion an
  // amplitude delta (1 + eps): it passes the breakpoint for a time of order
  // sqrt(eps) / w1 (about 1e-4 s here), far inside one step of the exact
  // propagator, and must be seen: 2 switches per half period (out and back),
  // none for delta (1 - eps). Common practice, no source: the grazing of a
  // harmonic motion.
  const Case probe = test::case_from(vacuum_pitch("", "pitch_deg = 0.0\n"));
  const double k = probe.model.section.pitch_stiffness, I = probe.model.section.pitch_inertia;
  const double w1 = std::sqrt(0.25 * k / I), d = 0.5 * kRadPerDeg;
  for (double eps : {1e-8, -1e-8}) {
    const std::string spring =
        fmt::format("[springs.pitch]\nlaw = \"bilinear\"\ninner_stiffness = {:.17g}\nhalf_width_deg = 0.5\n", 0.25 * k);
    const std::string initial = fmt::format("pitch_rate_deg_s = {:.17g}\n", d * w1 * (1 + eps) * kDegPerRad);
    const Case c = test::case_from(vacuum_pitch(spring, initial));
    const AeroelasticModel m(c.model);
    REQUIRE(exact_propagation_eligible(m));
    RunState run = start_of(m, c);
    integrate(m, run, std::numbers::pi / w1, exact(), OutputSchedule::none());
    CAPTURE(eps);
    CHECK(run.switches == (eps > 0 ? 2 : 0));
  }
}

TEST_CASE("Exact propagation agrees with Dormand-Prince at tight tolerance on the demo's flap freeplay",
          "[exact]") {
  // The 3-DOF demo (flap freeplay, Wagner lag states) released as in the
  // case, 3 s, without a gust and with each gust shape the exact flow takes
  // (its own 1-cos gust; a sharp-edged gust; a 4 Hz sinusoidal gust of 2.5
  // cycles, so that it starts and ends inside the run; the gust's Küssner
  // lag states and its harmonic input integrated exactly): the exact flow
  // against the Odeint Dormand-Prince path at rtol 1e-13: the same switch
  // count, final state and monodromy to 1e-9 relative (the Odeint path's
  // own accuracy at that tolerance), every peak time to what that accuracy
  // allows at the peak (below). The check the issue names (exact
  // propagation against the Odeint path, 1e-13 to 1e-10).
  // Each piecewise-linear law on the flap too: the demo's freeplay, a
  // bilinear spring (20 % stiffness inside +-0.5 degree) and a table of
  // four points (asymmetric: stiffer below than above, a kink at 0.3
  // degree).
  const std::string demo = std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron.toml";
  // (Two 1-cos gusts make the augmented state 15 long: the any-length
  // instance of the propagator; the others use fixed-size ones, 9 to 13.)
  const std::string gust =
      GENERATE(as<std::string>{}, "none", "demo 1-cos", "sharp-edged", "sinusoidal", "two 1-cos");
  const std::string law = GENERATE(as<std::string>{}, "freeplay", "bilinear", "table");
  CAPTURE(gust, law);
  const Case demo_case = load_case(demo);
  const double kb = demo_case.model.section.flap_stiffness;  // N m/rad per m
  const std::string text = demo_case.text;
  std::string base = text.substr(0, text.find("[[gust]]"));
  const std::size_t springs = base.find("[springs.flap]");
  const std::size_t after = base.find("\n[", springs + 1);
  const double deg = std::numbers::pi / 180;
  const std::string spring =
      law == "bilinear" ? fmt::format("[springs.flap]\nlaw = \"bilinear\"\ninner_stiffness = {}\nhalf_width_deg = 0.5\n", 0.2 * kb)
      : law == "table"  ? fmt::format("[springs.flap]\nlaw = \"table\"\ndisplacements_deg = [-4.0, -0.4, 0.3, 4.0]\n"
                                      "forces = [{}, {}, {}, {}]\n",
                                      -1.2 * kb * 3.6 * deg - 0.05 * kb * 0.4 * deg, -0.05 * kb * 0.4 * deg,
                                      0.1 * kb * 0.3 * deg, 0.1 * kb * 0.3 * deg + 0.9 * kb * 3.7 * deg)
                        : base.substr(springs, after - springs + 1);
  base = base.substr(0, springs) + spring + base.substr(after + 1);
  const Case c = gust == "sharp-edged"
                     ? test::case_from(base + "[[gust]]\nshape = \"sharp-edged\"\nstart = 0.4\namplitude = 3.0\n")
                 : gust == "sinusoidal"
                     ? test::case_from(base + "[[gust]]\nshape = \"sinusoidal\"\nstart = 0.3\namplitude = 4.0\n"
                                              "frequency_hz = 4.0\ncycles = 2.5\n")
                 : gust == "two 1-cos"
                     ? test::case_from(base + text.substr(text.find("[[gust]]")) +
                                       "\n[[gust]]\nshape = \"one-minus-cosine\"\nstart = 1.2\namplitude = -2.0\n"
                                       "gradient = 9.0\n")
                     : test::case_from(base + text.substr(text.find("[[gust]]")));
  ModelDescription d = c.model;
  if (gust == "none") d.gusts = GustField();
  const AeroelasticModel m(d);
  std::string why;
  REQUIRE(exact_propagation_eligible(m, &why));
  CHECK(m.gusts().empty() == (gust == "none"));
  const int n = m.state_size();
  struct Peak {
    int dof;
    double t, acceleration;  // s; the DOF's acceleration there (units of x'' )
  };
  struct Out {
    RunState run;
    std::vector<Peak> peaks;
  };
  const StateLayout& L = m.layout();
  std::vector<double> dxdt(static_cast<std::size_t>(m.state_size()));
  auto go = [&](const IntegratorSettings& s) {
    Out o;
    o.run = start_of(m, c);
    o.run.track_monodromy = true;
    o.run.monodromy.assign(static_cast<std::size_t>(n * n), 0.0);
    for (int i = 0; i < n; ++i) o.run.monodromy[static_cast<std::size_t>(i * (n + 1))] = 1.0;
    integrate(m, o.run, 3.0, s, OutputSchedule::none(), {{}, [&](int dof, double t, const std::vector<double>& x) {
                m.rhs(x.data(), dxdt.data(), t, m.regions_of(x.data()), m.gusts().segment_of(t));
                o.peaks.push_back({dof, t, dxdt[static_cast<std::size_t>(L.velocity + dof)]});
                return ObserverAction::kContinue;
              }});
    return o;
  };
  const Out e = go(exact());
  const Out r = go({StepperKind::kDopri5, 1e-13, 1e-16, 0.0, 0.0});
  CAPTURE(e.run.switches, r.run.switches, e.run.steps, r.run.steps);
  CHECK(e.run.switches > 10);
  CHECK(e.run.switches == r.run.switches);
  const Eigen::VectorXd W = state_weights(m);
  double scale = 0, err = 0;
  for (int i = 0; i < n; ++i) {
    scale = std::max(scale, std::abs(W(i) * r.run.x[static_cast<std::size_t>(i)]));
    err = std::max(err, std::abs(W(i) * (e.run.x[static_cast<std::size_t>(i)] - r.run.x[static_cast<std::size_t>(i)])));
  }
  CAPTURE(err, scale);
  CHECK(err < 1e-9 * scale);
  const Eigen::Map<const Eigen::MatrixXd> pe(e.run.monodromy.data(), n, n), pr(r.run.monodromy.data(), n, n);
  const Eigen::MatrixXd se = W.asDiagonal() * pe * W.cwiseInverse().asDiagonal();
  const Eigen::MatrixXd sr = W.asDiagonal() * pr * W.cwiseInverse().asDiagonal();
  CAPTURE((se - sr).cwiseAbs().maxCoeff(), sr.cwiseAbs().maxCoeff());
  CHECK((se - sr).cwiseAbs().maxCoeff() < 1e-8 * sr.cwiseAbs().maxCoeff());
  // Peak times: a peak is a zero of the DOF's velocity, so a velocity
  // uncertainty dv moves it by dv / |acceleration| (first-order
  // perturbation, common practice, no source). With dv the reference's
  // state accuracy above (1e-9 of the scaled state), each peak time must
  // agree to 1e-12 s + dv / |a|. This matters where the oscillation has
  // decayed about a new static position (the sharp-edged gust): its late
  // peaks are flat, and there three Dormand-Prince references (rtol 1e-13,
  // 3e-14, 1e-14) scatter among themselves by up to 1.4e-9 s (measured)
  // while every state agrees to 1e-9 relative.
  REQUIRE(e.peaks.size() == r.peaks.size());
  double worst = 0;  // largest |dt| / allowed
  for (std::size_t k = 0; k < e.peaks.size(); ++k) {
    CHECK(e.peaks[k].dof == r.peaks[k].dof);
    const double dv = 1e-9 * scale / W(L.velocity + e.peaks[k].dof);
    const double allowed = 1e-12 + dv / std::abs(e.peaks[k].acceleration);
    worst = std::max(worst, std::abs(e.peaks[k].t - r.peaks[k].t) / allowed);
  }
  CAPTURE(worst);
  CHECK(worst < 1.0);
}

TEST_CASE("stepper = \"exact\" on a case that cannot be propagated exactly is refused, naming why", "[exact][case]") {
  // Continuous turbulence is a recorded input (not constant or harmonic):
  // "auto" falls back to Dormand-Prince; "exact" is an input error naming
  // the key and the turbulence. The demo's 1-cos gust is eligible.
  const std::string demo = std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron.toml";
  CHECK(load_case(demo).simulation.integrator.stepper == StepperKind::kExact);  // auto
  CHECK_NOTHROW(load_case(demo, {"simulation.stepper=exact"}));
  const std::string text = load_case(demo).text;
  const std::string turbulent = text.substr(0, text.find("[[gust]]")) +
                                "[[gust]]\nshape = \"turbulence\"\nmodel = \"dryden\"\nintensity = 1.5\n"
                                "scale_length = 24.0\nseed = 3\n";
  CHECK_FALSE(exact_propagation_eligible(test::case_from(turbulent).model));
  try {
    (void)test::case_from(turbulent, {"simulation.stepper=exact"});
    FAIL("no error");
  } catch (const InputError& e) {
    const std::string m = e.what();
    CAPTURE(m);
    CHECK(m.find("stepper") != std::string::npos);
    CHECK(m.find("turbulence") != std::string::npos);
  }
  CHECK_NOTHROW(test::case_from(turbulent, {"simulation.stepper=dopri5"}));
}

TEST_CASE("Exact propagation: runs sharing an ExactFlowCache give the same results bit for bit", "[exact]") {
  // The cache holds only what a run would rebuild identically (the
  // regions' exponentials), so runs with it, without it, and a second run
  // through a filled cache must agree exactly (common practice, no source:
  // a cache must not change results); a run of another model is refused (InternalError).
  const Case c = load_case(std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron.toml");
  const AeroelasticModel m(c.model);
  auto go = [&](ExactFlowCache* cache) {
    RunState run = start_of(m, c);
    run.exact_cache = cache;
    std::vector<double> peaks;
    integrate(m, run, 2.0, exact(), OutputSchedule::none(), {{}, [&](int, double t, const std::vector<double>&) {
                peaks.push_back(t);
                return ObserverAction::kContinue;
              }});
    peaks.insert(peaks.end(), run.x.begin(), run.x.end());
    peaks.push_back(static_cast<double>(run.switches));
    return peaks;
  };
  ExactFlowCache cache;
  const std::vector<double> alone = go(nullptr), first = go(&cache), again = go(&cache);
  REQUIRE(alone.size() > 20);
  CHECK(first == alone);
  CHECK(again == alone);
  const Case other = load_case(std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron.toml", {"flow.airspeed=30"});
  const AeroelasticModel m2(other.model);
  RunState run = start_of(m2, other);
  run.exact_cache = &cache;
  CHECK_THROWS_AS(integrate(m2, run, 0.1, exact(), OutputSchedule::none()), InternalError);
}
