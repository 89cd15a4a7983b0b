#include "aerosect/analysis/equilibrium.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

#include <Eigen/Eigenvalues>
#include <Eigen/LU>
#include <Eigen/QR>
#include <fmt/format.h>

#include "aerosect/error.hpp"

namespace aerosect {

namespace {

// At most this many region combinations are tried (three freeplay springs
// have 27; three 256-point tables would have 1.7e7).
constexpr long long kMaxCombinations = 200000;

struct Problem {
  int n = 2;
  std::vector<int> active;           // DOFs not held
  DofMatrix K;                       // K_lin + K_st (N/m, N m/rad ... per m span)
  DofVector F0;                      // constant generalised force
  DofVector scale;                   // q_scaled = q / scale (b for plunge, 1 rad for angles)
  std::vector<const SpringLaw*> law; // every DOF's law
  std::vector<bool> nonlinear;
};

// Residual R(q) = K q + f_nl(q; r) - F0 and its Jacobian, active DOFs only,
// in scaled units: rows times scale (force x length = moment-like), columns
// per scaled displacement.
void residual(const Problem& p, const DofVector& q, const std::vector<int>& r, Eigen::VectorXd& R,
              Eigen::MatrixXd& J) {
  const int na = static_cast<int>(p.active.size());
  R.resize(na);
  J.resize(na, na);
  for (int a = 0; a < na; ++a) {
    const int i = p.active[a];
    double Ri = -p.F0(i);
    for (int j = 0; j < p.n; ++j) Ri += p.K(i, j) * q(j);
    if (p.nonlinear[i]) Ri += p.law[i]->force(q(i), r[i]);
    R(a) = Ri * p.scale(i);
    for (int c = 0; c < na; ++c) {
      const int j = p.active[c];
      double Kij = p.K(i, j);
      if (i == j && p.nonlinear[i]) Kij += p.law[i]->tangent_stiffness(q(i), r[i]);
      J(a, c) = Kij * p.scale(i) * p.scale(j);
    }
  }
}

// Is q(j) inside region r of its law (to round-off of the scaled units)?
bool inside(const SpringLaw& law, int r, double q, double scale) {
  const auto bp = law.breakpoints();
  const auto at = [&](int i) { return bp[static_cast<std::size_t>(i)]; };
  const auto tol = [&](int i) { return 1e-10 * (scale + std::abs(at(i))); };
  if (r > 0 && q < at(r - 1) - tol(r - 1)) return false;
  if (r < static_cast<int>(bp.size()) && q > at(r) + tol(r)) return false;
  return true;
}

// Interval [lo, hi] of region r.
void bounds(const SpringLaw& law, int r, double& lo, double& hi) {
  const auto bp = law.breakpoints();
  lo = r > 0 ? bp[static_cast<std::size_t>(r - 1)] : -std::numeric_limits<double>::infinity();
  hi = r < static_cast<int>(bp.size()) ? bp[static_cast<std::size_t>(r)] : std::numeric_limits<double>::infinity();
}

// Solve one combination. Returns false when it has no consistent solution.
bool solve_combination(const Problem& p, const std::vector<int>& r, DofVector& q, int& free_dirs) {
  const int na = static_cast<int>(p.active.size());
  q = DofVector::Zero(p.n);
  free_dirs = 0;
  if (na == 0) return true;
  Eigen::VectorXd R;
  Eigen::MatrixXd J;
  residual(p, q, r, R, J);
  const double force_scale = std::max({p.F0.cwiseProduct(p.scale).cwiseAbs().maxCoeff(),
                                       J.cwiseAbs().maxCoeff() * 1e-3, 1e-300});
  bool polynomial = false;
  for (int i : p.active) polynomial |= p.nonlinear[i] && !p.law[i]->is_piecewise_linear();

  // Newton from q = 0 (one step for a piecewise-linear combination). A
  // singular Jacobian: the minimum-norm step, with the dimension of its null
  // space remembered (a continuum of equilibria when consistent).
  for (int it = 0; it < 60; ++it) {
    Eigen::CompleteOrthogonalDecomposition<Eigen::MatrixXd> cod(J);
    cod.setThreshold(1e-12);
    const Eigen::VectorXd dz = cod.solve(-R);
    free_dirs = na - static_cast<int>(cod.rank());
    for (int a = 0; a < na; ++a) q(p.active[a]) += dz(a) * p.scale(p.active[a]);
    residual(p, q, r, R, J);
    if (!polynomial) break;
    if (dz.cwiseAbs().maxCoeff() <= 1e-14 * std::max(1.0, q.cwiseQuotient(p.scale).cwiseAbs().maxCoeff()))
      break;
    if (!q.allFinite()) return false;
  }
  if (!q.allFinite()) return false;
  if (R.cwiseAbs().maxCoeff() > 1e-9 * force_scale) return false;  // inconsistent or not converged

  // A continuum: move along the null space to the point nearest 0 that
  // lies in the combination's regions (one direction at a time).
  if (free_dirs > 0) {
    Eigen::FullPivLU<Eigen::MatrixXd> lu(J);
    lu.setThreshold(1e-12);
    const Eigen::MatrixXd N = lu.kernel();
    for (Eigen::Index k = 0; k < N.cols(); ++k) {
      double zlo = -std::numeric_limits<double>::infinity(), zhi = std::numeric_limits<double>::infinity();
      for (int a = 0; a < na; ++a) {
        const int i = p.active[a];
        const double ni = N(a, k) * p.scale(i);
        if (!p.nonlinear[i] || std::abs(ni) < 1e-12 * p.scale(i)) continue;
        double lo, hi;
        bounds(*p.law[i], r[i], lo, hi);
        double z1 = (lo - q(i)) / ni, z2 = (hi - q(i)) / ni;
        if (z1 > z2) std::swap(z1, z2);
        zlo = std::max(zlo, z1);
        zhi = std::min(zhi, z2);
      }
      if (zlo > zhi) continue;
      const double z = std::clamp(0.0, zlo, zhi);
      for (int a = 0; a < na; ++a) q(p.active[a]) += z * N(a, k) * p.scale(p.active[a]);
    }
  }
  for (int i : p.active)
    if (p.nonlinear[i] && !inside(*p.law[i], r[i], q(i), p.scale(i))) return false;
  return true;
}

}  // namespace

std::string region_name(const SpringLaw& law, int region) {
  const int nr = law.region_count();
  if (nr <= 1) return "";
  if (law.kind() == "freeplay" && nr == 3) return region == 0 ? "lower stop" : region == 1 ? "gap" : "upper stop";
  if (law.kind() == "bilinear" && nr == 3) return region == 0 ? "below" : region == 1 ? "inner" : "above";
  return fmt::format("segment {} of {}", region + 1, nr);
}

EquilibriumResult static_equilibrium(const AeroelasticModel& model) {
  const ModelDescription& d = model.description();
  const StateLayout& L = model.layout();
  const int n = L.n_dof;
  const AeroMatrices& am = model.aero();
  EquilibriumResult out;
  out.steady_condition = model.has_steady_condition();

  // The static balance (equilibrium.hpp): K = K_lin + K_st, F0.
  Problem p;
  p.n = n;
  const DofMatrix K_st = am.stiffness - am.circulation_force * am.downwash_displacement.transpose();
  p.K = K_st;
  p.scale = DofVector::Ones(n);
  p.scale(kPlunge) = d.section.semichord;
  p.nonlinear.assign(static_cast<std::size_t>(n), false);
  for (int j : model.nonlinear_springs()) p.nonlinear[static_cast<std::size_t>(j)] = true;
  for (int j = 0; j < n; ++j) {
    p.law.push_back(&d.springs[static_cast<std::size_t>(j)]);
    if (!p.nonlinear[j]) p.K(j, j) += d.springs[static_cast<std::size_t>(j)].nominal_stiffness();
    if (!d.held[static_cast<std::size_t>(j)]) p.active.push_back(j);
  }
  const DofVector q_a0 = model.aerodynamic_offset().segment(L.displacement, n);
  p.F0 = -K_st * q_a0 + model.steady_force();

  // Region combinations of the nonlinear springs of active DOFs (held ones
  // sit at 0, in the region holding 0).
  std::vector<int> varying;
  long long combos = 1;
  std::vector<int> r(static_cast<std::size_t>(n), 0);
  for (int j = 0; j < n; ++j) {
    r[j] = d.springs[static_cast<std::size_t>(j)].region_of(0.0);
    if (p.nonlinear[j] && !d.held[static_cast<std::size_t>(j)] && d.springs[static_cast<std::size_t>(j)].region_count() > 1) {
      varying.push_back(j);
      combos *= d.springs[static_cast<std::size_t>(j)].region_count();
    }
  }
  if (combos > kMaxCombinations) {
    out.combinations = 0;
    out.remark = fmt::format("not solved: the springs' regions give {} combinations (at most {} are tried)",
                             combos, kMaxCombinations);
    return out;
  }
  out.combinations = static_cast<int>(combos);

  const Eigen::VectorXd W = state_weights(model);
  std::vector<int> idx(varying.size(), 0);
  for (long long c = 0; c < combos; ++c) {
    // Combination c in mixed radix.
    long long rest = c;
    for (std::size_t v = 0; v < varying.size(); ++v) {
      const int nr = d.springs[static_cast<std::size_t>(varying[v])].region_count();
      r[varying[v]] = static_cast<int>(rest % nr);
      rest /= nr;
    }
    DofVector q;
    int free_dirs = 0;
    if (!solve_combination(p, r, q, free_dirs)) continue;
    // A point on a breakpoint is found by both neighbouring combinations.
    bool seen = false;
    for (const Equilibrium& e : out.equilibria)
      if ((e.displacement - q).cwiseQuotient(p.scale).cwiseAbs().maxCoeff() <=
          1e-9 * std::max(1.0, q.cwiseQuotient(p.scale).cwiseAbs().maxCoeff()))
        seen = true;
    if (seen) continue;

    Equilibrium e;
    e.displacement = q;
    e.regions = r;
    e.free_directions = free_dirs;
    const std::vector<double> x = model.initial_state(q, DofVector::Zero(n), true);
    e.state = Eigen::Map<const Eigen::VectorXd>(x.data(), L.size);
    std::vector<double> f(static_cast<std::size_t>(L.size));
    model.rhs(x.data(), f.data(), 0.0, r, 0);
    e.residual = 0;
    for (int i = 0; i < L.size; ++i) e.residual = std::max(e.residual, std::abs(f[i]) * W(i));
    e.loads = model.loads(x.data(), f.data(), 0.0, 0);
    e.tangent_stiffness = p.K;
    for (int j = 0; j < n; ++j) {
      const SpringLaw& law = d.springs[static_cast<std::size_t>(j)];
      SpringEquilibrium s;
      s.law = law.kind();
      s.region = r[j];
      s.region_count = law.region_count();
      s.region_name = region_name(law, r[j]);
      s.force = law.force(q(j), r[j]);
      s.tangent_stiffness = law.tangent_stiffness(q(j), r[j]);
      s.in_contact = law.kind() == "freeplay" && law.region_count() == 3 && r[j] != 1;
      if (p.nonlinear[j]) e.tangent_stiffness(j, j) += s.tangent_stiffness;
      e.springs.push_back(s);
    }
    // Static stability from the tangent static stiffness of the active DOFs
    // (scaled): a real eigenvalue <= 0 is divergence.
    if (free_dirs > 0) {
      e.static_stability = "neutral";
    } else {
      const int na = static_cast<int>(p.active.size());
      Eigen::MatrixXd Ks(na, na);
      for (int a = 0; a < na; ++a)
        for (int b2 = 0; b2 < na; ++b2)
          Ks(a, b2) = e.tangent_stiffness(p.active[a], p.active[b2]) * p.scale(p.active[a]) * p.scale(p.active[b2]);
      bool stable = true;
      if (na > 0) {
        const Eigen::VectorXcd ev = Eigen::EigenSolver<Eigen::MatrixXd>(Ks, false).eigenvalues();
        for (Eigen::Index i = 0; i < ev.size(); ++i)
          if (ev(i).real() <= 0) stable = false;
      }
      e.static_stability = stable ? "stable" : "unstable";
    }
    out.equilibria.push_back(std::move(e));
  }

  // A point of a continuum is not another equilibrium: a gap's edge (with
  // no contact load) is found again by the stop's combination.
  {
    std::vector<bool> drop(out.equilibria.size(), false);
    for (std::size_t ia = 0; ia < out.equilibria.size(); ++ia) {
      const Equilibrium& a = out.equilibria[ia];
      bool in_family = false;
      for (const Equilibrium& b : out.equilibria) {
        if (&a == &b || b.free_directions == 0 || a.free_directions > 0) continue;
        Eigen::VectorXd R;
        Eigen::MatrixXd J;
        residual(p, a.displacement, b.regions, R, J);
        bool inside_all = true;
        for (int i : p.active)
          if (p.nonlinear[i] && !inside(*p.law[i], b.regions[i], a.displacement(i), p.scale(i))) inside_all = false;
        const double fs = std::max({p.F0.cwiseProduct(p.scale).cwiseAbs().maxCoeff(), J.cwiseAbs().maxCoeff() * 1e-3, 1e-300});
        if (inside_all && R.cwiseAbs().maxCoeff() <= 1e-9 * fs) in_family = true;
      }
      drop[ia] = in_family;
    }
    std::vector<Equilibrium> kept;
    for (std::size_t ia = 0; ia < out.equilibria.size(); ++ia)
      if (!drop[ia]) kept.push_back(std::move(out.equilibria[ia]));
    out.equilibria = std::move(kept);
  }

  // Stable first, then nearest 0.
  const DofVector sc = p.scale;
  std::stable_sort(out.equilibria.begin(), out.equilibria.end(), [&](const Equilibrium& a, const Equilibrium& b) {
    const int ra = a.static_stability == "stable" ? 0 : a.static_stability == "neutral" ? 1 : 2;
    const int rb = b.static_stability == "stable" ? 0 : b.static_stability == "neutral" ? 1 : 2;
    if (ra != rb) return ra < rb;
    return a.displacement.cwiseQuotient(sc).norm() < b.displacement.cwiseQuotient(sc).norm();
  });
  if (out.equilibria.empty()) {
    out.remark = "no static equilibrium: no region of the springs balances the steady loads "
                 "(the section diverges or is pressed beyond every stop)";
  } else if (out.equilibria.size() > 1) {
    out.remark = fmt::format("{} static equilibria; the first listed is used for linearisation and runs",
                             out.equilibria.size());
  } else if (out.equilibria.front().static_stability == "unstable") {
    out.remark = "the only static equilibrium is statically unstable (beyond the divergence speed)";
  }
  return out;
}

RunStart run_start(const AeroelasticModel& model, const DofVector& q0, const DofVector& v0,
                   bool steady_lag_states, const EquilibriumResult* equilibrium) {
  RunStart s;
  if (!model.has_steady_condition()) {
    s.x = model.initial_state(q0, v0, steady_lag_states);
    s.regions = model.regions_of(s.x.data());
    s.reference = "absolute";
    return s;
  }
  EquilibriumResult own;
  if (!equilibrium) {
    own = static_equilibrium(model);
    equilibrium = &own;
  }
  const Equilibrium* e = principal_equilibrium(*equilibrium);
  if (!e) {
    s.x = model.initial_state(q0, v0, steady_lag_states);
    s.regions = model.regions_of(s.x.data());
    s.reference = "absolute (no static equilibrium: " + equilibrium->remark + ")";
    return s;
  }
  s.x = model.initial_state(e->displacement + q0, v0, steady_lag_states);
  // At the equilibrium itself keep its regions (a spring resting exactly on
  // a breakpoint, e.g. at a stop with zero contact load); else the regions
  // of the start.
  s.regions = q0.cwiseAbs().maxCoeff() == 0 ? e->regions : model.regions_of(s.x.data());
  s.reference = "perturbation about the static equilibrium";
  return s;
}

const Equilibrium* principal_equilibrium(const EquilibriumResult& result) {
  return result.equilibria.empty() ? nullptr : &result.equilibria.front();
}

}  // namespace aerosect
