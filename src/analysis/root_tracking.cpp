#include "aerosect/analysis/root_tracking.hpp"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>

#include <Eigen/Eigenvalues>
#include <boost/math/tools/toms748_solve.hpp>

#include "aerosect/analysis/mode_shapes.hpp"
#include "aerosect/error.hpp"

namespace aerosect {

using cd = std::complex<double>;

double growth_margin(cd lambda, double spectral_radius) {
  return lambda.real() - 1e-9 * std::abs(lambda) - 1e-12 * spectral_radius;
}

bool growing(cd lambda, double spectral_radius) { return growth_margin(lambda, spectral_radius) > 0; }

double growth_margin(const Root& r) { return growth_margin(r.eigenvalue, r.spectral_radius); }

bool any_growing(const Eigen::VectorXcd& eigenvalues) {
  const double radius = eigenvalues.size() > 0 ? eigenvalues.cwiseAbs().maxCoeff() : 0.0;
  for (Eigen::Index i = 0; i < eigenvalues.size(); ++i)
    if (growing(eigenvalues(i), radius)) return true;
  return false;
}

Root make_root(cd lambda, Eigen::VectorXcd shape, double U, double b) {
  Root r;
  r.eigenvalue = lambda;
  r.frequency = std::abs(lambda.imag());
  const double mag = std::abs(lambda);
  r.damping_ratio = mag > 0 ? -lambda.real() / mag : 0.0;
  r.reduced_frequency = U > 0 ? r.frequency * b / U
                              : (r.frequency > 0 ? std::numeric_limits<double>::infinity() : 0.0);
  r.shape = std::move(shape);
  return r;
}

int continuing_candidate(const std::vector<cd>& values, const std::vector<Eigen::VectorXcd>& shapes,
                         cd ref, const Eigen::VectorXcd& ref_shape, double ambiguity_ratio,
                         const std::vector<bool>& skip) {
  auto skipped = [&](std::size_t i) { return !skip.empty() && skip[i]; };
  // The nearest candidate ...
  int best = -1;
  double d_best = std::numeric_limits<double>::infinity();
  for (std::size_t i = 0; i < values.size(); ++i) {
    if (skipped(i)) continue;
    const double d = std::abs(values[i] - ref);
    if (d < d_best) {
      d_best = d;
      best = static_cast<int>(i);
    }
  }
  if (best < 0 || ref_shape.size() == 0) return best;
  // ... unless others are nearly as near: then the best-correlated shape.
  const double reach = ambiguity_ratio * d_best + 1e-14 * std::abs(ref);
  int chosen = best, count = 0;
  double best_mac = -1;
  for (std::size_t i = 0; i < values.size(); ++i) {
    if (skipped(i) || std::abs(values[i] - ref) > reach) continue;
    if (shapes[i].size() != ref_shape.size()) continue;
    ++count;
    const double q = mac(shapes[i], ref_shape);
    if (q > best_mac) {
      best_mac = q;
      chosen = static_cast<int>(i);
    }
  }
  return count > 1 ? chosen : best;
}

std::vector<Root> in_vacuo_roots(const SectionProperties& s, const DofVector& k) {
  const Eigen::MatrixXd M = structural_mass(s);
  const Eigen::MatrixXd K = k.asDiagonal();
  Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> es(K, M);
  AEROSECT_CHECK(es.info() == Eigen::Success);
  std::vector<Root> roots;
  for (Eigen::Index i = 0; i < es.eigenvalues().size(); ++i) {
    const double w = std::sqrt(std::max(0.0, es.eigenvalues()(i)));
    roots.push_back(make_root(cd(0.0, w),
                              normalised_shape(es.eigenvectors().col(i).cast<cd>(), s.semichord),
                              0.0, s.semichord));
  }
  return roots;
}

double frequency_floor(const SectionProperties& s) {
  const auto w = uncoupled_frequencies(s);
  return 1e-6 * std::max({w.plunge, w.pitch, w.flap});
}

namespace {

std::vector<Root> advance(const RootProvider& p, double Ua, const std::vector<Root>& from,
                          double Ub, int depth) {
  if (auto to = p.step(Ub, from, depth >= p.max_halvings)) return std::move(*to);
  AEROSECT_CHECK(depth < p.max_halvings);  // the provider must answer a last try
  const double Um = 0.5 * (Ua + Ub);
  const std::vector<Root> mid = advance(p, Ua, from, Um, depth + 1);
  return advance(p, Um, mid, Ub, depth + 1);
}

}  // namespace

std::vector<Root> continue_roots(const RootProvider& p, double Ua, const std::vector<Root>& from,
                                 double Ub) {
  return advance(p, Ua, from, Ub, 0);
}

RootSweep sweep_roots(const RootProvider& p, std::vector<Root> current,
                      const std::vector<double>& speeds, const std::atomic<bool>* cancel) {
  RootSweep sw;
  sw.speeds = speeds;
  for (std::size_t i = 0; i < speeds.size(); ++i) {
    AEROSECT_CHECK(speeds[i] >= 0 && std::isfinite(speeds[i]));
    if (i > 0) AEROSECT_CHECK(speeds[i] > speeds[i - 1]);
  }
  double U = 0;
  for (double target : speeds) {
    stop_if_cancelled(cancel);
    if (target > U) current = advance(p, U, current, target, 0);
    U = target;
    sw.roots.push_back(current);
  }
  return sw;
}

double refine_crossing(const std::function<Root(double)>& root_at, double Ua, const Root& lo,
                       double Ub, const Root& hi,
                       const std::function<bool(double, double)>& converged) {
  // The neutral point Re lambda = 0 when the bracket holds it, else the
  // zero of the growth margin (a root at round-off level at Ua).
  const bool neutral = lo.eigenvalue.real() < 0;
  auto f = [&](double U) {
    const Root r = U <= Ua ? lo : root_at(U);
    return neutral ? r.eigenvalue.real() : growth_margin(r);
  };
  const double fa = neutral ? lo.eigenvalue.real() : growth_margin(lo);
  const double fb = neutral ? hi.eigenvalue.real() : growth_margin(hi);
  if (fb == 0.0) return Ub;
  std::uintmax_t iterations = 200;
  const auto br = boost::math::tools::toms748_solve(
      f, Ua, Ub, fa, fb, [&](double x, double y) { return converged(x, y); }, iterations);
  return 0.5 * (br.first + br.second);
}

Crossing first_flutter_crossing(const RootProvider& p, const RootSweep& sweep, double rtol,
                                double w_floor) {
  AEROSECT_CHECK(sweep.roots.size() == sweep.speeds.size());
  AEROSECT_CHECK(rtol > 0);
  Crossing best;
  auto tol = [rtol](double x, double y) {
    return std::abs(y - x) <= rtol * std::min(std::abs(x), std::abs(y));
  };
  for (std::size_t i = 0; i + 1 < sweep.speeds.size(); ++i) {
    const auto& lo = sweep.roots[i];
    const auto& hi = sweep.roots[i + 1];
    const double Ua = sweep.speeds[i], Ub = sweep.speeds[i + 1];
    for (std::size_t j = 0; j < lo.size(); ++j) {
      if (!(growth_margin(lo[j]) < 0 && growth_margin(hi[j]) >= 0)) continue;
      if (hi[j].frequency <= w_floor && lo[j].frequency <= w_floor) continue;  // divergence
      auto root_at = [&](double U) { return advance(p, Ua, lo, U, 0)[j]; };
      const double U = refine_crossing(root_at, Ua, lo[j], Ub, hi[j], tol);
      if (best.found && U >= best.speed) continue;
      const Root r = U <= Ua ? lo[j] : root_at(U);
      if (r.frequency <= w_floor) continue;
      best.found = true;
      best.speed = U;
      best.frequency = r.frequency;
      best.reduced_frequency = r.reduced_frequency;
      best.mode = static_cast<int>(j);
      best.shape = r.shape;
    }
    if (best.found) break;
  }
  return best;
}

}  // namespace aerosect
