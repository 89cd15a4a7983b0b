#include "aerosect/analysis/lco.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>

#include <Eigen/Eigenvalues>

#include "aerosect/analysis/equilibrium.hpp"
#include "aerosect/analysis/root_tracking.hpp"
#include "aerosect/error.hpp"

namespace aerosect {

const char* to_string(ResponseClass c) {
  switch (c) {
    case ResponseClass::kDecayed: return "decayed";
    case ResponseClass::kPeriodic: return "periodic";
    case ResponseClass::kNonPeriodic: return "non-periodic";
    case ResponseClass::kDivergent: return "divergent";
    case ResponseClass::kUnsettled: return "unsettled";
  }
  return "?";
}

const char* to_string(DecayReason r) {
  switch (r) {
    case DecayReason::kNone: return "";
    case DecayReason::kToRest: return "to rest (amplitude below the floor, rest stable)";
    case DecayReason::kIntoGap: return "into the gap (extrema inside the gap, amplitude shrinking, rest stable)";
  }
  return "?";
}

namespace {

// True when rest is an unstable equilibrium: the state matrix linearised
// about rest has a growing eigenvalue (the growth criterion of
// root_tracking.hpp). A motion that has died down to the floor there has
// not decayed: it is leaving the equilibrium (inside a freeplay gap above
// the gap-open flutter speed, or any section above its linear flutter
// speed). Rest is q = 0 with every gap open (the gap-open stiffness of
// each gap law, the linear coefficient of the others); with a steady
// condition it is the static equilibrium (equilibrium.hpp), linearised
// with each spring's tangent stiffness in the region it lies in there
// (against a stop: the gap-closed slope), and a condition with no static
// equilibrium has no rest to decay to.
bool rest_unstable(const AeroelasticModel& model) {
  const auto& springs = model.description().springs;
  const int n = model.n_dof();
  DofVector k(n);
  if (model.has_steady_condition()) {
    const EquilibriumResult eq = static_equilibrium(model);
    const Equilibrium* e = principal_equilibrium(eq);
    if (!e) return true;
    for (int j = 0; j < n; ++j) k(j) = e->springs[static_cast<std::size_t>(j)].tangent_stiffness;
    return any_growing(Eigen::EigenSolver<Eigen::MatrixXd>(model.state_matrix(k), false).eigenvalues());
  }
  for (int j = 0; j < n; ++j) {
    const SpringLaw& law = springs[static_cast<std::size_t>(j)];
    k(j) = law.breakpoints().empty() ? law.nominal_stiffness() : law.gap_open_stiffness();
  }
  return any_growing(Eigen::EigenSolver<Eigen::MatrixXd>(model.state_matrix(k), false).eigenvalues());
}

}  // namespace

int lco_watched_dof(const AeroelasticModel& model, const LcoSettings& settings) {
  if (settings.watch_dof >= 0) return settings.watch_dof;
  if (!model.nonlinear_springs().empty()) return model.nonlinear_springs().front();
  return kPitch;
}

LcoTracker::LcoTracker(const AeroelasticModel& model, LcoSettings settings)
    : model_(model), s_(settings) {
  watch_ = lco_watched_dof(model, s_);
  const SpringLaw& law = model.description().springs[watch_];
  const auto bp = law.breakpoints();
  if (!bp.empty()) {
    const int r = law.region_of(law.offset());
    if (law.gap_open_stiffness() < law.gap_closed_stiffness() && r > 0 &&
        r < static_cast<int>(bp.size()) + 1) {
      has_gap_ = true;
      gap_lo_ = r > 0 ? bp[r - 1] : -1e300;
      gap_hi_ = r < static_cast<int>(bp.size()) ? bp[r] : 1e300;
    }
  }
  rest_unstable_ = rest_unstable(model);
}

ObserverAction LcoTracker::on_peak(int dof, double t, const std::vector<double>& x) {
  const StateLayout& L = model_.layout();
  const double b = model_.description().section.semichord;
  // Divergence on any DOF.
  for (int j = 0; j < L.n_dof; ++j) {
    const double v = std::abs(x[L.displacement + j]);
    if ((j == kPlunge && v > s_.divergence_plunge * b) || (j != kPlunge && v > s_.divergence_angle)) {
      decided_ = ResponseClass::kDivergent;
      decided_flag_ = true;
      return ObserverAction::kStop;
    }
  }
  extrema_[dof].push_back({t, x[L.displacement + dof]});
  if (dof != watch_) return ObserverAction::kContinue;
  const auto& e = extrema_[dof];
  const std::size_t n = e.size();
  // A cycle completes at a maximum preceded by a minimum and a maximum.
  if (n < 3) return ObserverAction::kContinue;
  const Extremum &a = e[n - 3], &m = e[n - 2], &c = e[n - 1];
  if (!(c.x > m.x && a.x > m.x)) return ObserverAction::kContinue;  // c is not a maximum
  amplitude_.push_back(0.5 * (c.x - m.x));
  period_.push_back(c.t - a.t);
  cycle_end_.push_back(c.t);
  const std::size_t k = amplitude_.size();
  // Decay to rest (not when rest in the gap is unstable: see above).
  if (amplitude_.back() < s_.decay_floor && !rest_unstable_) {
    decided_ = ResponseClass::kDecayed;
    decay_reason_ = DecayReason::kToRest;
    decided_flag_ = true;
    return ObserverAction::kStop;
  }
  if (static_cast<int>(k) < std::max(s_.min_cycles, s_.settle_cycles + 1))
    return ObserverAction::kContinue;
  // Into the gap: the last cycles inside the gap, shrinking.
  if (has_gap_) {
    bool inside = true, shrinking = true;
    for (std::size_t i = k - s_.settle_cycles; i < k; ++i) {
      shrinking = shrinking && amplitude_[i] <= amplitude_[i - 1];
    }
    for (std::size_t i = n - 2 * s_.settle_cycles; i < n; ++i)
      inside = inside && e[i].x > gap_lo_ && e[i].x < gap_hi_;
    if (inside && shrinking && !rest_unstable_) {
      decided_ = ResponseClass::kDecayed;
      decay_reason_ = DecayReason::kIntoGap;
      decided_flag_ = true;
      return ObserverAction::kStop;
    }
  }
  // Stationary cycle, possibly with p sub-peaks per period (maxima of
  // alternating heights): the sequences A_k and T_k repeat with lag p.
  for (int lag = 1; lag <= kMaxLag; ++lag) {
    const std::size_t need = static_cast<std::size_t>(s_.settle_cycles * lag + lag);
    if (k < need || static_cast<int>(k) < s_.min_cycles * lag) break;
    double amax = 0, tsum = 0;
    for (std::size_t i = k - static_cast<std::size_t>(lag); i < k; ++i) {
      amax = std::max(amax, amplitude_[i]);
      tsum += period_[i];
    }
    bool settled = true;
    for (std::size_t i = k - need + static_cast<std::size_t>(lag); i < k && settled; ++i) {
      settled = std::abs(amplitude_[i] - amplitude_[i - lag]) <= s_.tolerance * amax &&
                std::abs(period_[i] - period_[i - lag]) <= s_.tolerance * tsum;
    }
    if (settled) {
      lag_ = lag;
      periodic_state_ = x;
      decided_ = ResponseClass::kPeriodic;
      decided_flag_ = true;
      return ObserverAction::kStop;
    }
  }
  return ObserverAction::kContinue;
}

bool LcoTracker::stationary() const {
  const std::size_t w = static_cast<std::size_t>(std::max(2, s_.stationary_window));
  const std::size_t k = amplitude_.size();
  if (k < 2 * w) return false;
  // Mean and variance of the cycle amplitudes of one window.
  auto stats = [&](std::size_t from) {
    double mean = 0, var = 0;
    for (std::size_t i = from; i < from + w; ++i) mean += amplitude_[i];
    mean /= static_cast<double>(w);
    for (std::size_t i = from; i < from + w; ++i) var += (amplitude_[i] - mean) * (amplitude_[i] - mean);
    return std::pair{mean, var / static_cast<double>(w - 1)};
  };
  const auto [ma, va] = stats(k - 2 * w);
  const auto [mb, vb] = stats(k - w);
  const double ref = std::max(ma, mb);
  if (!(ref > 0)) return false;
  // No drift of the mean beyond the windows' own scatter (three standard
  // errors of the difference) or the tolerance: a growing, dying or
  // converging motion drifts by more than its within-window scatter.
  return std::abs(ma - mb) <= std::max(s_.stationary_tolerance * ref, 3.0 * std::sqrt((va + vb) / static_cast<double>(w)));
}

LcoResult LcoTracker::result() const {
  LcoResult r;
  r.watched_dof = watch_;
  r.cycles = static_cast<int>(amplitude_.size());
  r.stopped_early = decided_flag_;
  // Undecided: non-periodic only when the motion is stationary; a motion
  // still growing or dying out is unsettled (never "decayed" without one of
  // the verified reasons above).
  r.response = decided_flag_ ? decided_ : stationary() ? ResponseClass::kNonPeriodic : ResponseClass::kUnsettled;
  r.decay_reason = decided_flag_ ? decay_reason_ : DecayReason::kNone;
  const std::size_t k = amplitude_.size();
  if (k == 0) return r;
  const std::size_t window =
      std::min<std::size_t>(k, static_cast<std::size_t>(s_.settle_cycles * lag_));
  double pmean = 0, amin = 1e300, amax = 0;
  for (std::size_t i = k - window; i < k; ++i) {
    pmean += period_[i];
    amin = std::min(amin, amplitude_[i]);
    amax = std::max(amax, amplitude_[i]);
  }
  pmean = pmean / static_cast<double>(window) * lag_;  // the whole period of a p-peak cycle
  r.frequency = pmean > 0 ? 1.0 / pmean : 0.0;
  r.peaks_per_period = lag_;
  r.spread = amax > 0 ? (amax - amin) / (0.5 * (amax + amin)) : 0.0;
  // Per-DOF figures over the window of the last cycles.
  const double t_from = k > window ? cycle_end_[k - window - 1] : cycle_end_.front() - period_.front();
  const double t_to = cycle_end_.back();
  for (int j = 0; j < model_.n_dof(); ++j) {
    double mx = -1e300, mn = 1e300;
    for (const auto& ex : extrema_[j]) {
      if (ex.t < t_from - 1e-12 || ex.t > t_to + 1e-12) continue;
      mx = std::max(mx, ex.x);
      mn = std::min(mn, ex.x);
    }
    if (mx >= mn) r.dof[j] = {0.5 * (mx - mn), mx, mn};
  }
  return r;
}

}  // namespace aerosect

namespace aerosect {

DofHarmonics harmonic_content(std::span<const double> x, int harmonics) {
  const std::size_t n = x.size();
  AEROSECT_CHECK(n >= 4 && harmonics >= 1 && 2 * static_cast<std::size_t>(harmonics) < n);
  DofHarmonics h;
  const double inv_n = 1.0 / static_cast<double>(n);
  for (double v : x) h.mean += v;
  h.mean *= inv_n;
  double sq = 0, ac = 0;
  for (double v : x) {
    sq += v * v;
    ac += (v - h.mean) * (v - h.mean);
  }
  h.rms = std::sqrt(sq * inv_n);
  h.rms_about_mean = std::sqrt(ac * inv_n);
  // X_k = sum x_n exp(-2 pi i k n / N), the bins asked for only (K << N);
  // the angle is reduced with (k n mod N) so it stays exact for large n.
  h.harmonics.resize(static_cast<std::size_t>(harmonics));
  for (int k = 1; k <= harmonics; ++k) {
    double re = 0, im = 0;
    for (std::size_t m = 0; m < n; ++m) {
      const std::size_t kn = (static_cast<std::size_t>(k) * m) % n;
      const double a = 2.0 * std::numbers::pi * static_cast<double>(kn) * inv_n;
      re += (x[m] - h.mean) * std::cos(a);
      im -= (x[m] - h.mean) * std::sin(a);
    }
    h.harmonics[static_cast<std::size_t>(k - 1)] = 2.0 * inv_n * std::hypot(re, im);
  }
  // Parseval: 2 rms_about_mean^2 = sum over every resolved harmonic of a_k^2.
  const double a1 = h.harmonics.front();
  const double rest = 2.0 * h.rms_about_mean * h.rms_about_mean - a1 * a1;
  h.thd = a1 > 0 ? std::sqrt(std::max(0.0, rest)) / a1 : 0.0;
  return h;
}

SettledCycle sample_settled_cycle(const AeroelasticModel& model, RunState& run, double period,
                                  const IntegratorSettings& settings, const CycleSettings& cycle,
                                  int watched_dof) {
  AEROSECT_CHECK(period > 0 && std::isfinite(period) && cycle.samples >= 4);
  const StateLayout& L = model.layout();
  const std::size_t n = static_cast<std::size_t>(cycle.samples);
  SettledCycle out;
  out.period = period;
  out.samples = cycle.samples;
  std::array<std::vector<double>, 3> raw;
  for (int j = 0; j < L.n_dof; ++j) raw[j].reserve(n + 1);
  // Samples at t0 + k T/N, k = 0..N (the integrator computes the times from
  // k, never by accumulation); the one at t0 + T closes the period and is
  // not used.
  integrate(model, run, run.time + period, settings, {false, period / static_cast<double>(n)},
            {[&](double, const std::vector<double>& x) {
              for (int j = 0; j < L.n_dof; ++j) raw[j].push_back(x[L.displacement + j]);
              return ObserverAction::kContinue;
            }});
  AEROSECT_CHECK(raw[0].size() >= n);
  // Phase origin: the watched DOF's largest sample.
  const auto& w = raw[static_cast<std::size_t>(watched_dof)];
  const std::size_t origin =
      static_cast<std::size_t>(std::max_element(w.begin(), w.begin() + static_cast<long>(n)) - w.begin());
  for (int j = 0; j < L.n_dof; ++j) {
    auto& t = out.trace[j];
    t.resize(n);
    for (std::size_t m = 0; m < n; ++m) t[m] = raw[j][(origin + m) % n];
    out.dof[j] = harmonic_content(t, cycle.harmonics);
  }
  return out;
}

}  // namespace aerosect
