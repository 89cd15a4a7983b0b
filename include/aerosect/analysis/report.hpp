#pragma once
// Reports of analysis results: a JSON summary (keys documented in README.md,
// "JSON output") and the human-readable text of the same content. The
// engine builds them; the command-line driver only prints them.

#include <string>
#include <vector>

#include <nlohmann/json.hpp>

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

struct CheckReport {
  std::vector<NaturalMode> modes;
  Divergence divergence;
};
CheckReport check_case(const Case& c);

nlohmann::json check_json(const Case& c, const CheckReport& r);
std::string check_text(const Case& c, const CheckReport& r);

nlohmann::json simulation_json(const Case& c, const SimulationSummary& s,
                               const std::string& output_path);
std::string simulation_text(const Case& c, const SimulationSummary& s,
                            const std::string& output_path);

}  // namespace aerosect
