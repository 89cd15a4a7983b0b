#pragma once
// Restoring law of one structural spring (plunge, pitch or flap).
//
//   f(x) = restoring generalised force, positive when it opposes positive x
//          (N/m per m span for plunge, N m/m for pitch and flap); x in m or rad.
//
// Every law is represented as a piecewise polynomial with sorted breakpoints
// x_1 < ... < x_n dividing the axis into regions 0..n (region r spans
// [x_r, x_{r+1}], x_0 = -inf, x_{n+1} = +inf):
//   f(x) = slope[r] x + intercept[r] + sum_k poly[k] x^(k+2)
// A linear spring has no breakpoints, one region and no intercept. The run
// state stores the active region of each spring; the right-hand side
// evaluates the stored region, never the sign of x, so each integration
// segment is smooth (switching between regions is the integrator's job).
//
// Laws (x0 = offset, the centre of the gap or of the inner segment):
//   linear      f = k x
//   freeplay    f = 0 for x0 - d_below <= x <= x0 + d_above,
//               f = k (x - (x0 +- d)) outside (d = half-gap when symmetric)
//   bilinear    f = k_in (x - x0) for |x - x0| <= d, slope k_out beyond
//               (continuous at the breakpoints)
//   cubic       f = k (x + beta x^3)   (beta > 0 hardening, < 0 softening)
//   polynomial  f = sum_i c_i x^i, i = 1..n
//   table       piecewise linear through (x_i, f_i), end segments extended
//   piecewise   given slopes and intercepts per region (may jump)

#include <span>
#include <string>
#include <vector>

namespace aerosect {

class SpringLaw {
 public:
  SpringLaw() = default;  // linear, zero stiffness
  static SpringLaw linear(double stiffness);
  static SpringLaw freeplay(double stiffness, double gap_below, double gap_above, double offset);
  static SpringLaw bilinear(double inner_stiffness, double outer_stiffness, double half_width,
                            double offset);
  static SpringLaw cubic(double stiffness, double beta);
  // coefficients[i] multiplies x^(i+1).
  static SpringLaw polynomial(std::vector<double> coefficients);
  // Points sorted by x, at least two.
  static SpringLaw table(std::vector<double> x, std::vector<double> f);
  // Raw pieces: f = slopes[r] x + intercepts[r] in region r, breakpoints
  // strictly increasing, one more slope (and intercept) than breakpoints.
  // Continuity is not required: a preloaded centring spring,
  // f = k x + F sign(x), jumps by 2F at its breakpoint 0.
  static SpringLaw piecewise_linear(std::vector<double> breakpoints, std::vector<double> slopes,
                                    std::vector<double> intercepts);

  // f(x) in the given region, and df/dx there.
  double force(double x, int region) const;
  double tangent_stiffness(double x, int region) const;
  // Region that contains x (x exactly on a breakpoint: the region above it).
  int region_of(double x) const;

  std::span<const double> breakpoints() const { return breakpoints_; }
  // Jump of the force across breakpoint i (0-based):
  // f(x_i; region i+1) - f(x_i; region i), in N/m or N m/m. Exactly 0 when
  // the law is continuous there to round-off (freeplay, bilinear, table and
  // continuous piecewise laws), so callers may test it against zero.
  double force_jump(int i) const;
  int region_count() const { return static_cast<int>(slopes_.size()); }
  // True when f = k x exactly (goes into the linear state matrix).
  bool is_linear() const;
  bool is_piecewise_linear() const { return poly_.empty(); }
  // Stiffness of the nominal linear model: the outer (engaged) slope for
  // gap laws, the linear coefficient for polynomial laws.
  double nominal_stiffness() const { return nominal_stiffness_; }
  // Linearisations for flutter bounds: slope with the gap closed (the
  // outer regions) and with it open (the region holding the offset).
  double gap_closed_stiffness() const;
  double gap_open_stiffness() const;
  // Describing function (equivalent linear stiffness) for x = A sin(theta):
  // N(A) = 1/(pi A) * integral_0^2pi f(A sin theta) sin theta dtheta.
  double describing_function(double amplitude) const;
  // Dual-input describing function (Gelb & Vander Velde 1968, bias plus
  // sinusoid) for x = B + A sin(theta), A > 0:
  //   mean  F0(B, A)  = 1/(2 pi) integral_0^2pi f(B + A sin theta) dtheta
  //                     (N/m or N m/m: the mean restoring force)
  //   gain  N_A(B, A) = 1/(pi A) integral_0^2pi f(B + A sin theta) sin theta dtheta
  //                     (N/m or N m/rad per m span: the first-harmonic stiffness)
  // In closed form, the same integrator as describing_function(A), which
  // is gain(0, A) bit for bit. With no breakpoint between B - A and B + A
  // (the oscillation stays in one region) a piecewise-linear law gives
  // F0 = f(B) and N_A = its slope there.
  struct DualInput {
    double mean = 0;  // F0
    double gain = 0;  // N_A
  };
  DualInput dual_input_describing_function(double bias, double amplitude) const;
  const std::string& kind() const { return kind_; }
  std::span<const double> slopes() const { return slopes_; }
  std::span<const double> intercepts() const { return intercepts_; }
  std::span<const double> polynomial_terms() const { return poly_; }  // of x^2, x^3, ...
  double offset() const { return offset_; }

 private:
  DualInput harmonics(double bias, double amplitude) const;

  std::vector<double> breakpoints_;
  std::vector<double> slopes_{0.0}, intercepts_{0.0};
  std::vector<double> poly_;  // poly_[k] multiplies x^(k+2)
  double nominal_stiffness_ = 0;
  double offset_ = 0;
  std::string kind_ = "linear";
};

}  // namespace aerosect
