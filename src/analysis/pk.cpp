#include "aerosect/analysis/pk.hpp"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>
#include <optional>

#include <Eigen/Eigenvalues>
#include <Eigen/LU>

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

// Index of the eigenvalue continuing (p_ref, shape_ref): root_tracking.hpp.
Eigen::Index pick(const Spectrum& sp, cd p_ref, const Eigen::VectorXcd& shape_ref,
                  double semichord, double ambiguity_ratio) {
  std::vector<cd> values(sp.values.data(), sp.values.data() + sp.values.size());
  std::vector<Eigen::VectorXcd> shapes;
  for (Eigen::Index i = 0; i < sp.values.size(); ++i)
    shapes.push_back(normalised_shape(sp.shapes.col(i), semichord));
  const Eigen::VectorXcd ref = shape_ref.size() == sp.shapes.rows() ? shape_ref : Eigen::VectorXcd();
  return continuing_candidate(values, shapes, p_ref, ref, ambiguity_ratio);
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
Root pk_root(cd p, const Eigen::VectorXcd& q, double U, double b, double sep,
             double spectral_radius) {
  if (std::abs(p) <= 1e-10 * spectral_radius) p = 0.0;
  Root r = make_root(p, normalised_shape(q, b), U, b);
  r.separation = sep;
  r.spectral_radius = spectral_radius;
  return r;
}

// One mode at one speed, from a starting root.
Root solve_mode(const PkProblem& pr, const Assembly& a, const Root& start) {
  const PkSettings& st = pr.settings;
  const double U = a.airspeed, b = a.semichord;
  cd p_ref = start.eigenvalue;
  Eigen::VectorXcd shape_ref = start.shape;
  if (U <= 0) {
    const Quadratic q = quadratic(a, 0.0);  // circulatory terms vanish at U = 0
    const Spectrum sp = spectrum(a, q);
    const Eigen::Index i = pick(sp, p_ref, shape_ref, b, st.ambiguity_ratio);
    const double sep = separation(sp, i);
    cd p = sp.values(i);
    Eigen::VectorXcd v = sp.shapes.col(i);
    polish(q, p, v, sep);
    Root r = pk_root(p, v, U, b, sep, sp.values.cwiseAbs().maxCoeff());
    r.converged = true;
    r.iterations = 1;
    return r;
  }
  // Solve r(k) = Im(p(k)) b / U - k = 0: fixed-point steps, accelerated by
  // secant steps once two residuals are known.
  double k = p_ref.imag() * b / U;
  double k_old = 0, r_old = 0;
  bool have_old = false;
  Root r;
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
    r = pk_root(p, v, U, b, sep, radius);
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

bool acceptable_step(const std::vector<Root>& from, const std::vector<Root>& to,
                     double fraction) {
  for (std::size_t i = 0; i < to.size(); ++i) {
    if (!to[i].converged && from[i].converged) return false;
    if (std::abs(to[i].eigenvalue - from[i].eigenvalue) > fraction * from[i].separation) return false;
    for (std::size_t j = 0; j < i; ++j)
      if (std::abs(to[i].eigenvalue - to[j].eigenvalue) <=
          1e-9 * std::max(std::abs(to[i].eigenvalue), std::abs(to[j].eigenvalue)))
        return false;
  }
  return true;
}

// The p-k root provider: a step is accepted when acceptable_step holds (or
// it cannot be halved further).
RootProvider pk_provider(const PkProblem& pr) {
  RootProvider p;
  p.max_halvings = pr.settings.max_step_halvings;
  p.step = [&pr](double U, const std::vector<Root>& from,
                 bool last_try) -> std::optional<std::vector<Root>> {
    std::vector<Root> to = pk_roots(pr, U, from);
    if (last_try || acceptable_step(from, to, pr.settings.max_step_fraction)) return to;
    return std::nullopt;
  };
  return p;
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

std::vector<Root> pk_roots(const PkProblem& problem, double airspeed,
                             const std::vector<Root>& previous) {
  const Assembly a = assemble(problem, airspeed);
  std::vector<Root> start = previous;
  if (start.empty()) {
    start = in_vacuo_roots(problem.section, springs_of(problem));
    if (airspeed > 0) {
      const Assembly still = assemble(problem, 0.0);
      for (Root& r : start) r = solve_mode(problem, still, r);
    }
  }
  AEROSECT_CHECK(static_cast<int>(start.size()) == a.n);
  std::vector<Root> roots;
  roots.reserve(start.size());
  for (const Root& r : start) roots.push_back(solve_mode(problem, a, r));
  return roots;
}

std::vector<Root> pk_roots(const SectionProperties& s, double density, double airspeed,
                             const DofVector& spring_stiffness, PkAerodynamics aero,
                             const WagnerApproximation& wagner,
                             const std::vector<Root>& previous) {
  PkProblem pr;
  pr.section = s;
  pr.density = density;
  pr.spring_stiffness = spring_stiffness;
  pr.aerodynamics = aero;
  pr.wagner = wagner;
  return pk_roots(pr, airspeed, previous);
}

RootSweep pk_sweep(const PkProblem& problem, const std::vector<double>& speeds,
                   const std::atomic<bool>* cancel) {
  for (std::size_t i = 0; i < speeds.size(); ++i) {
    AEROSECT_CHECK(speeds[i] >= 0.0 && std::isfinite(speeds[i]));
    if (i > 0) AEROSECT_CHECK(speeds[i] > speeds[i - 1]);
  }
  return sweep_roots(pk_provider(problem), pk_roots(problem, 0.0, {}), speeds, cancel);
}

Crossing pk_flutter(const PkProblem& problem, const RootSweep& sweep, double relative_tolerance) {
  return first_flutter_crossing(pk_provider(problem), sweep, relative_tolerance,
                                frequency_floor(problem.section));
}

}  // namespace aerosect
