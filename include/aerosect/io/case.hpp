#pragma once
// Case files (TOML) -> the resolved, validated case.
//
// A case gives the section in one of two equivalent forms:
//   SI:              [section], optional [flap], [flow]
//   nondimensional:  [nondimensional] (+ optional [nondimensional.reference])
// plus [aerodynamics], [initial] and [simulation]. Every key, its units and
// its default are listed in README.md ("Case file reference"); the reader
// rejects unknown keys (with a "did you mean"), missing keys, conflicting
// alternatives and impossible values with an InputError naming the file,
// line, key, the value and what is allowed.
//
// Angles in case files are in degrees (keys ending in _deg); everything the
// reader returns is SI with angles in radians.
//
// Overrides ("--set key=value") replace or add any entry before validation;
// the value is read as a TOML value (a bare word is taken as a string).

#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "aerosect/integrate/integrator.hpp"
#include "aerosect/model/gust.hpp"
#include "aerosect/model/section.hpp"
#include "aerosect/model/system.hpp"

namespace aerosect {

struct SimulationSettings {
  double duration = 0;               // s
  OutputSchedule output;             // fixed interval (s) or every step
  IntegratorSettings integrator;
  DofVector initial_displacement;    // m, rad
  DofVector initial_velocity;        // m/s, rad/s
  bool steady_lag_states = false;    // lag states start in steady flow
};

struct Case {
  std::string path;                  // as given
  std::string text;                  // the file's text, as read
  std::vector<std::string> overrides;  // "key=value" in the order given
  std::string title;
  std::string input_form;            // "si" or "nondimensional"
  std::optional<double> altitude;    // m, when the density came from the ISA
  ModelDescription model;            // resolved SI section, flow, aero, springs, held DOFs
  NondimensionalParameters nondimensional;  // the same section, nondimensional form
  SimulationSettings simulation;
  std::optional<double> dive_speed_eas;  // V_D, m/s equivalent airspeed ([envelope])
  std::optional<RegulationGustInputs> gust_regulation;  // inputs of a CS-25 sized 1-cos gust
  std::optional<SmallAircraftGustInputs> small_aircraft_gust;  // inputs of a CS-23 sized 1-cos gust
  // Every other file the case read (recorded gusts), as resolved, in the
  // order read; reports name them with their SHA-256 (io/checksum.hpp).
  std::vector<std::string> input_files;

  // The case text with the overrides appended as comments (what was run).
  std::string text_as_run() const;
};

// Reads and validates a case file. Throws InputError.
Case load_case(const std::string& path, const std::vector<std::string>& overrides = {});
// The same from text already in memory; `path` is used in messages only.
Case parse_case(const std::string& text, const std::string& path,
                const std::vector<std::string>& overrides = {});

// A case text parsed once (TOML syntax only; nothing validated yet), from
// which cases with different overrides are read without parsing the text
// again: a sweep's points. with(ov) equals parse_case(text, path, ov).
// Immutable once made: one document may serve several threads.
class CaseDocument {
 public:
  CaseDocument(std::string text, std::string path);  // throws InputError on a TOML syntax error
  ~CaseDocument();
  CaseDocument(const CaseDocument&) = delete;
  CaseDocument& operator=(const CaseDocument&) = delete;
  Case with(const std::vector<std::string>& overrides) const;

 private:
  struct Impl;
  std::unique_ptr<const Impl> impl_;
};

// Every key a case file may hold, as dotted paths (for suggestions and docs).
const std::vector<std::string>& known_case_keys();
// The units of a numeric case key as a UDUNITS string (README.md, "Case
// file reference"): "m s-1" for flow.airspeed, "1" for a pure number or a
// length in semichords, "degree" for an angle key (..._deg); "" for a text
// key (title, law, shape, ...) or a key the schema does not know. A key of
// a [[gust]] entry may carry its entry's index (gust.2.amplitude).
std::string case_key_units(const std::string& key);

}  // namespace aerosect
