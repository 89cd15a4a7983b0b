#pragma once
// Reports of analysis results: a JSON summary (keys documented in README.md,
// "JSON output") and the human-readable text of the same content. The
// engine builds them; the command-line driver only prints them.

#include <numbers>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "aerosect/analysis/equilibrium.hpp"
#include "aerosect/analysis/modes.hpp"
#include "aerosect/analysis/simulate.hpp"
#include "aerosect/io/case.hpp"

namespace aerosect {

// The caution every report carries (theory sheet, section 6).
extern const char* const kSafetyCaution;

// The keys every JSON summary starts with (README, "JSON output"):
// command, aerosect_version, case, title, input_form, dof,
// aerodynamic_model, overrides, caution.
nlohmann::json report_header(const Case& c, const char* command);

// How a text report states speeds, frequencies and lengths: in SI units for
// an SI case; for a nondimensional case in the reduced quantities its
// reader thinks in, U* = U / (b omega_alpha), omega / omega_alpha and
// semichords (the result files keep both forms).
struct Presenter {
  bool reduced = false;
  double speed_ref = 1;   // b omega_alpha, m/s
  double omega_ref = 1;   // omega_alpha, rad/s
  double length_ref = 1;  // b, m
  // "6.2851 m/s" or "U* 6.2851" (`what`: e.g. "TAS" after m/s).
  std::string speed(double u_m_s, const char* what = "") const;
  std::string frequency(double f_hz) const;  // "0.08407 Hz" or "w/w_a 0.5282"
  std::string length(double m) const;        // "2 m" or "2 semichords"
  // A displacement of DOF `dof` (SI: m or rad) in the unit a text shows it
  // in: degrees for pitch and flap; m for plunge, or semichords (h/b) for a
  // nondimensional case. `displacement_unit` names that unit in the files'
  // vocabulary (UDUNITS: "degree", "m", "semichords").
  double displacement_value(int dof, double v) const;
  const char* displacement_unit(int dof) const;
  // " (rad in the file)" or " (m in the file)" when the shown unit is not
  // the file's, else "".
  const char* file_unit_note(int dof) const;
  std::string speed_heading() const { return reduced ? "U*" : "speed m s-1"; }
  std::string frequency_heading() const { return reduced ? "w/w_a" : "freq Hz"; }
  double speed_value(double u_m_s) const { return reduced ? u_m_s / speed_ref : u_m_s; }
  double frequency_value(double f_hz) const { return reduced ? 2 * std::numbers::pi * f_hz / omega_ref : f_hz; }
};
Presenter presenter(const Case& c);

struct CheckReport {
  std::vector<NaturalMode> modes;
  Divergence divergence;
  EquilibriumResult equilibrium;  // static equilibrium at the case's airspeed
};

// The static equilibrium in a report (check, flutter): JSON object
// `steady_condition` {incidence_deg, flap_trim_deg, hinge_moment_n_m_per_m,
// gravity_m_s2} or null, `initial_conditions` ("absolute" or "perturbation
// about the static equilibrium"), `remark`, `combinations`, and
// `equilibria` (list: `displacement` {plunge_m, pitch_deg, flap_deg},
// `static_stability`, `free_directions`, `springs` (list per DOF: `dof`,
// `law`, `region`, `region_name`, `force`, `force_units`, `in_contact`,
// `tangent_stiffness`), `lift_n_per_m`, `pitching_moment_n_m_per_m`,
// `hinge_moment_n_m_per_m`); and the text block of the same content.
nlohmann::json equilibrium_json(const Case& c, const EquilibriumResult& r);
std::string equilibrium_text(const Case& c, const EquilibriumResult& r);
CheckReport check_case(const Case& c);

nlohmann::json check_json(const Case& c, const CheckReport& r);
std::string check_text(const Case& c, const CheckReport& r);

nlohmann::json simulation_json(const Case& c, const SimulationSummary& s,
                               const std::string& output_path);
std::string simulation_text(const Case& c, const SimulationSummary& s,
                            const std::string& output_path);

}  // namespace aerosect
