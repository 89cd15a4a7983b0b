#include <catch2/catch.hpp>

#include <cmath>
#include <numbers>
#include <vector>

#include "aerosect/analysis/lco.hpp"

using namespace aerosect;
using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;

namespace {
constexpr double kPi = std::numbers::pi;
constexpr int kN = 128;  // samples per period, the sweep's default
}  // namespace

TEST_CASE("Cycle content of a sampled sinusoid", "[lco]") {
  // x = c + A cos(2 pi t/T + phi): mean c, RMS about the mean A/sqrt(2), RMS
  // about zero sqrt(c^2 + A^2/2), first harmonic A, no others (definition of
  // the RMS of a sinusoid, common practice, no source; the N-point DFT of a
  // sampled cosine of degree 1 < N/2 is exact: orthogonality of the discrete
  // exponentials). Tolerance: round-off of 128-term sums.
  const double c = 0.3, A = 2.5, phi = 0.7;
  std::vector<double> x(kN);
  for (int n = 0; n < kN; ++n) x[n] = c + A * std::cos(2 * kPi * n / kN + phi);
  const DofHarmonics h = harmonic_content(x, 5);
  CHECK_THAT(h.mean, WithinRel(c, 1e-13));
  CHECK_THAT(h.rms_about_mean, WithinRel(A / std::sqrt(2.0), 1e-13));
  CHECK_THAT(h.rms, WithinRel(std::sqrt(c * c + A * A / 2), 1e-13));
  REQUIRE(h.harmonics.size() == 5);
  CHECK_THAT(h.harmonics[0], WithinRel(A, 1e-13));
  for (int k = 1; k < 5; ++k) CHECK_THAT(h.harmonics[k], WithinAbs(0.0, 1e-13 * A));
  CHECK_THAT(h.thd, WithinAbs(0.0, 1e-6));  // sqrt of a round-off difference: ~sqrt(1e-16)
}

TEST_CASE("Cycle content of a sampled square wave", "[lco]") {
  // x(t) = sign(sin(2 pi t/T)), amplitude 1. Textbook Fourier series
  // (Kreyszig, Advanced Engineering Mathematics, ch. 11, the rectangular
  // wave; recalled from memory): x = (4/pi) sum_{k odd} sin(k w t)/k, so
  // a_k = 4/(pi k) for odd k, 0 for even k, and THD = sqrt(pi^2/8 - 1).
  // Sampled at t_n = (n + 1/2) T/N (no sample on a jump), the N-point DFT is
  // that of a rectangular sequence (Dirichlet kernel; Oppenheim & Schafer,
  // Discrete-Time Signal Processing, DFT of a rectangular pulse; recalled
  // from memory): a_k = 4 / (N sin(pi k/N)) for odd k, exactly. Checked:
  // the exact sampled values to round-off, and the continuous series within
  // the sampling factor (pi k/N)/sin(pi k/N) - 1 <= (pi k/N)^2/6 (x 1.01).
  std::vector<double> x(kN);
  for (int n = 0; n < kN; ++n) x[n] = std::sin(2 * kPi * (n + 0.5) / kN) > 0 ? 1.0 : -1.0;
  const DofHarmonics h = harmonic_content(x, 5);
  CHECK_THAT(h.mean, WithinAbs(0.0, 1e-15));
  CHECK_THAT(h.rms, WithinRel(1.0, 1e-15));
  CHECK_THAT(h.rms_about_mean, WithinRel(1.0, 1e-15));
  for (int k = 1; k <= 5; ++k) {
    const double a = h.harmonics[k - 1];
    if (k % 2 == 0) {
      CHECK_THAT(a, WithinAbs(0.0, 1e-14));
      continue;
    }
    CHECK_THAT(a, WithinRel(4.0 / (kN * std::sin(kPi * k / kN)), 1e-13));
    const double series = 4.0 / (kPi * k), bound = 1.01 * std::pow(kPi * k / kN, 2) / 6;
    CHECK(std::abs(a / series - 1) <= bound);
  }
  // THD: sampled value from Parseval with rms_about_mean = 1 exactly; the
  // continuous 0.48343 within the first harmonic's sampling factor (1e-4
  // relative on a_1 moves THD by ~2.6e-4; allow 1e-3).
  const double a1 = 4.0 / (kN * std::sin(kPi / kN));
  CHECK_THAT(h.thd, WithinRel(std::sqrt(2.0 / (a1 * a1) - 1.0), 1e-12));
  CHECK_THAT(h.thd, WithinAbs(std::sqrt(kPi * kPi / 8 - 1), 1e-3));
}

TEST_CASE("Cycle content of a sampled triangle wave", "[lco]") {
  // x(t) = |theta|, theta = 2 pi t/T - pi in [-pi, pi). Textbook Fourier
  // series (Kreyszig, Advanced Engineering Mathematics, ch. 11, f(x) = |x|;
  // recalled from memory): |theta| = pi/2 - (4/pi) sum_{k odd} cos(k theta)/k^2,
  // so mean pi/2, a_k = 4/(pi k^2) for odd k, THD = sqrt(pi^4/96 - 1).
  // Sampled at N points, the DFT bin k collects the aliases N m +- k of the
  // series (sampling of a Fourier series, Oppenheim & Schafer; all cosines
  // of an even wave sampled symmetrically add with one sign), so
  // a_k = sum_m (a_{mN-k} + a_{mN+k}) over m >= 0, summed here to M = 2e5
  // (tail below 8/(pi N^2 M) = 7.8e-10 absolute). The mean has no alias (the
  // series has no even harmonics): exact.
  std::vector<double> x(kN);
  for (int n = 0; n < kN; ++n) x[n] = std::abs(2 * kPi * n / kN - kPi);
  const DofHarmonics h = harmonic_content(x, 5);
  CHECK_THAT(h.mean, WithinRel(kPi / 2, 1e-14));
  auto series = [](long k) { return k % 2 ? 4.0 / (kPi * double(k) * double(k)) : 0.0; };
  for (int k = 1; k <= 5; ++k) {
    double aliased = series(k);
    for (long m = 1; m <= 200000; ++m) aliased += series(m * kN - k) + series(m * kN + k);
    if (k % 2 == 0) {
      CHECK_THAT(h.harmonics[k - 1], WithinAbs(0.0, 1e-13));
    } else {
      CHECK_THAT(h.harmonics[k - 1], WithinAbs(aliased, 1e-9));
      // and the continuous series within the aliasing, k^2 pi^2 / (3 N^2) relative
      CHECK(std::abs(h.harmonics[k - 1] / series(k) - 1) <= 1.01 * k * k * kPi * kPi / (3.0 * kN * kN));
    }
  }
  // THD of the continuous wave within the first harmonic's aliasing (2e-4
  // relative on a_1; the sampled RMS is the trapezoid rule's, 1e-5 off).
  CHECK_THAT(h.thd, WithinAbs(std::sqrt(std::pow(kPi, 4) / 96 - 1), 1e-3));
}

TEST_CASE("Cycle content rejects too few samples for the harmonics asked", "[lco]") {
  // Internal invariant: K < N/2 (common practice, no source: the Nyquist limit).
  std::vector<double> x(8, 1.0);
  CHECK_THROWS(harmonic_content(x, 4));
  CHECK_NOTHROW(harmonic_content(x, 3));
}
