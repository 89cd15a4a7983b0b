#include "aerosect/model/spring.hpp"

#include <boost/container/small_vector.hpp>

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>


#include "aerosect/error.hpp"

namespace aerosect {

SpringLaw SpringLaw::linear(double stiffness) {
  SpringLaw s;
  s.slopes_ = {stiffness};
  s.nominal_stiffness_ = stiffness;
  return s;
}

SpringLaw SpringLaw::freeplay(double k, double gap_below, double gap_above, double offset) {
  AEROSECT_CHECK(gap_below >= 0 && gap_above >= 0);
  SpringLaw s;
  const double lo = offset - gap_below, hi = offset + gap_above;
  if (lo == hi) {
    // A zero gap is a linear spring about the offset.
    s.slopes_ = {k};
    s.intercepts_ = {-k * offset};
  } else {
    s.breakpoints_ = {lo, hi};
    s.slopes_ = {k, 0.0, k};
    s.intercepts_ = {-k * lo, 0.0, -k * hi};
  }
  s.nominal_stiffness_ = k;
  s.offset_ = offset;
  s.kind_ = "freeplay";
  return s;
}

SpringLaw SpringLaw::bilinear(double k_in, double k_out, double d, double x0) {
  AEROSECT_CHECK(d > 0);
  SpringLaw s;
  s.breakpoints_ = {x0 - d, x0 + d};
  s.slopes_ = {k_out, k_in, k_out};
  s.intercepts_ = {-k_in * d - k_out * (x0 - d), -k_in * x0, k_in * d - k_out * (x0 + d)};
  s.nominal_stiffness_ = k_out;
  s.offset_ = x0;
  s.kind_ = "bilinear";
  return s;
}

SpringLaw SpringLaw::cubic(double k, double beta) {
  SpringLaw s;
  s.slopes_ = {k};
  s.poly_ = {0.0, k * beta};
  s.nominal_stiffness_ = k;
  s.kind_ = "cubic";
  return s;
}

SpringLaw SpringLaw::polynomial(std::vector<double> c) {
  AEROSECT_CHECK(!c.empty());
  SpringLaw s;
  s.slopes_ = {c[0]};
  s.poly_.assign(c.begin() + 1, c.end());
  while (!s.poly_.empty() && s.poly_.back() == 0.0) s.poly_.pop_back();
  s.nominal_stiffness_ = c[0];
  s.kind_ = "polynomial";
  return s;
}

SpringLaw SpringLaw::table(std::vector<double> x, std::vector<double> f) {
  AEROSECT_CHECK(x.size() >= 2 && x.size() == f.size());
  AEROSECT_CHECK(std::is_sorted(x.begin(), x.end()));
  SpringLaw s;
  s.breakpoints_.assign(x.begin() + 1, x.end() - 1);
  s.slopes_.clear();
  s.intercepts_.clear();
  for (std::size_t i = 0; i + 1 < x.size(); ++i) {
    const double k = (f[i + 1] - f[i]) / (x[i + 1] - x[i]);
    s.slopes_.push_back(k);
    s.intercepts_.push_back(f[i] - k * x[i]);
  }
  // Nominal: the slope of the segment holding x = 0 (or the nearest end).
  s.nominal_stiffness_ = s.slopes_[static_cast<std::size_t>(s.region_of(0.0))];
  s.kind_ = "table";
  return s;
}

SpringLaw SpringLaw::piecewise_linear(std::vector<double> breakpoints, std::vector<double> slopes,
                                      std::vector<double> intercepts) {
  AEROSECT_CHECK(slopes.size() == breakpoints.size() + 1 && intercepts.size() == slopes.size());
  AEROSECT_CHECK(std::adjacent_find(breakpoints.begin(), breakpoints.end(),
                                    [](double a, double b) { return !(a < b); }) == breakpoints.end());
  SpringLaw s;
  s.breakpoints_ = std::move(breakpoints);
  s.slopes_ = std::move(slopes);
  s.intercepts_ = std::move(intercepts);
  s.nominal_stiffness_ = s.slopes_[static_cast<std::size_t>(s.region_of(0.0))];
  s.kind_ = "piecewise";
  return s;
}

bool SpringLaw::is_linear() const {
  return breakpoints_.empty() && poly_.empty() && intercepts_[0] == 0.0;
}

double SpringLaw::force(double x, int region) const {
  double f = slopes_[static_cast<std::size_t>(region)] * x +
             intercepts_[static_cast<std::size_t>(region)];
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
  double k = slopes_[static_cast<std::size_t>(region)];
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

double SpringLaw::force_jump(int i) const {
  AEROSECT_CHECK(i >= 0 && i < static_cast<int>(breakpoints_.size()));
  const auto r = static_cast<std::size_t>(i);
  const double x = breakpoints_[r];
  // The polynomial terms are the same on both sides: only the linear pieces differ.
  const double below = slopes_[r] * x + intercepts_[r];
  const double above = slopes_[r + 1] * x + intercepts_[r + 1];
  // Round-off of the two evaluations (a few ulps of their terms) is no jump.
  const double scale = std::abs(slopes_[r] * x) + std::abs(intercepts_[r]) +
                       std::abs(slopes_[r + 1] * x) + std::abs(intercepts_[r + 1]);
  const double jump = above - below;
  return std::abs(jump) <= 16 * std::numeric_limits<double>::epsilon() * scale ? 0.0 : jump;
}

double SpringLaw::gap_closed_stiffness() const {
  return std::max(slopes_.front(), slopes_.back());
}

double SpringLaw::gap_open_stiffness() const {
  return slopes_[static_cast<std::size_t>(region_of(offset_))];
}

double SpringLaw::describing_function(double A) const { return harmonics(0.0, A).gain; }

SpringLaw::DualInput SpringLaw::dual_input_describing_function(double B, double A) const {
  return harmonics(B, A);
}

SpringLaw::DualInput SpringLaw::harmonics(double B, double A) const {
  AEROSECT_CHECK(A > 0 && std::isfinite(B));
  // Closed form. Split [0, 2 pi] where B + A sin(theta) crosses a
  // breakpoint; on a piece [a, b] in region r the law is linear,
  // f = s A sin + c' with c' = s B + c (c' = c exactly when B = 0), and
  //   int (s A sin + c') sin = s A [(b - a) - (sin b cos b - sin a cos a)] / 2
  //                            + c' (cos a - cos b),
  //   int (s A sin + c')     = s A (cos a - cos b) + c' (b - a).
  // The polynomial terms are the same in every region and integrate over
  // the whole period with the sine-power moments
  //   mu_i = 1/(2 pi) int_0^2pi sin^i = (i-1)!!/i!! for even i, 0 for odd i:
  // c x^m with x = B + A sin expands binomially into
  //   F0 += c sum_i C(m,i) B^(m-i) A^i mu_i,
  //   N_A += c sum_i C(m,i) B^(m-i) A^(i-1) 2 mu_(i+1);
  // with B = 0 only i = m is left: c A^(m-1) 2 m!!/(m+1)!! for odd m (the
  // cubic's 3/4 A^2 of Gelb & Vander Velde). Checked against Boost's
  // Gauss-Kronrod quadrature of the defining integrals (test_spring.cpp).
  // Each cut's sine and cosine are known without trigonometry: the
  // quarter points exactly, a breakpoint's cut t (and pi - t, t + 2 pi)
  // from sin t = (x_b - B) / A. On a piece the motion B + A sin is monotone
  // (the quarter points are cuts), so the mean of its end values lies in the
  // piece's region. (This is the mean equation's inner loop: the steady
  // describing-function scan calls it about two million times on a trimmed
  // case; sin/cos per piece and a heap vector per call were 80% of it.)
  using std::numbers::pi;
  struct Cut {
    double angle, sin, cos;
  };
  boost::container::small_vector<Cut, 16> cuts = {
      {0.0, 0.0, 1.0}, {0.5 * pi, 1.0, 0.0}, {pi, 0.0, -1.0}, {1.5 * pi, -1.0, 0.0}, {2.0 * pi, 0.0, 1.0}};
  for (double xb : breakpoints_) {
    if (std::abs(xb - B) >= A) continue;
    const double sn = (xb - B) / A;
    const double t = std::asin(sn), cs = std::sqrt((1.0 - sn) * (1.0 + sn));
    for (const Cut c : {Cut{t, sn, cs}, Cut{pi - t, sn, -cs}, Cut{t + 2 * pi, sn, cs}}) {
      if (c.angle > 0 && c.angle < 2 * pi) cuts.push_back(c);
    }
  }
  std::sort(cuts.begin(), cuts.end(), [](const Cut& x, const Cut& y) { return x.angle < y.angle; });
  double sum = 0, sum0 = 0;
  for (std::size_t i = 0; i + 1 < cuts.size(); ++i) {
    const double a = cuts[i].angle, b = cuts[i + 1].angle;
    if (b - a < 1e-15) continue;
    const double sa = cuts[i].sin, ca = cuts[i].cos, sb = cuts[i + 1].sin, cb = cuts[i + 1].cos;
    const auto r = static_cast<std::size_t>(region_of(B + A * 0.5 * (sa + sb)));
    const double c = slopes_[r] * B + intercepts_[r];
    sum += slopes_[r] * A * 0.5 * ((b - a) - (sb * cb - sa * ca)) + c * (ca - cb);
    sum0 += slopes_[r] * A * (ca - cb) + c * (b - a);
  }
  DualInput out;
  out.gain = sum / (pi * A);
  out.mean = sum0 / (2 * pi);
  // mu_i for i = 0..m+1.
  auto moment = [](int i) {
    if (i % 2 != 0) return 0.0;
    double mu = 1.0;
    for (int q = i; q > 0; q -= 2) mu *= static_cast<double>(q - 1) / static_cast<double>(q);
    return mu;
  };
  // poly_[k] multiplies x^m, m = k + 2.
  for (std::size_t k = 0; k < poly_.size(); ++k) {
    const int m = static_cast<int>(k) + 2;
    if (B == 0) {
      if (m % 2 == 0) {
        out.mean += poly_[k] * std::pow(A, m) * moment(m);
        continue;
      }
      double ratio = 2.0;  // 2 m!! / (m+1)!!
      for (int q = m; q > 0; q -= 2) ratio *= static_cast<double>(q) / static_cast<double>(q + 1);
      out.gain += poly_[k] * std::pow(A, m - 1) * ratio;
      continue;
    }
    double binomial = 1.0;  // C(m, i)
    for (int i = 0; i <= m; ++i) {
      if (i > 0) binomial = binomial * static_cast<double>(m - i + 1) / static_cast<double>(i);
      const double term = poly_[k] * binomial * std::pow(B, m - i);
      out.mean += term * std::pow(A, i) * moment(i);
      out.gain += term * std::pow(A, i - 1) * 2 * moment(i + 1);
    }
  }
  return out;
}

}  // namespace aerosect
