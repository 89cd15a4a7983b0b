#pragma once
// Continuous vertical turbulence (MIL-F-8785C, MIL-HDBK-1797, FAR/CS-25
// Appendix G): spectra, seeded gust records and the standard's defaults.
//
// Spectra. Omega is the spatial frequency (rad/m), L = L_w the vertical scale
// length in the MIL-F-8785C convention (the one the formulas below are written
// in; MIL-HDBK-1797 writes the same spectra with 2 L_w, i.e. its L_w is half
// of this one), sigma = sigma_w the rms vertical gust velocity (m/s). The
// spectra are one-sided in Omega over [0, inf): integral_0^inf Phi dOmega =
// sigma^2. Units m^2/s^2 per rad/m.
//   Dryden:     Phi(Omega) = sigma^2 (L/pi) (1 + 3 (L Omega)^2) / (1 + (L Omega)^2)^2
//   von Karman: Phi(Omega) = sigma^2 (L/pi) [1 + (8/3)(1.339 L Omega)^2]
//                                         / [1 + (1.339 L Omega)^2]^(11/6)
// (1.339 rounds Gamma(1/3)/(sqrt(pi) Gamma(5/6)) = 1.338985; with the rounded
// value the von Karman formula integrates to 0.999989 sigma^2.)
// Frozen turbulence crossed at the true airspeed V (m/s) gives the temporal
// one-sided PSD of the record, per rad/s: Phi_t(omega) = Phi(omega / V) / V.
//
// Shaping filters, with T = L / V (s):
//   Dryden (exact):  H(s) = sigma sqrt(L/(pi V)) (1 + sqrt(3) T s) / (1 + T s)^2
//   von Karman (no rational filter exists; our own 4th-order fit):
//     H(s) = sigma sqrt(L/(pi V)) K (1 + T s/z1)(1 + T s/z2)(1 + T s/z3)
//                                   / [(1 + T s/p1)(1 + T s/p2)(1 + T s/p3)(1 + T s/p4)]
//     z = 0.194967, 14.2280, 203.911;  p = 0.215735, 1.48644, 22.1464, 321.539;
//     K^2 = 1.01541792729788 (makes the filter's variance exactly sigma^2).
//   The poles and zeros minimise the largest relative error of |H|^2 against
//   the exact spectrum over 0 <= L Omega <= 1000 (minimax in log|H|^2, with
//   the variance held exact). Measured error: -4.7 % .. +5.0 % over that band
//   (+1.5 % at Omega = 0). Above the band a rational filter decays as
//   Omega^-2 against the spectrum's Omega^-5/3: -30 % at L Omega = 3000,
//   -53 % at 10^4. The customary 3rd-order filters are worse where a typical
//   section responds (L Omega ~ 10..1000): our best 3rd-order fit is 11 % off
//   over 0..1000, and a 3rd-order fit that stops at 100 is -55 % off at 1000.
//
// Noise convention. n(t) is white noise of two-sided intensity q:
// E[n(t) n(t + tau)] = q delta(tau). The filter output's one-sided PSD per
// rad/s is (q / pi) |H(i omega)|^2, its variance (q / pi) integral_0^inf
// |H|^2 domega = q sigma^2 / pi. We drive H (with its 1/pi) by q = pi, so that
// the output PSD is |H(i omega)|^2 = Phi_t(omega) and the variance sigma^2.
//
// Discretisation (exact for white noise, not a zero-order hold). The filter
// is realised as a cascade of first-order sections, x' = A x + B n,
// w = C x (strictly proper: no direct noise term). Over a step dt the
// continuous-time process is reproduced exactly at the sample times by
//   x_{k+1} = A_d x_k + v_k,  A_d = exp(A dt),
//   v_k ~ N(0, Q_d),  Q_d = integral_0^dt exp(A s) q B B^T exp(A^T s) ds,
// with A_d and Q_d from one matrix exponential (Van Loan 1978) when
// max|eig(A)| dt <= 1, else from Q_d = P - A_d P A_d^T with P the stationary
// covariance (A P + P A^T + q B B^T = 0), which avoids Van Loan's growing
// exp(-A dt) block. (Holding the noise constant over a step, with samples of
// variance q/dt, is not white: for Dryden it lowers the variance by
// ~0.19 (dt/T)^2 relative, 0.19 % at dt = T/10 and 4.5 % at T/2, and reshapes
// the PSD towards the Nyquist frequency.)
// The first state x_0 is drawn from the stationary covariance P_d, the
// solution of the discrete Lyapunov equation P_d = A_d P_d A_d^T + Q_d (equal
// to P), so the record has no start transient: every sample has variance
// sigma^2 and the autocorrelation of the samples is R(k dt) exactly; the
// sampled record's PSD is Phi_t folded about the Nyquist frequency pi/dt.
//
// Reproducibility. The noise is std::mt19937_64 (its output sequence for a
// seed is fixed by the C++ standard, [rand.eng.mers], [rand.predef]) turned
// into normal deviates by our own code, Marsaglia's polar form of the
// Box-Muller transform: uniforms from the top 53 bits by exact integer
// arithmetic, and a logarithm of our own built from IEEE-754 basic operations
// (+ - * / sqrt and std::fma, all correctly rounded, so the same on every
// conforming platform), because std::log, std::sin, std::cos and the standard
// distributions differ between libraries. Every multiply-add in the noise and
// in the filter recursion is an explicit std::fma, so the compiler's
// contraction choices cannot change a bit. Hence standard_normal_sequence()
// is bit-identical on every IEEE-754 binary64 platform. The filter matrices
// A_d, Q_d and their factors come from Eigen (matrix exponential, LU, LDLT);
// the record is bit-identical wherever Eigen runs the same operation sequence
// (same Eigen version and SIMD path): GCC 12 and Clang at -O2 on x86-64 give
// the same bits. A build that lets Eigen use other SIMD widths or fused
// multiply-adds (-march=native, AArch64) can differ in the last bits of the
// matrices and so of the record (up to ~1e-12 relative seen with
// -march=haswell: statistically nothing, but not the same bits).

#include <cstddef>
#include <cstdint>
#include <vector>

namespace aerosect {

enum class TurbulenceModel { kDryden, kVonKarman };
const char* to_string(TurbulenceModel m);

struct TurbulenceSpec {
  TurbulenceModel model = TurbulenceModel::kDryden;
  double intensity = 0;     // sigma_w, m/s (>= 0)
  double scale_length = 0;  // L_w, m (> 0), MIL-F-8785C convention (see above)
  double airspeed = 0;      // V, m/s true airspeed (> 0)
  std::uint64_t seed = 0;
};

// Band of L Omega over which the von Karman filter was fitted, and the
// largest relative error of its PSD against the exact spectrum there
// (measured 4.97 %; the unit tests check it).
inline constexpr double kVonKarmanFitBand = 1000.0;
inline constexpr double kVonKarmanFitError = 0.05;

// Vertical gust record w(t_k) (m/s, positive up), t_k = k dt (dt > 0, s),
// k = 0..n-1, started in the stationary state (see above).
std::vector<double> turbulence_record(const TurbulenceSpec& s, double dt, std::size_t n);

// One-sided spatial PSD Phi(Omega), m^2/s^2 per rad/m (exact formulas above).
double turbulence_psd_spatial(TurbulenceModel m, double sigma, double L, double Omega);
// One-sided temporal PSD Phi_t(omega) = Phi(omega/V)/V, m^2/s^2 per rad/s.
double turbulence_psd_temporal(TurbulenceModel m, double sigma, double L, double V,
                               double omega);
// One-sided PSD per rad/s that the shaping filter realises, (q/pi)|H(i omega)|^2
// with q = pi, evaluated from the state-space matrices the record uses
// (C (i omega I - A)^-1 B). Equals Phi_t for Dryden; the fit for von Karman.
double turbulence_filter_psd(const TurbulenceSpec& s, double omega);

// The record's noise source: n standard normal deviates for a seed,
// bit-identical on every IEEE-754 platform (see above).
std::vector<double> standard_normal_sequence(std::uint64_t seed, std::size_t n);

// MIL-F-8785C defaults (h in m above ground; 1 ft = 0.3048 m).
//   Scale length L_w: h below 1000 ft; 1750 ft (Dryden) or 2500 ft
//   (von Karman) above 2000 ft; linear in h in between (the standard
//   interpolates between the low-altitude value at 1000 ft and the
//   medium/high-altitude value at 2000 ft).
//   Intensity sigma_w: 0.1 W20 below 1000 ft, W20 the wind speed at 20 ft
//   (15 kt light, 30 kt moderate, 45 kt severe); above 2000 ft the standard's
//   chart of sigma against altitude for the probabilities of exceedance
//   10^-2 (light), 10^-3 (moderate), 10^-5 (severe), interpolated linearly
//   between its tabulated altitudes (values recalled from memory, see the
//   source); linear in h between 1000 and 2000 ft. Up to 80 000 ft.
enum class TurbulenceSeverity { kLight, kModerate, kSevere };
const char* to_string(TurbulenceSeverity s);
double mil8785c_scale_length(TurbulenceModel m, double altitude_m);  // L_w, m
double mil8785c_intensity(TurbulenceSeverity s, double altitude_m);  // sigma_w, m/s

}  // namespace aerosect
