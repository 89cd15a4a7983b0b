#include "aerosect/analysis/preload.hpp"

#include <algorithm>
#include <cmath>
#include <functional>

#include <Eigen/Eigenvalues>
#include <fmt/format.h>

#include "aerosect/analysis/equilibrium.hpp"
#include "aerosect/analysis/root_tracking.hpp"
#include "aerosect/error.hpp"
#include "aerosect/units.hpp"

namespace aerosect {

namespace {

// The one nonlinear spring with breakpoints, or -1 (and why not).
int gap_spring(const Case& c, std::string& reason) {
  std::vector<int> nonlinear;
  for (int j = 0; j < c.model.section.dof; ++j)
    if (!c.model.springs[static_cast<std::size_t>(j)].is_linear()) nonlinear.push_back(j);
  if (nonlinear.size() != 1) {
    reason = nonlinear.empty() ? "no nonlinear spring" : "more than one nonlinear spring";
    return -1;
  }
  if (c.model.springs[static_cast<std::size_t>(nonlinear.front())].breakpoints().empty()) {
    reason = "the nonlinear spring has no gap (no breakpoints): a preload cannot hold it against a stop";
    return -1;
  }
  return nonlinear.front();
}

// Spring j at the static equilibrium of case c.
struct SpringAtRest {
  bool found = false;
  double x = 0, force = 0;
  std::string region;
  bool against_stop = false;
  bool stable = false;  // the linearisation about it at the case airspeed
};

SpringAtRest spring_at_rest(const Case& c, int j) {
  SpringAtRest s;
  const AeroelasticModel model(c.model);
  const EquilibriumResult r = static_equilibrium(model);
  const Equilibrium* e = principal_equilibrium(r);
  if (!e) return s;
  const SpringLaw& law = c.model.springs[static_cast<std::size_t>(j)];
  const SpringEquilibrium& sp = e->springs[static_cast<std::size_t>(j)];
  s.found = true;
  s.x = e->displacement(j);
  s.force = sp.force;
  s.region = sp.region_name;
  s.against_stop = sp.region != law.region_of(law.offset());
  DofVector k(c.model.section.dof);
  for (int i = 0; i < k.size(); ++i) k(i) = e->springs[static_cast<std::size_t>(i)].tangent_stiffness;
  s.stable = !any_growing(Eigen::EigenSolver<Eigen::MatrixXd>(model.state_matrix(k), false).eigenvalues());
  return s;
}

}  // namespace

std::string preload_key(int spring) { return spring == kFlap ? "steady.hinge_moment" : "steady.incidence_deg"; }

PreloadHold preload_hold(const Case& c) {
  PreloadHold h;
  h.steady_condition = c.model.steady.any();
  h.spring = gap_spring(c, h.reason);
  if (h.spring < 0) return h;
  h.applicable = true;
  const SpringAtRest s = spring_at_rest(c, h.spring);
  h.equilibrium_found = s.found;
  if (!s.found) return h;
  h.displacement = s.x;
  h.region = s.region;
  h.against_stop = s.against_stop;
  h.spring_force = s.force;
  h.linearisation_stable = s.stable;
  h.held = s.against_stop && s.stable;
  return h;
}

PreloadMap preload_map(const Case& c, const SweepRequest& base, int levels, const std::atomic<bool>* cancel) {
  AEROSECT_CHECK(levels >= 2);
  PreloadMap m;
  const int j = gap_spring(c, m.reason);
  if (j < 0) return m;
  m.spring = j;
  m.key = preload_key(j);
  m.units = j == kFlap ? "N m m-1" : "degree";
  const SpringLaw& law = c.model.springs[static_cast<std::size_t>(j)];
  const auto bp = law.breakpoints();
  const double half_gap = 0.5 * (bp.back() - bp.front());
  double scale = 1.0;  // 1 degree of incidence
  if (j == kFlap && law.gap_closed_stiffness() * half_gap > 0) scale = law.gap_closed_stiffness() * half_gap;

  // The spring at the equilibrium of one level (the key replaced).
  auto at = [&](double level) {
    stop_if_cancelled(cancel);
    return spring_at_rest(sweep_point_case(base, {fmt::format("{}={:.17g}", m.key, level)}), j);
  };
  SpringAtRest s0;
  try {
    s0 = at(0.0);
  } catch (const InputError& e) {
    m.reason = fmt::format("the case does not take {} ({})", m.key, e.what());
    return m;
  }
  if (!s0.found) {
    m.reason = "no static equilibrium without preload";
    return m;
  }

  // Direction: towards the nearer stop (or the one it is on).
  const double towards = s0.x < law.offset() ? -1.0 : 1.0;
  double moved = 0;
  for (const double probe : {1e-3 * scale, scale}) {
    const SpringAtRest s1 = at(probe);
    if (s1.found && s1.x != s0.x) {
      moved = s1.x - s0.x;
      break;
    }
  }
  if (moved == 0) {
    m.reason = fmt::format("{} does not move the {} at the case airspeed", m.key, dof_name(j));
    return m;
  }
  m.direction = towards * moved > 0 ? 1.0 : -1.0;
  auto signed_at = [&](double magnitude) { return at(m.direction * magnitude); };

  // The smallest level that reaches `reached` (monotone in the level):
  // doubling from `from`, then bisection to 1e-6 relative. NaN: not by
  // 1e6 scales.
  auto first_level = [&](double from, const std::function<bool(const SpringAtRest&)>& reached) {
    if (reached(signed_at(from))) return from;
    double lo = from, hi = std::max(from, 1e-3 * scale);
    while (!reached(signed_at(hi))) {
      lo = hi;
      hi *= 2;
      if (hi > 1e6 * scale) return std::numeric_limits<double>::quiet_NaN();
    }
    while (hi - lo > 1e-6 * hi) {
      const double mid = 0.5 * (lo + hi);
      (reached(signed_at(mid)) ? hi : lo) = mid;
    }
    return hi;
  };
  m.contact_level = s0.against_stop ? 0.0 : first_level(0.0, [](const SpringAtRest& s) { return s.found && s.against_stop; });
  if (!std::isfinite(m.contact_level)) {
    m.reason = fmt::format("no {} up to {:.4g} {} holds the {} against a stop", m.key, 1e6 * scale, m.units,
                           dof_name(j));
    return m;
  }

  // The level-0 LCO and its oscillating spring force; the hold-off level.
  auto is_lco = [](const SweepPoint& p) {
    return p.ok && (p.lco.response == ResponseClass::kPeriodic || p.lco.response == ResponseClass::kNonPeriodic);
  };
  {
    SweepRequest r0 = base;
    r0.options.axes = {SweepAxis{m.key, {0.0}}};
    r0.options.up = true;
    r0.options.down = false;
    const std::vector<SweepPoint> p0 = run_sweep(r0, {}, {}, cancel);
    stop_if_cancelled(cancel);
    if (!p0.empty() && is_lco(p0.front())) {
      const DofCycle& d = p0.front().lco.dof[static_cast<std::size_t>(j)];
      m.oscillating_force = 0.5 * (law.force(d.max, law.region_of(d.max)) - law.force(d.min, law.region_of(d.min)));
      const double f_osc = m.oscillating_force;
      m.hold_off_level = first_level(m.contact_level, [f_osc](const SpringAtRest& s) {
        return s.found && s.against_stop && std::abs(s.force) >= f_osc;
      });
    }
  }
  double top = 2 * std::max(std::isfinite(m.hold_off_level) ? m.hold_off_level : 0.0, m.contact_level);
  if (!(top > 0)) top = scale;

  // The map.
  SweepAxis axis{m.key, {}};
  for (int i = 0; i < levels; ++i) m.levels.push_back(m.direction * top * i / (levels - 1));
  axis.values = m.levels;
  std::sort(axis.values.begin(), axis.values.end());
  m.request = base;
  m.request.options.axes = {axis};
  m.request.options.up = m.request.options.down = true;
  m.request.options.continuation = true;
  m.points = run_sweep(m.request, {}, {}, cancel);
  stop_if_cancelled(cancel);
  for (const double level : m.levels) {
    bool any = false;
    for (const SweepPoint& p : m.points)
      if (p.value1 == level && is_lco(p)) any = true;
    m.lco.push_back(any);
    const SpringAtRest s = at(level);
    m.contact_load.push_back(s.found ? s.force : std::numeric_limits<double>::quiet_NaN());
    m.against_stop.push_back(s.found && s.against_stop);
  }

  // The answer.
  std::size_t last = m.levels.size();
  for (std::size_t i = 0; i < m.levels.size(); ++i)
    if (m.lco[i]) last = i;
  if (last == m.levels.size()) {
    m.outcome = PreloadOutcome::kNone;
    m.verdict = fmt::format("no LCO at any level swept ({} = 0 to {:.4g} {})", m.key, m.levels.back(), m.units);
  } else if (last + 1 == m.levels.size()) {
    m.outcome = PreloadOutcome::kEveryLevel;
    m.verdict = fmt::format("LCO at every level swept up to {} = {:.4g} {}", m.key, m.levels.back(), m.units);
    for (std::size_t i = 0; i < last; ++i)
      if (!m.lco[i]) {
        m.verdict = fmt::format("LCO at the highest level swept ({} = {:.4g} {}; not at every lower level)", m.key,
                                m.levels.back(), m.units);
        break;
      }
  } else {
    m.outcome = PreloadOutcome::kBracketed;
    m.bracket_low = m.levels[last];
    m.bracket_high = m.levels[last + 1];
    m.verdict = fmt::format("freeplay LCO disappears between {} = {:.4g} and {:.4g} {} (the last level swept "
                            "with an LCO and the next; none above up to {:.4g} {})",
                            m.key, m.bracket_low, m.bracket_high, m.units, m.levels.back(), m.units);
  }
  m.available = true;
  return m;
}

}  // namespace aerosect
