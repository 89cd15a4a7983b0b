#include "aerosect/model/theodorsen_function.hpp"

#include <boost/math/special_functions/bessel.hpp>
#include <boost/math/special_functions/hankel.hpp>

#include "aerosect/error.hpp"

namespace aerosect {

namespace {
constexpr double kSmallReducedFrequency = 1e-18;
}  // namespace

std::complex<double> theodorsen_function(double k) {
  AEROSECT_CHECK(k >= 0.0);  // also rejects NaN
  if (k < kSmallReducedFrequency) return {1.0, 0.0};
  const std::complex<double> i(0.0, 1.0);
  const std::complex<double> h1 = boost::math::cyl_hankel_2(1, k);
  const std::complex<double> h0 = boost::math::cyl_hankel_2(0, k);
  return h1 / (h1 + i * h0);
}

std::complex<double> sears_function(double k) {
  const std::complex<double> C = theodorsen_function(k);  // checks k >= 0
  const double j0 = boost::math::cyl_bessel_j(0, k);
  const double j1 = boost::math::cyl_bessel_j(1, k);
  const std::complex<double> i(0.0, 1.0);
  return (j0 - i * j1) * C + i * j1;
}

std::complex<double> wagner_rational_laplace(const WagnerApproximation& w,
                                             std::complex<double> p_bar) {
  AEROSECT_CHECK(w.coefficients.size() == w.exponents.size());
  std::complex<double> c = w.initial_value();
  for (std::size_t j = 0; j < w.size(); ++j)
    c += w.coefficients[j] * w.exponents[j] / (p_bar + w.exponents[j]);
  return c;
}

std::complex<double> wagner_rational(const WagnerApproximation& w, double k) {
  return wagner_rational_laplace(w, std::complex<double>(0.0, k));
}

}  // namespace aerosect
