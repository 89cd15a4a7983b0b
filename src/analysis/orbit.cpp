#include "aerosect/analysis/orbit.hpp"

#include "aerosect/integrate/exact_flow.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>

#include <Eigen/Eigenvalues>
#include <Eigen/LU>
#include <fmt/format.h>

#include "aerosect/error.hpp"

namespace aerosect {

int orbit_watched_dof(const AeroelasticModel& model, int requested) {
  if (requested >= 0) {
    AEROSECT_CHECK(requested < model.n_dof());
    return requested;
  }
  if (!model.nonlinear_springs().empty()) return model.nonlinear_springs().front();
  return kPitch;
}

namespace {

// Components of the state that are unknowns: all but a held DOF's
// displacement and velocity.
std::vector<int> active_components(const AeroelasticModel& model) {
  const StateLayout& L = model.layout();
  std::vector<int> a;
  for (int i = 0; i < L.size; ++i) {
    bool held = false;
    for (int j = 0; j < L.n_dof; ++j)
      if (model.description().held[j] && (i == L.displacement + j || i == L.velocity + j)) held = true;
    if (!held) a.push_back(i);
  }
  return a;
}

// The flow phi_T(x0): end state, end regions, switches, extrema; with
// `monodromy` the variational equations ride along (integrator.hpp).
Flow plain_flow(const AeroelasticModel& model, const std::vector<double>& x0, double period,
                const IntegratorSettings& settings, bool extrema, const std::atomic<bool>* cancel,
                bool monodromy = false, ExactFlowCache* cache = nullptr) {
  const StateLayout& L = model.layout();
  const int n = L.size;
  RunState run;
  run.exact_cache = cache;
  run.x = x0;
  run.regions = model.regions_of(x0.data());
  if (monodromy) {
    run.track_monodromy = true;
    run.monodromy.assign(static_cast<std::size_t>(n) * static_cast<std::size_t>(n), 0.0);
    for (int i = 0; i < n; ++i) run.monodromy[static_cast<std::size_t>(i) * static_cast<std::size_t>(n + 1)] = 1.0;
  }
  Flow out;
  PeakObserver peaks;
  if (extrema)
    peaks = [&out, &L](int dof, double t, const std::vector<double>& x) {
      out.extrema[dof].emplace_back(t, x[L.displacement + dof]);
      return ObserverAction::kContinue;
    };
  const IntegrationResult r =
      integrate(model, run, period, settings, OutputSchedule::none(), {{}, peaks, cancel});
  if (r.reason == StopReason::kCancelled) throw NumericalError(run.time, "cancelled");
  out.x = std::move(run.x);
  out.regions = std::move(run.regions);
  out.switches = run.switches;
  if (monodromy) out.monodromy = Eigen::Map<const Eigen::MatrixXd>(run.monodromy.data(), n, n);
  return out;
}

}  // namespace

Eigen::MatrixXd finite_difference_monodromy(const AeroelasticModel& model,
                                            const std::vector<double>& x0, double period,
                                            const IntegratorSettings& settings,
                                            const std::atomic<bool>* cancel) {
  const int n = model.state_size();
  const Eigen::VectorXd w = state_weights(model);
  double scale = 0;
  for (int i = 0; i < n; ++i) scale = std::max(scale, std::abs(w(i) * x0[static_cast<std::size_t>(i)]));
  if (!(scale > 0)) scale = 1e-3;
  Eigen::MatrixXd phi = Eigen::MatrixXd::Identity(n, n);
  for (int i : active_components(model)) {
    const double h = 1e-6 * scale / w(i);
    std::vector<double> xp = x0, xm = x0;
    xp[static_cast<std::size_t>(i)] += h;
    xm[static_cast<std::size_t>(i)] -= h;
    const Flow fp = plain_flow(model, xp, period, settings, false, cancel);
    const Flow fm = plain_flow(model, xm, period, settings, false, cancel);
    for (int k = 0; k < n; ++k)
      phi(k, i) = (fp.x[static_cast<std::size_t>(k)] - fm.x[static_cast<std::size_t>(k)]) / (2 * h);
  }
  return phi;
}

Flow orbit_flow(const AeroelasticModel& model, const std::vector<double>& x0, double period,
                const IntegratorSettings& settings, bool monodromy,
                const std::atomic<bool>* cancel, ExactFlowCache* cache) {
  AEROSECT_CHECK(period > 0 && std::isfinite(period));
  return plain_flow(model, x0, period, settings, true, cancel, monodromy, cache);
}

void describe_orbit(const AeroelasticModel& model, Orbit& o, const Flow& flow,
                    const OrbitSettings& settings) {
  const StateLayout& L = model.layout();
  const auto& d = model.description();
  const int w = o.watched_dof;
  const double T = o.period;
  // Extrema per DOF over one period: the start value and every velocity
  // zero inside (0, T) (a periodic motion takes its largest and smallest
  // values at velocity zeros; the start is one for the watched DOF).
  for (int j = 0; j < L.n_dof; ++j) {
    const double x0j = o.x0[static_cast<std::size_t>(L.displacement + j)];
    double mx = x0j, mn = x0j;
    for (const auto& [t, v] : flow.extrema[j]) {
      mx = std::max(mx, v);
      mn = std::min(mn, v);
    }
    o.dof[j] = {0.5 * (mx - mn), mx, mn};
  }
  // Maxima of the watched DOF per period: the cyclic sequence of its
  // extrema, starting with x0 (a maximum), each compared with its neighbours.
  {
    std::vector<double> seq{o.x0[static_cast<std::size_t>(L.displacement + w)]};
    for (const auto& [t, v] : flow.extrema[w])
      if (t < T * (1 - 1e-7) && t > T * 1e-7) seq.push_back(v);
    int peaks = 0;
    const std::size_t m = seq.size();
    for (std::size_t i = 0; i < m; ++i) {
      const double prev = seq[(i + m - 1) % m], next = seq[(i + 1) % m];
      if (m == 1 || (seq[i] >= prev && seq[i] >= next)) ++peaks;
    }
    o.peaks_per_period = std::max(1, peaks);
  }
  o.switches = flow.switches;
  // Grazing: the closest approach of a spring DOF's extremum to a breakpoint,
  // relative to that DOF's amplitude.
  o.grazing_margin = std::numeric_limits<double>::infinity();
  for (int j : model.nonlinear_springs()) {
    const auto bp = d.springs[j].breakpoints();
    if (bp.empty()) continue;
    const double scale = std::max(o.dof[j].amplitude, 1e-300);
    std::vector<double> values{o.x0[static_cast<std::size_t>(L.displacement + j)]};
    for (const auto& [t, v] : flow.extrema[j]) values.push_back(v);
    for (double v : values)
      for (double p : bp) o.grazing_margin = std::min(o.grazing_margin, std::abs(v - p) / scale);
  }
  o.grazing = o.grazing_margin < settings.grazing_threshold;
  // Floquet multipliers of the active block.
  const std::vector<int> act = active_components(model);
  const int m = static_cast<int>(act.size());
  Eigen::MatrixXd P(m, m);
  for (int a = 0; a < m; ++a)
    for (int b = 0; b < m; ++b) P(a, b) = o.monodromy(act[a], act[b]);
  const Eigen::VectorXcd ev = Eigen::EigenSolver<Eigen::MatrixXd>(P, false).eigenvalues();
  o.multipliers.assign(ev.data(), ev.data() + ev.size());
  std::sort(o.multipliers.begin(), o.multipliers.end(),
            [](auto a, auto b) { return std::abs(a) > std::abs(b); });
  std::size_t trivial = 0;
  o.trivial_multiplier_error = std::numeric_limits<double>::infinity();
  for (std::size_t i = 0; i < o.multipliers.size(); ++i) {
    const double e = std::abs(o.multipliers[i] - 1.0);
    if (e < o.trivial_multiplier_error) {
      o.trivial_multiplier_error = e;
      trivial = i;
    }
  }
  o.largest_nontrivial = 0;
  for (std::size_t i = 0; i < o.multipliers.size(); ++i)
    if (i != trivial) o.largest_nontrivial = std::max(o.largest_nontrivial, std::abs(o.multipliers[i]));
  o.stable = o.largest_nontrivial < 1.0;
  // Content: one period sampled from the section point (sample 0 is the
  // watched DOF's maximum).
  RunState run;
  run.x = o.x0;
  run.regions = model.regions_of(o.x0.data());
  const SettledCycle cycle = sample_settled_cycle(model, run, T, settings.integrator, settings.cycle, w);
  o.content = cycle.dof;
  o.trace = cycle.trace;
}

Orbit solve_orbit(const AeroelasticModel& model, const OrbitSeed& seed,
                  const OrbitSettings& settings, const std::atomic<bool>* cancel) {
  const StateLayout& L = model.layout();
  AEROSECT_CHECK(static_cast<int>(seed.x0.size()) == L.size);
  Orbit o;
  o.watched_dof = orbit_watched_dof(model, settings.watched_dof);
  const int vw = L.velocity + o.watched_dof;
  const std::vector<int> act = active_components(model);
  const int m = static_cast<int>(act.size());
  int vw_index = -1;
  for (int a = 0; a < m; ++a)
    if (act[a] == vw) vw_index = a;
  if (vw_index < 0) {
    o.failure = "the watched DOF is held";
    return o;
  }
  const Eigen::VectorXd W = state_weights(model);
  std::vector<double> x0 = seed.x0;
  double T = seed.period;
  if (!(T > 0) || !std::isfinite(T)) {
    o.failure = fmt::format("the seed's period {} s is not positive", T);
    return o;
  }
  std::vector<double> f(static_cast<std::size_t>(L.size));
  Eigen::FullPivLU<Eigen::MatrixXd> chord_lu;  // the first iterate's Newton matrix (chord)
  Eigen::MatrixXd chord_monodromy;
  ExactFlowCache regions;  // the shooting runs' region exponentials, built once
  for (int it = 0; it <= settings.max_iterations; ++it) {
    Flow flow;
    const bool with_monodromy = !settings.chord || it == 0;
    try {
      flow = orbit_flow(model, x0, T, settings.integrator, with_monodromy, cancel, &regions);
      if (!with_monodromy) flow.monodromy = chord_monodromy;
    } catch (const NumericalError& e) {
      o.failure = fmt::format("the flow over one period failed at Newton iteration {}: {}", it, e.what());
      return o;
    }
    // Scaled residual, relative to the largest weighted half peak-to-peak.
    double scale = 0;
    for (int j = 0; j < L.n_dof; ++j) {
      double mx = x0[static_cast<std::size_t>(L.displacement + j)], mn = mx;
      for (const auto& e : flow.extrema[j]) {
        mx = std::max(mx, e.second);
        mn = std::min(mn, e.second);
      }
      scale = std::max(scale, 0.5 * (mx - mn) * W(L.displacement + j));
    }
    if (!(scale > 0)) {
      o.failure = "the motion has no amplitude (rest, not a cycle)";
      return o;
    }
    double res = 0;
    for (int i : act)
      res = std::max(res, std::abs(W(i) * (flow.x[static_cast<std::size_t>(i)] - x0[static_cast<std::size_t>(i)])));
    res /= scale;
    o.residual = res;
    o.iterations = it;
    o.x0 = x0;
    o.period = T;
    o.monodromy = flow.monodromy;
    if (res <= settings.tolerance) {
      o.converged = true;
      describe_orbit(model, o, flow, settings);
      if (o.grazing) {
        o.converged = false;
        o.failure = fmt::format("grazing orbit: an extremum of a spring DOF lies on a breakpoint "
                                "(margin {:.3g} of the amplitude); the return map is not "
                                "differentiable there", o.grazing_margin);
      }
      return o;
    }
    if (it == settings.max_iterations) break;
    // Newton step on the bordered system (chord: the first iterate's matrix).
    Eigen::VectorXd rhs(m + 1);
    for (int a = 0; a < m; ++a)
      rhs(a) = -(flow.x[static_cast<std::size_t>(act[a])] - x0[static_cast<std::size_t>(act[a])]);
    rhs(m) = -x0[static_cast<std::size_t>(vw)];
    if (with_monodromy) {
      model.rhs(flow.x.data(), f.data(), T, flow.regions);
      Eigen::MatrixXd J = Eigen::MatrixXd::Zero(m + 1, m + 1);
      for (int a = 0; a < m; ++a) {
        for (int b = 0; b < m; ++b) J(a, b) = flow.monodromy(act[a], act[b]) - (a == b ? 1.0 : 0.0);
        J(a, m) = f[static_cast<std::size_t>(act[a])];
      }
      J(m, vw_index) = 1.0;
      chord_lu.compute(J);
      if (settings.chord) chord_monodromy = flow.monodromy;
    }
    const Eigen::VectorXd d = chord_lu.solve(rhs);
    if (!d.allFinite()) {
      o.failure = "singular Newton system (a multiplier at +1 other than the trivial one: a fold "
                  "or branch point at fixed parameter)";
      return o;
    }
    // Damping: no step larger than 30 % of the amplitude or 20 % of the period.
    double step = 0;
    for (int a = 0; a < m; ++a) step = std::max(step, std::abs(W(act[a]) * d(a)));
    double damp = std::min(1.0, 0.3 * scale / std::max(step, 1e-300));
    damp = std::min(damp, 0.2 * T / std::max(std::abs(d(m)), 1e-300));
    for (int a = 0; a < m; ++a) x0[static_cast<std::size_t>(act[a])] += damp * d(a);
    T += damp * d(m);
    if (!(T > 0)) {
      o.failure = "the period went negative in the Newton iteration";
      return o;
    }
  }
  o.failure = fmt::format("no convergence in {} Newton iterations (scaled residual {:.3g})",
                          settings.max_iterations, o.residual);
  return o;
}

std::optional<OrbitSeed> seed_from_time_march(const AeroelasticModel& model,
                                              const std::vector<double>& start, double duration,
                                              const IntegratorSettings& settings, int watched_dof,
                                              const std::atomic<bool>* cancel) {
  const StateLayout& L = model.layout();
  LcoSettings ls;
  ls.watch_dof = orbit_watched_dof(model, watched_dof);
  ls.tolerance = 1e-6;
  LcoTracker tracker(model, ls);
  ExactFlowCache regions;
  RunState run;
  run.exact_cache = &regions;
  run.x = start;
  run.regions = model.regions_of(start.data());
  const IntegrationResult r =
      integrate(model, run, duration, settings, OutputSchedule::none(),
                {{}, [&tracker](int dof, double t, const std::vector<double>& x) {
                   return tracker.on_peak(dof, t, x);
                 }, cancel});
  if (r.reason == StopReason::kCancelled) return std::nullopt;
  const LcoResult lr = tracker.result();
  if (lr.response != ResponseClass::kPeriodic || !(lr.frequency > 0)) return std::nullopt;
  // On to the next maximum of the watched DOF.
  const int w = ls.watch_dof;
  std::optional<std::vector<double>> at_max;
  std::vector<double> f(static_cast<std::size_t>(L.size));
  const double period = 1.0 / lr.frequency;
  integrate(model, run, run.time + 2.0 * period, settings, OutputSchedule::none(),
            {{}, [&](int dof, double, const std::vector<double>& x) {
              if (dof != w || at_max) return at_max ? ObserverAction::kStop : ObserverAction::kContinue;
              model.rhs(x.data(), f.data(), 0, model.regions_of(x.data()));
              if (f[static_cast<std::size_t>(L.velocity + w)] < 0) {
                at_max = x;
                return ObserverAction::kStop;
              }
              return ObserverAction::kContinue;
            }, cancel});
  if (!at_max) return std::nullopt;
  (*at_max)[static_cast<std::size_t>(L.velocity + w)] = 0.0;
  return OrbitSeed{*at_max, period};
}

OrbitSeed seed_from_harmonic(const AeroelasticModel& model, const DofVector& stiffness, int dof,
                             double amplitude, double frequency) {
  const StateLayout& L = model.layout();
  const Eigen::MatrixXd A = model.state_matrix(stiffness);
  Eigen::EigenSolver<Eigen::MatrixXd> es(A, true);
  const Eigen::VectorXcd& ev = es.eigenvalues();
  Eigen::Index best = -1;
  double best_d = std::numeric_limits<double>::infinity();
  for (Eigen::Index i = 0; i < ev.size(); ++i) {
    if (!(ev(i).imag() > 1e-9 * std::max(1.0, std::abs(ev(i))))) continue;
    const double dist = frequency > 0 ? std::abs(ev(i).imag() - frequency) : -ev(i).real();
    if (dist < best_d) {
      best_d = dist;
      best = i;
    }
  }
  AEROSECT_CHECK(best >= 0);
  const Eigen::VectorXcd v = es.eigenvectors().col(best);
  const std::complex<double> vd = v(L.displacement + dof);
  AEROSECT_CHECK(std::abs(vd) > 0);
  const std::complex<double> c = amplitude / vd;
  OrbitSeed s;
  s.x0.resize(static_cast<std::size_t>(L.size));
  for (int i = 0; i < L.size; ++i) s.x0[static_cast<std::size_t>(i)] = (c * v(i)).real();
  s.x0[static_cast<std::size_t>(L.velocity + dof)] = 0.0;
  s.period = 2.0 * std::numbers::pi / ev(best).imag();
  return s;
}

}  // namespace aerosect
