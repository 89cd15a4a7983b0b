#include "aerosect/analysis/flutter.hpp"

#include <fmt/format.h>

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

// Eigenvalues in the closed upper half plane with their displacement parts,
// each marked when it is an aerodynamic lag root (see is_lag_root).
struct Candidates {
  std::vector<cd> values;
  std::vector<Eigen::VectorXcd> shapes;  // normalised (h/b, ...)
  std::vector<bool> lag;                 // aerodynamic lag root
  double spectral_radius = 0;
};

// An eigenvector x = [q | q' | y] of A belongs to an aerodynamic lag root
// when its Wagner lag states carry more than kLagRatio times the 3/4-chord
// downwash Q that drives them: with y_i' = r_i (Q - y_i), an eigenvector has
// y_i = r_i Q / (lambda + r_i), so |y_i| >> |Q| means lambda sits at the lag
// pole -r_i and the root lives in the lag dynamics, not the structure (a
// structural root has |y_i / Q| = |r_i / (lambda + r_i)| of order 1). Q is
// read from A's own Wagner rows: r_i Q = A(w_i, 0:2n) x(0:2n).
constexpr double kLagRatio = 3.0;
bool is_lag_root(const Eigen::MatrixXd& A, const StateLayout& L, const Eigen::VectorXcd& x) {
  const int m = 2 * L.n_dof;
  double worst = 0;
  for (int i = 0; i < L.n_wagner; ++i) {
    const int w = L.wagner + i;
    const double rate = -A(w, w);
    if (!(rate > 0)) continue;
    const cd Q = (A.row(w).head(m).cast<cd>() * x.head(m))(0) / rate;
    const double y = std::abs(x(w));
    if (y > kLagRatio * std::abs(Q)) worst = std::max(worst, y);
  }
  return worst > 0;
}

Candidates candidates_of(const Eigen::MatrixXd& A, const StateLayout& L, double b) {
  Eigen::EigenSolver<Eigen::MatrixXd> es(A, true);
  AEROSECT_CHECK(es.info() == Eigen::Success);
  const double scale = es.eigenvalues().cwiseAbs().maxCoeff();
  Candidates c;
  c.spectral_radius = scale;
  for (Eigen::Index i = 0; i < es.eigenvalues().size(); ++i) {
    const cd v = es.eigenvalues()(i);
    if (v.imag() < -1e-12 * scale) continue;
    c.values.push_back(cd(v.real(), std::max(0.0, v.imag())));
    c.shapes.push_back(normalised_shape(es.eigenvectors().col(i).head(L.n_dof), b));
    c.lag.push_back(is_lag_root(A, L, es.eigenvectors().col(i)));
  }
  return c;
}

// Continue every mode's root from `from` to the candidates `c`. Returns
// false when the assignment is not clean (step too large). With `strict`
// false (the step cannot be refined further, e.g. exactly at a frequency
// coalescence) each mode takes the nearest candidate not yet taken.
// Structural modes continue onto structural candidates: aerodynamic lag
// roots are passed over while any other candidate is left (a mode seeded at
// zero frequency, a DOF without stiffness, would otherwise fall onto one of
// the lag roots that leave zero with it as U grows from 0).
bool assign(const std::vector<Root>& from, const Candidates& c, double U, double b,
            std::vector<Root>& to, bool strict = true) {
  const std::size_t m = from.size();
  to.assign(m, Root{});
  std::vector<bool> taken(c.values.size(), false);
  std::size_t structural = 0;
  for (bool lag : c.lag) structural += lag ? 0 : 1;
  const std::vector<bool> skip_lag = structural >= m ? c.lag : std::vector<bool>();
  for (std::size_t j = 0; j < m; ++j) {
    std::vector<bool> skip = skip_lag;
    if (!strict) {
      if (skip.empty()) skip.assign(c.values.size(), false);
      for (std::size_t i = 0; i < skip.size(); ++i) skip[i] = skip[i] || taken[i];
    }
    const int chosen = strict ? continuing_candidate(c.values, c.shapes, from[j].eigenvalue,
                                                     from[j].shape, 1.5, skip)
                              : continuing_candidate(c.values, c.shapes, from[j].eigenvalue,
                                                     Eigen::VectorXcd(), 1.0, skip);
    AEROSECT_CHECK(chosen >= 0);
    const std::size_t i = static_cast<std::size_t>(chosen);
    double sep = std::numeric_limits<double>::infinity();
    for (std::size_t q = 0; q < c.values.size(); ++q)
      if (q != i) sep = std::min(sep, std::abs(c.values[q] - c.values[i]));
    if (strict) {
      if (taken[i]) return false;
      if (std::abs(c.values[i] - from[j].eigenvalue) > 0.5 * sep) return false;
    }
    taken[i] = true;
    to[j] = make_root(c.values[i], c.shapes[i], U, b);
    to[j].spectral_radius = c.spectral_radius;
    to[j].separation = sep;
    to[j].aerodynamic_lag = c.lag[i];
  }
  return true;
}

// The state-space root provider: eigenvalues of A(U), assigned to the modes.
RootProvider state_space_provider(const AeroelasticModel& model, const DofVector& k) {
  RootProvider p;
  p.max_halvings = 14;
  p.step = [&model, k](double U, const std::vector<Root>& from,
                       bool last_try) -> std::optional<std::vector<Root>> {
    const double b = model.description().section.semichord;
    const Candidates c = candidates_of(model.state_matrix_at(U, k), model.layout(), b);
    std::vector<Root> to;
    if (assign(from, c, U, b, to)) return to;
    if (!last_try) return std::nullopt;
    assign(from, c, U, b, to, false);
    return to;
  };
  return p;
}

// Roots at U = 0 from the in-vacuo modes of (K, M_s).
std::vector<Root> still_air_roots(const AeroelasticModel& model, const DofVector& k) {
  const SectionProperties& s = model.description().section;
  std::vector<Root> roots = in_vacuo_roots(s, k);
  // Still air adds apparent mass and (if any) structural damping: follow by
  // scaling the density from 0 to the case's value.
  ModelDescription d = model.description();
  const double rho = d.flow.density;
  const int steps = 8;
  for (int step = 1; step <= steps; ++step) {
    d.flow.density = rho * step / steps;
    const AeroelasticModel still(d);
    const Candidates c = candidates_of(still.state_matrix_at(0.0, k), still.layout(), s.semichord);
    std::vector<Root> next;
    if (!assign(roots, c, 0.0, s.semichord, next)) {
      // Fall back to nearest-only matching at this density step.
      next = roots;
      for (auto& r : next) {
        std::size_t best = 0;
        for (std::size_t i = 1; i < c.values.size(); ++i)
          if (std::abs(c.values[i] - r.eigenvalue) < std::abs(c.values[best] - r.eigenvalue)) best = i;
        r = make_root(c.values[best], c.shapes[best], 0.0, s.semichord);
        r.spectral_radius = c.spectral_radius;
      }
    }
    roots = next;
  }
  return roots;
}

}  // namespace

AeroelasticModel stability_model(const ModelDescription& description) {
  ModelDescription d;
  d.section = description.section;
  d.flow = description.flow;
  d.aero = description.aero;
  d.springs = description.springs;
  // held: none; gusts: none (see flutter.hpp).
  return AeroelasticModel(std::move(d));
}

RootSweep state_space_sweep(const AeroelasticModel& model, const DofVector& k,
                            const std::vector<double>& speeds, const std::atomic<bool>* cancel) {
  return sweep_roots(state_space_provider(model, k), still_air_roots(model, k), speeds, cancel);
}

RootSweep state_space_sweep(const ModelDescription& d, const DofVector& k,
                            const std::vector<double>& speeds, const std::atomic<bool>* cancel) {
  return state_space_sweep(stability_model(d), k, speeds, cancel);
}

Crossing state_space_flutter(const AeroelasticModel& model, const DofVector& k,
                             const RootSweep& sweep, double rtol) {
  return first_flutter_crossing(state_space_provider(model, k), sweep, rtol,
                                frequency_floor(model.description().section));
}

Crossing state_space_divergence(const AeroelasticModel& model, const DofVector& k,
                                const std::vector<double>& speeds, double rtol) {
  Crossing c;
  auto det = [&](double U) { return model.state_matrix_at(U, k).partialPivLu().determinant(); };
  auto tol = [rtol](double x, double y) {
    return std::abs(y - x) <= rtol * std::min(std::abs(x), std::abs(y));
  };
  const SectionProperties& s = model.description().section;
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
      const Eigen::MatrixXd A = model.state_matrix_at(Ud, k);
      Eigen::EigenSolver<Eigen::MatrixXd> es(A, true);
      Eigen::Index i0 = 0;
      es.eigenvalues().cwiseAbs().minCoeff(&i0);
      c.found = true;
      c.speed = Ud;
      c.shape = normalised_shape(es.eigenvectors().col(i0).head(s.dof), s.semichord);
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

MethodResult pk_method(const Case& c, const AeroelasticModel& model, const DofVector& k,
                       const std::vector<double>& speeds, double rtol, const std::atomic<bool>* cancel) {
  PkProblem pr;
  pr.section = c.model.section;
  pr.density = c.model.flow.density;
  pr.spring_stiffness = k;
  pr.aerodynamics = PkAerodynamics::kExactTheodorsen;
  MethodResult m;
  m.method = "p-k";
  m.sweep = pk_sweep(pr, speeds, cancel);
  stop_if_cancelled(cancel);
  m.flutter = pk_flutter(pr, m.sweep, rtol);
  // Divergence is a static property (C(0) = 1 for both methods): the
  // quasi-static eigenproblem is exact for it.
  m.divergence = state_space_divergence(model, k, speeds, rtol);
  return m;
}

}  // namespace

std::vector<std::string> mode_names(const SectionProperties& s, const DofVector& k) {
  const Eigen::MatrixXd M = structural_mass(s);
  std::vector<std::string> names;
  for (const Root& r : in_vacuo_roots(s, k))
    names.push_back(dof_name(dominant_dof(r.shape, M, s.semichord)));
  return names;
}

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
  // With a steady condition: the nominal linearisation about the static
  // equilibrium at the case's airspeed (the tangent stiffness of the region
  // each spring lies in there).
  if (c.model.steady.any()) {
    rep.equilibrium = static_equilibrium(AeroelasticModel(c.model));
    if (const Equilibrium* e = principal_equilibrium(rep.equilibrium)) {
      for (int j = 0; j < n; ++j) nominal(j) = e->springs[static_cast<std::size_t>(j)].tangent_stiffness;
      rep.nominal_basis = "tangent stiffness of every spring at the static equilibrium at the case's airspeed";
      for (int j = 0; j < n; ++j)
        if (!e->springs[static_cast<std::size_t>(j)].region_name.empty())
          rep.nominal_basis += fmt::format(" ({} spring: {})", kDofNames[j], e->springs[static_cast<std::size_t>(j)].region_name);
      rep.nominal_basis += ", held over every speed";
    } else {
      rep.nominal_basis = "nominal stiffness of every spring: the steady condition has no static equilibrium (" +
                          rep.equilibrium.remark + ")";
    }
  } else {
    rep.equilibrium.combinations = 0;
    rep.equilibrium.remark = "no steady condition";
  }
  lins.push_back({Linearisation::kNominal, nominal});
  if (rep.has_gap) {
    lins.push_back({Linearisation::kGapClosed, closed});
    lins.push_back({Linearisation::kGapOpen, open});
  }
  if (o.amplitude) lins.push_back({Linearisation::kDescribingFunction, df});

  rep.mode_names = mode_names(s, nominal);

  const AeroelasticModel model = stability_model(c.model);
  for (const auto& [lin, k] : lins) {
    stop_if_cancelled(o.cancel);
    LinearisationResult lr;
    lr.linearisation = lin;
    lr.stiffness = k;
    lr.mode_names = mode_names(s, k);
    if (o.state_space) {
      MethodResult m;
      m.method = "state-space";
      m.sweep = state_space_sweep(model, k, speeds, o.cancel);
      stop_if_cancelled(o.cancel);
      m.flutter = state_space_flutter(model, k, m.sweep, o.relative_tolerance);
      m.divergence = state_space_divergence(model, k, speeds, o.relative_tolerance);
      lr.methods.push_back(std::move(m));
    }
    if (o.pk) lr.methods.push_back(pk_method(c, model, k, speeds, o.relative_tolerance, o.cancel));
    rep.results.push_back(std::move(lr));
  }
  // With a steady condition describing_function_lco gives the dual-input
  // (bias plus sinusoid) prediction about the mean of its mean equation.
  if (o.lco_prediction) rep.lco = describing_function_lco(c, speeds, 80, o.cancel);
  return rep;
}

}  // namespace aerosect
