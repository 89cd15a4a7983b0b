#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <complex>
#include <vector>

#include <Eigen/Eigenvalues>

#include "aerosect/analysis/modes.hpp"
#include "aerosect/analysis/pk.hpp"
#include "aerosect/error.hpp"
#include "aerosect/model/system.hpp"
#include "aerosect/model/theodorsen_function.hpp"

using namespace aerosect;

namespace {

// Reference scales b = 1 m, omega_alpha = 1 rad/s, rho = 1.225 kg/m^3 (the
// defaults of ReferenceScales), so airspeeds are U* and frequencies
// omega / omega_alpha.
PkProblem nondimensional_problem(double mu, double a, double x_alpha, double r_alpha,
                                 double omega_bar, PkAerodynamics aero) {
  NondimensionalParameters n;
  n.mass_ratio = mu;
  n.elastic_axis = a;
  n.cg_offset = x_alpha;
  n.radius_of_gyration = r_alpha;
  n.frequency_ratio = omega_bar;
  SectionProperties s;
  FlowConditions f;
  from_nondimensional(n, s, f);
  PkProblem p;
  p.section = s;
  p.density = f.density;
  p.aerodynamics = aero;
  return p;
}

// Nonlinear-aerofoil benchmark of Lee, Price & Wong (Prog. Aerospace Sci. 35,
// 1999): mu = 100, a_h = -0.5, x_alpha = 0.25, r_alpha = 0.5, omega_bar = 0.2.
PkProblem benchmark(PkAerodynamics aero) {
  return nondimensional_problem(100.0, -0.5, 0.25, 0.5, 0.2, aero);
}

// Hodges & Pierce, Introduction to Structural Dynamics and Aeroelasticity,
// ch. 5 (as transcribed in the theory sheet): a = -1/5, x_theta = 0.1,
// mu = 20, r^2 = 6/25, sigma = omega_h / omega_theta = 2/5, no damping.
PkProblem textbook(PkAerodynamics aero) {
  return nondimensional_problem(20.0, -0.2, 0.1, std::sqrt(6.0 / 25.0), 0.4, aero);
}

std::vector<double> speeds(double step, double last) {
  std::vector<double> v;
  for (int i = 1; i * step <= last + 1e-12; ++i) v.push_back(i * step);
  return v;
}

Crossing flutter_of(const PkProblem& p, double last_speed, double tol = 1e-10) {
  const RootSweep sw = pk_sweep(p, speeds(0.05, last_speed));
  for (const auto& at_speed : sw.roots)
    for (const Root& r : at_speed) REQUIRE(r.converged);
  return pk_flutter(p, sw, tol);
}

}  // namespace

TEST_CASE("Theodorsen function against check values", "[pk][theodorsen]") {
  // Theory sheet section 2 (Theodorsen 1935, NACA Report 496), to the printed
  // digits (half a unit of the last digit).
  const struct { double k, re, im; } sheet[] = {
      {0.1, 0.8319, -0.1723}, {0.5, 0.5979, -0.1507}, {1.0, 0.5394, -0.1003}};
  for (const auto& v : sheet) {
    const std::complex<double> c = theodorsen_function(v.k);
    CHECK(c.real() == Approx(v.re).margin(5e-5));
    CHECK(c.imag() == Approx(v.im).margin(5e-5));
  }
  // Same formula evaluated independently with mpmath 1.3.0 (hankel2) here,
  // 12 significant digits: C(0.5) = 0.59793606425 - 0.150709503163i,
  // C(10) = 0.500617885389 - 0.0124466215539i.
  CHECK(theodorsen_function(0.5).real() == Approx(0.59793606425).margin(1e-10));
  CHECK(theodorsen_function(0.5).imag() == Approx(-0.150709503163).margin(1e-10));
  CHECK(theodorsen_function(10.0).real() == Approx(0.500617885389).margin(1e-10));
  CHECK(theodorsen_function(10.0).imag() == Approx(-0.0124466215539).margin(1e-10));
}

TEST_CASE("Theodorsen function limits and domain", "[pk][theodorsen]") {
  // C(0) = 1 and C(k) -> 1/2 as k -> infinity (Theodorsen 1935; common practice).
  CHECK(theodorsen_function(0.0) == std::complex<double>(1.0, 0.0));
  CHECK(theodorsen_function(1e-20) == std::complex<double>(1.0, 0.0));
  CHECK(std::abs(theodorsen_function(1e-6) - 1.0) < 1e-4);
  CHECK(std::abs(theodorsen_function(1e-12) - 1.0) < 1e-10);
  CHECK(std::abs(theodorsen_function(1e3) - 0.5) < 1e-3);
  CHECK(std::abs(theodorsen_function(1e6) - 0.5) < 1e-6);
  // Lag: Im C(k) < 0 for k > 0 (common practice, no source).
  for (double k : {1e-6, 1e-3, 0.05, 0.3, 2.0, 50.0}) CHECK(theodorsen_function(k).imag() < 0);
  CHECK_THROWS_AS(theodorsen_function(-0.1), InternalError);
  CHECK_THROWS_AS(sears_function(-0.1), InternalError);
}

TEST_CASE("Sears function against check values", "[pk][sears]") {
  // Theory sheet section 2, to the printed digits; S(0) = 1 (common practice).
  const std::complex<double> s1 = sears_function(0.1), s5 = sears_function(0.5);
  CHECK(s1.real() == Approx(0.8212).margin(5e-5));
  CHECK(s1.imag() == Approx(-0.1635).margin(5e-5));
  CHECK(s5.real() == Approx(0.5246).margin(5e-5));
  CHECK(s5.imag() == Approx(-0.0440).margin(5e-5));
  CHECK(sears_function(0.0) == std::complex<double>(1.0, 0.0));
  // Decays to zero at high frequency (common practice, no source).
  CHECK(std::abs(sears_function(1e6)) < 1e-3);
}

TEST_CASE("Rational C(k) of R.T. Jones' Wagner approximation", "[pk][wagner]") {
  const WagnerApproximation jones = WagnerApproximation::jones();
  // k -> 0 gives 1 (steady flow); k -> infinity gives phi(0) = 0.5 (theory
  // sheet section 2: phi(0) = 1 - 0.165 - 0.335).
  CHECK(std::abs(wagner_rational(jones, 0.0) - 1.0) < 1e-15);
  CHECK(std::abs(wagner_rational(jones, 1e9) - 0.5) < 1e-9);
  // Conjugate symmetry C(-k) = conj C(k) (real impulse response; common practice).
  CHECK(std::abs(wagner_rational(jones, -0.3) - std::conj(wagner_rational(jones, 0.3))) < 1e-15);
  // Within a few percent of the exact function over k = 0.01 .. 2
  // (measured here: max |C_J - C| / |C| = 0.0234 at k = 0.56).
  double worst = 0;
  for (int i = 0; i <= 2000; ++i) {
    const double k = 0.01 * std::pow(200.0, i / 2000.0);
    const std::complex<double> exact = theodorsen_function(k);
    worst = std::max(worst, std::abs(wagner_rational(jones, k) - exact) / std::abs(exact));
  }
  CHECK(worst < 0.025);
  CHECK(worst > 0.02);  // the approximation is not exact: the test is sensitive
}

TEST_CASE("p-k flutter, exact Theodorsen: textbook section", "[pk]") {
  // Hodges & Pierce ch. 5 as transcribed in the theory sheet; exact-Theodorsen
  // values "computed with scipy" there: U/(b omega_theta) = 2.1839 at
  // omega/omega_theta = 0.6490 (printed digits: half a unit of the last).
  const Crossing c = flutter_of(textbook(PkAerodynamics::kExactTheodorsen), 2.6);
  REQUIRE(c.found);
  CHECK(c.speed == Approx(2.1839).margin(5e-5));
  CHECK(c.frequency == Approx(0.6490).margin(5e-5));
  CHECK(c.reduced_frequency == Approx(c.frequency / c.speed).epsilon(1e-10));
  // The pitch-dominated (higher in-vacuo) branch is the one that goes
  // unstable (recalled from memory of the book's V-g plots).
  CHECK(c.mode == 1);
}

TEST_CASE("p-k flutter, exact Theodorsen: nonlinear-aerofoil benchmark", "[pk]") {
  // Lee, Price & Wong 1999 section; exact-Theodorsen U* = 6.2566 (theory sheet
  // section 4, "computed with scipy"), printed digits.
  const Crossing c = flutter_of(benchmark(PkAerodynamics::kExactTheodorsen), 8.0);
  REQUIRE(c.found);
  CHECK(c.speed == Approx(6.2566).margin(5e-5));
  CHECK(c.mode == 1);
}

TEST_CASE("p-k flutter, Jones rational C(k)", "[pk][wagner]") {
  // Lee, Price & Wong 1999: linear flutter with Jones' Wagner approximation
  // U*_L = 6.2851.
  const Crossing lpw = flutter_of(benchmark(PkAerodynamics::kWagnerApproximation), 8.0);
  REQUIRE(lpw.found);
  CHECK(lpw.speed == Approx(6.2851).epsilon(1e-4));
  // Hodges & Pierce ch. 5 (as transcribed): Jones-Wagner flutter 2.170 at
  // 0.6443 omega_theta (printed digits).
  const Crossing hp = flutter_of(textbook(PkAerodynamics::kWagnerApproximation), 2.6);
  REQUIRE(hp.found);
  CHECK(hp.speed == Approx(2.170).margin(5e-4));
  CHECK(hp.frequency == Approx(0.6443).margin(5e-5));
}

TEST_CASE("p-k with the Wagner rational C(k) reproduces the state-space flutter point",
          "[pk][wagner]") {
  // On the flutter boundary p = i omega, so the p-k determinant with the
  // rational C_J(k) is exactly the characteristic equation of the time-domain
  // model with the same lag states (common practice, no source): the state
  // matrix must have a neutral root at the p-k flutter speed and frequency.
  for (const PkProblem& p : {benchmark(PkAerodynamics::kWagnerApproximation),
                             textbook(PkAerodynamics::kWagnerApproximation)}) {
    const Crossing c = flutter_of(p, 8.0, 1e-13);
    REQUIRE(c.found);
    auto rightmost = [&](double U) {
      ModelDescription d;
      d.section = p.section;
      d.flow = {p.density, U};
      d.springs[0] = SpringLaw::linear(p.section.plunge_stiffness);
      d.springs[1] = SpringLaw::linear(p.section.pitch_stiffness);
      const AeroelasticModel model(d);
      Eigen::EigenSolver<Eigen::MatrixXd> es(model.nominal_state_matrix());
      std::complex<double> best(-1e300, 0);
      for (Eigen::Index i = 0; i < es.eigenvalues().size(); ++i)
        if (es.eigenvalues()(i).real() > best.real()) best = es.eigenvalues()(i);
      return best;
    };
    const std::complex<double> at = rightmost(c.speed);
    CHECK(std::abs(at.real()) < 1e-10 * c.frequency);
    CHECK(std::abs(at.imag()) == Approx(c.frequency).epsilon(1e-9));
    CHECK(rightmost(c.speed * (1 - 1e-6)).real() < 0);
    CHECK(rightmost(c.speed * (1 + 1e-6)).real() > 0);
  }
}

TEST_CASE("A very stiff flap reproduces the 2-DOF p-k flutter speed", "[pk][flap]") {
  // Theory sheet self-check: K_beta -> infinity reproduces the 2-DOF results.
  // Hinge at c = 0.6, r_beta = 0.05, omega_beta / omega_alpha = 1000 (measured
  // here: relative difference 1.7e-7 for the benchmark).
  for (PkAerodynamics aero :
       {PkAerodynamics::kExactTheodorsen, PkAerodynamics::kWagnerApproximation}) {
    for (bool use_textbook : {false, true}) {
      const PkProblem two = use_textbook ? textbook(aero) : benchmark(aero);
      NondimensionalParameters n = to_nondimensional(two.section, {two.density, 0.0});
      n.dof = 3;
      n.hinge = 0.6;
      n.flap_radius_of_gyration = 0.05;
      n.flap_frequency_ratio = 1000;
      PkProblem three = two;
      FlowConditions f;
      from_nondimensional(n, three.section, f);
      const double last = use_textbook ? 2.6 : 8.0;
      const Crossing c2 = flutter_of(two, last), c3 = flutter_of(three, last);
      REQUIRE(c2.found);
      REQUIRE(c3.found);
      CHECK(c3.speed == Approx(c2.speed).epsilon(1e-6));
      CHECK(c3.frequency == Approx(c2.frequency).epsilon(1e-6));
      CHECK(c3.shape.size() == 3);
      CHECK(std::abs(c3.shape(kFlap)) < 1e-4);  // the flap barely moves
    }
  }
}

TEST_CASE("Spring stiffness argument: dynamic similarity", "[pk]") {
  // Dimensional analysis (common practice, no source): scaling every spring
  // by 4 doubles every structural frequency at fixed mu, so the flutter speed
  // and frequency double and the reduced frequency is unchanged.
  const PkProblem p = benchmark(PkAerodynamics::kExactTheodorsen);
  PkProblem q = p;
  q.spring_stiffness = 4.0 * nominal_spring_stiffness(p.section);
  const Crossing c1 = flutter_of(p, 8.0), c2 = flutter_of(q, 16.0);
  REQUIRE(c1.found);
  REQUIRE(c2.found);
  CHECK(c2.speed == Approx(2 * c1.speed).epsilon(1e-8));
  CHECK(c2.frequency == Approx(2 * c1.frequency).epsilon(1e-8));
  CHECK(c2.reduced_frequency == Approx(c1.reduced_frequency).epsilon(1e-8));
}

TEST_CASE("p-k roots at and near zero airspeed", "[pk]") {
  // In vacuum (rho = 0) the roots are +i omega of the in-vacuo modes
  // (common practice, no source).
  PkProblem vac = textbook(PkAerodynamics::kExactTheodorsen);
  vac.density = 0;
  const auto modes = in_vacuo_modes(vac.section);
  const std::vector<Root> r0 = pk_roots(vac, 0.0);
  REQUIRE(r0.size() == 2);
  for (int i = 0; i < 2; ++i) {
    CHECK(r0[i].converged);
    CHECK(std::abs(r0[i].eigenvalue.real()) < 1e-12);
    CHECK(r0[i].eigenvalue.imag() == Approx(modes[i].frequency).epsilon(1e-12));
    CHECK(r0[i].damping_ratio == Approx(0).margin(1e-12));
  }
  // In still air the apparent mass lowers the frequencies, with no damping;
  // k = omega b / U is infinite there.
  const PkProblem air = textbook(PkAerodynamics::kExactTheodorsen);
  const std::vector<Root> still = pk_roots(air, 0.0);
  for (int i = 0; i < 2; ++i) {
    CHECK(still[i].eigenvalue.imag() < modes[i].frequency);
    CHECK(std::abs(still[i].eigenvalue.real()) < 1e-12);
    CHECK(std::isinf(still[i].reduced_frequency));
  }
  // A small positive speed: large k, roots continuous with still air, and
  // positive aerodynamic damping (common practice, no source).
  const std::vector<Root> slow = pk_roots(air, 1e-3, still);
  for (int i = 0; i < 2; ++i) {
    CHECK(slow[i].converged);
    CHECK(slow[i].reduced_frequency > 100);
    CHECK(std::abs(slow[i].eigenvalue - still[i].eigenvalue) < 1e-3 * std::abs(still[i].eigenvalue));
    CHECK(slow[i].damping_ratio > 0);
  }
  // Damping ratio definition zeta = -Re(p) / |p|.
  for (const Root& r : slow)
    CHECK(r.damping_ratio == Approx(-r.eigenvalue.real() / std::abs(r.eigenvalue)).epsilon(1e-14));
}

TEST_CASE("One-step roots from still air agree with the swept roots", "[pk]") {
  // Internal consistency: far from any mode interaction a single continuation
  // step lands on the same roots as the stepped sweep.
  const PkProblem p = benchmark(PkAerodynamics::kExactTheodorsen);
  const RootSweep sw = pk_sweep(p, speeds(0.25, 3.0));
  const std::vector<Root> direct = pk_roots(p, 3.0);
  for (int i = 0; i < 2; ++i) {
    CHECK(std::abs(direct[i].eigenvalue - sw.roots.back()[i].eigenvalue) < 1e-10);
    CHECK(direct[i].reduced_frequency ==
          Approx(std::abs(direct[i].eigenvalue.imag()) * p.section.semichord / 3.0).epsilon(1e-11));
  }
  CHECK_THROWS_AS(pk_sweep(p, {1.0, 0.5}), InternalError);
}
