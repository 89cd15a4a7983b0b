#include "aerosect/analysis/describing_function.hpp"

#include <algorithm>
#include <cmath>

#include <Eigen/Eigenvalues>
#include <boost/math/tools/roots.hpp>
#include <complex>
#include <limits>

#include "aerosect/analysis/flutter.hpp"
#include "aerosect/analysis/pk.hpp"
#include "aerosect/analysis/root_tracking.hpp"
#include "aerosect/error.hpp"

namespace aerosect {

namespace {

// The oscillatory root (|Im| > 0: flutter, not the real divergence or lag
// roots) with the largest growth margin (root_tracking.hpp), and its
// frequency, rad/s.
Root oscillatory_root(const AeroelasticModel& model, const DofVector& k, double U) {
  Eigen::EigenSolver<Eigen::MatrixXd> es(model.state_matrix_at(U, k), false);
  Root best;
  best.eigenvalue = {-std::numeric_limits<double>::infinity(), 0.0};
  best.spectral_radius = es.eigenvalues().cwiseAbs().maxCoeff();
  for (Eigen::Index i = 0; i < es.eigenvalues().size(); ++i) {
    const std::complex<double> l = es.eigenvalues()(i);
    if (std::abs(l.imag()) > 1e-8 * std::max(1.0, std::abs(l)) &&
        growth_margin(l, best.spectral_radius) > growth_margin(best)) {
      best.eigenvalue = l;
      best.frequency = std::abs(l.imag());
    }
  }
  return best;
}

double largest_growth(const AeroelasticModel& model, const DofVector& k, double U) {
  return growth_margin(oscillatory_root(model, k, U));
}

}  // namespace

LcoPrediction describing_function_lco(const Case& c, const std::vector<double>& speeds,
                                      int count, const std::atomic<bool>* cancel) {
  LcoPrediction p;
  const SectionProperties& s = c.model.section;
  const int n = s.dof;
  std::vector<int> nonlinear;
  for (int j = 0; j < n; ++j)
    if (!c.model.springs[j].is_linear()) nonlinear.push_back(j);
  if (nonlinear.size() != 1) {
    p.reason = nonlinear.empty() ? "no nonlinear spring"
                                 : "more than one nonlinear spring (the describing-function "
                                   "prediction here is for a single nonlinearity)";
    return p;
  }
  const int j = nonlinear.front();
  const SpringLaw& law = c.model.springs[j];
  p.spring = j;

  // Amplitude scale: the largest breakpoint distance, or where the
  // polynomial terms match the linear one.
  double scale = 0;
  for (double b : law.breakpoints()) scale = std::max(scale, std::abs(b));
  if (scale == 0) {
    const double k = law.nominal_stiffness();
    // |N(A) - k| = k at A = scale: found by doubling.
    double a = 1e-6;
    while (a < 1e3 && std::abs(law.describing_function(a) - k) < 1e-3 * std::abs(k)) a *= 2;
    scale = a * 30;  // N has changed by ~0.1 % at a; cover well past it
  }
  // With a gap, N(A) changes fastest just past the breakpoint: space
  // A = scale (1 + s) with s geometric from 1e-4 to 100; otherwise A itself.
  const bool gap = !law.breakpoints().empty();
  auto amplitude = [&](int i) {
    const double f = static_cast<double>(i) / (count - 1);
    return gap ? scale * (1 + 1e-4 * std::pow(1e6, f)) : scale * 1e-3 * std::pow(1e3, f);
  };

  const AeroelasticModel model = stability_model(c.model);
  DofVector k(n);
  for (int i = 0; i < n; ++i) k(i) = c.model.springs[i].nominal_stiffness();
  // Every neutral speed of each equivalent linear system: the speeds where
  // the largest oscillatory growth rate changes sign on the grid, refined by
  // TOMS 748. Branch b is the b-th crossing from below at that amplitude.
  std::vector<LcoPredictionPoint> all;
  for (int i = 0; i < count; ++i) {
    stop_if_cancelled(cancel);
    const double A = amplitude(i);
    const double N = law.describing_function(A);
    if (!(N >= 0)) continue;
    k(j) = N;
    auto g = [&](double U) { return largest_growth(model, k, U); };
    int branch = 0;
    double g0 = g(speeds.front());
    for (std::size_t q = 1; q < speeds.size(); ++q) {
      const double g1 = g(speeds[q]);
      if ((g0 < 0) != (g1 < 0) && std::isfinite(g0) && std::isfinite(g1)) {
        // The growth criterion picks the interval; the neutral point
        // Re lambda = 0 inside it is the LCO speed (the margin's own zero
        // when Re lambda does not change sign there: round-off level).
        auto re = [&](double U) { return oscillatory_root(model, k, U).eigenvalue.real(); };
        const double r0 = re(speeds[q - 1]), r1 = re(speeds[q]);
        const bool neutral = (r0 < 0) != (r1 < 0);
        boost::uintmax_t iterations = 100;
        const auto root = boost::math::tools::toms748_solve(
            [&](double U) { return neutral ? re(U) : g(U); }, speeds[q - 1], speeds[q],
            neutral ? r0 : g0, neutral ? r1 : g1, boost::math::tools::eps_tolerance<double>(40),
            iterations);
        LcoPredictionPoint pt;
        pt.amplitude = A;
        pt.equivalent_stiffness = N;
        pt.speed = 0.5 * (root.first + root.second);
        pt.frequency = oscillatory_root(model, k, pt.speed).frequency;
        pt.branch = branch++;
        DofVector kp = k, km = k;
        kp(j) = law.describing_function(A * (1 + 1e-3));
        km(j) = law.describing_function(A * (1 - 1e-3));
        pt.stable = largest_growth(model, kp, pt.speed) < 0 && largest_growth(model, km, pt.speed) > 0;
        all.push_back(pt);
      }
      g0 = g1;
    }
  }
  std::stable_sort(all.begin(), all.end(),
                   [](const auto& a, const auto& b) { return a.branch < b.branch; });
  p.points = std::move(all);
  p.available = !p.points.empty();
  if (!p.available) p.reason = "no flutter crossing for any equivalent stiffness in the swept speeds";
  return p;
}

}  // namespace aerosect
