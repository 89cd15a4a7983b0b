#include "case_gusts.hpp"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <numbers>

#include <fmt/format.h>

#include "aerosect/io/gust_record.hpp"
#include "aerosect/model/atmosphere.hpp"
#include "aerosect/model/gust.hpp"
#include "aerosect/model/section.hpp"
#include "aerosect/model/turbulence.hpp"
#include "aerosect/units.hpp"

namespace aerosect {

using std::numbers::pi;
using namespace toml_input;

const std::vector<std::string>& gust_case_keys() {
  static const std::vector<std::string> keys = {
      "aerodynamics.kussner",
      "aerodynamics.kussner_coefficients",
      "aerodynamics.kussner_exponents",
      "gust.shape",
      "gust.start",
      "gust.start_semichords",
      "gust.start_distance",
      "gust.amplitude",
      "gust.amplitude_eas",
      "gust.gradient",
      "gust.gradient_chords",
      "gust.mean_chord",
      "gust.design",
      "gust.speed_condition",
      "gust.altitude",
      "gust.landing_weight_ratio",
      "gust.zero_fuel_weight_ratio",
      "gust.max_operating_altitude",
      "gust.frequency_hz",
      "gust.reduced_frequency",
      "gust.cycles",
      "gust.label",
      "gust.file",
      "gust.base",
      "gust.base_dataset",
      "gust.velocity_dataset",
      "gust.scale",
      "gust.model",
      "gust.intensity",
      "gust.severity",
      "gust.scale_length",
      "gust.seed",
      "gust.sample_interval",
  };
  return keys;
}

// [aerodynamics] Küssner keys and the [[gust]] tables.
void read_gusts(const toml::table& root, const Context& ctx, const Table& aero, Case& c) {
  const std::string kk = aero.choice("kussner", {"two-pole", "three-pole", "custom"}, "two-pole");
  const auto kc = aero.numbers("kussner_coefficients");
  const auto ke = aero.numbers("kussner_exponents");
  const std::string kwhat =
      "psi(s) = 1 - sum c_i exp(-d_i s): kussner_coefficients = [c_1, ...] and "
      "kussner_exponents = [d_1, ...] per semichord (not per chord), 1 to 8 poles";
  if (kk != "custom") {
    if (kc) aero.fail("kussner_coefficients", "is only used with kussner = \"custom\"", kwhat);
    if (ke) aero.fail("kussner_exponents", "is only used with kussner = \"custom\"", kwhat);
    c.model.kussner = kk == "two-pole" ? kussner_two_pole() : kussner_three_pole();
  } else {
    if (!kc) aero.missing("kussner_coefficients", kwhat);
    if (!ke) aero.missing("kussner_exponents", kwhat);
    aero.require(!kc->empty() && kc->size() <= 8, "kussner_coefficients", "must have 1 to 8 entries", kwhat);
    aero.require(ke->size() == kc->size(), "kussner_exponents",
                 fmt::format("has {} entries but kussner_coefficients has {}", ke->size(), kc->size()),
                 kwhat);
    double sum = 0;
    for (double v : *kc) sum += v;
    aero.require(sum > 0 && sum <= 1 + 1e-12, "kussner_coefficients",
                 fmt::format("sum to {:.6g}: psi(0) = {:.6g} would be negative or psi would not rise", sum, 1 - sum),
                 "coefficients whose sum lies in (0, 1] (psi(0) = 0 for a sharp-edged gust)");
    for (double e : *ke) aero.require(e > 0, "kussner_exponents", "must all be positive", "d_i > 0");
    c.model.kussner = {*kc, *ke};
  }
  c.model.kussner_name = kk;

  const toml::node* node = root.get("gust");
  if (!node) return;
  const Table top(ctx, &root, "");
  if (!node->is_array_of_tables())
    top.fail("gust", "must be an array of tables", "one [[gust]] table per gust profile");
  const double U = c.model.flow.airspeed, b = c.model.section.semichord;
  const double rho = c.model.flow.density;
  std::vector<GustProfile> profiles;
  int entry = 0;
  for (const auto& e : *node->as_array()) {
    const Table g(ctx, e.as_table(), "gust", fmt::format("gust.{}", ++entry));
    GustProfile p;
    const std::string shape = g.choice(
        "shape", {"sharp-edged", "one-minus-cosine", "sinusoidal", "recorded", "turbulence"}, "");
    if (shape.empty())
      g.missing("shape", "\"sharp-edged\", \"one-minus-cosine\", \"sinusoidal\" or \"recorded\"");
    const bool turbulence = shape == "turbulence";
    p.shape = shape == "sharp-edged"        ? GustShape::kSharpEdged
              : shape == "one-minus-cosine" ? GustShape::kOneMinusCosine
              : shape == "sinusoidal"       ? GustShape::kSinusoidal
                                            : GustShape::kRecorded;
    const bool recorded = p.shape == GustShape::kRecorded && !turbulence;
    for (const char* k : {"model", "intensity", "severity", "scale_length", "seed", "sample_interval"})
      if (!turbulence && g.has(k)) g.fail(k, "is only used by turbulence", "shape = \"turbulence\"");
    for (const char* k : {"file", "base", "base_dataset", "velocity_dataset", "scale"})
      if (!recorded && g.has(k)) g.fail(k, "is only used by recorded gusts", "shape = \"recorded\"");
    g.require(U > 0 && rho > 0, "shape", "needs air and a positive airspeed",
              "a case with density > 0 and airspeed > 0");
    const std::string sk = g.one_of({"start", "start_semichords", "start_distance"});
    if (sk == "start") p.start = *g.number("start");
    if (sk == "start_semichords") p.start = *g.number("start_semichords") * b / U;
    if (sk == "start_distance") p.start = *g.number("start_distance") / U;
    if (!sk.empty()) g.require(p.start >= 0, sk, "must not be negative", "s or semichords >= 0");
    const std::string design = g.choice("design", {"cs-25", "cs-23"}, "");
    const double eas_to_tas = eas_to_tas_factor(rho);
    if (p.shape == GustShape::kOneMinusCosine) {
      // The chord that gradient_chords and the small-aircraft rule's gust
      // length count in: the case's mean geometric chord when given, else
      // the section's chord 2b.
      const std::optional<double> mean_chord = g.number("mean_chord");
      if (mean_chord)
        g.require(*mean_chord > 0, "mean_chord", "must be positive", "the mean geometric chord c-bar in m, > 0");
      const double chord = mean_chord.value_or(2 * b);
      const std::string chord_text = mean_chord ? fmt::format("mean_chord = {:g} m", chord)
                                                : fmt::format("the section's chord 2b = {:g} m", chord);
      std::string hk;  // the key that gave H ("" for the small-aircraft rule)
      double H = 0;
      if (design == "cs-23") {
        // The rule sets the gust length: 2H = 25 mean chords.
        for (const char* k : {"gradient", "gradient_chords"})
          if (g.has(k))
            g.fail(k, "conflicts with design = \"cs-23\" (the rule sets the gust length 2H = 25 mean chords)",
                   "no gradient with design = \"cs-23\"; mean_chord (m) when the mean chord is not 2b");
        H = kCs23GustGradientChords * chord;
      } else {
        hk = g.one_of({"gradient", "gradient_chords"});
        if (hk.empty())
          g.missing("gradient", "gust gradient distance H: gradient (m; 9 to 107 m in CS-25.341) or "
                                "gradient_chords (H in mean chords)");
        const double v = *g.number(hk);
        g.require(v > 0, hk, "must be positive",
                  hk == "gradient" ? "H in m, > 0" : "H in mean chords (c-bar, here " + chord_text + "), > 0");
        H = hk == "gradient" ? v : v * chord;
        if (mean_chord && hk != "gradient_chords")
          g.fail("mean_chord", "is only used with gradient_chords or design = \"cs-23\"",
                 "gradient_chords = H / c-bar, or design = \"cs-23\" (2H = 25 c-bar)");
      }
      p.gradient = H;
      if (!design.empty()) {
        for (const char* k : {"amplitude", "amplitude_eas"})
          if (g.has(k)) g.fail(k, fmt::format("conflicts with design = \"{}\" (which sizes the gust)", design),
                               fmt::format("either an amplitude or design = \"{}\" with its inputs", design));
        const bool other = design == "cs-25" ? c.small_aircraft_gust.has_value() : c.gust_regulation.has_value();
        if (other)
          g.fail("design", fmt::format("mixes rules: another [[gust]] is sized by design = \"{}\"",
                                       design == "cs-25" ? "cs-23" : "cs-25"),
                 "one design rule per case (one aircraft, one rule)");
      }
      // The sizing altitude: the table's, else the [flow] altitude.
      auto sizing_altitude = [&](double top, const std::string& range) {
        if (auto a = g.number("altitude")) {
          g.require(*a >= 0 && *a <= top, "altitude", "is out of range", range);
          return *a;
        }
        if (!c.altitude) g.missing("altitude", "the altitude for the rule (m), needed when [flow] gives a density");
        if (*c.altitude > top)
          g.fail("altitude", fmt::format("is not given, and the [flow] altitude {:g} m is above the rule's range",
                                         *c.altitude),
                 range + " (give gust.altitude)");
        return std::max(0.0, *c.altitude);
      };
      if (design == "cs-25") {
        g.require(H >= 30 * kMetresPerFoot - 1e-9 && H <= 350 * kMetresPerFoot + 1e-9, hk,
                  hk == "gradient" ? "is outside the rule's range"
                                   : fmt::format("gives H = {:.6g} m with {}, outside the rule's range", H, chord_text),
                  hk == "gradient" ? "9.144 m <= H <= 106.68 m (30 to 350 ft)"
                                   : fmt::format("{:.4g} to {:.4g} chords (9.144 m <= H <= 106.68 m, 30 to 350 ft)",
                                                 30 * kMetresPerFoot / chord, 350 * kMetresPerFoot / chord));
        RegulationGustInputs in;
        in.gradient = H;
        in.altitude = sizing_altitude(kIsaMaxAltitude, "0 to 20000 m");
        auto ratio = [&](const char* k) {
          const double v = g.required_number(k, "a weight ratio, 0 < ratio <= 1");
          g.require(v > 0 && v <= 1, k, "is not a weight ratio", "0 < ratio <= 1");
          return v;
        };
        in.landing_weight_ratio = ratio("landing_weight_ratio");
        in.zero_fuel_weight_ratio = ratio("zero_fuel_weight_ratio");
        in.max_operating_altitude = g.required_number("max_operating_altitude", "Z_mo, m");
        g.require(in.max_operating_altitude > 0 && in.max_operating_altitude < 76200,
                  "max_operating_altitude", "is out of range", "0 < Z_mo < 76200 m (250 000 ft)");
        in.at_dive_speed = g.choice("speed_condition", {"VC", "VD"}, "VC") == "VD";
        p.amplitude = cs25_design_gust_velocity(in) * eas_to_tas;
        p.regulation_sized = true;
        p.rule = GustRule::kCs25;
        p.eas_to_tas = eas_to_tas;
        c.gust_regulation = in;
      } else if (design == "cs-23") {
        // Small-aircraft rule (values recalled from memory, gust.hpp): U_de
        // at V_C or V_D, which the case must state (no default: the two
        // differ by a factor of two).
        for (const char* k : {"landing_weight_ratio", "zero_fuel_weight_ratio", "max_operating_altitude"})
          if (g.has(k)) g.fail(k, "is only used with design = \"cs-25\"", "design = \"cs-25\"");
        const std::string condition = g.choice("speed_condition", {"VC", "VD"}, "");
        if (condition.empty())
          g.missing("speed_condition", "\"VC\" or \"VD\": design = \"cs-23\" needs the speed condition "
                                       "(U_de at V_D is half that at V_C)");
        SmallAircraftGustInputs in;
        in.altitude = sizing_altitude(kCs23MaxAltitude, "0 to 15240 m (50 000 ft, the end of the rule's table)");
        in.mean_chord = chord;
        in.mean_chord_given = mean_chord.has_value();
        in.at_dive_speed = condition == "VD";
        p.amplitude = cs23_derived_gust_velocity(in.altitude, in.at_dive_speed) * eas_to_tas;
        p.regulation_sized = true;
        p.rule = GustRule::kCs23;
        p.eas_to_tas = eas_to_tas;
        c.small_aircraft_gust = in;
      }
    }
    if (turbulence) {
      // Continuous turbulence: a seeded record from the shaping filter
      // (turbulence.hpp), replayed as a recorded gust over the whole run.
      for (const char* k :
           {"amplitude", "amplitude_eas", "design", "gradient", "gradient_chords", "mean_chord", "file"})
        if (g.has(k)) g.fail(k, "is not used by turbulence", "model, intensity or severity, scale_length, seed");
      TurbulenceSpec spec;
      spec.model = g.choice("model", {"dryden", "von-karman"}, "von-karman") == "dryden"
                       ? TurbulenceModel::kDryden
                       : TurbulenceModel::kVonKarman;
      spec.airspeed = U;
      double h = c.altitude.value_or(-1.0);
      if (auto a = g.number("altitude")) h = *a;
      const std::string ik = g.one_of({"intensity", "severity"});
      if (ik == "intensity") {
        spec.intensity = *g.number("intensity");
        g.require(spec.intensity >= 0 && spec.intensity < 50, "intensity", "is impossible", "0 <= sigma_w < 50 m/s");
      } else {
        const std::string sev = g.choice("severity", {"light", "moderate", "severe"}, "");
        if (sev.empty()) g.missing("intensity | gust.severity", "intensity (sigma_w, m/s) or severity (MIL-F-8785C)");
        if (!(h > 0)) g.missing("altitude", "an altitude (m) for the MIL-F-8785C intensity");
        spec.intensity = mil8785c_intensity(sev == "light" ? TurbulenceSeverity::kLight
                                            : sev == "moderate" ? TurbulenceSeverity::kModerate
                                                                : TurbulenceSeverity::kSevere, h);
      }
      if (auto L = g.number("scale_length")) {
        g.require(*L > 0, "scale_length", "must be positive", "L_w in m (MIL-F-8785C convention)");
        spec.scale_length = *L;
      } else {
        if (!(h > 0)) g.missing("scale_length", "a scale length (m), or an altitude for the MIL-F-8785C default");
        spec.scale_length = mil8785c_scale_length(spec.model, h);
      }
      const double seed = g.number("seed").value_or(1.0);
      g.require(seed >= 0 && seed < 9.007e15 && seed == std::floor(seed), "seed", "must be a whole number",
                "0 <= seed < 2^53");
      spec.seed = static_cast<std::uint64_t>(seed);
      const auto w = uncoupled_frequencies(c.model.section);
      const double fastest = std::max({w.plunge, w.pitch, w.flap});
      double dt = std::min(spec.scale_length / U / 20.0, 2 * pi / fastest / 40.0);
      if (auto v = g.number("sample_interval")) {
        g.require(*v > 0, "sample_interval", "must be positive", "s");
        dt = *v;
      }
      const double span = c.simulation.duration - p.start;
      g.require(span / dt < 5e7, "sample_interval", fmt::format("gives {:.3g} samples", span / dt),
                "at most 5e7 samples in a turbulence record");
      const std::size_t n = static_cast<std::size_t>(std::ceil(std::max(span, dt) / dt)) + 1;
      const std::vector<double> rec = turbulence_record(spec, dt, n);
      p.record_velocity = rec;
      p.record_time.resize(n);
      for (std::size_t k = 0; k < n; ++k) p.record_time[k] = static_cast<double>(k) * dt;
      p.turbulence = spec;
      p.label = fmt::format("{} turbulence sigma = {:.3g} m/s, L = {:.4g} m, seed {}", to_string(spec.model),
                            spec.intensity, spec.scale_length, spec.seed);
    } else if (recorded) {
      for (const char* k : {"amplitude", "amplitude_eas", "design", "gradient", "gradient_chords", "mean_chord"})
        if (g.has(k)) g.fail(k, "is not used by recorded gusts (scale the record with `scale`)",
                             "file, base, base_dataset, velocity_dataset, scale");
      const std::string file = g.string("file").value_or("");
      if (file.empty()) g.missing("file", "the recorded gust file (CSV or HDF5)");
      std::string full = file;
      if (!file.empty() && file[0] != '/') {
        const auto slash = c.path.rfind('/');
        if (slash != std::string::npos) full = c.path.substr(0, slash + 1) + file;
      }
      const std::string base = g.choice("base", {"time", "distance"}, "time");
      const GustRecord rec = read_gust_record(
          full, g.string("base_dataset").value_or(base), g.string("velocity_dataset").value_or("gust_velocity"),
          g.where("file"), "gust.file");
      c.input_files.push_back(full);
      const double scale = g.number("scale").value_or(1.0);
      p.record_time = rec.base;
      if (base == "distance")
        for (double& x : p.record_time) x /= U;
      for (double w : rec.velocity) p.record_velocity.push_back(scale * w);
    } else if (design.empty() || p.shape != GustShape::kOneMinusCosine) {
      if (!design.empty()) g.fail("design", "applies to one-minus-cosine gusts only", "shape = \"one-minus-cosine\"");
      for (const char* k : {"landing_weight_ratio", "zero_fuel_weight_ratio", "max_operating_altitude"})
        if (g.has(k)) g.fail(k, "is only used with design = \"cs-25\"", "design = \"cs-25\"");
      for (const char* k : {"speed_condition", "altitude"})
        if (g.has(k)) g.fail(k, "is only used with a design rule", "design = \"cs-25\" or \"cs-23\"");
      const std::string ak = g.required_one_of(
          {"amplitude", "amplitude_eas"}, "gust velocity in m/s: amplitude (true airspeed) or amplitude_eas");
      const double a = *g.number(ak);
      g.require(std::abs(a) < 100, ak, "is beyond any atmospheric gust", "|amplitude| < 100 m/s");
      p.amplitude = ak == "amplitude" ? a : a * eas_to_tas;
    }
    for (const char* k : {"gradient", "gradient_chords", "mean_chord"})
      if (p.shape != GustShape::kOneMinusCosine && g.has(k))
        g.fail(k, "is only used by one-minus-cosine gusts", "shape = \"one-minus-cosine\"");
    if (p.shape == GustShape::kSinusoidal) {
      const std::string fk = g.required_one_of(
          {"frequency_hz", "reduced_frequency"}, "frequency_hz (Hz) or reduced_frequency (k = omega b / U)");
      const double f = *g.number(fk);
      g.require(f > 0, fk, "must be positive", "a positive frequency");
      p.frequency = fk == "frequency_hz" ? 2 * pi * f : f * U / b;
      p.cycles = nonnegative_or(g, "cycles", 0.0, "periods, 0 for until the end");
    } else {
      for (const char* k : {"frequency_hz", "reduced_frequency", "cycles"})
        if (g.has(k)) g.fail(k, "is only used by sinusoidal gusts", "shape = \"sinusoidal\"");
    }
    if (!turbulence) p.label = g.string("label").value_or(
        p.shape == GustShape::kOneMinusCosine ? fmt::format("1-cos H = {:g} m", p.gradient) : shape);
    profiles.push_back(p);
  }
  c.model.gusts = GustField(profiles, U);
}

}  // namespace aerosect
