#include "aerosect/analysis/report.hpp"

#include <cmath>
#include <numbers>

#include <fmt/format.h>

#include "aerosect/model/system.hpp"
#include "aerosect/units.hpp"
#include "aerosect/version.hpp"

namespace aerosect {

using std::numbers::pi;

const char* const kSafetyCaution =
    "CAUTION: flutter and LCO clearance is safety-critical. Results of a typical-section model "
    "are for preliminary design and trade studies; airworthiness requires the applicable "
    "regulations, ground vibration tests, flight flutter testing and the judgement of "
    "qualified, licensed engineers under the local authority's rules. Freeplay limits for real "
    "hardware come from the applicable specification, not from this tool.";

namespace {

nlohmann::json parameters_json(const RunMetadata& m) {
  nlohmann::json j = nlohmann::json::object();
  for (const auto& p : m.parameters) j[p.group][p.name] = p.value;
  return j;
}

}  // namespace

Presenter presenter(const Case& c) {
  Presenter p;
  p.reduced = c.input_form != "si";
  p.omega_ref = uncoupled_frequencies(c.model.section).pitch;
  if (!(p.omega_ref > 0)) p.omega_ref = 1;
  p.length_ref = c.model.section.semichord;
  p.speed_ref = p.length_ref * p.omega_ref;
  return p;
}

std::string Presenter::speed(double u, const char* what) const {
  if (reduced) return fmt::format("U* {:.5g}", u / speed_ref);
  return fmt::format("{:.5g} m s-1{}{}", u, *what ? " " : "", what);
}

std::string Presenter::frequency(double f_hz) const {
  if (reduced) return fmt::format("w/w_a {:.4g}", frequency_value(f_hz));
  return fmt::format("{:.4g} Hz", f_hz);
}

std::string Presenter::length(double m) const {
  if (reduced) return fmt::format("{:.4g} semichords", m / length_ref);
  return fmt::format("{:.4g} m", m);
}

double Presenter::displacement_value(int dof, double v) const {
  if (is_angle_dof(dof)) return v * kDegPerRad;
  return reduced ? v / length_ref : v;
}

const char* Presenter::displacement_unit(int dof) const {
  if (is_angle_dof(dof)) return "degree";
  return reduced ? "semichords" : "m";
}

const char* Presenter::file_unit_note(int dof) const {
  if (is_angle_dof(dof)) return " (rad in the file)";
  return reduced ? " (m in the file)" : "";
}

nlohmann::json report_header(const Case& c, const char* command) {
  nlohmann::json j;
  j["command"] = command;
  j["aerosect_version"] = kVersion;
  j["case"] = c.path;
  j["title"] = c.title;
  j["input_form"] = c.input_form;
  j["dof"] = c.model.section.dof;
  j["aerodynamic_model"] = to_string(c.model.aero.model);
  j["overrides"] = c.overrides;
  j["caution"] = kSafetyCaution;
  return j;
}

namespace {

std::string fmt_num(double v) { return std::isfinite(v) ? fmt::format("{:.6g}", v) : "inf"; }
}  // namespace

CheckReport check_case(const Case& c) {
  CheckReport r;
  r.modes = in_vacuo_modes(c.model.section);
  r.divergence = divergence(c.model.section, c.model.flow.density);
  r.equilibrium = static_equilibrium(AeroelasticModel(c.model));
  return r;
}

nlohmann::json equilibrium_json(const Case& c, const EquilibriumResult& r) {
  nlohmann::json j;
  const SteadyCondition& st = c.model.steady;
  const int n = c.model.section.dof;
  if (r.steady_condition) {
    j["steady_condition"] = {{"incidence_deg", st.incidence * kDegPerRad},
                             {"gravity_m_s2", st.gravity}};
    if (n == 3) {
      j["steady_condition"]["flap_trim_deg"] = st.flap_trim * kDegPerRad;
      j["steady_condition"]["hinge_moment_n_m_per_m"] = st.hinge_moment;
    }
  } else {
    j["steady_condition"] = nullptr;
  }
  j["initial_conditions"] = r.steady_condition && !r.equilibria.empty()
                                ? "perturbation about the static equilibrium"
                                : "absolute";
  j["remark"] = r.remark;
  j["combinations"] = r.combinations;
  j["equilibria"] = nlohmann::json::array();
  for (const Equilibrium& e : r.equilibria) {
    nlohmann::json ej;
    ej["displacement"]["plunge_m"] = e.displacement(kPlunge);
    ej["displacement"]["pitch_deg"] = e.displacement(kPitch) * kDegPerRad;
    if (n == 3) ej["displacement"]["flap_deg"] = e.displacement(kFlap) * kDegPerRad;
    ej["static_stability"] = e.static_stability;
    ej["free_directions"] = e.free_directions;
    ej["springs"] = nlohmann::json::array();
    for (int k = 0; k < n; ++k) {
      const SpringEquilibrium& s = e.springs[static_cast<std::size_t>(k)];
      ej["springs"].push_back({{"dof", kDofNames[k]},
                               {"law", s.law},
                               {"region", s.region},
                               {"region_name", s.region_name},
                               {"force", s.force},
                               {"force_units", k == kPlunge ? "N m-1" : "N m m-1"},
                               {"in_contact", s.in_contact},
                               {"tangent_stiffness", s.tangent_stiffness}});
    }
    ej["lift_n_per_m"] = e.loads.lift;
    ej["pitching_moment_n_m_per_m"] = e.loads.pitching_moment;
    if (n == 3) ej["hinge_moment_n_m_per_m"] = e.loads.hinge_moment;
    j["equilibria"].push_back(ej);
  }
  return j;
}

std::string equilibrium_text(const Case& c, const EquilibriumResult& r) {
  const Presenter pr = presenter(c);
  const SteadyCondition& st = c.model.steady;
  const int n = c.model.section.dof;
  std::string t = "Static equilibrium";
  if (r.steady_condition) {
    t += fmt::format(" (steady condition: incidence {:.4g} deg", st.incidence * kDegPerRad);
    if (n == 3 && st.flap_trim != 0) t += fmt::format(", flap trim {:.4g} deg", st.flap_trim * kDegPerRad);
    if (n == 3 && st.hinge_moment != 0) t += fmt::format(", hinge moment {:.4g} N m m-1", st.hinge_moment);
    t += fmt::format(", gravity {:.4g} m s-2)\n", st.gravity);
  } else {
    t += " (no steady condition: nothing loads the section)\n";
  }
  if (!r.remark.empty()) t += "  " + r.remark + "\n";
  for (std::size_t i = 0; i < r.equilibria.size(); ++i) {
    const Equilibrium& e = r.equilibria[i];
    t += r.equilibria.size() > 1 ? fmt::format("  {}:", i + 1) : std::string(" ");
    for (int k = 0; k < n; ++k)
      t += fmt::format(" {} {:.6g} {}{}", kDofNames[k], pr.displacement_value(k, e.displacement(k)),
                       pr.displacement_unit(k), k + 1 < n ? "," : "");
    t += fmt::format("; statically {}", e.static_stability);
    if (e.free_directions > 0) t += " (a spring in its gap with nothing loading it: any point of the gap; 0 shown)";
    t += "\n";
    for (int k = 0; k < n; ++k) {
      const SpringEquilibrium& s = e.springs[static_cast<std::size_t>(k)];
      if (s.region_count <= 1 && s.law == "linear") continue;
      t += fmt::format("    {} spring ({}){}: force {:.5g} {}{}\n", kDofNames[k], s.law,
                       s.region_name.empty() ? "" : ", " + s.region_name, s.force,
                       k == kPlunge ? "N m-1" : "N m m-1", s.in_contact ? " (contact load against the stop)" : "");
    }
    if (r.steady_condition) {
      t += fmt::format("    steady lift {:.5g} N m-1, moment about the elastic axis {:.5g} N m m-1", e.loads.lift,
                       e.loads.pitching_moment);
      if (n == 3) t += fmt::format(", hinge moment {:.5g} N m m-1", e.loads.hinge_moment);
      t += "\n";
    }
  }
  if (r.steady_condition && !r.equilibria.empty())
    t += "  [initial] values are a perturbation about this equilibrium (the first, when several)\n";
  return t;
}

nlohmann::json check_json(const Case& c, const CheckReport& r) {
  nlohmann::json j = report_header(c, "check");
  j["parameters"] = parameters_json(case_metadata(c, "check"));
  const auto w = uncoupled_frequencies(c.model.section);
  j["uncoupled_frequencies_hz"]["plunge"] = w.plunge / (2 * pi);
  j["uncoupled_frequencies_hz"]["pitch"] = w.pitch / (2 * pi);
  if (c.model.section.dof == 3) j["uncoupled_frequencies_hz"]["flap"] = w.flap / (2 * pi);
  j["in_vacuo_modes"] = nlohmann::json::array();
  for (const auto& m : r.modes) {
    nlohmann::json mj;
    mj["frequency_hz"] = m.frequency / (2 * pi);
    mj["frequency_ratio"] = m.frequency / w.pitch;
    mj["dominant"] = kDofNames[m.dominant_dof];
    mj["shape"]["plunge_per_semichord"] = m.shape(kPlunge);
    mj["shape"]["pitch"] = m.shape(kPitch);
    if (c.model.section.dof == 3) mj["shape"]["flap"] = m.shape(kFlap);
    j["in_vacuo_modes"].push_back(mj);
  }
  const Divergence& d = r.divergence;
  j["divergence"]["exists"] = d.exists;
  if (d.exists) {
    j["divergence"]["speed_m_s"] = d.speed;
    j["divergence"]["reduced_speed"] = d.speed / (c.model.section.semichord * w.pitch);
    j["divergence"]["speed_ratio"] = c.model.flow.airspeed / d.speed;
  } else {
    j["divergence"]["speed_m_s"] = nullptr;
  }
  j["divergence"]["density_kg_m3"] = c.model.flow.density;
  j["equilibrium"] = equilibrium_json(c, r.equilibrium);
  // The assembled first-order model, for independent re-integration:
  // x' = A x - G f(q), f the nonlinear spring laws (piecewise polynomials).
  const AeroelasticModel model(c.model);
  nlohmann::json lm;
  lm["state_size"] = model.state_size();
  lm["layout"] = {{"displacement", model.layout().displacement}, {"velocity", model.layout().velocity},
                  {"wagner", model.layout().wagner}, {"n_wagner", model.layout().n_wagner},
                  {"gust", model.layout().gust}, {"n_gust", model.layout().n_gust}};
  for (Eigen::Index i = 0; i < model.linear_part().rows(); ++i) {
    std::vector<double> row(model.linear_part().cols());
    for (Eigen::Index k = 0; k < model.linear_part().cols(); ++k) row[k] = model.linear_part()(i, k);
    lm["A"].push_back(row);
  }
  lm["nonlinear_springs"] = nlohmann::json::array();
  for (int jn : model.nonlinear_springs()) {
    const SpringLaw& law = c.model.springs[jn];
    std::vector<double> g(model.state_size());
    for (int i = 0; i < model.state_size(); ++i) g[i] = model.force_input()(i, jn);
    auto v = [](std::span<const double> s) { return std::vector<double>(s.begin(), s.end()); };
    lm["nonlinear_springs"].push_back({{"dof", jn}, {"kind", law.kind()}, {"G", g},
                                       {"breakpoints", v(law.breakpoints())}, {"slopes", v(law.slopes())},
                                       {"intercepts", v(law.intercepts())},
                                       {"polynomial_terms", v(law.polynomial_terms())}});
  }
  const auto& s0 = c.simulation;
  // With a steady condition x' = A x + b0 - sum G f: b0 as "steady_input",
  // and the start is the equilibrium plus the [initial] perturbation.
  if (model.has_steady_condition())
    lm["steady_input"] = std::vector<double>(model.steady_input().data(),
                                             model.steady_input().data() + model.steady_input().size());
  lm["initial_state"] = run_start(model, s0.initial_displacement, s0.initial_velocity, s0.steady_lag_states,
                                  &r.equilibrium).x;
  lm["duration_s"] = s0.duration;
  j["linear_model"] = lm;
  return j;
}

std::string check_text(const Case& c, const CheckReport& r) {
  const SectionProperties& s = c.model.section;
  const NondimensionalParameters& n = c.nondimensional;
  const auto w = uncoupled_frequencies(s);
  std::string t;
  t += fmt::format("aerosect {} check: {}\n", kVersion, c.path);
  if (!c.title.empty()) t += fmt::format("  {}\n", c.title);
  t += fmt::format("  {}-DOF section, input in {} form, aerodynamics: {}\n\n", s.dof,
                   c.input_form == "si" ? "SI" : "nondimensional", to_string(c.model.aero.model));
  t += "SI parameters (per unit span)\n";
  t += fmt::format("  semichord b            {:>12} m\n", fmt_num(s.semichord));
  t += fmt::format("  mass m                 {:>12} kg m-1\n", fmt_num(s.mass));
  t += fmt::format("  elastic axis a_h       {:>12} semichords from midchord\n", fmt_num(s.elastic_axis));
  t += fmt::format("  static unbalance S_a   {:>12} kg m m-1\n", fmt_num(s.static_unbalance));
  t += fmt::format("  pitch inertia I_a      {:>12} kg m2 m-1 (about the elastic axis)\n", fmt_num(s.pitch_inertia));
  t += fmt::format("  plunge stiffness K_h   {:>12} N m-1 m-1\n", fmt_num(s.plunge_stiffness));
  t += fmt::format("  pitch stiffness K_a    {:>12} N m rad-1 m-1\n", fmt_num(s.pitch_stiffness));
  if (s.dof == 3) {
    t += fmt::format("  hinge c                {:>12} semichords from midchord\n", fmt_num(s.hinge));
    t += fmt::format("  flap unbalance S_b     {:>12} kg m m-1 (about the hinge)\n", fmt_num(s.flap_static_unbalance));
    t += fmt::format("  flap inertia I_b       {:>12} kg m2 m-1 (about the hinge)\n", fmt_num(s.flap_inertia));
    t += fmt::format("  hinge stiffness K_b    {:>12} N m rad-1 m-1\n", fmt_num(s.flap_stiffness));
  }
  t += fmt::format("  density rho            {:>12} kg m-3{}\n", fmt_num(c.model.flow.density),
                   c.altitude ? fmt::format(" (ISA, {} m)", *c.altitude) : std::string());
  t += fmt::format("  airspeed U             {:>12} m s-1\n\n", fmt_num(c.model.flow.airspeed));
  t += "Nondimensional parameters\n";
  t += fmt::format("  mu {}  a_h {}  x_alpha {}  r_alpha {}  omega_bar {}  U* {}\n",
                   fmt_num(n.mass_ratio), fmt_num(n.elastic_axis), fmt_num(n.cg_offset),
                   fmt_num(n.radius_of_gyration), fmt_num(n.frequency_ratio), fmt_num(n.reduced_speed));
  t += fmt::format("  zeta_h {}  zeta_alpha {}", fmt_num(n.plunge_damping_ratio),
                   fmt_num(n.pitch_damping_ratio));
  if (s.dof == 3)
    t += fmt::format("  c {}  x_beta {}  r_beta {}  omega_beta/omega_alpha {}  zeta_beta {}",
                     fmt_num(n.hinge), fmt_num(n.flap_cg_offset), fmt_num(n.flap_radius_of_gyration),
                     fmt_num(n.flap_frequency_ratio), fmt_num(n.flap_damping_ratio));
  t += "\n\nUncoupled in-vacuo frequencies\n";
  t += fmt::format("  plunge {:.6g} Hz   pitch {:.6g} Hz", w.plunge / (2 * pi), w.pitch / (2 * pi));
  if (s.dof == 3) t += fmt::format("   flap {:.6g} Hz", w.flap / (2 * pi));
  t += "\n\nCoupled in-vacuo modes (shape: h/b, alpha rad" + std::string(s.dof == 3 ? ", beta rad" : "") + ")\n";
  for (std::size_t i = 0; i < r.modes.size(); ++i) {
    const auto& m = r.modes[i];
    t += fmt::format("  mode {}  {:10.6g} Hz  ({:.4f} omega_alpha)  {:<6}  shape [", i + 1,
                     m.frequency / (2 * pi), m.frequency / w.pitch, kDofNames[m.dominant_dof]);
    for (int k = 0; k < s.dof; ++k) t += fmt::format("{}{:+.4f}", k ? ", " : "", m.shape(k));
    t += "]\n";
  }
  t += "\nStatic divergence (quasi-steady circulatory lift)\n";
  if (r.divergence.exists) {
    t += fmt::format("  U_D = {:.6g} m s-1  (U_D / (b omega_alpha) = {:.6g}); case airspeed is {:.3g} of U_D\n",
                     r.divergence.speed, r.divergence.speed / (s.semichord * w.pitch),
                     c.model.flow.airspeed / r.divergence.speed);
  } else {
    t += c.model.flow.density > 0 ? "  none: the aerodynamic stiffness never cancels the springs\n"
                                  : "  none: vacuum (density 0)\n";
  }
  t += "\n";
  t += equilibrium_text(c, r.equilibrium);
  t += "\n";
  t += kSafetyCaution;
  t += "\n";
  return t;
}

nlohmann::json simulation_json(const Case& c, const SimulationSummary& s,
                               const std::string& output_path) {
  nlohmann::json j = report_header(c, "simulate");
  j["output"] = output_path;
  j["completed"] = s.completed;
  j["status"] = s.status;
  j["end_time_s"] = s.end_time;
  j["end_tau"] = s.end_tau;
  j["samples"] = s.samples;
  j["steps"] = s.steps;
  j["rhs_evaluations"] = s.rhs_evaluations;
  j["switches"] = s.switches;
  j["extremes"] = nlohmann::json::object();
  for (const auto& e : s.extremes) {
    j["extremes"][e.channel] = {{"units", e.units},       {"max", e.max},
                                {"time_of_max_s", e.time_of_max}, {"min", e.min},
                                {"time_of_min_s", e.time_of_min}, {"rms", e.rms}};
  }
  return j;
}

std::string simulation_text(const Case& c, const SimulationSummary& s,
                            const std::string& output_path) {
  std::string t;
  t += fmt::format("aerosect {} simulate: {}\n", kVersion, c.path);
  t += fmt::format("  {} to t = {:.6g} s (tau = {:.6g}); {} samples, {} steps, {} rhs evaluations, "
                   "{} switches\n",
                   s.status, s.end_time, s.end_tau, s.samples, s.steps, s.rhs_evaluations,
                   s.switches);
  t += fmt::format("  written to {}\n\n", output_path);
  t += fmt::format("  {:<24} {:>13} {:>9} {:>13} {:>9} {:>12}  units\n", "channel", "max", "at s",
                   "min", "at s", "rms");
  for (const auto& e : s.extremes) {
    t += fmt::format("  {:<24} {:>13.6g} {:>9.4g} {:>13.6g} {:>9.4g} {:>12.5g}  {}\n", e.channel,
                     e.max, e.time_of_max, e.min, e.time_of_min, e.rms, e.units);
  }
  t += "\n";
  t += kSafetyCaution;
  t += "\n";
  return t;
}

}  // namespace aerosect
