#include "aerosect/model/spring.hpp"

#include <algorithm>
#include <cmath>

#include "aerosect/error.hpp"

namespace aerosect {

SpringLaw SpringLaw::linear(double stiffness) {
  SpringLaw s;
  s.slopes_ = {stiffness};
  s.nominal_stiffness_ = stiffness;
  return s;
}

SpringLaw SpringLaw::piecewise(std::vector<double> breakpoints, std::vector<double> slopes,
                               std::vector<double> intercepts, std::string kind) {
  AEROSECT_CHECK(slopes.size() == breakpoints.size() + 1);
  AEROSECT_CHECK(intercepts.size() == slopes.size());
  AEROSECT_CHECK(std::is_sorted(breakpoints.begin(), breakpoints.end()));
  SpringLaw s;
  s.breakpoints_ = std::move(breakpoints);
  s.slopes_ = std::move(slopes);
  s.intercepts_ = std::move(intercepts);
  s.nominal_stiffness_ = *std::max_element(s.slopes_.begin(), s.slopes_.end());
  s.kind_ = std::move(kind);
  return s;
}

double SpringLaw::force(double x, int region) const {
  double f = slopes_[region] * x + intercepts_[region];
  if (!poly_.empty()) {
    double xk = x * x;
    for (double c : poly_) {
      f += c * xk;
      xk *= x;
    }
  }
  return f;
}

double SpringLaw::tangent_stiffness(double x, int region) const {
  double k = slopes_[region];
  double xk = x;
  double p = 2.0;
  for (double c : poly_) {
    k += p * c * xk;
    xk *= x;
    p += 1.0;
  }
  return k;
}

int SpringLaw::region_of(double x) const {
  return static_cast<int>(std::upper_bound(breakpoints_.begin(), breakpoints_.end(), x) -
                          breakpoints_.begin());
}

}  // namespace aerosect
