#include "aerosect/analysis/gust_sweep.hpp"

#include <algorithm>
#include <cmath>
#include <functional>

#include <fmt/format.h>

#include "aerosect/analysis/report.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/hdf5_document.hpp"
#include "aerosect/units.hpp"
#include "aerosect/version.hpp"

namespace aerosect {

bool has_one_minus_cosine(const Case& c) {
  for (const auto& p : c.model.gusts.profiles())
    if (p.shape == GustShape::kOneMinusCosine) return true;
  return false;
}

std::vector<double> default_gradients() {
  std::vector<double> g;
  const double lo = 30 * kMetresPerFoot, hi = 350 * kMetresPerFoot;
  for (int i = 0; i < 12; ++i) g.push_back(lo + (hi - lo) * i / 11);
  return g;
}

const char* to_string(GustStart s) { return s == GustStart::kRest ? "rest" : "case-initial"; }

GustSweep gust_gradient_sweep(const Case& c, const std::vector<double>& gradients,
                              const std::atomic<bool>* cancel, GustStart start) {
  std::vector<GustProfile> base = c.model.gusts.profiles();
  if (!has_one_minus_cosine(c))
    throw InputError({c.path, 0, 0}, "gust", "",
                     "a gradient sweep needs at least one [[gust]] with shape = \"one-minus-cosine\"",
                     "a [[gust]] table with shape = \"one-minus-cosine\" and a gradient or design");
  GustSweep out;
  out.start = start;
  // One run at gradient H into `sink`.
  auto run_at = [&](double H, TimeHistorySink& sink) {
    Case run = c;
    std::vector<GustProfile> profiles = base;
    double first = -1;
    for (auto& p : profiles) {
      if (p.shape != GustShape::kOneMinusCosine) continue;
      // CS-25 gives U_ds for each H; the small-aircraft rule's U_de does not
      // depend on H and is kept.
      if (p.rule == GustRule::kCs25 && c.gust_regulation) {
        RegulationGustInputs in = *c.gust_regulation;
        in.gradient = H;
        p.amplitude = cs25_design_gust_velocity(in) * p.eas_to_tas;
      }
      p.gradient = H;
      if (first < 0) first = p.amplitude;
    }
    run.model.gusts = GustField(profiles, c.model.flow.airspeed);
    if (start == GustStart::kRest) {
      run.simulation.initial_displacement.setZero();
      run.simulation.initial_velocity.setZero();
      run.simulation.steady_lag_states = false;
    }
    // Long enough to pass through the longest gust and a little after.
    run.simulation.duration = std::max(c.simulation.duration, run.model.gusts.end_time() * 1.5);
    const AeroelasticModel model(run.model);
    GustSweepPoint pt;
    pt.gradient = H;
    pt.design_velocity = first;
    pt.summary = simulate(run, model, sink, cancel);
    stop_if_cancelled(cancel);  // a run stopped part-way is no peak
    return pt;
  };
  for (double H : gradients) {
    AEROSECT_CHECK(H > 0);
    stop_if_cancelled(cancel);
    NullSink sink;
    out.points.push_back(run_at(H, sink));
  }
  // Critical gradient per channel.
  if (!out.points.empty()) {
    for (std::size_t k = 0; k < out.points.front().summary.extremes.size(); ++k) {
      GustSweep::Critical cr;
      cr.channel = out.points.front().summary.extremes[k].channel;
      cr.units = out.points.front().summary.extremes[k].units;
      double best = -1;
      for (const auto& p : out.points) {
        const Extreme& e = p.summary.extremes[k];
        for (auto [v, t] : {std::pair{e.max, e.time_of_max}, std::pair{e.min, e.time_of_min}}) {
          // Equal to round-off (an unsized gust's own peak is the same at
          // every H): the first, shortest gradient stays critical.
          if (std::abs(v) > best * (1 + 1e-12)) {
            best = std::abs(v);
            cr.gradient = p.gradient;
            cr.value = v;
            cr.time = t;
          }
        }
      }
      out.critical.push_back(cr);
    }
  }
  // The time history at each distinct critical gradient (the same
  // deterministic run as the sweep's, now recorded).
  for (const auto& cr : out.critical) {
    auto same = [&](const GustSweep::History& h) { return h.gradient == cr.gradient; };
    if (auto it = std::find_if(out.histories.begin(), out.histories.end(), same); it != out.histories.end()) {
      it->critical_for.push_back(cr.channel);
      continue;
    }
    GustSweep::History h;
    h.gradient = cr.gradient;
    h.critical_for = {cr.channel};
    h.design_velocity = run_at(cr.gradient, h.record).design_velocity;
    out.histories.push_back(std::move(h));
  }
  return out;
}

namespace {
// The rule that sized each regulation-sized gust of the case, with its
// inputs and what it gave (gust_sweep_json, gust_sweep_text).
struct SizingLine {
  std::size_t gust = 0;  // 1-based
  GustRule rule = GustRule::kNone;
  bool at_dive_speed = false;
  double altitude = 0, velocity_eas = 0, velocity_tas = 0, gradient = 0;
  const SmallAircraftGustInputs* small = nullptr;  // cs-23 only
};

std::vector<SizingLine> sizing_lines(const Case& c) {
  std::vector<SizingLine> out;
  const auto& gusts = c.model.gusts.profiles();
  for (std::size_t i = 0; i < gusts.size(); ++i) {
    const GustProfile& p = gusts[i];
    SizingLine l;
    l.gust = i + 1;
    l.rule = p.rule;
    l.velocity_tas = p.amplitude;
    l.velocity_eas = p.amplitude / p.eas_to_tas;
    l.gradient = p.gradient;
    if (p.rule == GustRule::kCs25 && c.gust_regulation) {
      l.at_dive_speed = c.gust_regulation->at_dive_speed;
      l.altitude = c.gust_regulation->altitude;
    } else if (p.rule == GustRule::kCs23 && c.small_aircraft_gust) {
      l.at_dive_speed = c.small_aircraft_gust->at_dive_speed;
      l.altitude = c.small_aircraft_gust->altitude;
      l.small = &*c.small_aircraft_gust;
    } else {
      continue;
    }
    out.push_back(l);
  }
  return out;
}

constexpr const char* kCs23Note =
    "small-aircraft rule values (U_de 50 ft/s EAS at V_C to 20 000 ft, linear to 25 ft/s at 50 000 ft, half at "
    "V_D; gust length 25 mean chords) recalled from memory: check them against the applicable rule's text; the "
    "rule's gust alleviation factor is not applied (Kussner aerodynamics in time replace it)";

// The same, as indented lines of the text report.
constexpr const char* kCs23Text =
    "    CAUTION: the small-aircraft rule's values (U_de 50 ft/s EAS at V_C to 20 000 ft, linear to 25 ft/s\n"
    "    at 50 000 ft, half at V_D; gust length 25 mean chords) were recalled from memory: check them\n"
    "    against the applicable rule's text. The rule's gust alleviation factor is not applied (Kussner\n"
    "    aerodynamics in time replace it).\n";

nlohmann::json sizing_json(const Case& c) {
  nlohmann::json a = nlohmann::json::array();
  for (const SizingLine& l : sizing_lines(c)) {
    nlohmann::json j = {{"gust", l.gust},
                        {"rule", to_string(l.rule)},
                        {"speed_condition", l.at_dive_speed ? "VD" : "VC"},
                        {"altitude_m", l.altitude},
                        {"gradient_m", l.gradient}};
    if (l.rule == GustRule::kCs25) {
      j["design_velocity_eas_m_s"] = l.velocity_eas;
      j["design_velocity_tas_m_s"] = l.velocity_tas;
      j["sweep"] = "U_ds = U_ref F_g (H/350 ft)^(1/6) (CS-25.341(a)), re-sized at every H of the sweep; "
                   "the values here are at the case's H";
    } else {
      j["derived_gust_velocity_eas_m_s"] = l.velocity_eas;
      j["derived_gust_velocity_tas_m_s"] = l.velocity_tas;
      j["mean_chord_m"] = l.small->mean_chord;
      j["mean_chord_from"] = l.small->mean_chord_given ? "gust.mean_chord" : "the section's chord 2b";
      j["gust_length_chords"] = 2 * kCs23GustGradientChords;
      j["sweep"] = "U_de does not depend on H: kept at every H of the sweep; gradient_m is the rule's H (12.5 mean "
                   "chords)";
      j["note"] = kCs23Note;
    }
    a.push_back(j);
  }
  return a;
}

std::string sizing_text(const Case& c) {
  std::string t;
  for (const SizingLine& l : sizing_lines(c)) {
    const char* vc = l.at_dive_speed ? "V_D" : "V_C";
    if (l.rule == GustRule::kCs25)
      t += fmt::format("  gust {} sized by cs-25 (CS-25.341(a)) at {}, altitude {:.6g} m:\n    U_ds {:.4g} m s-1 EAS "
                       "= {:.4g} m s-1 TAS at the case's H = {:.4g} m (re-sized at every H)\n",
                       l.gust, vc, l.altitude, l.velocity_eas, l.velocity_tas, l.gradient);
    else
      t += fmt::format("  gust {} sized by cs-23 (small-aircraft rule) at {}, altitude {:.6g} m:\n    U_de {:.4g} m s-1 "
                       "EAS = {:.4g} m s-1 TAS, H = 12.5 mean chords = {:.4g} m (c-bar {:.4g} m, {});\n"
                       "    U_de is kept at every H of the sweep\n{}",
                       l.gust, vc, l.altitude, l.velocity_eas, l.velocity_tas, l.gradient, l.small->mean_chord,
                       l.small->mean_chord_given ? "gust.mean_chord" : "the section's chord 2b", kCs23Text);
  }
  return t;
}

// What the peaks contain, said with every report.
std::string start_note(GustStart s) {
  return s == GustStart::kRest
             ? "runs start from rest: every peak is the gust's own (--keep-initial starts from the case's [initial])"
             : "runs start from the case's [initial] conditions: peaks include the release transient";
}
}  // namespace

nlohmann::json gust_sweep_json(const Case& c, const GustSweep& s, const std::string& output) {
  nlohmann::json j = report_header(c, "gust");
  j["output"] = output;
  j["gust_convention"] = "gust velocity positive up at the leading edge; 1-cos profiles";
  j["start"] = to_string(s.start);
  j["start_note"] = start_note(s.start);
  j["gust_sizing"] = sizing_json(c);
  j["points"] = nlohmann::json::array();
  for (const auto& p : s.points) {
    nlohmann::json pj;
    pj["gradient_m"] = p.gradient;
    pj["design_velocity_m_s"] = p.design_velocity;
    for (const auto& e : p.summary.extremes)
      pj["peaks"][e.channel] = {{"max", e.max}, {"time_of_max_s", e.time_of_max},
                                {"min", e.min}, {"time_of_min_s", e.time_of_min}};
    j["points"].push_back(pj);
  }
  for (const auto& cr : s.critical)
    j["critical"][cr.channel] = {{"gradient_m", cr.gradient}, {"value", cr.value},
                                 {"units", cr.units}, {"time_s", cr.time}};
  j["critical_histories"] = nlohmann::json::array();
  for (std::size_t k = 0; k < s.histories.size(); ++k)
    j["critical_histories"].push_back({{"group", fmt::format("critical_history_{}", k + 1)},
                                       {"gradient_m", s.histories[k].gradient},
                                       {"design_velocity_m_s", s.histories[k].design_velocity},
                                       {"critical_for", s.histories[k].critical_for},
                                       {"samples", s.histories[k].record.rows()}});
  return j;
}

std::string gust_sweep_text(const Case& c, const GustSweep& s, const std::string& output) {
  std::string t = fmt::format("aerosect {} gust gradient sweep: {}\n", kVersion, c.path);
  if (!c.title.empty()) t += fmt::format("  {}\n", c.title);
  t += "  one-minus-cosine gusts, velocity positive up at the leading edge\n";
  t += fmt::format("  {}\n", start_note(s.start));
  t += sizing_text(c);
  t += "\n";
  // One units vocabulary with the files (UDUNITS); angles shown in degrees
  // in the table and the critical lines alike; the flap columns only for a
  // 3-DOF section.
  auto shown = [](double v, const std::string& units) -> std::pair<double, std::string> {
    if (units.rfind("rad", 0) == 0) return {v * kDegPerRad, "degree" + units.substr(3)};
    return {v, units};
  };
  auto extreme = [](const SimulationSummary& sm, const std::string& ch) -> const Extreme* {
    for (const auto& e : sm.extremes)
      if (e.channel == ch) return &e;
    return nullptr;
  };
  std::vector<std::string> columns = {"lift", "pitching_moment", "hinge_moment", "pitch", "flap"};
  if (c.model.section.dof < 3) columns = {"lift", "pitching_moment", "pitch"};
  const SimulationSummary* first = s.points.empty() ? nullptr : &s.points.front().summary;
  // A nondimensional case: H in semichords, U_ds over b w_a, times as tau
  // (semichords travelled); loads stay in the files' units.
  const Presenter pr = presenter(c);
  const double b = c.model.section.semichord, U_over_b = c.model.flow.airspeed / b;
  // The design velocity column: U_de when the first 1-cos gust (the one the
  // column follows) is sized by the small-aircraft rule, else U_ds.
  const char* u = "U_ds";
  for (const auto& p : c.model.gusts.profiles())
    if (p.shape == GustShape::kOneMinusCosine) {
      if (p.rule == GustRule::kCs23) u = "U_de";
      break;
    }
  std::string head = pr.reduced ? fmt::format("  {:>8} {:>11}", "H/b", fmt::format("{}/(b w_a)", u))
                                : fmt::format("  {:>8} {:>11}", "H m", fmt::format("{} m s-1", u));
  for (const auto& ch : columns) {
    const Extreme* e = first ? extreme(*first, ch) : nullptr;
    head += fmt::format(" {:>22}", ch + " " + (e ? shown(0, e->units).second : std::string("?")));
  }
  t += head + "\n";
  for (const auto& p : s.points) {
    std::string row = pr.reduced ? fmt::format("  {:>8.4g} {:>11.4g}", p.gradient / b, pr.speed_value(p.design_velocity))
                                 : fmt::format("  {:>8.4g} {:>11.4g}", p.gradient, p.design_velocity);
    for (const auto& ch : columns) {
      const Extreme* e = extreme(p.summary, ch);
      const double v = e ? (std::abs(e->max) > std::abs(e->min) ? e->max : e->min) : std::nan("");
      row += fmt::format(" {:>22.6g}", e ? shown(v, e->units).first : v);
    }
    t += row + "\n";
  }
  t += "\n  critical gradient (largest magnitude):\n";
  for (const auto& cr : s.critical) {
    const auto [v, units] = shown(cr.value, cr.units);
    if (pr.reduced)
      t += fmt::format("    {:<24} H = {}  peak {:.6g} {} at tau = {:.4g}\n", cr.channel, pr.length(cr.gradient), v,
                       units, U_over_b * cr.time);
    else
      t += fmt::format("    {:<24} H = {:<8.4g} m  peak {:.6g} {} at t = {:.4g} s\n", cr.channel, cr.gradient, v,
                       units, cr.time);
  }
  if (!s.histories.empty()) {
    t += "\n  time histories kept at the critical gradients:\n";
    for (std::size_t k = 0; k < s.histories.size(); ++k) {
      std::string of;
      for (const auto& ch : s.histories[k].critical_for) of += (of.empty() ? "" : ", ") + ch;
      t += fmt::format("    critical_history_{}  H = {}  {} samples  (critical for {})\n", k + 1,
                       pr.length(s.histories[k].gradient), s.histories[k].record.rows(), of);
    }
  }
  if (!output.empty()) t += fmt::format("\nwritten to {}\n", output);
  t += "\n";
  t += kSafetyCaution;
  t += "\n";
  return t;
}

namespace {

// The root attribute `initial_state`: "rest", or the initial displacements
// and velocities that are not zero, in SI units ("pitch 0.0349066 rad,
// plunge_rate 0.1 m s-1"). The plot's note that the peaks include the
// release transient reads it.
std::string initial_state_text(const SimulationSettings& s) {
  std::string t;
  auto add = [&t](const std::string& name, double v, const std::string& units) {
    if (v != 0.0) t += fmt::format("{}{} {:.6g} {}", t.empty() ? "" : ", ", name, v, units);
  };
  for (Eigen::Index k = 0; k < s.initial_displacement.size() && k < kMaxDof; ++k)
    add(kDofNames[k], s.initial_displacement(k), kDofUnits[k]);
  for (Eigen::Index k = 0; k < s.initial_velocity.size() && k < kMaxDof; ++k)
    add(std::string(kDofNames[k]) + "_rate", s.initial_velocity(k), std::string(kDofUnits[k]) + " s-1");
  return t.empty() ? "rest" : t;
}

}  // namespace

Layout<GustSweepPoint> gust_sweep_layout(const GustSweepPoint& first) {
  const auto field = written_field<GustSweepPoint>;
  Layout<GustSweepPoint> layout;
  layout.push_back(field("design_velocity", "m s-1", "peak velocity of the first one-minus-cosine gust (true airspeed)",
                         [](const GustSweepPoint& p) { return p.design_velocity; }));
  const std::vector<Extreme>& channels = first.summary.extremes;
  for (std::size_t k = 0; k < channels.size(); ++k) {
    const std::string& ch = channels[k].channel;
    layout.push_back(field("peaks/" + ch + "_max", channels[k].units, "largest " + ch,
                           [k](const GustSweepPoint& p) { return p.summary.extremes.at(k).max; }));
    layout.push_back(field("peaks/" + ch + "_min", channels[k].units, "smallest " + ch,
                           [k](const GustSweepPoint& p) { return p.summary.extremes.at(k).min; }));
    layout.push_back(field("peaks/" + ch + "_time_of_max", "s", "time of the largest " + ch,
                           [k](const GustSweepPoint& p) { return p.summary.extremes.at(k).time_of_max; }));
    layout.push_back(field("peaks/" + ch + "_time_of_min", "s", "time of the smallest " + ch,
                           [k](const GustSweepPoint& p) { return p.summary.extremes.at(k).time_of_min; }));
  }
  return layout;
}

void write_gust_sweep_tables(TableSink& doc, const Case& c, const GustSweep& s) {
  RunMetadata meta = case_metadata(c, "gust-sweep");
  meta.text_attributes.push_back(
      {"initial_state", s.start == GustStart::kRest ? std::string("rest") : initial_state_text(c.simulation)});
  doc.metadata(meta);
  std::vector<double> H;
  for (const auto& p : s.points) H.push_back(p.gradient);
  doc.axis("gradient", H, "m", "gust gradient distance H (half the gust length)");
  const GustSweepPoint* first = s.points.data();
  write_layout<GustSweepPoint>(doc, gust_sweep_layout(s.points.empty() ? GustSweepPoint{} : s.points.front()),
                               {"gradient"}, s.points.size(), s.points,
                               [first](const GustSweepPoint& p) { return static_cast<std::size_t>(&p - first); });
  for (const auto& cr : s.critical) {
    doc.number_attribute("peaks", "critical_gradient_" + cr.channel, cr.gradient, "m");
    doc.number_attribute("peaks", "critical_value_" + cr.channel, cr.value, cr.units);
  }
  for (std::size_t k = 0; k < s.histories.size(); ++k) {
    const GustSweep::History& h = s.histories[k];
    const std::string g = fmt::format("critical_history_{}", k + 1);
    doc.axis(g + "/time", h.record.time(), "s", "elapsed time since release");
    doc.text_attribute(g + "/time", "comment", "elapsed time since the start of the run, not a calendar time");
    // Not "gradient": a variable named like the root's dimension `gradient`
    // would read as its coordinate variable (netCDF User Guide, coordinate
    // variables), and this one is a scalar.
    doc.dataset(g + "/gust_gradient", {}, std::vector<double>{h.gradient}, "m", "gust gradient distance H of this run");
    doc.dataset(g + "/design_velocity", {}, std::vector<double>{h.design_velocity}, "m s-1",
                "peak velocity of the first one-minus-cosine gust (true airspeed)");
    std::string of;
    for (const auto& ch : h.critical_for) of += (of.empty() ? "" : " ") + ch;
    doc.text_attribute(g, "critical_for", of);
    for (const Channel& ch : h.record.channels())
      if (ch.width == 1) doc.dataset(g + "/" + ch.name, {g + "/time"}, h.record.column(ch.name), ch.units, ch.long_name);
  }
}

void write_gust_sweep_file(const std::string& path, const Case& c, const GustSweep& s) {
  Hdf5Document doc(path);
  write_gust_sweep_tables(doc, c, s);
  doc.commit();
}

}  // namespace aerosect
