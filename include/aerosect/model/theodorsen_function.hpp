#pragma once
// Frequency-domain transfer functions of thin-aerofoil unsteady aerodynamics.
//
// Convention: harmonic motion q(t) = Re(q_hat e^{i omega t}) (the e^{+i omega t}
// convention of Theodorsen 1935, NACA Report 496), reduced frequency
// k = omega b / U >= 0 with b the semichord and U the airspeed.
//
// Theodorsen's function (lift deficiency), the ratio of the effective
// (lagged) downwash w_c to the 3/4-chord downwash Q of aerodynamics.hpp:
//   C(k) = H1^(2)(k) / (H1^(2)(k) + i H0^(2)(k))
// with H_n^(2) = J_n - i Y_n the Hankel functions of the second kind
// (boost::math::cyl_hankel_2). C(0) = 1, C(k) -> 1/2 as k -> infinity,
// Im C(k) < 0 for k > 0.
//
// Sears' function (sinusoidal vertical gust, gust referenced to midchord):
//   S(k) = [J0(k) - i J1(k)] C(k) + i J1(k).
//
// Frequency response of a Wagner exponential approximation
//   phi(s) = 1 - sum_i psi_i exp(-eps_i s)   (s = U t / b, semichords)
// realised by the lag states of aerodynamics.hpp,
//   y_i' = (U/b) eps_i (Q - y_i),   w_c = phi(0) Q + sum_i psi_i y_i:
// with Q, y_i ~ e^{i omega t}, y_i = eps_i / (i k + eps_i) Q, so
//   C_approx(k) = phi(0) + sum_i psi_i eps_i / (i k + eps_i),
// C_approx(0) = phi(0) + sum_i psi_i = 1 and C_approx(inf) = phi(0).
// The complex-argument form evaluates the same rational function at the
// nondimensional Laplace variable p_bar = p b / U (p_bar = i k for harmonic
// motion); with it the frequency-domain equations are exactly those of the
// time-domain state-space model.

#include <complex>

#include "aerosect/model/aerodynamics.hpp"

namespace aerosect {

// Exact C(k). k must be >= 0 (AEROSECT_CHECK). For k < 1e-18 the limit 1 is
// returned: there |C(k) - 1| = O(k |ln k|) is below double rounding.
std::complex<double> theodorsen_function(double k);

// Exact S(k), k >= 0; S(0) = 1, and |S(k)| -> 0 as k -> infinity.
std::complex<double> sears_function(double k);

// C_approx(k) of a Wagner approximation, real k (any sign: C(-k) = conj C(k)).
std::complex<double> wagner_rational(const WagnerApproximation& w, double k);
// The same rational function at a complex p_bar = p b / U:
//   phi(0) + sum_i psi_i eps_i / (p_bar + eps_i).
std::complex<double> wagner_rational_laplace(const WagnerApproximation& w,
                                             std::complex<double> p_bar);

}  // namespace aerosect
