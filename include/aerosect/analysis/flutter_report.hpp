#pragma once
// Reports of a flutter analysis: the human summary, the JSON summary (keys
// in README.md, "JSON output") and the HDF5 file (layout in README.md,
// "Output files"), all from one FlutterReport.

#include <functional>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "aerosect/analysis/report.hpp"
#include "aerosect/analysis/flutter.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/io/table_layout.hpp"

namespace aerosect {

// Lowest instability of the nominal linearisation over every method run
// (state-space and p-k: the lower speed, and the method that gave it) and
// the margin against
// 1.15 V_D (CS-25.629(b) / 14 CFR 25.629(b): no flutter within the V_D/M_D
// envelope enlarged by 15 % in equivalent airspeed).
struct FlutterMargin {
  bool available = false;        // V_D given and an instability found
  double dive_speed_eas = 0;     // V_D, m/s EAS
  double required_eas = 0;       // 1.15 V_D
  double critical_eas = 0;       // lowest flutter/divergence speed, EAS
  double critical_tas = 0;
  std::string critical_kind;     // "flutter" or "divergence" ("none")
  std::string critical_method;   // "state-space" or "p-k": the method with the lowest speed
  double margin = 0;             // critical_eas / required_eas - 1
  bool margin_met = false;       // margin >= 0: the lowest instability lies beyond 1.15 V_D
  std::optional<double> lco_onset_eas;  // lowest gap-open flutter speed (freeplay), EAS
  std::string lco_onset_method;         // the method that gave it
};
FlutterMargin flutter_margin(const FlutterReport& r);

nlohmann::json flutter_json(const Case& c, const FlutterReport& r, const std::string& output);
std::string flutter_text(const Case& c, const FlutterReport& r, const std::string& output);
// The describing-function part of flutter_text: a table with a branch
// number and a stable column (every point of a short branch; of a long one
// the ends of every stable/unstable segment and an evenly thinned
// interior), then per branch where it starts and ends and why, and its
// stable speed ranges.
std::string lco_prediction_text(const LcoPrediction& p, const Presenter& pr = {});
// Writes the sweep tables and crossings; throws OutputError.
void write_flutter_file(const std::string& path, const Case& c, const FlutterReport& r);
// The same tables through any sink (write_flutter_file hands it the file).
void write_flutter_tables(TableSink& sink, const Case& c, const FlutterReport& r);

// The group of one method's tables in the flutter file, e.g.
// "nominal/state_space", "gap_open/pk" (README.md, "Output files").
std::string flutter_group(Linearisation l, const std::string& method);
// The group of a method ("state-space" -> "state_space", "p-k" -> "pk").
std::string flutter_method_group(const std::string& method);

// The layout of one method's result in the flutter file, each field once
// (the writer, and the study's provenance strings, come from these tables):
//  - per tracked root, a dataset over (speed, mode) in the method's group;
//  - per crossing fact, a number attribute of the method's group (integer
//    ones are flags and counts; NaN where the crossing was not found).
const Layout<Root>& flutter_root_layout();
struct MethodAttribute {
  std::string name;
  std::string units;      // UDUNITS ("1" for a pure number or a flag)
  std::string long_name;
  bool integer = false;   // written as an integer attribute
  std::function<double(const MethodResult&)> get;
};
const std::vector<MethodAttribute>& flutter_method_attributes();
// "flutter.h5: /<group>@<attribute>", the source of a reported number; the
// attribute must be one of flutter_method_attributes() (std::logic_error
// otherwise: a study row naming a number the file does not hold).
std::string flutter_source(Linearisation l, const std::string& method, const std::string& attribute);

// The describing-function LCO curve as the group /lco_prediction over the
// axis lco_prediction_point (one writer for the flutter file and the sweep
// map). With a `swept_key`, also lco_prediction/value: the airspeed in the
// units of that key (value_per_speed per m/s TAS).
void write_lco_prediction(TableSink& sink, const LcoPrediction& lco, double value_per_speed = 1.0,
                          const std::string& swept_key = {});

}  // namespace aerosect
