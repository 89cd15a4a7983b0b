#pragma once
// Restoring law of one structural spring (plunge, pitch or flap).
//
//   f(x) = restoring generalised force, positive when it opposes positive x
//          (N/m per m span for plunge, N m/m for pitch and flap); x in m or rad.
//
// Every law is represented as a piecewise polynomial with sorted breakpoints
// x_1 < ... < x_n dividing the axis into regions 0..n (region r spans
// [x_r, x_{r+1}], x_0 = -inf, x_{n+1} = +inf):
//   f(x) = slope[r] x + intercept[r] + sum_k poly[k] x^k   (k >= 2)
// A linear spring has no breakpoints and one region. The run state stores
// the active region of each spring; the right-hand side evaluates the stored
// region, never the sign of x, so each integration segment is smooth
// (switching between regions is the integrator's job).

#include <span>
#include <string>
#include <vector>

namespace aerosect {

class SpringLaw {
 public:
  SpringLaw() = default;  // linear, zero stiffness
  static SpringLaw linear(double stiffness);
  // General piecewise-linear law: slopes.size() == breakpoints.size() + 1,
  // intercepts likewise; continuity is the caller's business.
  static SpringLaw piecewise(std::vector<double> breakpoints, std::vector<double> slopes,
                             std::vector<double> intercepts, std::string kind);

  // f(x) in the given region, and df/dx there.
  double force(double x, int region) const;
  double tangent_stiffness(double x, int region) const;
  // Region that contains x (x exactly on a breakpoint: the region above it).
  int region_of(double x) const;

  std::span<const double> breakpoints() const { return breakpoints_; }
  int region_count() const { return static_cast<int>(slopes_.size()); }
  bool is_linear() const { return breakpoints_.empty() && poly_.empty(); }
  // Stiffness used for damping and for the nominal linear model, N/m or N m/rad.
  double nominal_stiffness() const { return nominal_stiffness_; }
  const std::string& kind() const { return kind_; }

 private:
  std::vector<double> breakpoints_;
  std::vector<double> slopes_{0.0}, intercepts_{0.0};
  std::vector<double> poly_;  // poly_[k] multiplies x^(k+2)
  double nominal_stiffness_ = 0;
  std::string kind_ = "linear";
};

}  // namespace aerosect
