#include "aerosect/analysis/pk.hpp"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>

#include <Eigen/Eigenvalues>
#include <Eigen/LU>
#include <boost/math/tools/toms748_solve.hpp>

#include "aerosect/analysis/mode_shapes.hpp"
#include "aerosect/error.hpp"
#include "aerosect/model/theodorsen_function.hpp"

namespace aerosect {

namespace {

using cd = std::complex<double>;

// The speed-dependent, k-independent parts of the flutter determinant.
struct Assembly {
  int n = 2;
  double airspeed = 0;
  double semichord = 1;
  Eigen::MatrixXcd mass;           // M_s + M_a
  Eigen::MatrixXcd mass_inverse;
  Eigen::MatrixXcd damping;        // C_s + C_a
  Eigen::MatrixXcd stiffness;      // K + K_a
  Eigen::MatrixXcd circ_rate;      // f_c d_v^T
  Eigen::MatrixXcd circ_disp;      // f_c d_q^T
};

DofVector springs_of(const PkProblem& pr) {
  if (pr.spring_stiffness.size() == 0) return nominal_spring_stiffness(pr.section);
  AEROSECT_CHECK(pr.spring_stiffness.size() == pr.section.dof);
  return pr.spring_stiffness;
}

Assembly assemble(const PkProblem& pr, double U) {
  const SectionProperties& s = pr.section;
  AEROSECT_CHECK(s.dof == 2 || s.dof == 3);
  AEROSECT_CHECK(U >= 0.0 && std::isfinite(U));
  Assembly a;
  a.n = s.dof;
  a.airspeed = U;
  a.semichord = s.semichord;
  const AeroMatrices am = theodorsen_matrices(s, {pr.density, U}, AeroModel::kWagner);
  const DofVector k = springs_of(pr);
  const Eigen::MatrixXd M = structural_mass(s) + am.apparent_mass;
  a.mass = M.cast<cd>();
  a.mass_inverse = M.inverse().cast<cd>();
  a.damping = (structural_damping(s) + am.damping).cast<cd>();
  const Eigen::MatrixXd K = Eigen::MatrixXd(k.asDiagonal()) + am.stiffness;
  a.stiffness = K.cast<cd>();
  const Eigen::MatrixXd fv = am.circulation_force * am.downwash_rate.transpose();
  const Eigen::MatrixXd fq = am.circulation_force * am.downwash_displacement.transpose();
  a.circ_rate = fv.cast<cd>();
  a.circ_disp = fq.cast<cd>();
  return a;
}

// C at signed reduced frequency k (C(-k) = conj C(k)).
cd circulation(const PkProblem& pr, double k) {
  if (pr.aerodynamics == PkAerodynamics::kWagnerApproximation)
    return wagner_rational(pr.wagner, k);
  if (!std::isfinite(k)) return {0.5, 0.0};
  const cd c = theodorsen_function(std::abs(k));
  return k >= 0 ? c : std::conj(c);
}

// Quadratic matrix and its derivative in p for a given circulation value.
struct Quadratic {
  Eigen::MatrixXcd M, C, K;
  Eigen::MatrixXcd at(cd p) const { return p * p * M + p * C + K; }
  Eigen::MatrixXcd slope(cd p) const { return 2.0 * p * M + C; }
};

Quadratic quadratic(const Assembly& a, cd c) {
  return {a.mass, a.damping - c * a.circ_rate, a.stiffness - c * a.circ_disp};
}

struct Spectrum {
  Eigen::VectorXcd values;   // 2n eigenvalues
  Eigen::MatrixXcd shapes;   // n x 2n displacement parts
};

Spectrum spectrum(const Assembly& a, const Quadratic& q) {
  const int n = a.n;
  Eigen::MatrixXcd A = Eigen::MatrixXcd::Zero(2 * n, 2 * n);
  A.topRightCorner(n, n) = Eigen::MatrixXcd::Identity(n, n);
  A.bottomLeftCorner(n, n) = -a.mass_inverse * q.K;
  A.bottomRightCorner(n, n) = -a.mass_inverse * q.C;
  Eigen::ComplexEigenSolver<Eigen::MatrixXcd> es(A, true);
  AEROSECT_CHECK(es.info() == Eigen::Success);
  return {es.eigenvalues(), es.eigenvectors().topRows(n)};
}

// Index of the eigenvalue continuing (p_ref, shape_ref).
Eigen::Index pick(const Spectrum& sp, cd p_ref, const Eigen::VectorXcd& shape_ref,
                  double semichord, double ambiguity_ratio) {
  const Eigen::Index m = sp.values.size();
  Eigen::Index best = 0;
  double d_best = std::numeric_limits<double>::infinity();
  for (Eigen::Index i = 0; i < m; ++i) {
    const double d = std::abs(sp.values(i) - p_ref);
    if (d < d_best) {
      d_best = d;
      best = i;
    }
  }
  if (shape_ref.size() != sp.shapes.rows()) return best;
  // Several nearly equidistant candidates: the best-correlated shape wins.
  const double reach = ambiguity_ratio * d_best + 1e-14 * std::abs(p_ref);
  Eigen::Index chosen = best;
  double best_mac = -1;
  int count = 0;
  for (Eigen::Index i = 0; i < m; ++i) {
    if (std::abs(sp.values(i) - p_ref) > reach) continue;
    ++count;
    const double c = mac(normalised_shape(sp.shapes.col(i), semichord), shape_ref);
    if (c > best_mac) {
      best_mac = c;
      chosen = i;
    }
  }
  return count > 1 ? chosen : best;
}

double separation(const Spectrum& sp, Eigen::Index i) {
  double d = std::numeric_limits<double>::infinity();
  for (Eigen::Index j = 0; j < sp.values.size(); ++j)
    if (j != i) d = std::min(d, std::abs(sp.values(j) - sp.values(i)));
  return d;
}

// Newton (nonlinear inverse) iteration on Q(p) v = 0 from the linearisation's
// eigenpair; the linearised eigenvalue is kept if the polish wanders off.
void polish(const Quadratic& q, cd& p, Eigen::VectorXcd& v, double sep) {
  cd lam = p;
  Eigen::VectorXcd x = v;
  Eigen::Index e = 0;
  x.cwiseAbs().maxCoeff(&e);
  x /= x(e);
  for (int it = 0; it < 6; ++it) {
    const Eigen::VectorXcd y = q.at(lam).fullPivLu().solve(q.slope(lam) * x);
    if (!y.allFinite() || std::abs(y(e)) == 0) break;
    const cd step = x(e) / y(e);
    lam -= step;
    x = y / y(e);
    x.cwiseAbs().maxCoeff(&e);
    x /= x(e);
    if (std::abs(step) <= 4 * std::numeric_limits<double>::epsilon() * std::abs(lam)) break;
  }
  if (std::isfinite(lam.real()) && std::isfinite(lam.imag()) && x.allFinite() &&
      std::abs(lam - p) <= 0.1 * sep) {
    p = lam;
    v = x;
  }
}

// A root at rounding level of the spectrum's scale is a neutral zero root
// (a free DOF): its sign is noise, so it is reported as exactly 0.
PkRoot make_root(cd p, const Eigen::VectorXcd& q, double U, double b, double sep,
                 double spectral_radius) {
  if (std::abs(p) <= 1e-10 * spectral_radius) p = 0.0;
  PkRoot r;
  r.p = p;
  r.frequency = std::abs(p.imag());
  const double mag = std::abs(p);
  r.damping_ratio = mag > 0 ? -p.real() / mag : 0.0;
  if (U > 0)
    r.reduced_frequency = r.frequency * b / U;
  else
    r.reduced_frequency = r.frequency > 0 ? std::numeric_limits<double>::infinity() : 0.0;
  r.shape = normalised_shape(q, b);
  r.separation = sep;
  return r;
}

// One mode at one speed, from a starting root.
PkRoot solve_mode(const PkProblem& pr, const Assembly& a, const PkRoot& start) {
  const PkSettings& st = pr.settings;
  const double U = a.airspeed, b = a.semichord;
  cd p_ref = start.p;
  Eigen::VectorXcd shape_ref = start.shape;
  if (U <= 0) {
    const Quadratic q = quadratic(a, 0.0);  // circulatory terms vanish at U = 0
    const Spectrum sp = spectrum(a, q);
    const Eigen::Index i = pick(sp, p_ref, shape_ref, b, st.ambiguity_ratio);
    const double sep = separation(sp, i);
    cd p = sp.values(i);
    Eigen::VectorXcd v = sp.shapes.col(i);
    polish(q, p, v, sep);
    PkRoot r = make_root(p, v, U, b, sep, sp.values.cwiseAbs().maxCoeff());
    r.converged = true;
    r.iterations = 1;
    return r;
  }
  // Solve r(k) = Im(p(k)) b / U - k = 0: fixed-point steps, accelerated by
  // secant steps once two residuals are known.
  double k = p_ref.imag() * b / U;
  double k_old = 0, r_old = 0;
  bool have_old = false;
  PkRoot r;
  for (int it = 1; it <= st.max_iterations; ++it) {
    const Quadratic q = quadratic(a, circulation(pr, k));
    const Spectrum sp = spectrum(a, q);
    const Eigen::Index i = pick(sp, p_ref, shape_ref, b, st.ambiguity_ratio);
    const double sep = separation(sp, i);
    cd p = sp.values(i);
    Eigen::VectorXcd v = sp.shapes.col(i);
    polish(q, p, v, sep);
    const double radius = sp.values.cwiseAbs().maxCoeff();
    const double k_new = p.imag() * b / U;
    r = make_root(p, v, U, b, sep, radius);
    r.reduced_frequency = std::abs(k);  // the k at which C was evaluated
    r.iterations = it;
    // Relative to |p| b / U: the same as relative to k for an oscillatory
    // root, and still meaningful for a root on its way to the real axis.
    if (std::abs(k_new - k) <= st.tolerance * std::max(std::abs(p), 1e-10 * radius) * b / U) {
      r.converged = true;
      return r;
    }
    p_ref = p;
    shape_ref = r.shape;
    const double res = k_new - k;
    double k_next = k_new;
    if (have_old && res != r_old) {
      const double k_sec = k - res * (k - k_old) / (res - r_old);
      // |k| <= |p| b / U for any root: a secant step far outside is not trusted.
      if (std::isfinite(k_sec) && std::abs(k_sec) <= 1.5 * std::abs(p) * b / U) k_next = k_sec;
    }
    k_old = k;
    r_old = res;
    have_old = true;
    k = k_next;
  }
  r.converged = false;
  return r;
}

// Starting roots from the in-vacuo modes of (K, M_s), ascending frequency.
std::vector<PkRoot> in_vacuo_start(const PkProblem& pr) {
  const DofVector k = springs_of(pr);
  const Eigen::MatrixXd M = structural_mass(pr.section);
  const Eigen::MatrixXd K = k.asDiagonal();
  Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> es(K, M);
  AEROSECT_CHECK(es.info() == Eigen::Success);
  std::vector<PkRoot> roots;
  for (Eigen::Index i = 0; i < es.eigenvalues().size(); ++i) {
    PkRoot r;
    r.p = cd(0.0, std::sqrt(std::max(0.0, es.eigenvalues()(i))));
    r.frequency = r.p.imag();
    r.shape = normalised_shape(es.eigenvectors().col(i).cast<cd>(), pr.section.semichord);
    r.converged = true;
    roots.push_back(r);
  }
  return roots;
}

bool acceptable_step(const std::vector<PkRoot>& from, const std::vector<PkRoot>& to,
                     double fraction) {
  for (std::size_t i = 0; i < to.size(); ++i) {
    if (!to[i].converged && from[i].converged) return false;
    if (std::abs(to[i].p - from[i].p) > fraction * from[i].separation) return false;
    for (std::size_t j = 0; j < i; ++j)
      if (std::abs(to[i].p - to[j].p) <=
          1e-9 * std::max(std::abs(to[i].p), std::abs(to[j].p)))
        return false;
  }
  return true;
}

// Continue roots from (Ua, from) to Ub with step halving.
std::vector<PkRoot> advance(const PkProblem& pr, double Ua, const std::vector<PkRoot>& from,
                            double Ub, int depth) {
  std::vector<PkRoot> to = pk_roots(pr, Ub, from);
  if (depth >= pr.settings.max_step_halvings ||
      acceptable_step(from, to, pr.settings.max_step_fraction))
    return to;
  const double Um = 0.5 * (Ua + Ub);
  const std::vector<PkRoot> mid = advance(pr, Ua, from, Um, depth + 1);
  return advance(pr, Um, mid, Ub, depth + 1);
}

}  // namespace

const char* to_string(PkAerodynamics a) {
  switch (a) {
    case PkAerodynamics::kExactTheodorsen: return "theodorsen";
    case PkAerodynamics::kWagnerApproximation: return "wagner";
  }
  return "?";
}

DofVector nominal_spring_stiffness(const SectionProperties& s) {
  return structural_stiffness(s).diagonal();
}

std::vector<PkRoot> pk_roots(const PkProblem& problem, double airspeed,
                             const std::vector<PkRoot>& previous) {
  const Assembly a = assemble(problem, airspeed);
  std::vector<PkRoot> start = previous;
  if (start.empty()) {
    start = in_vacuo_start(problem);
    if (airspeed > 0) {
      const Assembly still = assemble(problem, 0.0);
      for (PkRoot& r : start) r = solve_mode(problem, still, r);
    }
  }
  AEROSECT_CHECK(static_cast<int>(start.size()) == a.n);
  std::vector<PkRoot> roots;
  roots.reserve(start.size());
  for (const PkRoot& r : start) roots.push_back(solve_mode(problem, a, r));
  return roots;
}

std::vector<PkRoot> pk_roots(const SectionProperties& s, double density, double airspeed,
                             const DofVector& spring_stiffness, PkAerodynamics aero,
                             const WagnerApproximation& wagner,
                             const std::vector<PkRoot>& previous) {
  PkProblem pr;
  pr.section = s;
  pr.density = density;
  pr.spring_stiffness = spring_stiffness;
  pr.aerodynamics = aero;
  pr.wagner = wagner;
  return pk_roots(pr, airspeed, previous);
}

PkSweep pk_sweep(const PkProblem& problem, const std::vector<double>& speeds) {
  PkSweep sw;
  sw.speeds = speeds;
  for (std::size_t i = 0; i < speeds.size(); ++i) {
    AEROSECT_CHECK(speeds[i] >= 0.0 && std::isfinite(speeds[i]));
    if (i > 0) AEROSECT_CHECK(speeds[i] > speeds[i - 1]);
  }
  double U = 0;
  std::vector<PkRoot> current = pk_roots(problem, 0.0, {});
  for (double target : speeds) {
    if (target > U) current = advance(problem, U, current, target, 0);
    U = target;
    sw.roots.push_back(current);
  }
  return sw;
}

PkCrossing pk_flutter(const PkProblem& problem, const PkSweep& sweep,
                      double relative_tolerance) {
  AEROSECT_CHECK(sweep.roots.size() == sweep.speeds.size());
  AEROSECT_CHECK(relative_tolerance > 0);
  PkCrossing best;
  for (std::size_t i = 0; i + 1 < sweep.speeds.size(); ++i) {
    const std::vector<PkRoot>& lo = sweep.roots[i];
    const std::vector<PkRoot>& hi = sweep.roots[i + 1];
    const double Ua = sweep.speeds[i], Ub = sweep.speeds[i + 1];
    for (std::size_t j = 0; j < lo.size(); ++j) {
      if (!(lo[j].damping_ratio > 0 && hi[j].damping_ratio <= 0)) continue;
      auto re_p = [&](double U) {
        if (U <= Ua) return lo[j].p.real();
        return advance(problem, Ua, lo, U, 0)[j].p.real();
      };
      auto tol = [relative_tolerance](double x, double y) {
        return std::abs(y - x) <= relative_tolerance * std::min(std::abs(x), std::abs(y));
      };
      std::uintmax_t max_iter = 200;
      double U = Ub;
      if (hi[j].p.real() != 0.0) {
        const auto bracket = boost::math::tools::toms748_solve(
            re_p, Ua, Ub, lo[j].p.real(), hi[j].p.real(), tol, max_iter);
        U = 0.5 * (bracket.first + bracket.second);
      }
      if (best.found && U >= best.speed) continue;
      const PkRoot r = advance(problem, Ua, lo, U, 0)[j];
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
