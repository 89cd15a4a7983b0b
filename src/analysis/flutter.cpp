#include "aerosect/analysis/flutter.hpp"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>
#include <numbers>

#include <Eigen/Eigenvalues>
#include <Eigen/LU>
#include <boost/math/tools/toms748_solve.hpp>

#include "aerosect/analysis/mode_shapes.hpp"
#include "aerosect/analysis/pk.hpp"
#include "aerosect/error.hpp"
#include "aerosect/units.hpp"

namespace aerosect {

namespace {

using cd = std::complex<double>;
using std::numbers::pi;

Eigen::MatrixXd matrix_at(const ModelDescription& model, const DofVector& k, double U) {
  ModelDescription d = model;
  d.flow.airspeed = U;
  d.held = {false, false, false};
  return AeroelasticModel(d).state_matrix(k);
}

// Eigenvalues in the closed upper half plane with their displacement parts.
struct Candidates {
  std::vector<cd> values;
  std::vector<Eigen::VectorXcd> shapes;  // normalised (h/b, ...)
};

Candidates candidates_at(const ModelDescription& model, const DofVector& k, double U) {
  const Eigen::MatrixXd A = matrix_at(model, k, U);
  Eigen::EigenSolver<Eigen::MatrixXd> es(A, true);
  AEROSECT_CHECK(es.info() == Eigen::Success);
  const int n = model.section.dof;
  const double scale = es.eigenvalues().cwiseAbs().maxCoeff();
  Candidates c;
  for (Eigen::Index i = 0; i < es.eigenvalues().size(); ++i) {
    const cd v = es.eigenvalues()(i);
    if (v.imag() < -1e-12 * scale) continue;
    c.values.push_back(cd(v.real(), std::max(0.0, v.imag())));
    c.shapes.push_back(normalised_shape(es.eigenvectors().col(i).head(n), model.section.semichord));
  }
  return c;
}

StabilityRoot make_root(cd lambda, const Eigen::VectorXcd& shape, double U, double b) {
  StabilityRoot r;
  r.eigenvalue = lambda;
  r.frequency = std::abs(lambda.imag());
  const double mag = std::abs(lambda);
  r.damping_ratio = mag > 0 ? -lambda.real() / mag : 0.0;
  r.reduced_frequency = U > 0 ? r.frequency * b / U
                              : (r.frequency > 0 ? std::numeric_limits<double>::infinity() : 0.0);
  r.shape = shape;
  return r;
}

// Continue every mode's root from `from` to the candidates `c`. Returns
// false when the assignment is not clean (step too large). With `strict`
// false (the step cannot be refined further, e.g. exactly at a frequency
// coalescence) each mode takes the nearest candidate not yet taken.
bool assign(const std::vector<StabilityRoot>& from, const Candidates& c, double U, double b,
            std::vector<StabilityRoot>& to, bool strict = true) {
  const std::size_t m = from.size();
  to.assign(m, StabilityRoot{});
  std::vector<int> taken(c.values.size(), -1);
  for (std::size_t j = 0; j < m; ++j) {
    const cd ref = from[j].eigenvalue;
    // Nearest candidate, and its separation from the others.
    std::size_t best = 0;
    double d_best = std::numeric_limits<double>::infinity();
    for (std::size_t i = 0; i < c.values.size(); ++i) {
      if (!strict && taken[i] >= 0) continue;
      const double d = std::abs(c.values[i] - ref);
      if (d < d_best) {
        d_best = d;
        best = i;
      }
    }
    if (!strict) {
      taken[best] = static_cast<int>(j);
      to[j] = make_root(c.values[best], c.shapes[best], U, b);
      continue;
    }
    // Near-equidistant candidates: the best correlated shape wins.
    std::size_t chosen = best;
    double best_mac = -1;
    int count = 0;
    for (std::size_t i = 0; i < c.values.size(); ++i) {
      if (std::abs(c.values[i] - ref) > 1.5 * d_best + 1e-14 * std::abs(ref)) continue;
      ++count;
      const double q = mac(c.shapes[i], from[j].shape);
      if (q > best_mac) {
        best_mac = q;
        chosen = i;
      }
    }
    if (count == 1) chosen = best;
    double sep = std::numeric_limits<double>::infinity();
    for (std::size_t i = 0; i < c.values.size(); ++i)
      if (i != chosen) sep = std::min(sep, std::abs(c.values[i] - c.values[chosen]));
    if (taken[chosen] >= 0) return false;
    if (std::abs(c.values[chosen] - ref) > 0.5 * sep) return false;
    taken[chosen] = static_cast<int>(j);
    to[j] = make_root(c.values[chosen], c.shapes[chosen], U, b);
  }
  return true;
}

std::vector<StabilityRoot> advance(const ModelDescription& model, const DofVector& k, double Ua,
                                   const std::vector<StabilityRoot>& from, double Ub,
                                   int depth = 0) {
  const Candidates c = candidates_at(model, k, Ub);
  std::vector<StabilityRoot> to;
  if (assign(from, c, Ub, model.section.semichord, to)) return to;
  if (depth >= 14) {
    assign(from, c, Ub, model.section.semichord, to, false);
    return to;
  }
  const double Um = 0.5 * (Ua + Ub);
  const std::vector<StabilityRoot> mid = advance(model, k, Ua, from, Um, depth + 1);
  return advance(model, k, Um, mid, Ub, depth + 1);
}

// Roots at U = 0 from the in-vacuo modes of (K, M_s).
std::vector<StabilityRoot> still_air_roots(const ModelDescription& model, const DofVector& k) {
  const Eigen::MatrixXd M = structural_mass(model.section);
  const Eigen::MatrixXd K = k.asDiagonal();
  Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> es(K, M);
  AEROSECT_CHECK(es.info() == Eigen::Success);
  std::vector<StabilityRoot> vacuo;
  for (Eigen::Index i = 0; i < es.eigenvalues().size(); ++i) {
    const double w = std::sqrt(std::max(0.0, es.eigenvalues()(i)));
    vacuo.push_back(make_root(cd(0.0, w),
                              normalised_shape(es.eigenvectors().col(i).cast<cd>(),
                                               model.section.semichord),
                              0.0, model.section.semichord));
  }
  // Still air adds apparent mass and (if any) structural damping: follow by
  // scaling the density from 0 to the case's value.
  ModelDescription d = model;
  const double rho = model.flow.density;
  std::vector<StabilityRoot> roots = vacuo;
  const int steps = 8;
  for (int s = 1; s <= steps; ++s) {
    d.flow.density = rho * s / steps;
    const Candidates c = candidates_at(d, k, 0.0);
    std::vector<StabilityRoot> next;
    if (!assign(roots, c, 0.0, model.section.semichord, next)) {
      // Fall back to nearest-only matching at this density step.
      next = roots;
      for (auto& r : next) {
        std::size_t best = 0;
        for (std::size_t i = 1; i < c.values.size(); ++i)
          if (std::abs(c.values[i] - r.eigenvalue) < std::abs(c.values[best] - r.eigenvalue)) best = i;
        r = make_root(c.values[best], c.shapes[best], 0.0, model.section.semichord);
      }
    }
    roots = next;
  }
  return roots;
}

double frequency_floor(const ModelDescription& model) {
  const auto w = uncoupled_frequencies(model.section);
  return 1e-6 * std::max({w.plunge, w.pitch, w.flap});
}

}  // namespace

StabilitySweep state_space_sweep(const ModelDescription& model, const DofVector& k,
                                 const std::vector<double>& speeds) {
  StabilitySweep sw;
  sw.speeds = speeds;
  std::vector<StabilityRoot> current = still_air_roots(model, k);
  double U = 0;
  for (std::size_t i = 0; i < speeds.size(); ++i) {
    AEROSECT_CHECK(speeds[i] >= 0 && std::isfinite(speeds[i]));
    if (i > 0) AEROSECT_CHECK(speeds[i] > speeds[i - 1]);
    if (speeds[i] > U) current = advance(model, k, U, current, speeds[i]);
    U = speeds[i];
    sw.roots.push_back(current);
  }
  return sw;
}

Crossing state_space_flutter(const ModelDescription& model, const DofVector& k,
                             const StabilitySweep& sweep, double rtol) {
  Crossing best;
  const double w_floor = frequency_floor(model);
  auto tol = [rtol](double x, double y) {
    return std::abs(y - x) <= rtol * std::min(std::abs(x), std::abs(y));
  };
  // Growth rate beyond round-off: a neutral root of an undamped system (Re
  // exactly 0 in theory, +-1e-16 |lambda| in floating point) is not unstable.
  auto growth = [](const StabilityRoot& r) {
    return r.eigenvalue.real() - 1e-9 * std::abs(r.eigenvalue);
  };
  for (std::size_t i = 0; i + 1 < sweep.speeds.size(); ++i) {
    const auto& lo = sweep.roots[i];
    const auto& hi = sweep.roots[i + 1];
    const double Ua = sweep.speeds[i], Ub = sweep.speeds[i + 1];
    for (std::size_t j = 0; j < lo.size(); ++j) {
      const double ga = growth(lo[j]), gb = growth(hi[j]);
      if (!(ga < 0 && gb >= 0)) continue;
      if (hi[j].frequency <= w_floor && lo[j].frequency <= w_floor) continue;  // divergence
      auto g = [&](double U) {
        if (U <= Ua) return ga;
        return growth(advance(model, k, Ua, lo, U)[j]);
      };
      double U = Ub;
      if (gb != 0.0) {
        std::uintmax_t iters = 200;
        const auto br = boost::math::tools::toms748_solve(g, Ua, Ub, ga, gb, tol, iters);
        U = 0.5 * (br.first + br.second);
      }
      if (best.found && U >= best.speed) continue;
      const StabilityRoot r = advance(model, k, Ua, lo, U)[j];
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

Crossing state_space_divergence(const ModelDescription& model, const DofVector& k,
                                const std::vector<double>& speeds, double rtol) {
  Crossing c;
  auto det = [&](double U) { return matrix_at(model, k, U).partialPivLu().determinant(); };
  auto tol = [rtol](double x, double y) {
    return std::abs(y - x) <= rtol * std::min(std::abs(x), std::abs(y));
  };
  double Ua = -1, da = 0;
  for (double U : speeds) {
    if (U <= 0) continue;
    const double d = det(U);
    if (Ua > 0 && ((da > 0 && d <= 0) || (da < 0 && d >= 0))) {
      double Ud = U;
      if (d != 0.0) {
        std::uintmax_t iters = 200;
        const auto br = boost::math::tools::toms748_solve(det, Ua, U, da, d, tol, iters);
        Ud = 0.5 * (br.first + br.second);
      }
      // Shape: the null vector of A at divergence (displacement part).
      const Eigen::MatrixXd A = matrix_at(model, k, Ud);
      Eigen::FullPivLU<Eigen::MatrixXd> lu(A);
      Eigen::EigenSolver<Eigen::MatrixXd> es(A, true);
      Eigen::Index i0 = 0;
      es.eigenvalues().cwiseAbs().minCoeff(&i0);
      c.found = true;
      c.speed = Ud;
      c.shape = normalised_shape(es.eigenvectors().col(i0).head(model.section.dof),
                                 model.section.semichord);
      return c;
    }
    Ua = U;
    da = d;
  }
  return c;
}

const char* to_string(Linearisation l) {
  switch (l) {
    case Linearisation::kNominal: return "nominal";
    case Linearisation::kGapClosed: return "gap-closed";
    case Linearisation::kGapOpen: return "gap-open";
    case Linearisation::kDescribingFunction: return "describing-function";
  }
  return "?";
}

std::vector<double> default_speeds(const Case& c) {
  const auto w = uncoupled_frequencies(c.model.section);
  const double ref = c.model.section.semichord * w.pitch;
  double umax = std::max(10.0 * ref, 1.5 * c.model.flow.airspeed);
  if (c.dive_speed_eas && c.model.flow.density > 0)
    umax = std::max(umax, 1.5 * 1.15 * true_airspeed(*c.dive_speed_eas, c.model.flow.density));
  const int n = 400;
  std::vector<double> s(n);
  for (int i = 0; i < n; ++i) s[i] = umax * (i + 1) / n;
  return s;
}

namespace {

MethodResult pk_method(const Case& c, const DofVector& k, const std::vector<double>& speeds,
                       double rtol) {
  PkProblem pr;
  pr.section = c.model.section;
  pr.density = c.model.flow.density;
  pr.spring_stiffness = k;
  pr.aerodynamics = PkAerodynamics::kExactTheodorsen;
  const PkSweep sw = pk_sweep(pr, speeds);
  MethodResult m;
  m.method = "p-k";
  m.sweep.speeds = sw.speeds;
  for (const auto& row : sw.roots) {
    std::vector<StabilityRoot> out;
    for (const auto& r : row) {
      StabilityRoot s;
      s.eigenvalue = r.p;
      s.frequency = r.frequency;
      s.damping_ratio = r.damping_ratio;
      s.reduced_frequency = r.reduced_frequency;
      s.shape = r.shape;
      out.push_back(s);
    }
    m.sweep.roots.push_back(out);
  }
  const PkCrossing f = pk_flutter(pr, sw, rtol);
  const double w_floor = frequency_floor(c.model);
  if (f.found && f.frequency > w_floor) {
    m.flutter.found = true;
    m.flutter.speed = f.speed;
    m.flutter.frequency = f.frequency;
    m.flutter.reduced_frequency = f.reduced_frequency;
    m.flutter.mode = f.mode;
    m.flutter.shape = f.shape;
  }
  // Divergence is a static property (C(0) = 1 for both methods): the
  // quasi-static eigenproblem is exact for it.
  m.divergence = state_space_divergence(c.model, k, speeds, rtol);
  return m;
}

}  // namespace

FlutterReport flutter_analysis(const Case& c, const FlutterOptions& o) {
  FlutterReport rep;
  const SectionProperties& s = c.model.section;
  const int n = s.dof;
  const auto w = uncoupled_frequencies(s);
  rep.reference_frequency = w.pitch;
  rep.reference_speed = s.semichord * w.pitch;
  rep.density = c.model.flow.density;
  rep.dive_speed_eas = c.dive_speed_eas;
  const std::vector<double> speeds = o.speeds.empty() ? default_speeds(c) : o.speeds;

  // Spring stiffness per linearisation.
  std::vector<std::pair<Linearisation, DofVector>> lins;
  DofVector nominal(n), closed(n), open(n), df(n);
  for (int j = 0; j < n; ++j) {
    const SpringLaw& law = c.model.springs[j];
    nominal(j) = law.nominal_stiffness();
    closed(j) = law.gap_closed_stiffness();
    open(j) = law.gap_open_stiffness();
    const double unit = j == kPlunge ? 1.0 : kRadPerDeg;
    df(j) = o.amplitude ? law.describing_function(*o.amplitude * unit) : nominal(j);
    if (!law.breakpoints().empty()) rep.has_gap = true;
  }
  lins.push_back({Linearisation::kNominal, nominal});
  if (rep.has_gap) {
    lins.push_back({Linearisation::kGapClosed, closed});
    lins.push_back({Linearisation::kGapOpen, open});
  }
  if (o.amplitude) lins.push_back({Linearisation::kDescribingFunction, df});

  // Mode names from the in-vacuo shapes at nominal stiffness.
  {
    const Eigen::MatrixXd M = structural_mass(s);
    const Eigen::MatrixXd K = nominal.asDiagonal();
    Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> es(K, M);
    for (Eigen::Index i = 0; i < n; ++i) {
      const Eigen::VectorXcd v = normalised_shape(es.eigenvectors().col(i).cast<cd>(), s.semichord);
      rep.mode_names.push_back(dof_name(dominant_dof(v, M, s.semichord)));
    }
  }

  for (const auto& [lin, k] : lins) {
    LinearisationResult lr;
    lr.linearisation = lin;
    lr.stiffness = k;
    if (o.state_space) {
      MethodResult m;
      m.method = "state-space";
      m.sweep = state_space_sweep(c.model, k, speeds);
      m.flutter = state_space_flutter(c.model, k, m.sweep, o.relative_tolerance);
      m.divergence = state_space_divergence(c.model, k, speeds, o.relative_tolerance);
      lr.methods.push_back(std::move(m));
    }
    if (o.pk) lr.methods.push_back(pk_method(c, k, speeds, o.relative_tolerance));
    rep.results.push_back(std::move(lr));
  }
  if (o.lco_prediction) rep.lco = describing_function_lco(c, speeds);
  return rep;
}

}  // namespace aerosect
