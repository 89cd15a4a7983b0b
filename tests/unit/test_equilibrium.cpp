#include <catch2/catch.hpp>

#include <cmath>
#include <numbers>

#include <fmt/format.h>

#include "aerosect/analysis/equilibrium.hpp"
#include "aerosect/analysis/flutter.hpp"
#include "aerosect/integrate/integrator.hpp"
#include "aerosect/model/system.hpp"
#include "aerosect/units.hpp"
#include "helpers.hpp"

using namespace aerosect;
using std::numbers::pi;

namespace {

// An SI 2-DOF section (invented numbers) with the given extra TOML.
std::string section_2dof(const std::string& extra) {
  return R"([section]
semichord = 0.5
mass = 10.0
elastic_axis = -0.2
cg_offset = 0.1
radius_of_gyration = 0.5
plunge_stiffness = 20000.0
pitch_stiffness = 2500.0
[flow]
density = 1.225
airspeed = 30.0
[simulation]
duration = 1.0
)" + extra;
}

std::string flap_table(double stiffness = 60.0) {
  return "[flap]\nhinge = 0.5\nstatic_unbalance = 0.02\ninertia = 0.01\nstiffness = " +
         std::to_string(stiffness) + "\n";
}

}  // namespace

TEST_CASE("The steady input b0 is the aerodynamics alone at the offset", "[equilibrium]") {
  // Algebra of system.hpp (no outside source): b0 = A x_a0 + G K_lin q_a0
  // + G f must equal A_aero x_a0 + G f with A_aero the state matrix with
  // every spring removed, for 2 and 3 DOFs and every aerodynamic model.
  for (const char* aero : {"wagner", "quasi-steady", "steady"}) {
    for (bool flap : {false, true}) {
      const std::string steady = flap ? "[steady]\nincidence_deg = 3.0\nflap_trim_deg = -2.0\ngravity = 9.81\n"
                                      : "[steady]\nincidence_deg = 3.0\ngravity = 9.81\n";
      const Case c = test::case_from(section_2dof((flap ? flap_table() : "") + steady +
                                                  "[aerodynamics]\nmodel = \"" + aero + "\"\n"));
      const AeroelasticModel model(c.model);
      const int n = model.n_dof();
      const Eigen::MatrixXd A0 = model.state_matrix(DofVector::Zero(n));
      const Eigen::VectorXd ref = A0 * model.aerodynamic_offset() + model.force_input() * model.steady_force();
      const Eigen::VectorXd& b0 = model.steady_input();
      INFO(aero << (flap ? " 3-DOF" : " 2-DOF"));
      CHECK((b0 - ref).cwiseAbs().maxCoeff() <= 1e-13 * ref.cwiseAbs().maxCoeff());
      // Gravity: g (m, S_alpha[, S_beta]) from the kinetic energy.
      const auto& s = c.model.section;
      CHECK(model.steady_force()(kPlunge) == Approx(9.81 * s.mass).epsilon(1e-15));
      CHECK(model.steady_force()(kPitch) == Approx(9.81 * s.static_unbalance).epsilon(1e-15));
      if (flap) CHECK(model.steady_force()(kFlap) == Approx(9.81 * s.flap_static_unbalance).epsilon(1e-15));
      // rhs at x = 0 is b0.
      std::vector<double> x(static_cast<std::size_t>(model.state_size()), 0.0), f(x.size());
      model.rhs(x.data(), f.data(), 0.0, model.regions_of(x.data()));
      for (int i = 0; i < model.state_size(); ++i) CHECK(f[i] == b0(i));
    }
  }
}

TEST_CASE("Static equilibrium of a 2-DOF section at incidence: thin-aerofoil statics by hand",
          "[equilibrium]") {
  // Steady thin-aerofoil loads (Theodorsen, NACA Report 496, with C(0) = 1;
  // Bisplinghoff, Ashley & Halfman, Aeroelasticity, ch. 8 statics): lift
  // L = 2 pi rho U^2 b (alpha_0 + alpha) at the quarter chord, so the moment
  // about the elastic axis is L b (a + 1/2). Statics, h down:
  //   K_h h = -L,  K_alpha alpha = L b (a + 1/2)
  //   => alpha = q e alpha_0 / (K_alpha - q e), q = 2 pi rho U^2 b, e = b (a + 1/2).
  // Every aerodynamic model has the same steady limit; the Wagner lag states
  // settle at the steady downwash (checked through the residual).
  for (const char* aero : {"wagner", "quasi-steady", "steady"}) {
    const Case c = test::case_from(section_2dof("[steady]\nincidence_deg = 4.0\n[aerodynamics]\nmodel = \"" +
                                                std::string(aero) + "\"\n"));
    const AeroelasticModel model(c.model);
    const EquilibriumResult r = static_equilibrium(model);
    REQUIRE(r.equilibria.size() == 1);
    const Equilibrium& e = r.equilibria[0];
    const double rho = 1.225, U = 30.0, b = 0.5, a = -0.2, Kh = 20000.0, Ka = 2500.0;
    const double a0 = 4.0 * pi / 180, q = 2 * pi * rho * U * U * b, ecc = b * (a + 0.5);
    const double alpha = q * ecc * a0 / (Ka - q * ecc);
    const double L = q * (a0 + alpha), h = -L / Kh;
    INFO(aero);
    CHECK(e.displacement(kPitch) == Approx(alpha).epsilon(1e-12));
    CHECK(e.displacement(kPlunge) == Approx(h).epsilon(1e-12));
    CHECK(e.loads.lift == Approx(L).epsilon(1e-12));
    CHECK(e.loads.pitching_moment == Approx(L * ecc).epsilon(1e-12));
    CHECK(e.static_stability == "stable");
    CHECK(e.free_directions == 0);
    CHECK(e.residual < 1e-12);
    CHECK(r.steady_condition);
  }
}

TEST_CASE("Static equilibrium of a 3-DOF section at incidence and flap trim, by hand", "[equilibrium]") {
  // Steady loads of Theodorsen's flap theory (NACA Report 496; the steady
  // terms, C(0) = 1), with alpha_e = alpha_0 + alpha, beta_e = beta_0 + beta:
  //   L     = 2 pi rho U^2 b (alpha_e + T10 beta_e / pi)
  //   M_a   = L b (a + 1/2) - rho b^2 U^2 (T4 + T10) beta_e
  //   M_b   = -rho b^2 U^2 [(T5 - T4 T10) beta_e / pi + T12 (alpha_e + T10 beta_e / pi)]
  // Flap effectiveness T10 = sqrt(1 - c^2) + acos c, which is Glauert's
  // thin-aerofoil dC_L/d(beta) / 2 = pi - theta_h + sin theta_h with
  // cos theta_h = -c (Abbott & von Doenhoff, Theory of Wing Sections, §8.6).
  // Statics: K_a alpha = M_a, K_b beta = M_b + M_trim, K_h h = -L; the
  // (alpha, beta) pair is a 2x2 linear system, solved by Cramer's rule here.
  const double rho = 1.225, U = 30.0, b = 0.5, a = -0.2, c = 0.5, Kh = 20000.0, Ka = 2500.0, Kb = 60.0;
  const double A = std::acos(c), r = std::sqrt(1 - c * c);
  const double T4 = -A + c * r, T5 = -(1 - c * c) - A * A + 2 * c * r * A, T10 = r + A;
  const double T12 = r * (2 + c) - (2 * c + 1) * A;
  CHECK(T10 == Approx(pi - (pi - A) + std::sin(pi - A)).epsilon(1e-15));  // Glauert's form
  const double q = 2 * pi * rho * U * U * b, ecc = b * (a + 0.5), p = rho * b * b * U * U;
  // Loads as linear forms in (alpha_e, beta_e).
  const double La = q, Lb = q * T10 / pi;
  const double Maa = La * ecc, Mab = Lb * ecc - p * (T4 + T10);
  const double Mba = -p * T12, Mbb = -p * ((T5 - T4 * T10) / pi + T12 * T10 / pi);
  for (const auto& [trim_key, trim, beta0, Mtrim] :
       {std::tuple{"flap_trim_deg", 2.0, 2.0 * pi / 180, 0.0}, std::tuple{"hinge_moment", 0.3, 0.0, 0.3}}) {
    const double a0 = 3.0 * pi / 180;
    const Case cs = test::case_from(section_2dof(flap_table(Kb) + "[steady]\nincidence_deg = 3.0\n" + trim_key +
                                                 " = " + std::to_string(trim) + "\n"));
    const AeroelasticModel model(cs.model);
    const EquilibriumResult res = static_equilibrium(model);
    REQUIRE(res.equilibria.size() == 1);
    const Equilibrium& e = res.equilibria[0];
    // (Ka - Maa) alpha - Mab beta = Maa a0 + Mab beta0
    // -Mba alpha + (Kb - Mbb) beta = Mba a0 + Mbb beta0 + Mtrim
    const double m11 = Ka - Maa, m12 = -Mab, m21 = -Mba, m22 = Kb - Mbb;
    const double r1 = Maa * a0 + Mab * beta0, r2 = Mba * a0 + Mbb * beta0 + Mtrim;
    const double det = m11 * m22 - m12 * m21;
    const double alpha = (r1 * m22 - m12 * r2) / det, beta = (m11 * r2 - m21 * r1) / det;
    const double L = La * (a0 + alpha) + Lb * (beta0 + beta);
    INFO(trim_key);
    CHECK(e.displacement(kPitch) == Approx(alpha).epsilon(1e-11));
    CHECK(e.displacement(kFlap) == Approx(beta).epsilon(1e-11));
    CHECK(e.displacement(kPlunge) == Approx(-L / Kh).epsilon(1e-11));
    CHECK(e.loads.lift == Approx(L).epsilon(1e-11));
    CHECK(e.loads.hinge_moment == Approx(Mba * (a0 + alpha) + Mbb * (beta0 + beta)).epsilon(1e-11));
    CHECK(e.residual < 1e-12);
  }
}

TEST_CASE("Gravity in vacuum: a CG aft of the elastic axis pitches the nose up", "[equilibrium]") {
  // Hand solution (potential energy of the weight, no coupling in vacuum):
  // h = m g / K_h (down), alpha = S_alpha g / K_alpha (> 0, nose up, for
  // S_alpha > 0).
  const Case c = test::case_from(section_2dof("[steady]\ngravity = 9.80665\n"), {"flow.density=0.0"});
  const AeroelasticModel model(c.model);
  const EquilibriumResult r = static_equilibrium(model);
  REQUIRE(r.equilibria.size() == 1);
  const auto& s = c.model.section;
  REQUIRE(s.static_unbalance > 0);
  CHECK(r.equilibria[0].displacement(kPlunge) == Approx(s.mass * 9.80665 / 20000.0).epsilon(1e-14));
  CHECK(r.equilibria[0].displacement(kPitch) == Approx(s.static_unbalance * 9.80665 / 2500.0).epsilon(1e-14));
  CHECK(r.equilibria[0].displacement(kPitch) > 0);
}

TEST_CASE("Freeplay equilibria: in the gap without load, against the stop with one", "[equilibrium]") {
  const std::string fp = "[springs.flap]\nlaw = \"freeplay\"\nhalf_gap_deg = 1.0\n";
  SECTION("no load in vacuum: a continuum, q = 0 reported") {
    const Case c = test::case_from(section_2dof(flap_table() + fp), {"flow.density=0.0"});
    const EquilibriumResult r = static_equilibrium(AeroelasticModel(c.model));
    REQUIRE(r.equilibria.size() == 1);
    const Equilibrium& e = r.equilibria[0];
    CHECK(e.displacement.cwiseAbs().maxCoeff() == 0.0);
    CHECK(e.free_directions == 1);
    CHECK(e.static_stability == "neutral");
    CHECK(e.springs[kFlap].region_name == "gap");
    CHECK_FALSE(e.springs[kFlap].in_contact);
    CHECK_FALSE(r.steady_condition);
  }
  SECTION("no load in air: q = 0, unique (the aerodynamic hinge stiffness holds it)") {
    const Case c = test::case_from(section_2dof(flap_table() + fp));
    const EquilibriumResult r = static_equilibrium(AeroelasticModel(c.model));
    REQUIRE(r.equilibria.size() >= 1);
    CHECK(r.equilibria[0].displacement.cwiseAbs().maxCoeff() < 1e-15);
    CHECK(r.equilibria[0].springs[kFlap].region_name == "gap");
  }
  SECTION("hinge preload in vacuum: against the upper stop, contact load = the preload") {
    // Hand solution: beta = delta + M / K_beta, contact load M (the spring
    // carries the whole applied moment; nothing else acts on the flap in
    // vacuum without gravity).
    const Case c = test::case_from(section_2dof(flap_table() + fp + "[steady]\nhinge_moment = 0.5\n"),
                                   {"flow.density=0.0"});
    const EquilibriumResult r = static_equilibrium(AeroelasticModel(c.model));
    REQUIRE(r.equilibria.size() == 1);
    const Equilibrium& e = r.equilibria[0];
    CHECK(e.displacement(kFlap) == Approx(pi / 180 + 0.5 / 60.0).epsilon(1e-14));
    CHECK(e.springs[kFlap].region_name == "upper stop");
    CHECK(e.springs[kFlap].in_contact);
    CHECK(e.springs[kFlap].force == Approx(0.5).epsilon(1e-13));
    CHECK(e.static_stability == "stable");
  }
}

TEST_CASE("Cubic spring: Newton's equilibrium balances the load", "[equilibrium]") {
  // k (x + beta x^3) = M in vacuum: the root of the cubic, checked by
  // substitution (the hand check of a cubic's root).
  const Case c = test::case_from(
      section_2dof("[springs.pitch]\nlaw = \"cubic\"\ncubic_coefficient = 300.0\n[steady]\ngravity = 50.0\n"),
      {"flow.density=0.0"});
  const EquilibriumResult r = static_equilibrium(AeroelasticModel(c.model));
  REQUIRE(r.equilibria.size() == 1);
  const double x = r.equilibria[0].displacement(kPitch);
  const double M = 50.0 * c.model.section.static_unbalance;
  CHECK(2500.0 * (x + 300.0 * x * x * x) == Approx(M).epsilon(1e-12));
  CHECK(x < M / 2500.0);  // hardening: less than the linear deflection
}

TEST_CASE("A preload beyond the gap gives the gap-closed linear section with the offset force",
          "[equilibrium]") {
  // Issue #18's check (no outside source: an identity of the piecewise law):
  // in its upper region a freeplay spring is f = k (beta - delta) =
  // k beta - k delta, i.e. a linear spring with an extra hinge moment
  // k delta. A hinge preload that keeps the flap beyond the gap at every
  // instant must therefore give the time history of a linear flap spring
  // with hinge moment M + k delta, to the integrator's tolerance.
  const double delta_deg = 0.5, M = 1.2, k = 60.0;
  const std::string base = section_2dof(flap_table(k) + "[initial]\npitch_deg = 0.3\nflap_deg = 0.3\n");
  const Case cf = test::case_from(base + "[springs.flap]\nlaw = \"freeplay\"\nhalf_gap_deg = " +
                                  std::to_string(delta_deg) + "\n[steady]\nincidence_deg = 2.0\nhinge_moment = " +
                                  std::to_string(M) + "\n", {"flow.airspeed=15.0"});
  const Case cl = test::case_from(base + "[steady]\nincidence_deg = 2.0\nhinge_moment = " +
                                  fmt::format("{:.17g}", M + k * delta_deg * pi / 180) + "\n", {"flow.airspeed=15.0"});
  const AeroelasticModel mf(cf.model), ml(cl.model);
  // Equilibria agree too, the freeplay one against its upper stop.
  const EquilibriumResult ef = static_equilibrium(mf), el = static_equilibrium(ml);
  REQUIRE(ef.equilibria.size() == 1);
  REQUIRE(el.equilibria.size() == 1);
  INFO("equilibrium flap angle " << ef.equilibria[0].displacement(kFlap) * 180 / pi << " deg");
  CHECK(ef.equilibria[0].springs[kFlap].region_name == "upper stop");
  CHECK((ef.equilibria[0].displacement - el.equilibria[0].displacement).cwiseAbs().maxCoeff() < 1e-14);

  const double T = 2.0;
  auto run_of = [&](const AeroelasticModel& m, const Equilibrium& e, StepperKind st, double& min_flap) {
    RunState run;
    run.x = m.initial_state(e.displacement + cf.simulation.initial_displacement, DofVector::Zero(3), true);
    run.regions = m.regions_of(run.x.data());
    IntegratorSettings s;
    s.stepper = st;
    s.relative_tolerance = 1e-12;
    s.absolute_tolerance = 1e-15;
    std::vector<std::vector<double>> out;
    min_flap = 1e9;
    integrate(m, run, T, s, {false, 0.01},
              {[&](double, const std::vector<double>& x) {
                out.push_back(x);
                min_flap = std::min(min_flap, x[kFlap]);
                return ObserverAction::kContinue;
              }});
    return out;
  };
  for (StepperKind st : {StepperKind::kDopri5, StepperKind::kExact}) {
    double min_f = 0, min_l = 0;
    const auto hf = run_of(mf, ef.equilibria[0], st, min_f);
    const auto hl = run_of(ml, el.equilibria[0], st, min_l);
    REQUIRE(hf.size() == hl.size());
    REQUIRE(hf.size() > 100);
    INFO("stepper " << to_string(st) << ", lowest flap angle " << min_f * 180 / pi << " deg");
    CHECK(min_f > delta_deg * pi / 180);  // never back into the gap
    double err = 0, amp = 0;
    for (std::size_t i = 0; i < hf.size(); ++i)
      for (int j = 0; j < 3; ++j) {
        err = std::max(err, std::abs(hf[i][j] - hl[i][j]));
        amp = std::max(amp, std::abs(hl[i][j]));
      }
    INFO("max difference " << err << ", amplitude " << amp);
    CHECK(err <= 1e-9 * amp);
  }
}

TEST_CASE("A run started at the equilibrium stays there", "[equilibrium]") {
  // The equilibrium is a fixed point of the model's own right-hand side:
  // with the exact propagator and Dormand-Prince the state moves by round-off.
  const Case c = test::case_from(section_2dof(flap_table() +
                                              "[springs.flap]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.3\n"
                                              "[steady]\nincidence_deg = 2.0\ngravity = 9.80665\n"));
  const AeroelasticModel model(c.model);
  const EquilibriumResult r = static_equilibrium(model);
  REQUIRE(r.equilibria.size() >= 1);
  const Equilibrium& e = r.equilibria[0];
  for (StepperKind st : {StepperKind::kDopri5, StepperKind::kExact}) {
    RunState run;
    run.x.assign(e.state.data(), e.state.data() + e.state.size());
    run.regions = e.regions;
    IntegratorSettings s;
    s.stepper = st;
    integrate(model, run, 1.0, s, OutputSchedule::none());
    double d = 0;
    for (int i = 0; i < 3; ++i) d = std::max(d, std::abs(run.x[i] - e.state(i)));
    INFO(to_string(st) << ": drift " << d);
    // Exact flow: round-off of the state; Dormand-Prince: within its local
    // tolerances (rtol 1e-8 of the state, atol 1e-10), which bound what it
    // can tell from a fixed point.
    const double qmax = e.displacement.cwiseAbs().maxCoeff();
    CHECK(d < (st == StepperKind::kExact ? 1e-12 * qmax : s.relative_tolerance * qmax + s.absolute_tolerance));
    CHECK(run.switches == 0);
  }
}

TEST_CASE("Flutter of a preloaded section linearises about its equilibrium", "[equilibrium][flutter]") {
  // Issue #18 (this project's rule, no outside source): the nominal
  // linearisation takes each spring's tangent stiffness in the region the
  // static equilibrium lies in: a freeplay flap pressed against its stop is
  // the gap-closed section (k), an unloaded one keeps the nominal stiffness
  // as before, and the describing-function prediction is the dual-input
  // one (bias plus sinusoid, describing_function.hpp).
  const std::string base = section_2dof(flap_table() + "[springs.flap]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n");
  FlutterOptions o;
  o.speeds = test::grid(1.0, 60.0, 40);
  o.pk = false;
  const FlutterReport loaded = flutter_analysis(test::case_from(base + "[steady]\nhinge_moment = 1.0\n"), o);
  REQUIRE(loaded.results.front().linearisation == Linearisation::kNominal);
  CHECK(loaded.results.front().stiffness(kFlap) == 60.0);
  CHECK_THAT(loaded.nominal_basis, Catch::Contains("flap spring: upper stop"));
  CHECK(loaded.lco.biased);
  REQUIRE(loaded.equilibrium.equilibria.size() == 1);
  CHECK(loaded.equilibrium.equilibria[0].springs[kFlap].in_contact);
  // In vacuum an incidence loads nothing: the flap stays in its gap (any
  // point of it; 0 reported) and the nominal linearisation is then the
  // gap-open one (0).
  const FlutterReport in_gap =
      flutter_analysis(test::case_from(base + "[steady]\nincidence_deg = 1.0\n", {"flow.density=0.0"}), o);
  CHECK(in_gap.results.front().stiffness(kFlap) == 0.0);
  CHECK_THAT(in_gap.nominal_basis, Catch::Contains("flap spring: gap"));
  // Without a steady condition: the nominal stiffness, as before.
  const FlutterReport plain = flutter_analysis(test::case_from(base), o);
  CHECK(plain.results.front().stiffness(kFlap) == 60.0);
  CHECK(plain.nominal_basis == "nominal stiffness of every spring (the gap closed)");
}

TEST_CASE("A held section at incidence carries the steady thin-aerofoil lift", "[equilibrium]") {
  // Steady thin-aerofoil theory (NACA Report 496 with C(0) = 1; lift slope
  // 2 pi): L = 2 pi rho U^2 b alpha_0 at the quarter chord, so
  // M_alpha = L b (a + 1/2), with the section held at q = 0 and the lag
  // states in the steady flow. The Wagner lag states, once started steady,
  // stay there (their derivatives vanish).
  const Case c = test::case_from(section_2dof("[steady]\nincidence_deg = 3.0\n"),
                                 {"simulation.hold=[\"plunge\", \"pitch\"]"});
  const AeroelasticModel model(c.model);
  const std::vector<double> x = model.initial_state(DofVector::Zero(2), DofVector::Zero(2), true);
  std::vector<double> f(x.size());
  model.rhs(x.data(), f.data(), 0.0, model.regions_of(x.data()));
  for (double v : f) CHECK(std::abs(v) < 1e-12);
  const Loads l = model.loads(x.data(), f.data());
  const double L = 2 * pi * 1.225 * 30.0 * 30.0 * 0.5 * (3.0 * pi / 180);
  CHECK(l.lift == Approx(L).epsilon(1e-14));
  CHECK(l.pitching_moment == Approx(L * 0.5 * (-0.2 + 0.5)).epsilon(1e-14));
  CHECK(l.effective_downwash == Approx(30.0 * 3.0 * pi / 180).epsilon(1e-14));
}
