#include "aerosect/analysis/continuation.hpp"

#include "aerosect/analysis/equilibrium.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <memory>
#include <numbers>

#include <Eigen/Eigenvalues>
#include <Eigen/LU>
#include <fmt/format.h>
#include <toml++/toml.h>

#include "aerosect/analysis/describing_function.hpp"
#include "aerosect/analysis/report.hpp"
#include "aerosect/error.hpp"
#include "aerosect/units.hpp"

namespace aerosect {

const char* to_string(BranchStart s) {
  switch (s) {
    case BranchStart::kAuto: return "auto";
    case BranchStart::kHopf: return "hopf";
    case BranchStart::kMarch: return "march";
    case BranchStart::kDescribing: return "describing";
  }
  return "?";
}

const char* to_string(BifurcationKind k) {
  switch (k) {
    case BifurcationKind::kFold: return "fold";
    case BifurcationKind::kPeriodDoubling: return "period-doubling";
    case BifurcationKind::kTorus: return "torus";
    case BifurcationKind::kBranchPoint: return "branch-point";
    case BifurcationKind::kGrazing: return "grazing";
  }
  return "?";
}

namespace {

// The case's value of `key`: the last --set of it, else the file's entry.
std::optional<double> case_value(const Case& c, const std::string& key) {
  for (auto it = c.overrides.rbegin(); it != c.overrides.rend(); ++it) {
    const auto eq = it->find('=');
    if (eq != std::string::npos && it->substr(0, eq) == key) {
      try {
        std::size_t used = 0;
        const double v = std::stod(it->substr(eq + 1), &used);
        return v;
      } catch (const std::exception&) {
        return std::nullopt;
      }
    }
  }
  try {
    const toml::table t = toml::parse(std::string_view(c.text), std::string_view(c.path));
    if (auto v = t.at_path(key).value<double>()) return *v;
  } catch (const toml::parse_error&) {
  }
  return std::nullopt;
}

double pitch_frequency(const SectionProperties& s) {
  return std::sqrt(s.pitch_stiffness / s.pitch_inertia);
}

}  // namespace

ParameterFamily parameter_family(const Case& c, const std::string& key_in) {
  ParameterFamily f;
  const bool si = c.input_form == "si";
  f.key = key_in.empty() ? (si ? "flow.airspeed" : "nondimensional.reduced_speed") : key_in;
  const std::optional<double> v = case_value(c, f.key);
  if (!v)
    throw InputError({"--key", 0, 0}, "--key", f.key, "is not a numeric entry of the case",
                     "a numeric case key the case gives (or --set), e.g. flow.airspeed, "
                     "nondimensional.reduced_speed, springs.flap.half_gap_deg");
  f.value = *v;
  // The case reader refuses what it refuses for any value: try the case's own.
  {
    std::vector<std::string> ov = c.overrides;
    ov.push_back(fmt::format("{}={:.17g}", f.key, f.value));
    (void)parse_case(c.text, c.path, ov);
  }
  ModelDescription base = c.model;
  base.gusts = GustField();
  if (si && f.key == "flow.airspeed") {
    f.model_at = [base](double lambda) {
      ModelDescription d = base;
      d.flow.airspeed = lambda;
      return d;
    };
  } else if (!si && f.key == "nondimensional.reduced_speed") {
    const double scale = base.section.semichord * pitch_frequency(base.section);
    f.model_at = [base, scale](double lambda) {
      ModelDescription d = base;
      d.flow.airspeed = lambda * scale;
      return d;
    };
  } else {
    const std::string text = c.text, path = c.path, key = f.key;
    const std::vector<std::string> overrides = c.overrides;
    f.model_at = [text, path, key, overrides](double lambda) {
      std::vector<std::string> ov = overrides;
      ov.push_back(fmt::format("{}={:.17g}", key, lambda));
      ModelDescription d = parse_case(text, path, ov).model;
      d.gusts = GustField();
      return d;
    };
  }
  return f;
}

namespace {

// Unknowns: the full state (held components fixed), the period, lambda.
struct Unknowns {
  std::vector<double> x;
  double T = 0, lambda = 0;
};

class Context {
 public:
  Context(const ParameterFamily& f, const OrbitSettings& s, const std::atomic<bool>* cancel)
      : family_(f), settings_(s), cancel_(cancel) {}

  // The model at lambda (a few recent ones are kept; the pointer keeps its
  // model alive past the cache).
  std::shared_ptr<const AeroelasticModel> model(double lambda) {
    auto it = cache_.find(lambda);
    if (it != cache_.end()) return it->second;
    if (cache_.size() > 8) cache_.clear();
    auto m = std::make_shared<const AeroelasticModel>(family_.model_at(lambda));
    return cache_.emplace(lambda, std::move(m)).first->second;
  }
  const OrbitSettings& settings() const { return settings_; }
  const std::atomic<bool>* cancel() const { return cancel_; }
  bool cancelled() const { return cancel_ && cancel_->load(); }

 private:
  const ParameterFamily& family_;
  const OrbitSettings& settings_;
  const std::atomic<bool>* cancel_;
  std::map<double, std::shared_ptr<const AeroelasticModel>> cache_;
};

struct UnknownsLayout {
  std::vector<int> act;  // active state components
  int m = 0;             // act.size(); unknowns m + 2 (T at m, lambda at m + 1)
  int vw_index = -1;     // watched velocity in act
  int w_index = -1;      // watched displacement in act
  int watched = kPitch;
  Eigen::VectorXd W;     // state weights (full state)
};

UnknownsLayout make_layout(const AeroelasticModel& model, int watched) {
  UnknownsLayout l;
  const StateLayout& L = model.layout();
  l.watched = watched;
  for (int i = 0; i < L.size; ++i) {
    bool held = false;
    for (int j = 0; j < L.n_dof; ++j)
      if (model.description().held[j] && (i == L.displacement + j || i == L.velocity + j)) held = true;
    if (held) continue;
    if (i == L.velocity + watched) l.vw_index = static_cast<int>(l.act.size());
    if (i == L.displacement + watched) l.w_index = static_cast<int>(l.act.size());
    l.act.push_back(i);
  }
  l.m = static_cast<int>(l.act.size());
  l.W = state_weights(model);
  return l;
}

Eigen::VectorXd to_vector(const UnknownsLayout& l, const Unknowns& y) {
  Eigen::VectorXd v(l.m + 2);
  for (int a = 0; a < l.m; ++a) v(a) = y.x[static_cast<std::size_t>(l.act[a])];
  v(l.m) = y.T;
  v(l.m + 1) = y.lambda;
  return v;
}

struct Corrected {
  bool ok = false;
  std::string why;
  Unknowns y;
  Orbit orbit;
  Eigen::MatrixXd JF;  // (m+1) x (m+2), unscaled unknowns
  int iterations = 0;
  double airspeed = 0;
};

// Newton on r = 0, g = 0 and c . y = value.
Corrected correct(Context& ctx, const UnknownsLayout& l, Unknowns y, const Eigen::VectorXd& c, double value,
                  int max_iterations) {
  Corrected out;
  const OrbitSettings& s = ctx.settings();
  const int m = l.m;
  for (int it = 0; it <= max_iterations; ++it) {
    if (ctx.cancelled()) {
      out.why = "cancelled";
      return out;
    }
    if (!(y.T > 0) || !std::isfinite(y.T) || !std::isfinite(y.lambda)) {
      out.why = "the period or the parameter left the finite positive range";
      return out;
    }
    Flow flow, shifted;
    const double dl = 1e-7 * std::max(std::abs(y.lambda), 1e-3);
    std::shared_ptr<const AeroelasticModel> model_ptr;
    try {
      model_ptr = ctx.model(y.lambda);
      flow = orbit_flow(*model_ptr, y.x, y.T, s.integrator, true, ctx.cancel());
      shifted = orbit_flow(*ctx.model(y.lambda + dl), y.x, y.T, s.integrator, false, ctx.cancel());
    } catch (const NumericalError& e) {
      out.why = e.what();
      return out;
    } catch (const InputError& e) {
      out.why = fmt::format("the case reader refuses the parameter value {:.9g}: {}", y.lambda, e.problem());
      return out;
    }
    const AeroelasticModel& model = *model_ptr;
    const StateLayout& L = model.layout();
    // Scaled residual (orbit.hpp).
    double scale = 0;
    for (int j = 0; j < L.n_dof; ++j) {
      double mx = y.x[static_cast<std::size_t>(L.displacement + j)], mn = mx;
      for (const auto& e : flow.extrema[j]) {
        mx = std::max(mx, e.second);
        mn = std::min(mn, e.second);
      }
      scale = std::max(scale, 0.5 * (mx - mn) * l.W(L.displacement + j));
    }
    if (!(scale > 0)) {
      out.why = "the orbit shrank to rest";
      return out;
    }
    double res = 0;
    for (int i : l.act)
      res = std::max(res, std::abs(l.W(i) * (flow.x[static_cast<std::size_t>(i)] - y.x[static_cast<std::size_t>(i)])));
    const double g = y.x[static_cast<std::size_t>(l.act[l.vw_index])];
    res = std::max(res, std::abs(l.W(l.act[l.vw_index]) * g)) / scale;
    const Eigen::VectorXd yv = to_vector(l, y);
    const double h = c.dot(yv) - value;
    // Shooting Jacobian.
    std::vector<double> f(static_cast<std::size_t>(L.size));
    model.rhs(flow.x.data(), f.data(), y.T, flow.regions);
    Eigen::MatrixXd JF = Eigen::MatrixXd::Zero(m + 1, m + 2);
    Eigen::VectorXd F(m + 1);
    for (int a = 0; a < m; ++a) {
      const auto ia = static_cast<std::size_t>(l.act[a]);
      for (int b = 0; b < m; ++b) JF(a, b) = flow.monodromy(l.act[a], l.act[b]) - (a == b ? 1.0 : 0.0);
      JF(a, m) = f[ia];
      JF(a, m + 1) = (shifted.x[ia] - flow.x[ia]) / dl;
      F(a) = flow.x[ia] - y.x[ia];
    }
    JF(m, l.vw_index) = 1.0;
    F(m) = g;
    out.iterations = it;
    if (res <= s.tolerance && std::abs(h) <= 1e-9 * std::max(1.0, std::abs(value))) {
      Orbit& o = out.orbit;
      o.converged = true;
      o.watched_dof = l.watched;
      o.iterations = it;
      o.residual = res;
      o.x0 = y.x;
      o.period = y.T;
      o.monodromy = flow.monodromy;
      describe_orbit(model, o, flow, s);
      if (o.grazing) {
        out.why = fmt::format("grazing orbit at {:.9g} (an extremum of a spring DOF on its breakpoint, "
                              "margin {:.3g} of the amplitude)", y.lambda, o.grazing_margin);
        return out;
      }
      out.ok = true;
      out.y = y;
      out.JF = JF;
      out.airspeed = model.description().flow.airspeed;
      return out;
    }
    if (it == max_iterations) break;
    Eigen::MatrixXd J(m + 2, m + 2);
    J.topRows(m + 1) = JF;
    J.row(m + 1) = c.transpose();
    Eigen::VectorXd rhs(m + 2);
    rhs.head(m + 1) = -F;
    rhs(m + 1) = -h;
    const Eigen::VectorXd d = J.fullPivLu().solve(rhs);
    if (!d.allFinite()) {
      out.why = "singular corrector system";
      return out;
    }
    double step = 0;
    for (int a = 0; a < m; ++a) step = std::max(step, std::abs(l.W(l.act[a]) * d(a)));
    const double damp = std::min({1.0, 0.5 * scale / std::max(step, 1e-300),
                                  0.2 * y.T / std::max(std::abs(d(m)), 1e-300)});
    for (int a = 0; a < m; ++a) y.x[static_cast<std::size_t>(l.act[a])] += damp * d(a);
    y.T += damp * d(m);
    y.lambda += damp * d(m + 1);
  }
  out.why = fmt::format("the corrector did not converge in {} iterations", max_iterations);
  return out;
}

// Unit tangent in scaled coordinates: [JF diag(1/S); r^T] t = e_last.
Eigen::VectorXd tangent(const Eigen::MatrixXd& JF, const Eigen::VectorXd& S, const Eigen::VectorXd& r) {
  const int k = static_cast<int>(S.size());
  Eigen::MatrixXd M(k, k);
  M.topRows(k - 1) = JF * S.cwiseInverse().asDiagonal();
  M.row(k - 1) = r.transpose();
  Eigen::VectorXd e = Eigen::VectorXd::Zero(k);
  e(k - 1) = 1.0;
  Eigen::VectorXd t = M.fullPivLu().solve(e);
  if (!t.allFinite() || !(t.norm() > 0)) return Eigen::VectorXd();
  return t / t.norm();
}

struct Window {
  double lo, hi;
  bool inside(double v) const { return v >= lo && v <= hi; }
};

struct Trace {
  std::vector<BranchPoint> points;
  std::string stop;
  std::string grazing;     // set when the trace ended at a grazing point
  double grazing_at = 0;   // parameter of the last orbit before it
};

// Continues from a converged start along +t0 until a stop condition.
Trace run_direction(Context& ctx, const UnknownsLayout& l, const Corrected& start, Eigen::VectorXd t,
                    const Eigen::VectorXd& S, const Window& win, const BranchOptions& o,
                    double max_amplitude, double min_amplitude, int budget,
                    const std::function<void(const BranchPoint&)>& accepted) {
  Trace tr;
  Unknowns y = start.y;
  double ds = o.initial_step, s_total = 0;
  while (static_cast<int>(tr.points.size()) < budget) {
    if (ctx.cancelled()) {
      tr.stop = "cancelled";
      return tr;
    }
    const Eigen::VectorXd z = S.cwiseProduct(to_vector(l, y));
    const Eigen::VectorXd zp = z + ds * t;
    Unknowns yp = y;
    for (int a = 0; a < l.m; ++a) yp.x[static_cast<std::size_t>(l.act[a])] = zp(a) / S(a);
    yp.T = zp(l.m) / S(l.m);
    yp.lambda = zp(l.m + 1) / S(l.m + 1);
    const Eigen::VectorXd c = t.cwiseProduct(S);
    Corrected r = correct(ctx, l, yp, c, t.dot(zp), o.max_corrector_iterations);
    Eigen::VectorXd tn;
    if (r.ok) tn = tangent(r.JF, S, t);
    const bool turned = r.ok && (tn.size() == 0 || tn.dot(t) < 0.8);
    if (!r.ok || turned) {
      if (r.why == "cancelled" || ctx.cancelled()) {
        tr.stop = "cancelled";
        return tr;
      }
      ds *= 0.5;
      if (ds < o.min_step) {
        tr.stop = fmt::format("step below the minimum near {:.9g}: {}", y.lambda,
                              r.ok ? "the tangent turns too fast" : r.why);
        return tr;
      }
      continue;
    }
    s_total += ds;
    BranchPoint p;
    p.parameter = r.y.lambda;
    p.airspeed = r.airspeed;
    p.arclength = s_total;
    p.tangent_parameter = tn(l.m + 1);
    p.orbit = std::move(r.orbit);
    if (!win.inside(p.parameter)) {
      tr.stop = fmt::format("left the parameter window [{:.9g}, {:.9g}]", win.lo, win.hi);
      return tr;
    }
    const double amp = p.orbit.dof[l.watched].amplitude;
    // The number of switches per period changes only where the orbit
    // touches a breakpoint with zero normal velocity: a grazing point lies
    // between the two orbits. Beyond it the orbit lives inside one region
    // (for freeplay: the linear motion inside the gap, a whole family at one
    // parameter value); the branch ends there.
    const std::int64_t prev_switches = tr.points.empty() ? start.orbit.switches : tr.points.back().orbit.switches;
    if (p.orbit.switches != prev_switches) {
      tr.grazing = fmt::format("grazing: the orbit touches a spring breakpoint between {:.9g} and {:.9g} "
                               "(switches per period {} -> {})", y.lambda, p.parameter, prev_switches,
                               p.orbit.switches);
      tr.grazing_at = y.lambda;
      tr.stop = tr.grazing;
      return tr;
    }
    tr.points.push_back(std::move(p));
    if (accepted) accepted(tr.points.back());
    if (amp > max_amplitude) {
      tr.stop = fmt::format("amplitude above {:.6g}", max_amplitude);
      return tr;
    }
    if (amp < min_amplitude) {
      tr.stop = "the orbit shrinks to the equilibrium (a Hopf point)";
      return tr;
    }
    y = r.y;
    t = tn;
    const double grow = r.iterations <= 2 ? 1.5 : r.iterations == 3 ? 1.2 : r.iterations >= 6 ? 0.7 : 1.0;
    ds = std::min(o.max_step, ds * grow);
  }
  tr.stop = "point budget reached";
  return tr;
}

// Largest real part of the oscillatory eigenvalues of the nominal linear
// model and that root's frequency.
std::pair<double, double> oscillatory_growth(const AeroelasticModel& m) {
  Eigen::EigenSolver<Eigen::MatrixXd> es(m.nominal_state_matrix(), false);
  double g = -std::numeric_limits<double>::infinity(), w = 0;
  for (Eigen::Index i = 0; i < es.eigenvalues().size(); ++i) {
    const std::complex<double> e = es.eigenvalues()(i);
    if (std::abs(e.imag()) > 1e-8 * std::max(1.0, std::abs(e)) && e.real() > g) {
      g = e.real();
      w = std::abs(e.imag());
    }
  }
  return {g, w};
}

}  // namespace

bool smooth_spring_laws(const ModelDescription& d) {
  bool any = false;
  for (int j = 0; j < d.section.dof; ++j) {
    const SpringLaw& s = d.springs[static_cast<std::size_t>(j)];
    if (s.is_linear()) continue;
    any = true;
    if (!s.breakpoints().empty()) return false;
  }
  return any;
}

std::vector<Bifurcation> locate_bifurcations(const std::vector<BranchPoint>& pts, int w) {
  std::vector<Bifurcation> out;
  // Counts of nontrivial multipliers outside the unit circle by kind, and the
  // largest modulus of each kind.
  struct Counts {
    int pos = 0, neg = 0, cplx = 0;
    double mpos = 0, mneg = 0, mcplx = 0;
  };
  auto counts = [](const Orbit& o) {
    Counts c;
    std::size_t trivial = 0;
    double best = std::numeric_limits<double>::infinity();
    for (std::size_t i = 0; i < o.multipliers.size(); ++i)
      if (std::abs(o.multipliers[i] - 1.0) < best) {
        best = std::abs(o.multipliers[i] - 1.0);
        trivial = i;
      }
    for (std::size_t i = 0; i < o.multipliers.size(); ++i) {
      if (i == trivial) continue;
      const auto mu = o.multipliers[i];
      const double r = std::abs(mu);
      const bool real = std::abs(mu.imag()) <= 1e-9 * std::max(1.0, r);
      if (real && mu.real() > 0) {
        c.mpos = std::max(c.mpos, r);
        if (r > 1) ++c.pos;
      } else if (real) {
        c.mneg = std::max(c.mneg, r);
        if (r > 1) ++c.neg;
      } else {
        c.mcplx = std::max(c.mcplx, r);
        if (r > 1) ++c.cplx;
      }
    }
    return c;
  };
  for (std::size_t i = 1; i < pts.size(); ++i) {
    const BranchPoint &a = pts[i - 1], &b = pts[i];
    const double la = a.parameter, lb = b.parameter;
    const double Aa = a.orbit.dof[w].amplitude, Ab = b.orbit.dof[w].amplitude;
    const double Ta = a.orbit.period, Tb = b.orbit.period;
    auto at = [&](double u, BifurcationKind k) {
      Bifurcation bf;
      bf.kind = k;
      bf.after = static_cast<int>(i - 1);
      bf.parameter = la + u * (lb - la);
      bf.amplitude = Aa + u * (Ab - Aa);
      bf.period = Ta + u * (Tb - Ta);
      return bf;
    };
    const bool fold = a.tangent_parameter * b.tangent_parameter < 0;
    if (fold) {
      // Cubic Hermite lambda(s) over [s_a, s_b] with slopes t_a, t_b; the
      // turning point where its derivative (linear in the interpolant's
      // slopes to first order) vanishes.
      const double h = b.arclength - a.arclength;
      const double u = a.tangent_parameter / (a.tangent_parameter - b.tangent_parameter);
      Bifurcation bf = at(u, BifurcationKind::kFold);
      const double h00 = 2 * u * u * u - 3 * u * u + 1, h10 = u * u * u - 2 * u * u + u,
                   h01 = -2 * u * u * u + 3 * u * u, h11 = u * u * u - u * u;
      bf.parameter = h00 * la + h10 * h * a.tangent_parameter + h01 * lb + h11 * h * b.tangent_parameter;
      out.push_back(bf);
    }
    const Counts ca = counts(a.orbit), cb = counts(b.orbit);
    auto cross = [](double ma, double mb) {
      const double u = (1.0 - ma) / (mb - ma);
      return std::isfinite(u) ? std::clamp(u, 0.0, 1.0) : 0.5;
    };
    // One kind's count changes and its largest modulus crosses 1. When
    // several kinds change at once (two real multipliers meeting and
    // turning complex between the points) the step is too coarse to say
    // which crossed: nothing is reported for that interval.
    const int kinds_changed = (ca.pos != cb.pos) + (ca.neg != cb.neg) + (ca.cplx != cb.cplx);
    auto crossed = [kinds_changed](int na, int nb, double ma, double mb) {
      return kinds_changed == 1 && na != nb && (ma - 1) * (mb - 1) < 0;
    };
    if (crossed(ca.pos, cb.pos, ca.mpos, cb.mpos) && !fold)
      out.push_back(at(cross(ca.mpos, cb.mpos), BifurcationKind::kBranchPoint));
    if (crossed(ca.neg, cb.neg, ca.mneg, cb.mneg))
      out.push_back(at(cross(ca.mneg, cb.mneg), BifurcationKind::kPeriodDoubling));
    if (crossed(ca.cplx, cb.cplx, ca.mcplx, cb.mcplx))
      out.push_back(at(cross(ca.mcplx, cb.mcplx), BifurcationKind::kTorus));
  }
  return out;
}

Branch continue_branch(const Case& c, const BranchOptions& o, const std::atomic<bool>* cancel,
                       const BranchProgress& progress) {
  const ParameterFamily fam = parameter_family(c, o.key);
  Branch br;
  br.key = fam.key;
  Window win{std::min(o.from.value_or(fam.value / 10), o.to.value_or(4 * fam.value)),
             std::max(o.from.value_or(fam.value / 10), o.to.value_or(4 * fam.value))};
  if (!(win.hi > win.lo))
    throw InputError({"--from/--to", 0, 0}, "--from/--to", fmt::format("{}..{}", win.lo, win.hi),
                     "is an empty parameter window", "two different values of the key, e.g. --from 40 --to 90");
  Context ctx(fam, o.orbit, cancel);
  const std::shared_ptr<const AeroelasticModel> base_ptr = ctx.model(fam.value);
  const AeroelasticModel& base = *base_ptr;
  if (base.nonlinear_springs().empty())
    throw InputError({c.path, 0, 0}, "springs", "all linear",
                     "has no nonlinear spring: a linear section has no isolated limit cycle",
                     "a case with a freeplay, bilinear, cubic, polynomial or table spring law");
  const int w = orbit_watched_dof(base, o.orbit.watched_dof);
  br.watched_dof = w;
  const UnknownsLayout l = make_layout(base, w);
  AEROSECT_CHECK(l.vw_index >= 0 && l.w_index >= 0);
  const double b = c.model.section.semichord;
  const double max_amp = o.max_amplitude > 0 ? o.max_amplitude : (w == kPlunge ? 10.0 * b : 1.0);

  BranchStart start = o.start;
  if (start == BranchStart::kAuto) start = smooth_spring_laws(c.model) ? BranchStart::kHopf : BranchStart::kMarch;

  // ---- The first orbit and its tangent direction.
  Corrected first;
  Eigen::VectorXd r0 = Eigen::VectorXd::Zero(l.m + 2);
  bool both_ways = true;
  double min_amp = 0;
  auto fixed_lambda = [&](const OrbitSeed& seed, double lambda) {
    Unknowns y{seed.x0, seed.period, lambda};
    Eigen::VectorXd cvec = Eigen::VectorXd::Zero(l.m + 2);
    cvec(l.m + 1) = 1.0;
    return correct(ctx, l, y, cvec, lambda, o.orbit.max_iterations);
  };
  if (start == BranchStart::kMarch) {
    const double lambda0 = o.march_parameter.value_or(fam.value);
    const auto m_ptr = ctx.model(lambda0);
    const AeroelasticModel& m = *m_ptr;
    const auto x0 = o.march_state.empty()
                        ? run_start(m, c.simulation.initial_displacement, c.simulation.initial_velocity,
                                    c.simulation.steady_lag_states)
                              .x
                        : o.march_state;
    AEROSECT_CHECK(x0.size() == static_cast<std::size_t>(m.state_size()));
    const double pitch_period = 2 * std::numbers::pi / pitch_frequency(c.model.section);
    const double duration = std::max(c.simulation.duration, 400.0 * pitch_period);
    const auto seed = seed_from_time_march(m, x0, duration, c.simulation.integrator, w, cancel);
    if (!seed) {
      if (o.start == BranchStart::kMarch || (cancel && cancel->load())) {
        br.cancelled = cancel && cancel->load();
        br.stop_reason = br.cancelled ? "cancelled"
                                      : fmt::format("the case marched in time for {:.6g} s does not "
                                                    "settle on a periodic cycle at {} = {:.9g}",
                                                    duration, fam.key, lambda0);
        return br;
      }
      start = BranchStart::kDescribing;
    } else {
      br.start_detail = fmt::format("time-marched cycle at {} = {:.9g} ({})", fam.key, lambda0,
                                    presenter(c).frequency(1.0 / seed->period));
      first = fixed_lambda(*seed, lambda0);
      r0(l.m + 1) = 1.0;
    }
  }
  if (start == BranchStart::kDescribing) {
    if (fam.key != "flow.airspeed" && fam.key != "nondimensional.reduced_speed")
      throw InputError({"--start", 0, 0}, "--start", "describing",
                       "needs the airspeed as the parameter", "--key flow.airspeed (SI) or "
                       "nondimensional.reduced_speed, or --start march");
    const double to_speed = ctx.model(1.0)->description().flow.airspeed;  // lambda 1 -> m/s
    std::vector<double> speeds;
    for (int i = 1; i <= 400; ++i) speeds.push_back(win.hi * to_speed * i / 400.0);
    const LcoPrediction p = describing_function_lco(c, speeds);
    if (!p.available || p.points.empty()) {
      br.stop_reason = "no describing-function prediction: " + (p.reason.empty() ? std::string("no LCO in the window") : p.reason);
      return br;
    }
    const LcoPredictionPoint* best = nullptr;
    for (const auto& q : p.points)
      if (!best || std::abs(q.speed / to_speed - fam.value) < std::abs(best->speed / to_speed - fam.value)) best = &q;
    const double lambda = best->speed / to_speed;
    const auto m_ptr = ctx.model(lambda);
    const AeroelasticModel& m = *m_ptr;
    DofVector k(m.n_dof());
    for (int j = 0; j < m.n_dof(); ++j) k(j) = c.model.springs[j].nominal_stiffness();
    k(p.spring) = best->equivalent_stiffness;
    OrbitSeed seed = seed_from_harmonic(m, k, p.spring, best->amplitude, best->frequency);
    // A steady condition: the dual-input prediction oscillates about a
    // mean; the seed oscillates about the static equilibrium at lambda
    // (the nearest state the model gives; Newton moves it to the mean).
    if (p.biased) {
      const EquilibriumResult eq = static_equilibrium(m);
      if (const Equilibrium* e = principal_equilibrium(eq))
        for (std::size_t i = 0; i < seed.x0.size(); ++i) seed.x0[i] += e->state(static_cast<Eigen::Index>(i));
    }
    const Presenter pr = presenter(c);
    br.start_detail = fmt::format("describing-function orbit at {} = {:.9g} ({} amplitude {:.6g} {})", fam.key,
                                  lambda, dof_name(p.spring), pr.displacement_value(p.spring, best->amplitude),
                                  pr.displacement_unit(p.spring));
    first = fixed_lambda(seed, lambda);
    r0(l.m + 1) = 1.0;
  }
  if (start == BranchStart::kHopf) {
    // The first crossing of the imaginary axis in the window.
    const int n_scan = 200;
    double la = win.lo, ga = oscillatory_growth(*ctx.model(la)).first;
    std::optional<double> lh;
    for (int i = 1; i <= n_scan && !lh; ++i) {
      const double lb = win.lo + (win.hi - win.lo) * i / n_scan;
      const double gb = oscillatory_growth(AeroelasticModel(fam.model_at(lb))).first;
      if (ga < 0 && gb >= 0) {
        double lo = la, hi = lb;
        for (int k = 0; k < 200 && hi - lo > 1e-14 * std::abs(hi); ++k) {
          const double mid = 0.5 * (lo + hi);
          (oscillatory_growth(AeroelasticModel(fam.model_at(mid))).first < 0 ? lo : hi) = mid;
        }
        lh = 0.5 * (lo + hi);
      }
      la = lb;
      ga = gb;
    }
    if (!lh) {
      br.stop_reason = fmt::format("no Hopf (linear flutter) point of the nominal linear model in "
                                   "[{:.9g}, {:.9g}]", win.lo, win.hi);
      return br;
    }
    br.hopf_parameter = *lh;
    const auto m_ptr = ctx.model(*lh);
    const AeroelasticModel& m = *m_ptr;
    const double omega = oscillatory_growth(m).second;
    double a1 = o.start_amplitude;
    if (!(a1 > 0)) {
      a1 = w == kPlunge ? 0.1 * b : 0.1;
      const SpringLaw& law = c.model.springs[w];
      const auto poly = law.polynomial_terms();
      for (std::size_t k = 0; k < poly.size(); ++k)
        if (poly[k] != 0)
          a1 = std::min(a1, std::pow(1e-3 * std::abs(law.nominal_stiffness() / poly[k]), 1.0 / (k + 1.0)));
    }
    DofVector k(m.n_dof());
    for (int j = 0; j < m.n_dof(); ++j) k(j) = c.model.springs[j].nominal_stiffness();
    const OrbitSeed seed = seed_from_harmonic(m, k, w, a1, omega);
    const Presenter pr = presenter(c);
    br.start_detail = fmt::format("Hopf point of the linear model at {} = {:.9g} ({}), first orbit at {} "
                                  "amplitude {:.6g} {}", fam.key, *lh, pr.frequency(omega / (2 * std::numbers::pi)),
                                  dof_name(w), pr.displacement_value(w, a1), pr.displacement_unit(w));
    Unknowns y{seed.x0, seed.period, *lh};
    Eigen::VectorXd cvec = Eigen::VectorXd::Zero(l.m + 2);
    cvec(l.w_index) = 1.0;
    first = correct(ctx, l, y, cvec, a1, o.orbit.max_iterations);
    r0(l.w_index) = 1.0;
    both_ways = false;
    min_amp = 0.5 * a1;
  }
  br.start = start;
  if (!first.ok) {
    br.cancelled = cancel && cancel->load();
    br.stop_reason = br.cancelled ? "cancelled" : "the first orbit did not converge: " + first.why;
    return br;
  }
  // Scales of the arclength.
  Eigen::VectorXd S(l.m + 2);
  double a_ref = 0;
  for (int j = 0; j < base.n_dof(); ++j)
    a_ref = std::max(a_ref, first.orbit.dof[j].amplitude * l.W(base.layout().displacement + j));
  // A first orbit near a Hopf point is tiny: the scale of the nonlinearity
  // (where a polynomial term equals the linear one, or the half gap) keeps
  // the steps from staying tiny.
  for (int j : base.nonlinear_springs()) {
    const SpringLaw& law = c.model.springs[j];
    const double wj = l.W(base.layout().displacement + j);
    const auto poly = law.polynomial_terms();
    for (std::size_t k = 0; k < poly.size(); ++k)
      if (poly[k] != 0 && law.nominal_stiffness() > 0)
        a_ref = std::max(a_ref, 0.2 * wj * std::pow(law.nominal_stiffness() / std::abs(poly[k]), 1.0 / (k + 1.0)));
    for (double bp : law.breakpoints()) a_ref = std::max(a_ref, wj * std::abs(bp - law.offset()));
  }
  for (int a = 0; a < l.m; ++a) S(a) = l.W(l.act[a]) / a_ref;
  S(l.m) = 1.0 / first.y.T;
  S(l.m + 1) = 1.0 / (win.hi - win.lo);
  Eigen::VectorXd t0 = tangent(first.JF, S, S.cwiseInverse().cwiseProduct(r0));
  if (t0.size() == 0) {
    br.stop_reason = "no tangent at the first orbit (a singular point)";
    return br;
  }
  if (start == BranchStart::kHopf && t0(l.w_index) < 0) t0 = -t0;

  BranchPoint p0;
  p0.parameter = first.y.lambda;
  p0.airspeed = first.airspeed;
  p0.tangent_parameter = t0(l.m + 1);
  p0.orbit = first.orbit;
  int count = 1;
  auto accepted = [&](const BranchPoint& p) {
    ++count;
    if (progress) progress(p, count);
  };
  if (progress) progress(p0, count);
  const int budget = std::max(1, o.max_points - 1);
  std::vector<const Trace*> grazing_ends;
  Trace down, up, one;
  if (both_ways) {
    down = run_direction(ctx, l, first, -t0, S, win, o, max_amp, min_amp, budget / 2, accepted);
    if (down.stop == "cancelled") br.cancelled = true;
    if (!br.cancelled) {
      up = run_direction(ctx, l, first, t0, S, win, o, max_amp, min_amp,
                         budget - static_cast<int>(down.points.size()), accepted);
      if (up.stop == "cancelled") br.cancelled = true;
    }
    // Branch order: the down trace reversed, the start, the up trace.
    double s_down = down.points.empty() ? 0.0 : down.points.back().arclength;
    for (auto it = down.points.rbegin(); it != down.points.rend(); ++it) {
      BranchPoint q = std::move(*it);
      q.arclength = s_down - q.arclength;
      q.tangent_parameter = -q.tangent_parameter;
      br.points.push_back(std::move(q));
    }
    p0.arclength = s_down;
    br.points.push_back(p0);
    for (auto& q : up.points) {
      q.arclength += s_down;
      br.points.push_back(std::move(q));
    }
    br.stop_reason = "low end: " + down.stop + "; high end: " + (up.stop.empty() ? "not run" : up.stop);
    grazing_ends = {&down, &up};
  } else {
    one = run_direction(ctx, l, first, t0, S, win, o, max_amp, min_amp, budget, accepted);
    br.cancelled = one.stop == "cancelled";
    br.points.push_back(p0);
    for (auto& q : one.points) br.points.push_back(std::move(q));
    br.stop_reason = one.stop;
    grazing_ends = {&one};
  }
  br.bifurcations = locate_bifurcations(br.points, w);
  // Grazing ends: at the first or last point.
  for (const Trace* tr : grazing_ends) {
    if (tr->grazing.empty() || br.points.empty()) continue;
    const bool low_end = tr == grazing_ends[0] && both_ways;
    const BranchPoint& p = low_end ? br.points.front() : br.points.back();
    Bifurcation g;
    g.kind = BifurcationKind::kGrazing;
    g.after = low_end ? -1 : static_cast<int>(br.points.size()) - 1;
    g.parameter = p.parameter;
    g.amplitude = p.orbit.dof[w].amplitude;
    g.period = p.orbit.period;
    br.bifurcations.push_back(g);
  }
  return br;
}

}  // namespace aerosect
