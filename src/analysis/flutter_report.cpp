#include "aerosect/analysis/flutter_report.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>
#include <stdexcept>

#include <fmt/format.h>

#include "aerosect/analysis/mode_shapes.hpp"
#include "aerosect/analysis/report.hpp"
#include "aerosect/analysis/simulate.hpp"
#include "aerosect/io/hdf5_document.hpp"
#include "aerosect/units.hpp"
#include "aerosect/version.hpp"

namespace aerosect {

using std::numbers::pi;

namespace {

const char* kMarginCaution =
    "The margin is a typical-section estimate: it does not replace the analyses, ground "
    "vibration tests and flight flutter tests that CS-25.629 / 14 CFR 25.629 require.";

std::string group_name(Linearisation l) {
  std::string s = to_string(l);
  for (char& ch : s)
    if (ch == '-') ch = '_';
  return s;
}

const MethodResult* find_method(const LinearisationResult& lr, const std::string& name) {
  for (const auto& m : lr.methods)
    if (m.method == name) return &m;
  return nullptr;
}
const LinearisationResult* find_lin(const FlutterReport& r, Linearisation l) {
  for (const auto& x : r.results)
    if (x.linearisation == l) return &x;
  return nullptr;
}
// The preferred method of a linearisation: state-space when present.
const MethodResult* primary(const LinearisationResult& lr) {
  return lr.methods.empty() ? nullptr : &lr.methods.front();
}

std::string aero_label(const Case& c, const std::string& method) {
  if (method == "p-k") return "exact Theodorsen";
  if (c.model.aero.model != AeroModel::kWagner) return to_string(c.model.aero.model);
  return c.model.aero.wagner_name == "jones" ? "R. T. Jones Wagner" : "custom Wagner";
}

// "h/b 0.12 @ -40 deg, alpha 0.45 @ +10 deg, beta 1 @ +0 deg", phases
// relative to the largest component.
std::string shape_text(const Eigen::VectorXcd& v) {
  const char* names[3] = {"h/b", "alpha", "beta"};
  std::string t;
  for (Eigen::Index j = 0; j < v.size(); ++j)
    t += fmt::format("{}{} {:.3g} @ {:+.0f} deg", j ? ", " : "", names[j], std::abs(v(j)),
                     std::arg(v(j)) * kDegPerRad);
  return t;
}

nlohmann::json shape_json(const Eigen::VectorXcd& v) {
  const char* names[3] = {"plunge_per_semichord", "pitch", "flap"};
  nlohmann::json j;
  for (Eigen::Index k = 0; k < v.size(); ++k)
    j[names[k]] = {{"magnitude", std::abs(v(k))}, {"phase_deg", std::arg(v(k)) * kDegPerRad}};
  return j;
}

nlohmann::json crossing_json(const Crossing& x, const FlutterReport& r,
                             const std::vector<std::string>& names, bool flutter, const Case& c) {
  nlohmann::json j;
  j["found"] = x.found;
  if (!x.found) return j;
  j["speed_m_s"] = x.speed;
  j["speed_eas_m_s"] = equivalent_airspeed(x.speed, r.density);
  j["reduced_speed"] = x.speed / r.reference_speed;
  if (flutter) {
    j["frequency_hz"] = x.frequency / (2 * pi);
    j["frequency_ratio"] = x.frequency / r.reference_frequency;
    j["reduced_frequency"] = x.reduced_frequency;
    j["mode"] = x.mode + 1;
    j["mode_name"] = names[static_cast<std::size_t>(x.mode)];
  }
  if (x.shape.size() > 0) {
    j["shape"] = shape_json(x.shape);
    j["dominant_dof"] = dof_name(dominant_dof(x.shape, structural_mass(c.model.section),
                                              c.model.section.semichord));
  }
  return j;
}

std::string speed_text(const Crossing& x, const FlutterReport& r, const Presenter& pr) {
  if (!x.found) return "none in range";
  if (pr.reduced) return fmt::format("U* {:.6g}", x.speed / r.reference_speed);
  return fmt::format("{:.6g} m s-1 (U/b w_a {:.5g})", x.speed, x.speed / r.reference_speed);
}

// The rows of one branch the text table prints: every point of a short
// branch; of a long one both ends of every stable/unstable segment and an
// evenly thinned interior (about 12 rows), so no segment vanishes.
std::vector<std::size_t> printed_rows(const LcoPrediction& p, const LcoBranch& b) {
  std::vector<std::size_t> rows;
  const std::size_t every = b.count <= 24 ? 1 : (b.count + 11) / 12;
  for (std::size_t q = 0; q < b.count; ++q) {
    const std::size_t i = b.first + q;
    const bool segment_end = q == 0 || q + 1 == b.count || p.points[i].stable != p.points[i - 1].stable ||
                             p.points[i].stable != p.points[i + 1].stable;
    if (segment_end || q % every == 0) rows.push_back(i);
  }
  return rows;
}

}  // namespace

std::string lco_prediction_text(const LcoPrediction& p, const Presenter& pr) {
  const double unit = pr.displacement_value(p.spring, 1.0);
  const char* au = pr.displacement_unit(p.spring);
  std::string t =
      p.biased ? fmt::format("\nDescribing-function LCO prediction ({} spring; dual-input: near-harmonic about the "
                             "bias B that solves the mean equation of the steady condition):\n",
                             dof_name(p.spring))
               : fmt::format("\nDescribing-function LCO prediction ({} spring; near-harmonic, about zero):\n",
                             dof_name(p.spring));
  t += fmt::format("  {:>13} {:>12} {:>10} {:>6}  {}", fmt::format("amplitude {}", au), pr.speed_heading(),
                   pr.frequency_heading(), "branch", "stable");
  t += p.biased ? fmt::format("  {:>11}\n", fmt::format("bias {}", au)) : std::string("\n");
  for (const LcoBranch& b : p.branches)
    for (const std::size_t i : printed_rows(p, b)) {
      const auto& pt = p.points[i];
      t += fmt::format("  {:>13.5g} {:>12.5g} {:>10.4g} {:>6}  ", pt.amplitude * unit, pr.speed_value(pt.speed),
                       pr.frequency_value(pt.frequency / (2 * pi)), pt.branch);
      t += p.biased ? fmt::format("{:<6} {:>11.5g}\n", pt.stable ? "yes" : "no", pt.bias * unit)
                    : fmt::format("{}\n", pt.stable ? "yes" : "no");
    }
  double lo = std::numeric_limits<double>::infinity(), hi = 0;
  for (std::size_t k = 0; k < p.branches.size(); ++k) {
    const LcoBranch& b = p.branches[k];
    const auto& first = p.points[b.first];
    const auto& last = p.points[b.first + b.count - 1];
    t += fmt::format("  branch {}: {} points, {:.5g} {} at {} ({}) .. {:.5g} {} at {} ({})\n", k,
                     b.count, first.amplitude * unit, au, pr.speed(first.speed),
                     b.closed ? "closed curve" : to_string(b.start), last.amplitude * unit, au, pr.speed(last.speed),
                     b.closed ? "closed curve" : to_string(b.end));
    // Each stable run: its lowest and highest speed, the amplitude there
    // and why the range ends there.
    auto why = [&](std::size_t i, std::size_t r0, std::size_t r1) -> std::string {
      const std::size_t last_index = b.first + b.count - 1;
      if (i == b.first && !b.closed) return to_string(b.start);
      if (i == last_index && !b.closed) return to_string(b.end);
      if (i == r0 || i == r1) return "turns unstable";
      return "the curve turns back in speed";
    };
    bool any = false;
    for (std::size_t r0 = b.first; r0 < b.first + b.count; ++r0) {
      if (!p.points[r0].stable) continue;
      std::size_t r1 = r0;
      while (r1 + 1 < b.first + b.count && p.points[r1 + 1].stable) ++r1;
      std::size_t a = r0, z = r0;
      for (std::size_t i = r0; i <= r1; ++i) {
        if (p.points[i].speed < p.points[a].speed) a = i;
        if (p.points[i].speed > p.points[z].speed) z = i;
      }
      t += fmt::format("    stable from {} ({:.5g} {}; {}) to {} ({:.5g} {}; {})\n",
                       pr.speed(p.points[a].speed), p.points[a].amplitude * unit, au, why(a, r0, r1),
                       pr.speed(p.points[z].speed), p.points[z].amplitude * unit, au, why(z, r0, r1));
      lo = std::min(lo, p.points[a].speed);
      hi = std::max(hi, p.points[z].speed);
      any = true;
      r0 = r1;
    }
    if (!any) t += "    unstable throughout\n";
  }
  if (!p.equivalent_divergence.empty()) {
    double a0 = std::numeric_limits<double>::infinity(), a1 = 0;
    for (const auto& d : p.equivalent_divergence) {
      a0 = std::min(a0, d.amplitude);
      a1 = std::max(a1, d.amplitude);
    }
    t += fmt::format("  not LCOs: at {} amplitudes from {:.5g} to {:.5g} {} the equivalent system's growth rate "
                     "changes sign without a neutral oscillatory pair (a pair turns real: static divergence "
                     "of the equivalent system)\n",
                     p.equivalent_divergence.size(), a0 * unit, a1 * unit, au);
  }
  if (std::isfinite(lo))
    t += fmt::format("  stable LCO predicted between {} and {} (on the branches above, not "
                     "throughout)\n",
                     pr.speed(lo), pr.speed(hi));
  else
    t += "  no stable LCO predicted\n";
  t += fmt::format("  amplitudes searched up to {:.5g} {} (the physical amplitude limit)\n",
                   p.amplitude_limit * unit, au);
  return t;
}

FlutterMargin flutter_margin(const FlutterReport& r) {
  FlutterMargin m;
  if (!r.dive_speed_eas || r.results.empty() || r.results.front().methods.empty()) return m;
  // The lowest instability over every method run (state-space and p-k):
  // the margin rests on the lower of the two, never on one by convention.
  double crit = std::numeric_limits<double>::infinity();
  for (const MethodResult& p : r.results.front().methods) {
    if (p.flutter.found && p.flutter.speed < crit) {
      crit = p.flutter.speed;
      m.critical_kind = "flutter";
      m.critical_method = p.method;
    }
    if (p.divergence.found && p.divergence.speed < crit) {
      crit = p.divergence.speed;
      m.critical_kind = "divergence";
      m.critical_method = p.method;
    }
  }
  m.dive_speed_eas = *r.dive_speed_eas;
  m.required_eas = 1.15 * *r.dive_speed_eas;
  if (const LinearisationResult* open = find_lin(r, Linearisation::kGapOpen)) {
    for (const MethodResult& q : open->methods)
      if (q.flutter.found) {
        const double eas = equivalent_airspeed(q.flutter.speed, r.density);
        if (!m.lco_onset_eas || eas < *m.lco_onset_eas) {
          m.lco_onset_eas = eas;
          m.lco_onset_method = q.method;
        }
      }
  }
  if (!std::isfinite(crit)) {
    m.available = true;  // nothing found in the swept range
    m.critical_kind = "none";
    m.critical_eas = std::numeric_limits<double>::infinity();
    m.critical_tas = m.critical_eas;
    m.margin = std::numeric_limits<double>::infinity();
    m.margin_met = true;
    return m;
  }
  m.available = true;
  m.critical_tas = crit;
  m.critical_eas = equivalent_airspeed(crit, r.density);
  m.margin = m.critical_eas / m.required_eas - 1.0;
  m.margin_met = m.margin >= 0;
  return m;
}

nlohmann::json flutter_json(const Case& c, const FlutterReport& r, const std::string& output) {
  nlohmann::json j = report_header(c, "flutter");
  j["output"] = output;
  j["density_kg_m3"] = r.density;
  j["reference_speed_m_s"] = r.reference_speed;
  j["reference_frequency_hz"] = r.reference_frequency / (2 * pi);
  j["mode_names"] = r.mode_names;
  if (!r.results.empty() && !r.results.front().methods.empty()) {
    const auto& sp = r.results.front().methods.front().sweep.speeds;
    j["speeds"] = {{"from_m_s", sp.front()}, {"to_m_s", sp.back()}, {"count", sp.size()}};
  }
  j["linearisations"] = nlohmann::json::array();
  for (const auto& lr : r.results) {
    nlohmann::json l;
    l["name"] = to_string(lr.linearisation);
    for (int k = 0; k < lr.stiffness.size(); ++k) l["stiffness"][kDofNames[k]] = lr.stiffness(k);
    l["mode_names"] = lr.mode_names;
    l["methods"] = nlohmann::json::array();
    for (const auto& m : lr.methods) {
      nlohmann::json mj;
      mj["method"] = m.method;
      mj["aerodynamics"] = aero_label(c, m.method);
      mj["flutter"] = crossing_json(m.flutter, r, lr.mode_names, true, c);
      mj["divergence"] = crossing_json(m.divergence, r, lr.mode_names, false, c);
      l["methods"].push_back(mj);
    }
    const MethodResult* ss = find_method(lr, "state-space");
    const MethodResult* pk = find_method(lr, "p-k");
    if (ss && pk && ss->flutter.found && pk->flutter.found)
      l["wagner_approximation_error_percent"] =
          100.0 * (ss->flutter.speed - pk->flutter.speed) / pk->flutter.speed;
    j["linearisations"].push_back(l);
  }
  const LinearisationResult* open = find_lin(r, Linearisation::kGapOpen);
  const LinearisationResult* closed = find_lin(r, Linearisation::kGapClosed);
  if (open && closed) {
    const MethodResult* a = primary(*open);
    const MethodResult* b = primary(*closed);
    nlohmann::json band;
    band["gap_open_flutter_m_s"] = a && a->flutter.found ? nlohmann::json(a->flutter.speed) : nullptr;
    band["gap_closed_flutter_m_s"] = b && b->flutter.found ? nlohmann::json(b->flutter.speed) : nullptr;
    j["freeplay_band"] = band;
  } else {
    j["freeplay_band"] = nullptr;
  }
  if (r.lco.available) {
    const bool angle = r.lco.spring != kPlunge;
    const double unit = angle ? kDegPerRad : 1.0;
    nlohmann::json lj;
    lj["spring"] = dof_name(r.lco.spring);
    lj["amplitude_units"] = angle ? "degree" : "m";
    lj["note"] = r.lco.biased ? "dual-input describing-function prediction: near-harmonic oscillation about the "
                                "bias that solves the mean equation of the steady condition"
                              : "describing-function prediction: near-harmonic oscillation about zero assumed";
    lj["biased"] = r.lco.biased;
    lj["amplitude_limit"] = r.lco.amplitude_limit * unit;
    double lo = std::numeric_limits<double>::infinity(), hi = 0;
    lj["points"] = nlohmann::json::array();
    for (const auto& pt : r.lco.points)
      lj["points"].push_back({{"amplitude", pt.amplitude * unit},
                              {"speed_m_s", pt.speed},
                              {"frequency_hz", pt.frequency / (2 * pi)},
                              {"stable", pt.stable},
                              {"branch", pt.branch}});
    if (r.lco.biased)
      for (std::size_t q = 0; q < r.lco.points.size(); ++q) {
        lj["points"][q]["bias"] = r.lco.points[q].bias * unit;
        lj["points"][q]["mean_spring_force"] = r.lco.points[q].mean_force;
      }
    lj["branches"] = nlohmann::json::array();
    for (const LcoBranch& b : r.lco.branches) {
      nlohmann::json bj;
      bj["points"] = b.count;
      bj["closed"] = b.closed;
      bj["start"] = b.closed ? nlohmann::json(nullptr) : nlohmann::json(to_string(b.start));
      bj["end"] = b.closed ? nlohmann::json(nullptr) : nlohmann::json(to_string(b.end));
      bj["stable_speed_ranges_m_s"] = nlohmann::json::array();
      for (const auto& [a, z] : stable_speed_ranges(r.lco, b)) {
        bj["stable_speed_ranges_m_s"].push_back({a, z});
        lo = std::min(lo, a);
        hi = std::max(hi, z);
      }
      lj["branches"].push_back(bj);
    }
    lj["equivalent_divergence_count"] = r.lco.equivalent_divergence.size();
    lj["stable_speed_range_m_s"] =
        std::isfinite(lo) ? nlohmann::json::array({lo, hi}) : nlohmann::json(nullptr);
    // Where the curve passes the case's airspeed (interpolated between the
    // bracketing points of each branch).
    nlohmann::json at;
    at["speed_m_s"] = c.model.flow.airspeed;
    at["cycles"] = nlohmann::json::array();
    for (const LcoAtSpeed& q : lco_at_speed(r.lco, c.model.flow.airspeed))
      at["cycles"].push_back({{"amplitude", q.amplitude * unit},
                              {"frequency_hz", q.frequency / (2 * pi)},
                              {"stable", q.stable},
                              {"branch", q.branch}});
    lj["at_case_airspeed"] = at;
    j["lco_prediction"] = lj;
  } else {
    j["lco_prediction"] = nullptr;
  }
  // The steady condition: the equilibrium the nominal linearisation is
  // about, and why the describing-function prediction is left out.
  j["nominal_linearisation"] = r.nominal_basis;
  j["equilibrium"] = c.model.steady.any() ? equilibrium_json(c, r.equilibrium) : nlohmann::json(nullptr);
  j["lco_prediction_omitted"] = r.lco.available ? nlohmann::json(nullptr) : nlohmann::json(r.lco.reason);
  const FlutterMargin fm = flutter_margin(r);
  if (fm.available) {
    nlohmann::json mj;
    mj["dive_speed_eas_m_s"] = fm.dive_speed_eas;
    mj["required_eas_m_s"] = fm.required_eas;
    mj["critical"] = fm.critical_kind;
    mj["critical_method"] = fm.critical_method.empty() ? nlohmann::json(nullptr) : nlohmann::json(fm.critical_method);
    mj["critical_eas_m_s"] = std::isfinite(fm.critical_eas) ? nlohmann::json(fm.critical_eas) : nullptr;
    mj["margin_percent"] = std::isfinite(fm.margin) ? nlohmann::json(100 * fm.margin) : nullptr;
    mj["margin_met"] = fm.margin_met;
    mj["lco_onset_eas_m_s"] = fm.lco_onset_eas ? nlohmann::json(*fm.lco_onset_eas) : nullptr;
    mj["lco_onset_method"] = fm.lco_onset_eas ? nlohmann::json(fm.lco_onset_method) : nullptr;
    mj["caution"] = kMarginCaution;
    j["margin"] = mj;
  } else {
    j["margin"] = nullptr;
  }
  return j;
}

std::string flutter_text(const Case& c, const FlutterReport& r, const std::string& output) {
  const Presenter pr = presenter(c);
  std::string t;
  t += fmt::format("aerosect {} flutter: {}\n", kVersion, c.path);
  if (!c.title.empty()) t += fmt::format("  {}\n", c.title);
  t += fmt::format("  {}-DOF; density {:.5g} kg m-3; reference speed b w_a = {:.5g} m s-1, "
                   "w_a = {:.5g} Hz\n",
                   c.model.section.dof, r.density, r.reference_speed,
                   r.reference_frequency / (2 * pi));
  if (!r.results.empty() && !r.results.front().methods.empty()) {
    const auto& sp = r.results.front().methods.front().sweep.speeds;
    t += pr.reduced ? fmt::format("  {} speeds from U* {:.4g} to {:.4g} (U* = U / (b w_a); the file also "
                                  "holds them in m s-1 at the reference scales above)\n",
                                  sp.size(), pr.speed_value(sp.front()), pr.speed_value(sp.back()))
                    : fmt::format("  {} speeds from {:.4g} to {:.4g} m s-1 (true airspeed)\n", sp.size(),
                                  sp.front(), sp.back());
  }
  t += "  modes:";
  for (std::size_t i = 0; i < r.mode_names.size(); ++i)
    t += fmt::format(" {} ({})", i + 1, r.mode_names[i]);
  t += "\n";
  if (c.model.steady.any()) {
    t += "\n";
    t += equilibrium_text(c, r.equilibrium);
    t += "  nominal springs: " + r.nominal_basis + "\n";
  }
  for (const auto& lr : r.results) {
    t += fmt::format("\n{} springs", to_string(lr.linearisation));
    const char* dofs[3] = {"K_h", "K_a", "K_b"};
    const char* units[3] = {"N m-1 m-1", "N m rad-1 m-1", "N m rad-1 m-1"};
    t += " (";
    for (int k = 0; k < lr.stiffness.size(); ++k)
      t += fmt::format("{}{} = {:.5g} {}", k ? ", " : "", dofs[k], lr.stiffness(k), units[k]);
    t += ")\n";
    if (lr.mode_names != r.mode_names) {
      t += "  modes at these springs:";
      for (std::size_t i = 0; i < lr.mode_names.size(); ++i)
        t += fmt::format(" {} ({})", i + 1, lr.mode_names[i]);
      t += "\n";
    }
    for (const auto& m : lr.methods) {
      t += fmt::format("  {:<12} ({})\n", m.method, aero_label(c, m.method));
      t += fmt::format("    flutter     {}", speed_text(m.flutter, r, pr));
      if (m.flutter.found && pr.reduced)
        t += fmt::format(", w/w_a {:.4f}, k = {:.4f}, tracked from mode {} ({})",
                         m.flutter.frequency / r.reference_frequency, m.flutter.reduced_frequency,
                         m.flutter.mode + 1, lr.mode_names[static_cast<std::size_t>(m.flutter.mode)]);
      else if (m.flutter.found)
        t += fmt::format(", EAS {:.5g} m s-1, {:.5g} Hz (w/w_a {:.4f}), k = {:.4f}, tracked from mode {} ({})",
                         equivalent_airspeed(m.flutter.speed, r.density),
                         m.flutter.frequency / (2 * pi),
                         m.flutter.frequency / r.reference_frequency, m.flutter.reduced_frequency,
                         m.flutter.mode + 1, lr.mode_names[static_cast<std::size_t>(m.flutter.mode)]);
      t += "\n";
      if (m.flutter.found)
        t += fmt::format("                shape {} ({}-dominated)\n", shape_text(m.flutter.shape),
                         dof_name(dominant_dof(m.flutter.shape, structural_mass(c.model.section),
                                               c.model.section.semichord)));
      t += fmt::format("    divergence  {}\n", speed_text(m.divergence, r, pr));
    }
    const MethodResult* ss = find_method(lr, "state-space");
    const MethodResult* pk = find_method(lr, "p-k");
    if (ss && pk && ss->flutter.found && pk->flutter.found)
      t += fmt::format("    state-space minus p-k flutter speed: {:+.3f} % (the Wagner "
                       "approximation's error)\n",
                       100.0 * (ss->flutter.speed - pk->flutter.speed) / pk->flutter.speed);
  }
  const LinearisationResult* open = find_lin(r, Linearisation::kGapOpen);
  const LinearisationResult* closed = find_lin(r, Linearisation::kGapClosed);
  if (open && closed) {
    const MethodResult* a = primary(*open);
    const MethodResult* b = primary(*closed);
    t += "\nFreeplay: limit-cycle oscillation can exist between the gap-open and gap-closed "
         "flutter speeds:\n";
    t += fmt::format("  gap open {}  ..  gap closed {}\n", a ? speed_text(a->flutter, r, pr) : "-",
                     b ? speed_text(b->flutter, r, pr) : "-");
  }
  if (c.model.steady.any() && open && closed) {
    const Equilibrium* e = principal_equilibrium(r.equilibrium);
    bool contact = false;
    if (e)
      for (const auto& sp : e->springs) contact |= sp.in_contact;
    if (contact)
      t += "  The static equilibrium lies against a stop (contact load above): freeplay LCO needs an "
           "oscillation large enough to leave the stop; the band above is that of an unloaded surface.\n";
  }
  if (r.lco.available) t += lco_prediction_text(r.lco, pr);
  else if (c.model.steady.any() && !r.lco.reason.empty())
    t += fmt::format("\nDescribing-function LCO prediction {}.\n", r.lco.reason);
  const FlutterMargin fm = flutter_margin(r);
  if (fm.available) {
    t += fmt::format("\nMargin (CS-25.629(b) / 14 CFR 25.629(b)): V_D = {:.5g} m s-1 EAS, 1.15 V_D = "
                     "{:.5g} m s-1 EAS\n",
                     fm.dive_speed_eas, fm.required_eas);
    if (fm.critical_kind == "none") {
      t += "  no flutter or divergence in the swept range\n";
    } else {
      t += fmt::format("  lowest instability: {} ({}) at {:.5g} m s-1 EAS: margin {:+.1f} % -> {}\n",
                       fm.critical_kind, fm.critical_method, fm.critical_eas, 100 * fm.margin,
                       fm.margin_met ? "margin met: beyond 1.15 V_D" : "margin NOT met: inside 1.15 V_D");
    }
    if (fm.lco_onset_eas)
      t += fmt::format("  freeplay LCO can start at the gap-open flutter speed ({}), {:.5g} m s-1 EAS ({})\n",
                       fm.lco_onset_method, *fm.lco_onset_eas,
                       *fm.lco_onset_eas >= fm.required_eas ? "beyond 1.15 V_D" : "INSIDE 1.15 V_D");
    t += fmt::format("  {}\n", kMarginCaution);
  }
  if (!output.empty()) t += fmt::format("\nwritten to {}\n", output);
  t += "\n";
  t += kSafetyCaution;
  t += "\n";
  return t;
}

void write_flutter_file(const std::string& path, const Case& c, const FlutterReport& r) {
  Hdf5Document doc(path);
  write_flutter_tables(doc, c, r);
  doc.commit();
}

void write_flutter_tables(TableSink& doc, const Case& c, const FlutterReport& r) {
  RunMetadata meta = case_metadata(c, "flutter");
  doc.metadata(meta);
  doc.number_attribute("", "reference_speed", r.reference_speed, "m s-1");
  doc.number_attribute("", "reference_frequency", r.reference_frequency, "rad s-1");
  doc.number_attribute("", "density", r.density, "kg m-3");
  if (r.dive_speed_eas) {
    doc.number_attribute("", "dive_speed_eas", *r.dive_speed_eas, "m s-1");
    doc.number_attribute("", "clearance_speed_tas", 1.15 * true_airspeed(*r.dive_speed_eas, r.density),
                         "m s-1");
  }
  if (!r.observed_lco.ranges.empty()) {
    // Where stable LCOs were found (the study): ranges over their own axis.
    const std::size_t n = r.observed_lco.ranges.size();
    std::vector<std::int32_t> idx(n);
    std::vector<double> from(n), to(n);
    for (std::size_t k = 0; k < n; ++k) {
      idx[k] = static_cast<std::int32_t>(k + 1);
      from[k] = r.observed_lco.ranges[k].first;
      to[k] = r.observed_lco.ranges[k].second;
    }
    doc.integer_axis("lco_range", idx, "speed range where stable limit cycles were found");
    doc.dataset("lco_found_from", {"lco_range"}, from, "m s-1", "lowest true airspeed of the range (stable LCO found)");
    doc.dataset("lco_found_to", {"lco_range"}, to, "m s-1", "highest true airspeed of the range (stable LCO found)");
    doc.text_attribute("", "lco_found_source", r.observed_lco.source);
  }
  if (r.results.empty() || r.results.front().methods.empty()) return;
  const std::vector<double>& speeds = r.results.front().methods.front().sweep.speeds;
  doc.axis("speed", speeds, "m s-1", "true airspeed");
  std::vector<double> reduced(speeds.size());
  for (std::size_t i = 0; i < speeds.size(); ++i) reduced[i] = speeds[i] / r.reference_speed;
  doc.dataset("reduced_speed", {"speed"}, reduced, "1", "reduced speed U / (b omega_alpha)");
  const int n = static_cast<int>(r.mode_names.size());
  std::vector<std::int32_t> modes(static_cast<std::size_t>(n));
  std::string names;
  for (int i = 0; i < n; ++i) {
    modes[static_cast<std::size_t>(i)] = i + 1;
    names += (i ? "," : "") + r.mode_names[static_cast<std::size_t>(i)];
  }
  doc.integer_axis("mode", modes, "structural mode, numbered as the in-vacuo modes");
  doc.text_attribute("mode", "mode_names", names);

  for (const auto& lr : r.results) {
    const std::string lg = group_name(lr.linearisation);
    for (int k = 0; k < lr.stiffness.size(); ++k)
      doc.number_attribute(lg, std::string("stiffness_") + kDofNames[k], lr.stiffness(k),
                           k == kPlunge ? "N m-1 m-1" : "N m rad-1 m-1");
    {
      std::string lnames;
      for (std::size_t i = 0; i < lr.mode_names.size(); ++i) lnames += (i ? "," : "") + lr.mode_names[i];
      doc.text_attribute(lg, "mode_names", lnames);
    }
    for (const auto& m : lr.methods) {
      const std::string g = lg + "/" + flutter_method_group(m.method);
      const std::size_t ns = m.sweep.speeds.size();
      std::vector<Root> roots;  // row-major over (speed, mode)
      roots.reserve(ns * static_cast<std::size_t>(n));
      for (const auto& at_speed : m.sweep.roots) roots.insert(roots.end(), at_speed.begin(), at_speed.end());
      const Root* first = roots.data();
      write_layout<Root>(doc, flutter_root_layout(), {"speed", "mode"}, roots.size(), roots,
                         [first](const Root& root) { return static_cast<std::size_t>(&root - first); }, g + "/");
      doc.text_attribute(g, "aerodynamics", aero_label(c, m.method));
      for (const MethodAttribute& a : flutter_method_attributes()) {
        if (a.integer)
          doc.integer_attribute(g, a.name, static_cast<std::int64_t>(a.get(m)));
        else
          doc.number_attribute(g, a.name, a.get(m), a.units);
      }
    }
  }
  if (r.lco.available) write_lco_prediction(doc, r.lco);
}

void write_lco_prediction(TableSink& sink, const LcoPrediction& lco, double value_per_speed,
                          const std::string& swept_key) {
  const bool angle = lco.spring != kPlunge;
  using P = LcoPredictionPoint;
  auto field = [](const std::string& name, std::string units, std::string long_name,
                  std::function<double(const P&)> get) {
    return written_field<P>("lco_prediction/" + name, std::move(units), std::move(long_name), std::move(get));
  };
  // The layout of a describing-function LCO point: each field once.
  Layout<P> layout;
  if (!swept_key.empty())
    layout.push_back(field("value", case_key_units(swept_key).empty() ? "1" : case_key_units(swept_key),
                           "swept value (" + swept_key + ") of the predicted LCO",
                           [value_per_speed](const P& p) { return p.speed * value_per_speed; }));
  layout.push_back(field("amplitude", angle ? "rad" : "m",
                         std::string("describing-function LCO amplitude of the ") + dof_name(lco.spring),
                         [](const P& p) { return p.amplitude; }));
  layout.push_back(field("branch", "1", "connected curve of neutral points, numbered in ascending speed at its smallest amplitude",
                         [](const P& p) { return static_cast<double>(p.branch); }));
  layout.push_back(field("speed", "m s-1", "airspeed of the predicted LCO", [](const P& p) { return p.speed; }));
  layout.push_back(field("frequency", "Hz", "frequency of the predicted LCO",
                         [](const P& p) { return p.frequency / (2 * pi); }));
  layout.push_back(field("stable", "1", "1 for a stable LCO branch, 0 unstable",
                         [](const P& p) { return p.stable ? 1.0 : 0.0; }));
  layout.push_back(field("equivalent_stiffness", angle ? "N m rad-1 m-1" : "N m-1 m-1",
                         lco.biased ? "dual-input describing-function stiffness N_A(B, A)"
                                    : "describing-function stiffness N(A)",
                         [](const P& p) { return p.equivalent_stiffness; }));
  // With a steady condition: the bias and the mean spring force.
  if (lco.biased) {
    layout.push_back(field("bias", angle ? "rad" : "m",
                           std::string("mean B of the ") + dof_name(lco.spring) + " over the predicted LCO",
                           [](const P& p) { return p.bias; }));
    layout.push_back(field("mean_spring_force", angle ? "N m m-1" : "N m-1",
                           "mean spring force F0(B, A) over the predicted LCO", [](const P& p) { return p.mean_force; }));
  }
  // The branch number is an integer, stability a class (CF 1.10 §3.5 flags).
  for (auto& f : layout) {
    if (f.name == "lco_prediction/branch") f.integer = true;
    if (f.name == "lco_prediction/stable") f.integer = true, f.flags = {{0, 1}, "unstable stable"};
  }
  std::vector<std::int32_t> idx(lco.points.size());
  for (std::size_t q = 0; q < idx.size(); ++q) idx[q] = static_cast<std::int32_t>(q);
  sink.integer_axis("lco_prediction_point", idx, "point of the describing-function curves");
  const P* first = lco.points.data();
  write_layout<P>(sink, layout, {"lco_prediction_point"}, lco.points.size(), lco.points,
                  [first](const P& p) { return static_cast<std::size_t>(&p - first); });
  sink.text_attribute("lco_prediction", "spring", dof_name(lco.spring));
  // Why each branch ends at its smaller- and larger-amplitude end, by branch
  // number, comma-separated (describing_function.hpp, BranchEnd).
  std::string start, end;
  for (const LcoBranch& b : lco.branches) {
    start += std::string(start.empty() ? "" : ",") + (b.closed ? "closed curve" : to_string(b.start));
    end += std::string(end.empty() ? "" : ",") + (b.closed ? "closed curve" : to_string(b.end));
  }
  sink.text_attribute("lco_prediction", "branch_start", start);
  sink.text_attribute("lco_prediction", "branch_end", end);
  sink.number_attribute("lco_prediction", "amplitude_limit", lco.amplitude_limit, angle ? "rad" : "m");
}

std::string flutter_method_group(const std::string& method) { return method == "p-k" ? "pk" : "state_space"; }

const Layout<Root>& flutter_root_layout() {
  static const Layout<Root> layout = [] {
    // Not read back: there is no journal of flutter results.
    const auto field = written_field<Root>;
    Layout<Root> l;
    l.push_back(field("frequency", "Hz", "modal frequency |Im lambda| / 2 pi",
                      [](const Root& r) { return r.frequency / (2 * pi); }));
    l.push_back(field("damping_ratio", "1", "modal damping ratio -Re lambda / |lambda| (negative: unstable)",
                      [](const Root& r) { return r.damping_ratio; }));
    l.push_back(field("eigenvalue_real", "s-1", "real part of the eigenvalue",
                      [](const Root& r) { return r.eigenvalue.real(); }));
    l.push_back(field("eigenvalue_imag", "s-1", "imaginary part of the eigenvalue",
                      [](const Root& r) { return r.eigenvalue.imag(); }));
    l.push_back(field("reduced_frequency", "1", "reduced frequency omega b / U",
                      [](const Root& r) { return r.reduced_frequency; }));
    l.push_back(field("aerodynamic_lag", "1",
                      "1 where the tracked root is an aerodynamic lag root, not a structural one",
                      [](const Root& r) { return r.aerodynamic_lag ? 1.0 : 0.0; }));
    l.back().integer = true;  // a class (CF 1.10 §3.5 flags)
    l.back().flags = {{0, 1}, "structural aerodynamic_lag"};
    return l;
  }();
  return layout;
}

const std::vector<MethodAttribute>& flutter_method_attributes() {
  static const std::vector<MethodAttribute> attributes = [] {
    const double nan = std::numeric_limits<double>::quiet_NaN();
    std::vector<MethodAttribute> a;
    a.push_back({"flutter_found", "1", "1 when a flutter crossing was found in the speed range", true,
                 [](const MethodResult& m) { return m.flutter.found ? 1.0 : 0.0; }});
    a.push_back({"flutter_speed", "m s-1", "flutter speed (true airspeed)", false,
                 [nan](const MethodResult& m) { return m.flutter.found ? m.flutter.speed : nan; }});
    a.push_back({"flutter_frequency", "Hz", "flutter frequency", false,
                 [nan](const MethodResult& m) { return m.flutter.found ? m.flutter.frequency / (2 * pi) : nan; }});
    a.push_back({"flutter_reduced_frequency", "1", "reduced frequency omega b / U at flutter", false,
                 [nan](const MethodResult& m) { return m.flutter.found ? m.flutter.reduced_frequency : nan; }});
    a.push_back({"flutter_mode", "1", "the fluttering mode, numbered as the mode axis (0: none)", true,
                 [](const MethodResult& m) { return m.flutter.found ? m.flutter.mode + 1.0 : 0.0; }});
    a.push_back({"divergence_found", "1", "1 when a divergence crossing was found in the speed range", true,
                 [](const MethodResult& m) { return m.divergence.found ? 1.0 : 0.0; }});
    a.push_back({"divergence_speed", "m s-1", "divergence speed (true airspeed)", false,
                 [nan](const MethodResult& m) { return m.divergence.found ? m.divergence.speed : nan; }});
    return a;
  }();
  return attributes;
}

std::string flutter_source(Linearisation l, const std::string& method, const std::string& attribute) {
  const auto& a = flutter_method_attributes();
  if (std::none_of(a.begin(), a.end(), [&](const MethodAttribute& x) { return x.name == attribute; }))
    throw std::logic_error("flutter_source: the flutter file holds no attribute " + attribute);
  return "flutter.h5: /" + flutter_group(l, method) + "@" + attribute;
}

std::string flutter_group(Linearisation l, const std::string& method) {
  return group_name(l) + "/" + flutter_method_group(method);
}

}  // namespace aerosect
