#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <vector>

#include <boost/math/quadrature/gauss_kronrod.hpp>

#include "aerosect/model/spring.hpp"

using namespace aerosect;
using std::numbers::pi;

namespace {

// The defining integrals of the (dual-input) describing function by
// Boost.Math's adaptive Gauss-Kronrod (61 points per piece, pieces split
// where B + A sin t crosses a breakpoint): F0 = 1/(2 pi) int f(B + A sin t)
// and N_A = 1/(pi A) int f(B + A sin t) sin t over one period; B = 0 is the
// single-input N(A).
SpringLaw::DualInput quadrature(const SpringLaw& law, double B, double A) {
  std::vector<double> cuts = {0.0, 0.5 * pi, pi, 1.5 * pi, 2.0 * pi};
  for (double xb : law.breakpoints())
    if (std::abs(xb - B) < A) {
      const double t = std::asin((xb - B) / A);
      for (double c : {t, pi - t, t + 2 * pi})
        if (c > 0 && c < 2 * pi) cuts.push_back(c);
    }
  std::sort(cuts.begin(), cuts.end());
  SpringLaw::DualInput d;
  for (std::size_t i = 0; i + 1 < cuts.size(); ++i) {
    const double a = cuts[i], b = cuts[i + 1];
    if (b - a < 1e-15) continue;
    const int r = law.region_of(B + A * std::sin(0.5 * (a + b)));
    using GK = boost::math::quadrature::gauss_kronrod<double, 61>;
    d.mean += GK::integrate([&](double t) { return law.force(B + A * std::sin(t), r); }, a, b, 10, 1e-15);
    d.gain += GK::integrate([&](double t) { return law.force(B + A * std::sin(t), r) * std::sin(t); }, a, b, 10,
                            1e-15);
  }
  d.mean /= 2 * pi;
  d.gain /= pi * A;
  return d;
}

// Laws without the symmetry of the textbook cases: an offset asymmetric
// freeplay, an offset bilinear, a table, a jump law and a polynomial with
// even and odd terms (invented test data).
std::vector<SpringLaw> asymmetric_laws() {
  return {
      SpringLaw::freeplay(80.0, 0.004, 0.012, 0.003),
      SpringLaw::bilinear(20.0, 90.0, 0.01, -0.002),
      SpringLaw::table({-0.02, -0.005, 0.0, 0.01, 0.03}, {-3.0, -0.2, 0.1, 0.6, 2.5}),
      SpringLaw::piecewise_linear({0.0}, {50.0, 50.0}, {-0.4, 0.4}),
      SpringLaw::polynomial({40.0, 7.0, 900.0, -30.0, 2e4}),
  };
}

}  // namespace

TEST_CASE("Freeplay law by regions", "[spring]") {
  // Theory sheet section 3: zero inside |x - x0| <= delta, k (x - x0 -+ delta) outside.
  const SpringLaw s = SpringLaw::freeplay(100.0, 0.01, 0.02, 0.005);
  REQUIRE(s.breakpoints().size() == 2);
  CHECK(s.breakpoints()[0] == Approx(-0.005));
  CHECK(s.breakpoints()[1] == Approx(0.025));
  CHECK(s.region_of(-0.1) == 0);
  CHECK(s.region_of(0.0) == 1);
  CHECK(s.region_of(0.1) == 2);
  CHECK(s.force(0.0, 1) == 0.0);
  CHECK(s.force(0.035, 2) == Approx(100.0 * 0.01));
  CHECK(s.force(-0.015, 0) == Approx(-100.0 * 0.01));
  // The region a state is evaluated in is the stored one, not where x lies:
  // the law extends each region's polynomial beyond its breakpoints.
  CHECK(s.force(0.0, 2) == Approx(-100.0 * 0.025));
  CHECK(s.gap_open_stiffness() == 0.0);
  CHECK(s.gap_closed_stiffness() == 100.0);
  CHECK_FALSE(s.is_linear());
}

TEST_CASE("A zero gap and a one-segment table are linear springs", "[spring]") {
  // Common practice, no source: both laws degenerate to f = k x.
  const SpringLaw z = SpringLaw::freeplay(50.0, 0.0, 0.0, 0.0);
  CHECK(z.is_linear());
  CHECK(z.force(0.3, z.region_of(0.3)) == Approx(15.0));
  const SpringLaw t = SpringLaw::table({-1.0, 1.0}, {-50.0, 50.0});
  CHECK(t.is_linear());
  CHECK(t.nominal_stiffness() == Approx(50.0));
}

TEST_CASE("Bilinear law is continuous", "[spring]") {
  // Common practice, no source.
  const SpringLaw s = SpringLaw::bilinear(20.0, 100.0, 0.1, 0.02);
  for (double xb : s.breakpoints()) {
    const int above = s.region_of(xb), below = above - 1;
    CHECK(s.force(xb, below) == Approx(s.force(xb, above)).margin(1e-12));
  }
  CHECK(s.force(0.02, 1) == Approx(0.0).margin(1e-15));
  CHECK(s.gap_open_stiffness() == 20.0);
  CHECK(s.gap_closed_stiffness() == 100.0);
}

TEST_CASE("Describing functions against Gelb and Vander Velde", "[spring]") {
  // Gelb & Vander Velde 1968 (theory sheet section 3): freeplay
  // N(A)/k = 1 - (2/pi)[asin(d/A) + (d/A) sqrt(1 - (d/A)^2)], 0.3910 at A/d = 2;
  // cubic N(A) = k (1 + 3/4 beta A^2).
  const double k = 80.0, d = 0.01;
  const SpringLaw fp = SpringLaw::freeplay(k, d, d, 0.0);
  CHECK(fp.describing_function(2 * d) / k == Approx(0.3910).epsilon(1e-4));
  for (double r : {1.1, 1.5, 3.0, 10.0}) {
    const double u = 1.0 / r;
    const double exact = 1 - (2 / pi) * (std::asin(u) + u * std::sqrt(1 - u * u));
    CHECK(fp.describing_function(r * d) / k == Approx(exact).epsilon(1e-12));
  }
  CHECK(fp.describing_function(0.5 * d) == Approx(0.0).margin(1e-14));
  const SpringLaw cu = SpringLaw::cubic(k, 3.0);
  for (double A : {0.05, 0.2, 1.0})
    CHECK(cu.describing_function(A) == Approx(k * (1 + 0.75 * 3.0 * A * A)).epsilon(1e-12));
  // A linear law's describing function is its stiffness.
  CHECK(SpringLaw::linear(k).describing_function(0.3) == Approx(k).epsilon(1e-13));
}

TEST_CASE("Describing function in closed form equals the quadrature of its definition", "[spring]") {
  // Reference: the defining integral N(A) = 1/(pi A) int_0^2pi f(A sin t) sin t dt
  // by Boost.Math's adaptive Gauss-Kronrod (quadrature above, B = 0), on
  // asymmetric_laws().
  const std::vector<SpringLaw> laws = asymmetric_laws();
  for (const SpringLaw& law : laws)
    for (double A : {0.001, 0.0045, 0.011, 0.05, 0.3}) {
      const double ref = quadrature(law, 0.0, A).gain;
      INFO(law.kind() << " A = " << A);
      CHECK(law.describing_function(A) == Approx(ref).epsilon(1e-12).margin(1e-12 * std::abs(law.slopes().back())));
    }
}

TEST_CASE("Dual-input describing function of freeplay with bias in closed form", "[spring]") {
  // Gelb & Vander Velde 1968 define the dual-input (bias plus sinusoid)
  // describing function of x = B + A sin t as the mean F0 = 1/(2 pi) int f
  // and the first-harmonic gain N_A = 1/(pi A) int f sin t. Worked by hand
  // here for freeplay (stops lo < hi, stiffness k) as the sum of two ramps,
  // k max(0, x - hi) and -k max(0, lo - x). For the upper ramp with
  // u = (hi - B)/A in (-1, 1) it acts on [t1, pi - t1], t1 = asin u:
  //   mean  (1/2pi) int (A sin t - A u) = (A/pi) [sqrt(1 - u^2) - u (pi/2 - asin u)]
  //   gain  (1/(pi A)) int (A sin t - A u) sin t = (1/pi) [pi/2 - asin u - u sqrt(1 - u^2)]
  // (int sin^2 over [t1, pi - t1] = pi/2 - t1 + u sqrt(1 - u^2), int sin = 2 sqrt(1 - u^2));
  // u <= -1 (always engaged): mean A(-u), gain 1; u >= 1: both 0. The lower
  // ramp is the upper one mirrored (x -> -x) with v = (B - lo)/A: its mean
  // enters with a minus sign, its gain with a plus sign, so
  //   F0 = k A [m(u) - m(v)],  N_A = k [g(u) + g(v)].
  // With B = 0 and a symmetric gap N_A is the single-input result (the test
  // above), which checks the algebra.
  auto m = [](double u) {
    if (u <= -1) return -u;
    if (u >= 1) return 0.0;
    return (std::sqrt(1 - u * u) - u * (0.5 * pi - std::asin(u))) / pi;
  };
  auto g = [](double u) {
    if (u <= -1) return 1.0;
    if (u >= 1) return 0.0;
    return (0.5 * pi - std::asin(u) - u * std::sqrt(1 - u * u)) / pi;
  };
  const double k = 120.0, lo = -0.004, hi = 0.012;  // an offset, asymmetric gap
  const SpringLaw fp = SpringLaw::freeplay(k, 0.008, 0.008, 0.004);
  for (double B : {-0.02, -0.006, -0.001, 0.0, 0.004, 0.0105, 0.013, 0.03})
    for (double A : {0.001, 0.003, 0.008, 0.02, 0.1}) {
      const double u = (hi - B) / A, v = (B - lo) / A;
      const SpringLaw::DualInput d = fp.dual_input_describing_function(B, A);
      INFO("B = " << B << " A = " << A);
      // Round-off of the closed forms (a few ulps of k A).
      CHECK(d.mean == Approx(k * A * (m(u) - m(v))).margin(1e-12 * k * (A + std::abs(B))));
      CHECK(d.gain == Approx(k * (g(u) + g(v))).margin(1e-12 * k));
    }
  // The oscillation inside the gap: no force; wholly against a stop: the
  // stop's line (common practice, no source: a linear piece's harmonics).
  CHECK(fp.dual_input_describing_function(0.004, 0.003).mean == Approx(0.0).margin(1e-15));
  CHECK(fp.dual_input_describing_function(0.004, 0.003).gain == Approx(0.0).margin(1e-12));
  CHECK(fp.dual_input_describing_function(0.02, 0.005).mean == Approx(k * (0.02 - hi)).epsilon(1e-13));
  CHECK(fp.dual_input_describing_function(0.02, 0.005).gain == Approx(k).epsilon(1e-13));
}

TEST_CASE("Dual-input describing function equals the quadrature of its definition", "[spring]") {
  // Reference: the defining integrals of F0 and N_A by Boost.Math's adaptive
  // Gauss-Kronrod (quadrature above), on asymmetric_laws() and a cubic; with
  // B = 0 the gain is describing_function(A) bit for bit.
  // A table of 12 knots too: with 10 breakpoints inside the oscillation a
  // period has up to 5 + 3 x 10 cuts, more than the closed form keeps
  // without a heap buffer (16).
  std::vector<SpringLaw> laws = asymmetric_laws();
  laws.push_back(SpringLaw::cubic(60.0, 40.0));
  std::vector<double> xs, fs;
  for (int q = 0; q < 12; ++q) {
    xs.push_back(-0.03 + 0.006 * q);
    fs.push_back(80.0 * xs.back() + 400.0 * xs.back() * std::abs(xs.back()) + (q % 2 == 0 ? 0.01 : -0.01));
  }
  laws.push_back(SpringLaw::table(xs, fs));
  for (const SpringLaw& law : laws) {
    for (double B : {-0.012, -0.003, 0.0, 0.002, 0.009, 0.05})
      for (double A : {0.001, 0.0045, 0.011, 0.05, 0.3}) {
        const SpringLaw::DualInput ref = quadrature(law, B, A);
        const SpringLaw::DualInput d = law.dual_input_describing_function(B, A);
        INFO(law.kind() << " B = " << B << " A = " << A);
        // Scale of the force over the oscillation, for the margin of a near-zero value.
        const double fs = 1e-12 * (std::abs(law.slopes().back()) * (std::abs(B) + A) + std::abs(ref.mean));
        CHECK(d.mean == Approx(ref.mean).epsilon(1e-11).margin(fs + 1e-11 * std::abs(law.intercepts().back())));
        CHECK(d.gain == Approx(ref.gain).epsilon(1e-11).margin(1e-11 * std::abs(law.slopes().back())));
      }
    for (double A : {0.0045, 0.05}) CHECK(law.dual_input_describing_function(0.0, A).gain == law.describing_function(A));
  }
}
