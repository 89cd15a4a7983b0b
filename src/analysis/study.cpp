#include "aerosect/analysis/study.hpp"

#include <algorithm>
#include <cmath>
#include <ctime>
#include <exception>
#include <filesystem>
#include <iterator>
#include <limits>
#include <map>
#include <numbers>
#include <sstream>

#include <fmt/chrono.h>
#include <fmt/format.h>
#include <toml++/toml.h>

#include "aerosect/analysis/branch_report.hpp"
#include "aerosect/analysis/continuation.hpp"
#include "aerosect/analysis/flutter.hpp"
#include "aerosect/analysis/flutter_report.hpp"
#include "aerosect/analysis/gust_sweep.hpp"
#include "aerosect/analysis/modes.hpp"
#include "aerosect/analysis/preload.hpp"
#include "aerosect/analysis/report.hpp"
#include "aerosect/analysis/simulate.hpp"
#include "aerosect/analysis/sweep.hpp"
#include "aerosect/error.hpp"
#include "aerosect/integrate/exact_flow.hpp"
#include "aerosect/io/checksum.hpp"
#include "aerosect/io/hdf5_document.hpp"
#include "aerosect/io/hdf5_writer.hpp"
#include "aerosect/io/text_file.hpp"
#include "aerosect/units.hpp"

namespace aerosect {

namespace {

namespace fs = std::filesystem;

std::string sig4(double v) {
  if (!std::isfinite(v)) return v > 0 ? "none in range" : "n/a";
  return fmt::format("{:.4g}", v);
}

// Edits of the case text for a derived run (the LCO sweep, the LCO time
// history): gusts removed, the run length and output replaced, and
// optionally an initial disturbance of one DOF. The result is the complete
// text of the derived case, kept in its files as the case as run.
struct Derivation {
  bool remove_gusts = true;
  bool at_rest = false;                // initial conditions removed
  std::optional<double> duration;      // s
  std::optional<double> sample_interval;  // s
  int disturb_dof = -1;                // DOF given an initial displacement
  double disturbance = 0;              // m or rad
};

// The case's overrides for a derived run: without those of [[gust]] keys
// when the derivation removes the gusts (their tables are gone).
std::vector<std::string> derived_overrides(const Case& c, const Derivation& d) {
  std::vector<std::string> ov;
  for (const auto& o : c.overrides)
    if (!d.remove_gusts || o.rfind("gust.", 0) != 0) ov.push_back(o);
  return ov;
}

std::string derived_case_text(const Case& c, const Derivation& d) {
  toml::table root = toml::parse(std::string_view(c.text), std::string_view(c.path));
  if (d.remove_gusts) root.erase("gust");
  if (d.at_rest) root.erase("initial");
  toml::table* sim = root["simulation"].as_table();
  if (!sim) {
    root.insert("simulation", toml::table{});
    sim = root["simulation"].as_table();
  }
  if (d.duration) {
    sim->erase("duration");
    sim->erase("duration_semichords");
    sim->insert_or_assign("duration", *d.duration);
  }
  if (d.sample_interval) {
    for (const char* k : {"sample_rate", "sample_interval", "sample_interval_semichords", "every_step"})
      sim->erase(k);
    sim->insert_or_assign("sample_interval", *d.sample_interval);
  }
  if (d.disturb_dof >= 0) {
    toml::table* init = root["initial"].as_table();
    if (!init) {
      root.insert("initial", toml::table{});
      init = root["initial"].as_table();
    }
    if (d.disturb_dof == kPlunge) {
      init->erase("plunge_semichords");
      init->insert_or_assign("plunge", d.disturbance);
    } else {
      init->insert_or_assign(fmt::format("{}_deg", kDofNames[d.disturb_dof]), d.disturbance * kDegPerRad);
    }
  }
  std::ostringstream out;
  out << "# Derived by aerosect study from " << c.path << ":"
      << (d.remove_gusts ? " gusts removed;" : "") << (d.at_rest ? " starts at rest;" : "")
      << (d.duration ? " run length set;" : "") << (d.sample_interval ? " output interval set;" : "")
      << (d.disturb_dof >= 0 ? " initial disturbance added;" : "") << "\n"
      << root << "\n";
  return out.str();
}

bool has_turbulence(const Case& c) {
  for (const auto& p : c.model.gusts.profiles())
    if (p.turbulence) return true;
  return false;
}

// The first nonlinear spring's DOF, or -1.
int nonlinear_dof(const Case& c) {
  for (int k = 0; k < c.model.section.dof; ++k)
    if (!c.model.springs[static_cast<std::size_t>(k)].is_linear()) return k;
  return -1;
}

const MethodResult* method_of(const FlutterReport& r, Linearisation l, const std::string& name) {
  for (const auto& lr : r.results)
    if (lr.linearisation == l)
      for (const auto& m : lr.methods)
        if (m.method == name) return &m;
  return nullptr;
}


class Rows {
 public:
  explicit Rows(std::vector<StudyRow>& rows) : rows_(rows) {}
  // A number shown in `units` (the file holds number / scale).
  void add(std::string id, std::string quantity, double number, std::string units, std::string source,
           std::string note = {}) {
    StudyRow r;
    r.id = std::move(id);
    r.quantity = std::move(quantity);
    r.value = sig4(number);
    if (std::isfinite(number)) r.number = number;
    r.units = std::move(units);
    r.source = std::move(source);
    r.note = std::move(note);
    rows_.push_back(std::move(r));
  }
  // A row without a number (a statement).
  void text(std::string id, std::string quantity, std::string value, std::string source = {},
            std::string note = {}) {
    StudyRow r;
    r.id = std::move(id);
    r.quantity = std::move(quantity);
    r.value = std::move(value);
    r.source = std::move(source);
    r.note = std::move(note);
    rows_.push_back(std::move(r));
  }

 private:
  std::vector<StudyRow>& rows_;
};

nlohmann::json row_json(const StudyRow& r) {
  return {{"id", r.id},         {"quantity", r.quantity},
          {"value", r.value},   {"number", r.number ? nlohmann::json(*r.number) : nlohmann::json()},
          {"units", r.units},   {"source", r.source},
          {"note", r.note}};
}

// ---------------------------------------------------------------------------
// The stages. Each reads what the earlier ones left in Study, writes its
// files, adds its summary rows and its part, and returns; run_study calls
// them in order. A set cancel flag ends a stage by Cancelled.

struct Study {
  Study(const Case& c_, const std::string& directory, const StudyOptions& o_, const std::atomic<bool>* cancel_,
        const std::function<void(const std::string&)>& progress)
      : c(c_), o(o_), cancel(cancel_), progress_(progress), rows(R.rows) {
    R.directory = directory;
    si = c.input_form == "si";
    rho = c.model.flow.density;
    if (c.dive_speed_eas) vd_tas = true_airspeed(*c.dive_speed_eas, rho);
    pr = presenter(c);
  }
  const Case& c;
  const StudyOptions& o;
  const std::atomic<bool>* cancel;
  const std::function<void(const std::string&)>& progress_;
  StudyResult R;
  Rows rows;
  bool si = true;
  double rho = 0;
  std::optional<double> vd_tas;  // V_D, m/s TAS
  CheckReport check;             // from the check stage
  FlutterReport flutter;         // from the flutter stage
  Presenter pr;                  // SI, or U* and w/w_a for a nondimensional case

  // A speed (m/s TAS) as the report states it: "12.3 m/s TAS" or "U* 1.23".
  std::string v(double u) const { return pr.reduced ? "U* " + sig4(u / pr.speed_ref) : sig4(u) + " m s-1 TAS"; }
  std::string range(double a, double b) const {
    return pr.reduced ? fmt::format("U* {} .. {}", sig4(a / pr.speed_ref), sig4(b / pr.speed_ref))
                      : fmt::format("{} .. {} m s-1 TAS", sig4(a), sig4(b));
  }
  // Its EAS for a note (nothing for a nondimensional case).
  std::string eas(double u) const { return pr.reduced ? "" : fmt::format("{:.4g} m s-1 EAS", equivalent_airspeed(u, rho)); }
  // A row holding a speed: m/s TAS, or U* (the file's m/s over the
  // reference speed b w_a) for a nondimensional case.
  void speed_row(std::string id, std::string quantity, double u, std::string source, std::string note = {}) {
    if (pr.reduced)
      rows.add(std::move(id), std::move(quantity), u / pr.speed_ref, "U*",
               source + " / (b w_a) = " + fmt::format("{:.6g}", pr.speed_ref) + " m s-1", std::move(note));
    else
      rows.add(std::move(id), std::move(quantity), u, "m s-1 TAS", std::move(source), std::move(note));
  }

  void say(const std::string& s) const {
    if (progress_) progress_(s);
  }
  std::string path(const std::string& name) const { return (fs::path(R.directory) / name).string(); }
  void part(std::string name, bool done, std::string detail, std::vector<std::string> files = {}) {
    R.parts.push_back({std::move(name), done, std::move(detail), std::move(files)});
  }
};

// The case as run, and its check.
void check_stage(Study& s) {
  write_file_atomically(s.path("case.toml"), s.c.text_as_run());
  s.say("check");
  s.check = check_case(s.c);
  write_file_atomically(s.path("check.json"), check_json(s.c, s.check).dump(2) + "\n");
  s.part("check", true,
         fmt::format("{} in-vacuo modes, lowest {:.4g} Hz", s.check.modes.size(),
                     s.check.modes.empty() ? 0.0 : s.check.modes.front().frequency / (2 * std::numbers::pi)),
         {"case.toml", "check.json"});
}

// Rows of the flutter speeds of one linearisation, both methods.
void flutter_rows(Study& s, Linearisation l, const std::string& label, const std::string& id) {
  for (const char* method : {"state-space", "p-k"}) {
    const MethodResult* m = method_of(s.flutter, l, method);
    if (!m) continue;
    const std::string mid = flutter_method_group(method);
    if (m->flutter.found) {
      s.speed_row(id + "_flutter_" + mid, fmt::format("{} flutter speed ({})", label, method), m->flutter.speed,
                  flutter_source(l, method, "flutter_speed"),
                  s.pr.reduced ? s.pr.frequency(m->flutter.frequency / (2 * std::numbers::pi))
                               : fmt::format("{}, {:.4g} Hz", s.eas(m->flutter.speed),
                                             m->flutter.frequency / (2 * std::numbers::pi)));
    } else {
      s.rows.text(id + "_flutter_" + mid, fmt::format("{} flutter speed ({})", label, method),
                  "none up to " + s.v(m->sweep.speeds.back()), flutter_source(l, method, "flutter_found"));
    }
  }
}

// Linear flutter and divergence, both methods; the margin over 1.15 V_D.
void flutter_stage(Study& s) {
  s.say("flutter: state-space and p-k");
  FlutterOptions fo;
  fo.cancel = s.cancel;
  s.flutter = flutter_analysis(s.c, fo);
  const FlutterReport& fr = s.flutter;
  write_flutter_file(s.path("flutter.h5"), s.c, fr);
  s.R.hdf5_files.push_back("flutter.h5");
  std::string lins;
  for (const auto& lr : fr.results) lins += (lins.empty() ? "" : ", ") + std::string(to_string(lr.linearisation));
  s.part("flutter", true,
         fmt::format("state-space and p-k over {} speeds up to {}; linearisations: {}",
                     fr.results.front().methods.front().sweep.speeds.size(),
                     s.v(fr.results.front().methods.front().sweep.speeds.back()), lins),
         {"flutter.h5"});
  flutter_rows(s, Linearisation::kNominal, "Linear", "linear");
  if (const MethodResult* m = method_of(fr, Linearisation::kNominal, "state-space")) {
    if (m->divergence.found)
      s.speed_row("divergence", "Divergence speed (state-space)", m->divergence.speed,
                  flutter_source(Linearisation::kNominal, "state-space", "divergence_speed"), s.eas(m->divergence.speed));
    else
      s.rows.text("divergence", "Divergence speed (state-space)",
                  "none up to " + s.v(m->sweep.speeds.back()),
                  flutter_source(Linearisation::kNominal, "state-space", "divergence_found"));
  }
  const FlutterMargin fm = flutter_margin(fr);
  if (fm.available) {
    if (s.pr.reduced)  // as U* = TAS / (b w_a), like every speed of a nondimensional case
      s.rows.add("clearance_speed", "Clearance speed 1.15 V_D", true_airspeed(fm.required_eas, s.rho) / s.pr.speed_ref,
                 "U*", fmt::format("case: envelope.dive_speed_eas x 1.15, as TAS / (b w_a) = {:.6g} m s-1",
                                   s.pr.speed_ref),
                 fmt::format("V_D = {}", s.v(true_airspeed(fm.dive_speed_eas, s.rho))));
    else
      s.rows.add("clearance_speed", "Clearance speed 1.15 V_D", fm.required_eas, "m s-1 EAS",
                 "case: envelope.dive_speed_eas x 1.15", fmt::format("V_D = {:.4g} m s-1 EAS", fm.dive_speed_eas));
    if (std::isfinite(fm.margin))
      s.rows.add("margin",
                 fmt::format("Margin of the lowest instability ({}, {}) over 1.15 V_D", fm.critical_kind,
                             fm.critical_method),
                 100 * fm.margin, "%",
                 fmt::format("flutter.h5: /{} (EAS = TAS sqrt(rho/{}))",
                             flutter_group(Linearisation::kNominal, fm.critical_method), kSeaLevelDensity),
                 fm.margin_met ? "margin met: beyond 1.15 V_D (linear model, nominal springs)"
                               : "margin NOT met: inside 1.15 V_D (linear model, nominal springs)");
    else
      s.rows.text("margin", "Margin over 1.15 V_D", "no instability in the analysed range",
                  "flutter.h5: /" + flutter_group(Linearisation::kNominal, "state-space"),
                  "margin met: no instability up to the sweep's end (linear model, nominal springs)");
  } else {
    s.rows.text("margin", "Margin over 1.15 V_D", "not assessed", "", "the case gives no envelope.dive_speed_eas");
  }
  if (fr.has_gap) {
    flutter_rows(s, Linearisation::kGapOpen, "Gap-open (freeplay band lower end)", "gap_open");
    flutter_rows(s, Linearisation::kGapClosed, "Gap-closed (freeplay band upper end)", "gap_closed");
  }
}

// What the LCO sweep stage hands the rows and the LCO history stage.
struct LcoSweepRun {
  std::vector<SweepPoint> points;
  SweepTables tables;  // the map's layout: the rows cite its fields
  double per = 1;  // swept value per m/s TAS
  std::string key;
};

// The LCO sweep's speed range (m/s TAS): below the lowest speed a limit
// cycle can exist at (the gap-open flutter speed, or lower where the
// describing-function curve dips below it) up to just under the gap-closed
// (nominal) flutter speed.
std::pair<double, double> lco_sweep_range(const Study& s) {
  const FlutterReport& fr = s.flutter;
  const MethodResult* nominal = method_of(fr, Linearisation::kNominal, "state-space");
  const MethodResult* open = method_of(fr, Linearisation::kGapOpen, "state-space");
  double lo = std::numeric_limits<double>::infinity(), hi = 0;
  if (open && open->flutter.found) lo = open->flutter.speed;
  if (fr.lco.available)
    for (const auto& p : fr.lco.points)  // stable predictions: where a time march can find an LCO
      if (p.speed > 0 && p.stable) lo = std::min(lo, p.speed);
  if (nominal && nominal->flutter.found) {
    if (!fr.has_gap) lo = std::min(lo, nominal->flutter.speed);
    hi = fr.has_gap ? 0.98 * nominal->flutter.speed : 1.3 * nominal->flutter.speed;
  } else {
    hi = s.vd_tas ? 1.2 * 1.15 * *s.vd_tas : 1.5 * s.c.model.flow.airspeed;
  }
  if (!std::isfinite(lo)) lo = 0.2 * hi;
  lo = std::min(0.6 * lo, 0.5 * hi);
  if (s.o.sweep_speeds) return *s.o.sweep_speeds;
  return {lo, hi};
}

// The request of a derived sweep (the LCO sweep, the preload map) without
// its axis: gusts removed, runs of `duration` s (the option, else the
// case's run length but at least 400 periods of the lowest natural
// frequency) from the case's initial conditions, or, for a case at rest,
// with the nonlinear DOF displaced by 4 x its gap; `note` says which.
SweepRequest derived_sweep_request(const Study& s, int nl, const std::string& label, double& duration,
                                   std::string& note) {
  const Case& c = s.c;
  const double f_low = s.check.modes.empty() ? 1.0 : s.check.modes.front().frequency / (2 * std::numbers::pi);
  Derivation dv;
  duration = s.o.sweep_duration > 0 ? s.o.sweep_duration : std::max(c.simulation.duration, 400.0 / f_low);
  dv.duration = duration;
  bool at_rest = true;
  for (int k = 0; k < c.model.section.dof; ++k)
    if (c.simulation.initial_displacement(k) != 0 || c.simulation.initial_velocity(k) != 0) at_rest = false;
  note = "initial conditions of the case";
  if (at_rest) {
    const auto bp = c.model.springs[static_cast<std::size_t>(nl)].breakpoints();
    double gap = 0;
    for (double b : bp) gap = std::max(gap, std::abs(b));
    dv.disturb_dof = nl;
    dv.disturbance = gap > 0 ? 4.0 * gap : (nl == kPlunge ? 0.1 * c.model.section.semichord : 2.0 * kRadPerDeg);
    const Presenter pr = presenter(c);
    note = fmt::format("the case starts at rest: {} displaced by {:.4g} {}", kDofNames[nl],
                       pr.displacement_value(nl, dv.disturbance), pr.displacement_unit(nl));
  }
  SweepRequest req;
  req.case_text = derived_case_text(c, dv);
  req.case_path = c.path + label;
  req.overrides = derived_overrides(c, dv);
  req.options.jobs = std::max(1, s.o.jobs);
  return req;
}

// The LCO sweep up and down in airspeed, written to sweep.h5.
LcoSweepRun lco_sweep_stage(Study& s, int nl) {
  LcoSweepRun run;
  run.key = s.si ? "flow.airspeed" : "nondimensional.reduced_speed";
  run.per = s.si ? 1.0 : 1.0 / s.flutter.reference_speed;
  const auto [lo, hi] = lco_sweep_range(s);
  const int n = std::max(2, s.o.sweep_points);
  SweepAxis axis{run.key, {}};
  for (int i = 0; i < n; ++i) axis.values.push_back(run.per * (lo + (hi - lo) * i / (n - 1)));

  double sweep_duration = 0;
  std::string disturbance_note;
  SweepRequest req = derived_sweep_request(s, nl, " (LCO sweep)", sweep_duration, disturbance_note);
  req.options.axes = {axis};
  req.options.up = req.options.down = true;
  req.options.continuation = true;
  req.options.jobs = std::max(1, s.o.jobs);
  s.say(fmt::format("LCO sweep: {} speeds {}, up and down", n, s.range(lo, hi)));
  const Case sweep_case = parse_case(req.case_text, req.case_path, req.overrides);
  // The overlay does not depend on the points: one more work item of the
  // sweep's threads.
  std::optional<FlutterReport> overlay;
  std::exception_ptr overlay_failure;
  run.points = run_sweep(req, {}, {}, s.cancel, [&] {
    try {
      overlay = sweep_overlay(sweep_case, req, s.cancel);
    } catch (...) {
      overlay_failure = std::current_exception();
    }
  });
  run.tables = sweep_tables(req, sweep_case.model.section.dof);
  stop_if_cancelled(s.cancel);  // an interrupted sweep's points are not a map
  if (overlay_failure) std::rethrow_exception(overlay_failure);
  write_sweep_file(s.path("sweep.h5"), sweep_case, req, run.points, overlay ? &*overlay : nullptr);
  s.R.hdf5_files.push_back("sweep.h5");
  s.part("lco-sweep", true,
         fmt::format("{} speeds {}, up and down with continuation; runs of up "
                     "to {:.4g} s; {}; gusts removed",
                     n, s.range(lo, hi), sweep_duration, disturbance_note),
         {"sweep.h5"});
  return run;
}

// Rows of the sweep: onset, persistence, hysteresis, where LCOs were found.
void lco_sweep_rows(Study& s, const LcoSweepRun& run) {
  const std::vector<SweepPoint>& pts = run.points;
  const double per = run.per;
  const SweepSummary sm = summarize(pts);
  const std::string& cls = run.tables.field("response_class").name;
  const std::string key_note = s.si ? "" : fmt::format(" (U* = value x {:.4g} m s-1)", s.flutter.reference_speed);
  if (sm.onset_up)
    s.speed_row("lco_onset_up", "LCO onset, sweeping up", *sm.onset_up / per,
                "sweep.h5: first " + cls + " = 1 at direction 0" + key_note, s.eas(*sm.onset_up / per));
  else
    s.rows.text("lco_onset_up", "LCO onset, sweeping up", "no LCO found", "sweep.h5: " + cls);
  if (sm.disappearance_down)
    s.speed_row("lco_persists_down", "LCO persists, sweeping down, to", *sm.disappearance_down / per,
                "sweep.h5: lowest " + cls + " = 1 at direction 1" + key_note, s.eas(*sm.disappearance_down / per));
  else
    s.rows.text("lco_persists_down", "LCO persists, sweeping down, to", "no LCO found", "sweep.h5: " + cls);
  if (sm.onset_up && sm.disappearance_down && *sm.disappearance_down < *sm.onset_up)
    s.rows.text("hysteresis", "Hysteresis band",
                s.range(*sm.disappearance_down / per, *sm.onset_up / per),
                "sweep.h5: " + cls + ", both directions");
  else
    s.rows.text("hysteresis", "Hysteresis band", "none seen at this speed spacing",
                "sweep.h5: " + cls + ", both directions");
  if (const std::size_t n = unsettled_points(pts); n > 0)
    s.rows.text("lco_unsettled", "Sweep points that did not settle", fmt::format("{} (class unsettled: not an answer)", n),
                "sweep.h5: " + cls + " = 5",
                fmt::format("runs extended to {:g} times their length without settling", kSweepRunCap));
  // Where any LCO was found, either direction.
  std::optional<double> first, last;
  for (const auto& p : pts)
    if (p.ok && p.lco.response == ResponseClass::kPeriodic) {
      first = std::min(first.value_or(p.value1), p.value1);
      last = std::max(last.value_or(p.value1), p.value1);
    }
  if (first)
    s.rows.text("lco_range", "LCO found between (either direction)",
                s.range(*first / per, *last / per), "sweep.h5: " + cls + " = 1",
                s.vd_tas && *first / per <= *s.vd_tas ? "inside the envelope (at or below V_D)" : "");
  else
    s.rows.text("lco_range", "LCO found between (either direction)", "no LCO in the sweep", "sweep.h5: " + cls);
}

// The largest LCO inside the envelope (at or below V_D), or nullptr.
const SweepPoint* largest_lco(const Study& s, const LcoSweepRun& run) {
  const SweepPoint* worst = nullptr;
  for (const auto& p : run.points) {
    if (!p.ok || p.lco.response != ResponseClass::kPeriodic) continue;
    if (s.vd_tas && p.value1 / run.per > *s.vd_tas * (1 + 1e-12)) continue;
    const auto w = static_cast<std::size_t>(p.lco.watched_dof);
    if (!worst || p.lco.dof[w].amplitude > worst->lco.dof[w].amplitude) worst = &p;
  }
  return worst;
}

// Rows of the largest LCO: amplitudes, RMS, distortion, hinge-spring moment.
void largest_lco_rows(Study& s, const SweepPoint& worst, const SweepTables& t, const std::string& where, double per) {
  const Case& c = s.c;
  const int w = worst.lco.watched_dof;
  const double a = worst.lco.dof[static_cast<std::size_t>(w)].amplitude;
  s.rows.add("lco_largest", fmt::format("Largest LCO {}: {} amplitude", where, kDofNames[w]),
             s.pr.displacement_value(w, a), s.pr.displacement_unit(w),
             "sweep.h5: " + t.cite(std::string(kDofNames[w]) + "_amplitude", worst) + s.pr.file_unit_note(w),
             fmt::format("at {} sweeping {}, {}", s.v(worst.value1 / per), worst.direction == 0 ? "up" : "down",
                         s.pr.frequency(worst.lco.frequency)));
  if (worst.cycle.samples > 0) {
    const DofHarmonics& h = worst.cycle.dof[static_cast<std::size_t>(w)];
    s.rows.add("lco_largest_rms", fmt::format("  {} RMS at that LCO", kDofNames[w]),
               s.pr.displacement_value(w, h.rms), s.pr.displacement_unit(w),
               "sweep.h5: " + t.cite(std::string(kDofNames[w]) + "_rms", worst) + s.pr.file_unit_note(w));
    s.rows.add("lco_largest_thd", fmt::format("  {} total harmonic distortion at that LCO", kDofNames[w]), 100 * h.thd,
               "%",
               "sweep.h5: " + t.cite(std::string(kDofNames[w]) + "_thd", worst) + " x 100",
               "harmonics above the first, against the first");
  }
  for (int k = 0; k < c.model.section.dof; ++k) {
    if (k == w) continue;
    const double ak = worst.lco.dof[static_cast<std::size_t>(k)].amplitude;
    s.rows.add(fmt::format("lco_largest_{}", kDofNames[k]), fmt::format("  {} amplitude at that LCO", kDofNames[k]),
               s.pr.displacement_value(k, ak), s.pr.displacement_unit(k),
               "sweep.h5: " + t.cite(std::string(kDofNames[k]) + "_amplitude", worst) + s.pr.file_unit_note(k));
  }
  if (c.model.section.dof == 3) {
    const SpringLaw& law = c.model.springs[kFlap];
    const double fmax = law.force(worst.lco.dof[kFlap].max, law.region_of(worst.lco.dof[kFlap].max));
    const double fmin = law.force(worst.lco.dof[kFlap].min, law.region_of(worst.lco.dof[kFlap].min));
    s.rows.add("lco_hinge_spring_moment", "  hinge-spring (control circuit) moment at that LCO, largest |value|",
               std::max(std::abs(fmax), std::abs(fmin)), "N m m-1",
               "flap spring law at sweep.h5: flap_max / flap_min of that point");
  }
}

// Time history of the largest LCO, from the sweep point's final state.
void lco_history_stage(Study& s, const SweepPoint& worst, const std::string& where, const LcoSweepRun& run) {
  const Case& c = s.c;
  s.say("LCO time history at " + s.v(worst.value1 / run.per));
  const double period = 1.0 / worst.lco.frequency;
  Derivation hv;
  hv.duration = 10 * period;
  hv.sample_interval = period / 200;
  std::vector<std::string> ov = derived_overrides(c, hv);
  ov.push_back(fmt::format("{}={:.17g}", run.key, worst.value1));
  const Case hc = parse_case(derived_case_text(c, hv), c.path + " (largest LCO)", ov);
  const AeroelasticModel hm(hc.model);
  RunState start;
  start.x = worst.final_state;
  start.regions = worst.final_regions;
  Hdf5TimeHistoryWriter writer(s.path("lco.h5"));
  const SimulationSummary hs = simulate(hc, hm, writer, s.cancel, &start);
  // A run that reached its end wrote lco.h5 whole: it is listed even when
  // the interrupt came after its last step (a run cut short is
  // lco.incomplete.h5).
  if (hs.completed) s.R.hdf5_files.push_back("lco.h5");
  stop_if_cancelled(s.cancel);
  s.part("lco-history", hs.completed,
         fmt::format("10 cycles of the largest LCO {} ({}), started from the sweep point's final state", where,
                     s.v(worst.value1 / run.per)),
         {"lco.h5"});
  for (const auto& e : hs.extremes)
    if (e.channel == "hinge_moment")
      s.rows.add("lco_hinge_moment", "  aerodynamic hinge moment at that LCO, largest |value|",
                 std::max(std::abs(e.max), std::abs(e.min)), "N m m-1", "lco.h5@hinge_moment_max, @hinge_moment_min (the trajectory's extremes)");
}

// ---------------------------------------------------------------------------
// The LCO branch: converged orbits continued in airspeed (continuation.hpp),
// stable and unstable, with folds; the largest stable LCO inside the
// envelope solved as an orbit at the branch's maximum (or at V_D).

struct LcoBranchRun {
  std::optional<Case> branch_case;  // the derived case the branch was traced on (gusts removed)
  Branch branch;
  std::optional<Orbit> largest;   // largest stable LCO inside the envelope
  double largest_parameter = 0;   // its key value
  double largest_airspeed = 0;    // m/s TAS
  std::string largest_how;        // "maximum of the branch", "at V_D", "branch point"
};

// Contiguous runs of points of one stability along the branch.
struct StabilitySegment {
  bool stable = false;
  std::size_t first = 0, last = 0;  // point indices, inclusive
};
std::vector<StabilitySegment> stability_segments(const Branch& b) {
  std::vector<StabilitySegment> out;
  for (std::size_t i = 0; i < b.points.size(); ++i) {
    const bool st = b.points[i].orbit.stable;
    if (out.empty() || out.back().stable != st)
      out.push_back({st, i, i});
    else
      out.back().last = i;
  }
  return out;
}

std::pair<double, double> airspeed_range(const Branch& b, const StabilitySegment& g) {
  double lo = std::numeric_limits<double>::infinity(), hi = -lo;
  for (std::size_t i = g.first; i <= g.last; ++i) {
    lo = std::min(lo, b.points[i].airspeed);
    hi = std::max(hi, b.points[i].airspeed);
  }
  return {lo, hi};
}

// The hysteresis band of one fold: from the fold to the far end of the
// unstable run of orbits on its small-amplitude side (where that branch of
// unstable cycles meets the rest state: a Hopf point, or a grazing end of
// a freeplay branch). Inside the band a stable LCO and an unstable cycle
// (the threshold a disturbance must pass to start the LCO) coexist.
struct FoldBand {
  double fold_speed = 0, end_speed = 0;  // m/s TAS
  double amp_lo = 0, amp_hi = 0;         // unstable cycle amplitudes over the band (watched DOF)
  std::size_t unstable_points = 0;
  bool reaches_rest = false;  // the unstable run ends the branch (at a Hopf or grazing point)
};
std::optional<FoldBand> fold_band(const Branch& b, const Bifurcation& fold, double speed_per_parameter) {
  const auto n = static_cast<int>(b.points.size());
  if (fold.after < 0 || fold.after + 1 >= n) return std::nullopt;
  const int w = b.watched_dof;
  const auto amp = [&](int i) { return b.points[static_cast<std::size_t>(i)].orbit.dof[w].amplitude; };
  const int step = amp(fold.after) <= amp(fold.after + 1) ? -1 : 1;
  int i = step < 0 ? fold.after : fold.after + 1;
  FoldBand band;
  band.fold_speed = fold.parameter * speed_per_parameter;
  band.amp_lo = band.amp_hi = fold.amplitude;
  band.end_speed = band.fold_speed;
  for (; i >= 0 && i < n && !b.points[static_cast<std::size_t>(i)].orbit.stable; i += step) {
    band.end_speed = b.points[static_cast<std::size_t>(i)].airspeed;
    band.amp_lo = std::min(band.amp_lo, amp(i));
    band.amp_hi = std::max(band.amp_hi, amp(i));
    ++band.unstable_points;
  }
  if (band.unstable_points == 0) return std::nullopt;
  band.reaches_rest = i < 0 || i >= n;
  if (i < 0 && b.hopf_parameter && b.start == BranchStart::kHopf) {
    // The first orbit is the small one beside the Hopf point: the band
    // ends at the Hopf point, where the unstable cycle shrinks to rest.
    band.end_speed = *b.hopf_parameter * speed_per_parameter;
    band.amp_lo = 0;
  }
  return band;
}

// The orbit at lambda from the branch point nearest in lambda (nullopt
// when Newton fails there).
std::optional<Orbit> orbit_at(const ParameterFamily& fam, const Branch& b, std::size_t seed_point, double lambda,
                              const OrbitSettings& settings, const std::atomic<bool>* cancel) {
  const AeroelasticModel m(fam.model_at(lambda));
  const Orbit& near = b.points[seed_point].orbit;
  Orbit o = solve_orbit(m, OrbitSeed{near.x0, near.period}, settings, cancel);
  if (!o.converged || o.grazing) return std::nullopt;
  return o;
}

// The largest stable LCO at or below V_D: the largest stable point of the
// branch, refined to the maximum of amplitude against lambda by parabolic
// interpolation through it and its stable neighbours (each new lambda a
// solved orbit), or solved at V_D when the amplitude still grows there.
void largest_on_branch(const Study& s, const ParameterFamily& fam, double per, double limit, LcoBranchRun& r) {
  const Branch& b = r.branch;
  const int w = b.watched_dof;
  const auto inside = [&](double v) { return v <= limit * (1 + 1e-12); };
  std::optional<std::size_t> k;
  for (std::size_t i = 0; i < b.points.size(); ++i) {
    const BranchPoint& p = b.points[i];
    if (!p.orbit.stable || !inside(p.airspeed)) continue;
    if (!k || p.orbit.dof[w].amplitude > b.points[*k].orbit.dof[w].amplitude) k = i;
  }
  if (!k) return;
  OrbitSettings os;
  os.watched_dof = w;
  r.largest = b.points[*k].orbit;
  r.largest_parameter = b.points[*k].parameter;
  r.largest_airspeed = b.points[*k].airspeed;
  r.largest_how = "largest stable orbit on the branch";
  const auto stable_in = [&](std::size_t i) { return b.points[i].orbit.stable; };
  const bool has_lo = *k > 0 && stable_in(*k - 1), has_hi = *k + 1 < b.points.size() && stable_in(*k + 1);
  // Beyond the limit (V_D, else the sweep's end) with a larger amplitude:
  // the largest inside is at the limit.
  for (int d : {-1, 1}) {
    const bool has = d < 0 ? has_lo : has_hi;
    if (!has) continue;
    const BranchPoint& q = b.points[static_cast<std::size_t>(static_cast<long>(*k) + d)];
    if (!inside(q.airspeed) && q.orbit.dof[w].amplitude > r.largest->dof[w].amplitude) {
      const double lvd = limit * per;
      if (auto o = orbit_at(fam, b, *k, lvd, os, s.cancel); o && o->stable) {
        r.largest = *o;
        r.largest_parameter = lvd;
        r.largest_airspeed = limit;
        r.largest_how = s.vd_tas ? "at V_D (the stable amplitude still grows there)"
                                 : "at the end of the sweep range (the stable amplitude still grows there)";
      }
      return;
    }
  }
  if (!has_lo || !has_hi) return;  // at the end of a stable run: the point itself
  // (lambda, A) samples around the maximum; parabolic steps.
  std::vector<std::pair<double, double>> pts;
  for (long i = static_cast<long>(*k) - 1; i <= static_cast<long>(*k) + 1; ++i)
    pts.emplace_back(b.points[static_cast<std::size_t>(i)].parameter,
                     b.points[static_cast<std::size_t>(i)].orbit.dof[w].amplitude);
  for (int it = 0; it < 6; ++it) {
    std::sort(pts.begin(), pts.end());
    const auto best = std::max_element(pts.begin(), pts.end(),
                                       [](const auto& a, const auto& c) { return a.second < c.second; });
    if (best == pts.begin() || best + 1 == pts.end()) break;
    const auto [la, aa] = *(best - 1);
    const auto [lb, ab] = *best;
    const auto [lc, ac] = *(best + 1);
    const double num = (lb - la) * (lb - la) * (ab - ac) - (lb - lc) * (lb - lc) * (ab - aa);
    const double den = (lb - la) * (ab - ac) - (lb - lc) * (ab - aa);
    if (!(std::abs(den) > 0)) break;
    double ls = lb - 0.5 * num / den;
    ls = std::clamp(ls, la, lc);
    ls = std::min(ls, limit * per);
    if (std::abs(ls - lb) <= 1e-9 * std::max(1.0, std::abs(lb))) break;
    auto o = orbit_at(fam, b, *k, ls, os, s.cancel);
    stop_if_cancelled(s.cancel);
    if (!o || !o->stable) break;
    pts.emplace_back(ls, o->dof[w].amplitude);
    if (o->dof[w].amplitude > r.largest->dof[w].amplitude) {
      r.largest = *o;
      r.largest_parameter = ls;
      r.largest_airspeed = ls / per;
      r.largest_how = "maximum of the branch (parabolic search over solved orbits)";
    }
    // Keep the three points around the new maximum.
    std::sort(pts.begin(), pts.end());
    while (pts.size() > 3) {
      const auto bi = std::max_element(pts.begin(), pts.end(),
                                       [](const auto& a, const auto& c) { return a.second < c.second; }) -
                      pts.begin();
      if (bi <= 1) pts.pop_back();
      else pts.erase(pts.begin());
    }
  }
}

// The branch of limit cycles through the sweep's largest LCO (or from the
// case's own start), written to branch.h5; its rows.
LcoBranchRun lco_branch_stage(Study& s, const LcoSweepRun& run, const std::pair<double, double>& speeds) {
  const Case& c = s.c;
  LcoBranchRun r;
  Derivation bv;  // gusts removed: an orbit needs an autonomous system
  r.branch_case = parse_case(derived_case_text(c, bv), c.path + " (LCO branch)", derived_overrides(c, bv));
  const Case& bc = *r.branch_case;
  BranchOptions bo;
  bo.key = run.key;
  // Past the sweep's end and 1.15 V_D, so that the largest LCO up to
  // either is inside the branch.
  double hi = 1.05 * speeds.second;
  if (s.vd_tas) hi = std::max(hi, 1.05 * 1.15 * *s.vd_tas);
  bo.from = speeds.first * run.per;
  bo.to = hi * run.per;
  bo.max_points = 400;
  // A smoother curve for the figure than the default step 0.25 (scaled
  // arclength): short steps where orbits are cheap (exact propagation).
  bo.max_step = exact_propagation_eligible(bc.model) ? 0.02 : 0.1;
  // A settled periodic sweep point seeds the branch (the largest one);
  // without one the continuation chooses its own start.
  const SweepPoint* seed = nullptr;
  for (const auto& p : run.points)
    if (p.ok && p.lco.response == ResponseClass::kPeriodic && !p.final_state.empty() &&
        (!seed || p.lco.dof[static_cast<std::size_t>(p.lco.watched_dof)].amplitude >
                      seed->lco.dof[static_cast<std::size_t>(seed->lco.watched_dof)].amplitude))
      seed = &p;
  if (seed && !smooth_spring_laws(bc.model)) {
    bo.start = BranchStart::kMarch;
    bo.march_parameter = seed->value1;
    bo.march_state = seed->final_state;
    bo.orbit.watched_dof = seed->lco.watched_dof;
  }
  s.say(fmt::format("LCO branch: orbits continued in {} over {}", run.key, s.range(speeds.first, hi)));
  r.branch = continue_branch(bc, bo, s.cancel);
  stop_if_cancelled(s.cancel);
  const Branch& b = r.branch;
  write_branch_file(s.path("branch.h5"), bc, b, "sweep.h5");
  s.R.hdf5_files.push_back("branch.h5");
  s.part("lco-branch", !b.points.empty(),
         fmt::format("{} converged orbits continued in {} ({}); {}", b.points.size(), b.key, b.start_detail,
                     b.stop_reason),
         {"branch.h5"});
  const int w = b.watched_dof;
  const double ascale = s.pr.displacement_value(w, 1.0);
  const std::string aunit = s.pr.displacement_unit(w);
  const std::string amp_name = std::string(kDofNames[w]) + "_amplitude";
  if (b.points.empty()) {
    s.rows.text("lco_branch", "LCO branch (converged orbits)", "none", "branch.h5@stop_reason", b.stop_reason);
    return r;
  }
  s.rows.text("lco_branch", "LCO branch (converged orbits, stable and unstable)",
              fmt::format("{} orbits, {}", b.points.size(),
                          s.range(airspeed_range(b, {false, 0, b.points.size() - 1}).first,
                                  airspeed_range(b, {false, 0, b.points.size() - 1}).second)),
              "branch.h5: airspeed", b.start_detail);
  const auto segs = stability_segments(b);
  std::string stable_txt, unstable_txt;
  for (const auto& g : segs) {
    const auto [lo, hi2] = airspeed_range(b, g);
    std::string& t = g.stable ? stable_txt : unstable_txt;
    t += (t.empty() ? "" : "; ") + s.range(lo, hi2);
  }
  s.rows.text("lco_branch_stable", "  stable LCOs on the branch between",
              stable_txt.empty() ? "none" : stable_txt, "branch.h5: airspeed where stable = 1");
  s.rows.text("lco_branch_unstable", "  unstable cycles on the branch between",
              unstable_txt.empty() ? "none" : unstable_txt, "branch.h5: airspeed where stable = 0");
  const double per_speed = 1.0 / run.per;
  int nfold = 0, nband = 0;
  for (const auto& bf : b.bifurcations) {
    const double v = bf.parameter * per_speed;
    if (bf.kind == BifurcationKind::kFold) {
      ++nfold;
      s.speed_row(fmt::format("lco_fold_{}", nfold), fmt::format("  fold of the LCO branch ({})", nfold), v,
                  "branch.h5: bifurcation_parameter of the fold (cubic Hermite in arclength)",
                  fmt::format("{} amplitude {:.4g} {}{}{}", kDofNames[w], bf.amplitude * ascale, aunit,
                              s.pr.reduced ? "" : "; ", s.eas(v)));
      const auto band = fold_band(b, bf, per_speed);
      if (!band) continue;
      ++nband;
      const double lo = std::min(band->fold_speed, band->end_speed), hi2 = std::max(band->fold_speed, band->end_speed);
      s.rows.text(fmt::format("lco_hysteresis_fold_{}", nfold),
                  fmt::format("Hysteresis band from fold ({}): {}", nfold,
                              band->reaches_rest ? "rest or the LCO" : "the smaller or the larger LCO"),
                  s.range(lo, hi2), "branch.h5: the fold and the unstable orbits (stable = 0) on its small-amplitude side");
      s.rows.text(fmt::format("lco_trigger_fold_{}", nfold),
                  "  disturbance that starts the larger LCO there (unstable cycle amplitude)",
                  fmt::format("{} .. {} {}", sig4(band->amp_lo * ascale), sig4(band->amp_hi * ascale), aunit),
                  "branch.h5: " + amp_name + " where stable = 0",
                  "a disturbance larger than the unstable cycle grows into the larger LCO");
    } else {
      s.rows.text(fmt::format("lco_bifurcation_{}", &bf - b.bifurcations.data()),
                  bf.kind == BifurcationKind::kGrazing
                      ? std::string("  branch ends: the orbit grazes a spring breakpoint")
                      : fmt::format("  {} bifurcation on the LCO branch", to_string(bf.kind)),
                  s.v(v), "branch.h5: stable, largest_multiplier_modulus",
                  fmt::format("{} amplitude {:.4g} {}", kDofNames[w], bf.amplitude * ascale, aunit));
    }
  }
  if (nband == 0)
    s.rows.text("lco_hysteresis_branch", "Hysteresis band from the folds",
                nfold ? "none: no unstable cycles beside a fold" : "none: no fold on the branch",
                "branch.h5: stable");
  const ParameterFamily fam = parameter_family(bc, run.key);
  largest_on_branch(s, fam, run.per, s.vd_tas.value_or(speeds.second), r);
  return r;
}

// The largest stable LCO of the branch as a one-orbit file (lco_orbit.h5,
// the branch file's layout) and its rows.
void largest_orbit_rows(Study& s, const LcoBranchRun& r, const std::string& where) {
  const Case& c = s.c;
  const Orbit& o = *r.largest;
  Branch one;
  one.key = r.branch.key;
  one.start = r.branch.start;
  one.start_detail = "the largest stable LCO " + where + " of branch.h5: " + r.largest_how;
  one.watched_dof = r.branch.watched_dof;
  one.stop_reason = "one orbit";
  BranchPoint p;
  p.parameter = r.largest_parameter;
  p.airspeed = r.largest_airspeed;
  p.orbit = o;
  one.points.push_back(p);
  write_branch_file(s.path("lco_orbit.h5"), *r.branch_case, one);
  s.R.hdf5_files.push_back("lco_orbit.h5");
  const int w = o.watched_dof;
  const auto shown = [&](int k, double v) { return s.pr.displacement_value(k, v); };
  const auto unit = [&](int k) { return std::string(s.pr.displacement_unit(k)); };
  const auto in_file = [&](int k) { return std::string(s.pr.file_unit_note(k)); };
  const std::string n = kDofNames[w];
  s.rows.add("lco_largest", fmt::format("Largest stable LCO {}: {} amplitude", where, n),
             shown(w, o.dof[w].amplitude), unit(w), "lco_orbit.h5: " + n + "_amplitude[0]" + in_file(w),
             fmt::format("converged orbit at {}, {}; {}, residual {:.1e}", s.v(r.largest_airspeed), r.largest_how,
                         s.pr.frequency(o.frequency()), o.residual));
  s.rows.add("lco_largest_multiplier", "  largest non-trivial Floquet multiplier |mu| of that LCO",
             o.largest_nontrivial, "1", "lco_orbit.h5: largest_multiplier_modulus[0]",
             fmt::format("below 1: stable; trivial multiplier within {:.1e} of 1", o.trivial_multiplier_error));
  s.rows.add("lco_largest_rms", fmt::format("  {} RMS at that LCO", n), shown(w, o.content[w].rms), unit(w),
             "lco_orbit.h5: " + n + "_rms[0]" + in_file(w));
  s.rows.add("lco_largest_thd", fmt::format("  {} total harmonic distortion at that LCO", n), 100 * o.content[w].thd,
             "%", "lco_orbit.h5: " + n + "_thd[0] x 100", "harmonics above the first, against the first");
  for (int k = 0; k < c.model.section.dof; ++k) {
    if (k == w) continue;
    s.rows.add(fmt::format("lco_largest_{}", kDofNames[k]), fmt::format("  {} amplitude at that LCO", kDofNames[k]),
               shown(k, o.dof[k].amplitude), unit(k),
               fmt::format("lco_orbit.h5: {}_amplitude[0]{}", kDofNames[k], in_file(k)));
  }
  if (c.model.section.dof == 3) {
    const SpringLaw& law = c.model.springs[kFlap];
    const double fmax = law.force(o.dof[kFlap].max, law.region_of(o.dof[kFlap].max));
    const double fmin = law.force(o.dof[kFlap].min, law.region_of(o.dof[kFlap].min));
    s.rows.add("lco_hinge_spring_moment", "  hinge-spring (control circuit) moment at that LCO, largest |value|",
               std::max(std::abs(fmax), std::abs(fmin)), "N m m-1",
               "flap spring law at lco_orbit.h5: flap_max[0] / flap_min[0]");
  }
}

// Time history of the largest LCO, from the converged orbit's state.
void lco_orbit_history_stage(Study& s, const LcoBranchRun& r, const std::string& where, const std::string& key) {
  const Case& c = s.c;
  const Orbit& o = *r.largest;
  s.say("LCO time history at " + s.v(r.largest_airspeed));
  Derivation hv;
  hv.duration = 10 * o.period;
  hv.sample_interval = o.period / 200;
  std::vector<std::string> ov = derived_overrides(c, hv);
  ov.push_back(fmt::format("{}={:.17g}", key, r.largest_parameter));
  const Case hc = parse_case(derived_case_text(c, hv), c.path + " (largest LCO)", ov);
  const AeroelasticModel hm(hc.model);
  RunState start;
  start.x = o.x0;
  start.regions = hm.regions_of(o.x0.data());
  Hdf5TimeHistoryWriter writer(s.path("lco.h5"));
  const SimulationSummary hs = simulate(hc, hm, writer, s.cancel, &start);
  if (hs.completed) s.R.hdf5_files.push_back("lco.h5");  // (as lco_history_stage)
  stop_if_cancelled(s.cancel);
  s.part("lco-history", hs.completed,
         fmt::format("10 periods of the largest stable LCO {} ({}), started on the converged orbit", where,
                     s.v(r.largest_airspeed)),
         {"lco.h5"});
  for (const auto& e : hs.extremes)
    if (e.channel == "hinge_moment")
      s.rows.add("lco_hinge_moment", "  aerodynamic hinge moment at that LCO, largest |value|",
                 std::max(std::abs(e.max), std::abs(e.min)), "N m m-1", "lco.h5@hinge_moment_max, @hinge_moment_min (the trajectory's extremes)");
}

// Where stable LCOs were found, into flutter.h5 beside the linear freeplay
// bound (its V-g figure shades both): the branch's stable segments, or,
// without a branch, the sweep's runs of adjacent periodic points. The file
// is rewritten whole (Hdf5Document renames it into place).
void observed_lco_ranges(Study& s, const LcoSweepRun& run, const Branch& b) {
  auto& obs = s.flutter.observed_lco;
  obs = {};
  for (const auto& g : stability_segments(b))
    if (g.stable) obs.ranges.push_back(airspeed_range(b, g));
  if (!obs.ranges.empty()) {
    obs.source = "branch.h5: stable converged orbits (each range from its lowest to its highest airspeed)";
  } else {
    std::map<double, bool> periodic;  // swept speed (m/s TAS) -> some run periodic there
    for (const auto& p : run.points) {
      const bool per = p.ok && p.lco.response == ResponseClass::kPeriodic;
      periodic[p.value1 / run.per] = periodic[p.value1 / run.per] || per;
    }
    for (auto it = periodic.begin(); it != periodic.end(); ++it) {
      if (!it->second) continue;
      if (it != periodic.begin() && std::prev(it)->second) obs.ranges.back().second = it->first;
      else obs.ranges.emplace_back(it->first, it->first);
    }
    obs.source = "sweep.h5: periodic runs (each range from the lowest to the highest of adjacent swept speeds)";
  }
  if (obs.ranges.empty()) return;
  write_flutter_file(s.path("flutter.h5"), s.c, s.flutter);
}

// The LCO sweep, its rows and the history of its largest LCO.
void lco_stages(Study& s) {
  const int nl = nonlinear_dof(s.c);
  if (nl < 0) {
    s.part("lco-sweep", false, "skipped: the case has no nonlinear spring (freeplay, bilinear, cubic, "
                               "polynomial or table law), so its response is linear and the flutter "
                               "analysis above is the whole answer");
    s.rows.text("lco", "Limit-cycle oscillation", "not studied", "", "no nonlinear spring in the case");
    return;
  }
  const auto speeds = lco_sweep_range(s);
  const LcoSweepRun run = lco_sweep_stage(s, nl);
  lco_sweep_rows(s, run);
  const std::string where = s.vd_tas ? fmt::format("at or below V_D ({})", s.v(*s.vd_tas))
                                     : std::string("over the sweep (no V_D given)");
  const SweepPoint* worst = largest_lco(s, run);
  LcoBranchRun br = lco_branch_stage(s, run, speeds);
  observed_lco_ranges(s, run, br.branch);
  // The branch's largest stable LCO is the answer unless the sweep found a
  // larger one (on another branch than the one continued).
  if (br.largest && worst) {
    const auto w = static_cast<std::size_t>(worst->lco.watched_dof);
    if (worst->lco.watched_dof != br.largest->watched_dof ||
        worst->lco.dof[w].amplitude > br.largest->dof[w].amplitude * (1 + 1e-3)) {
      const bool budget = br.branch.stop_reason.find("budget") != std::string::npos;
      s.rows.text("lco_largest_source", "Largest LCO taken from", "the sweep", "sweep.h5",
                  budget ? "the sweep found a larger LCO than any stable orbit on the continued branch, which "
                           "ended at its point budget before reaching it"
                         : "the sweep found a larger LCO than any stable orbit on the continued branch: "
                           "another branch exists");
      br.largest.reset();
    }
  }
  if (br.largest) {
    largest_orbit_rows(s, br, where);
    lco_orbit_history_stage(s, br, where, run.key);
    return;
  }
  if (!worst) {
    s.rows.text("lco_largest", "Largest LCO " + where, "no LCO", "sweep.h5: " + run.tables.field("response_class").name);
    s.part("lco-history", false, "skipped: no LCO " + where);
    return;
  }
  largest_lco_rows(s, *worst, run.tables, where, run.per);
  if (worst->lco.frequency > 0) lco_history_stage(s, *worst, where, run);
}

// The preload (preload.hpp): whether the case's steady condition holds the
// surface against a stop at the case airspeed (rows citing flutter.h5's
// /parameters/equilibrium and preload.h5), and the LCO map against the
// preload level at that airspeed (preload.h5: the sweep's map of the
// preload key, with the hold and the answer as root attributes).
void preload_stage(Study& s) {
  const Case& c = s.c;
  const PreloadHold h = preload_hold(c);
  if (!h.applicable) {
    s.part("preload", false, fmt::format("skipped: {}", h.reason));
    return;
  }
  const int j = h.spring;
  const bool angle = j != kPlunge;
  const std::string dof = kDofNames[j];
  const std::string force_units = angle ? "N m m-1" : "N m-1";
  const std::string at_speed = fmt::format("at the case airspeed {}", s.v(c.model.flow.airspeed));
  // The hold at the case's condition.
  std::string held;
  if (!h.equilibrium_found)
    held = "no static equilibrium: nothing holds the surface";
  else if (h.held)
    held = fmt::format("yes: against the {}, and the linearisation there (the gap closed) is stable {}: no "
                       "freeplay LCO from small disturbances",
                       h.region, at_speed);
  else if (h.against_stop)
    held = fmt::format("against the {}, but the linearisation there (the gap closed) is unstable {}: it "
                       "flutters on the stop",
                       h.region, at_speed);
  else
    held = fmt::format("no: the {} rests in its {} {}", dof, h.region.empty() ? "gap" : h.region, at_speed);
  if (h.steady_condition && h.equilibrium_found) {
    s.rows.add("preload_equilibrium", fmt::format("{} at the static equilibrium of the steady condition", dof),
               angle ? h.displacement * kDegPerRad : h.displacement, angle ? "degree" : "m",
               fmt::format("flutter.h5: /parameters/equilibrium/{}{}", dof, angle ? " (rad)" : ""), h.region);
    s.rows.add("preload_contact_load",
               h.against_stop ? "Contact load against the stop" : fmt::format("{} spring force at the equilibrium", dof),
               h.spring_force, force_units, fmt::format("flutter.h5: /parameters/equilibrium/{}_spring_force", dof),
               h.against_stop ? h.region : "in the gap: no contact");
  }
  s.rows.text("preload_held", "Held against a stop by the case's condition",
              h.steady_condition ? held : "no [steady] condition: nothing preloads the surface",
              "preload.h5@held_against_stop");

  // The map against the preload level.
  double duration = 0;
  std::string note;
  const SweepRequest base = derived_sweep_request(s, j, " (preload map)", duration, note);
  const Case base_case = parse_case(base.case_text, base.case_path, base.overrides);
  s.say("preload: hold and LCO map against the preload level");
  const PreloadMap m = preload_map(base_case, base, 11, s.cancel);
  if (!m.available) {
    s.part("preload", true, fmt::format("hold assessed; the map against the preload level was not made: {}", m.reason));
    s.rows.text("preload_lco_limit", "Preload above which freeplay LCO disappears", "not assessed", "", m.reason);
    return;
  }
  {
    Hdf5Document doc(s.path("preload.h5"));
    write_sweep_tables(doc, base_case, m.request, m.points, nullptr);
    doc.text_attribute("", "preload_key", m.key);
    doc.text_attribute("", "preload_answer", m.verdict);
    doc.number_attribute("", "held_against_stop", h.held ? 1.0 : 0.0, "1");
    doc.number_attribute("", "against_stop", h.against_stop ? 1.0 : 0.0, "1");
    doc.number_attribute("", "case_spring_force", h.spring_force, force_units);
    doc.number_attribute("", "contact_level", m.direction * m.contact_level, m.units);
    if (std::isfinite(m.hold_off_level)) {
      doc.number_attribute("", "hold_off_level", m.direction * m.hold_off_level, m.units);
      doc.number_attribute("", "oscillating_spring_force", m.oscillating_force, force_units);
    }
    if (m.outcome == PreloadOutcome::kBracketed) {
      doc.number_attribute("", "lco_disappears_above", m.bracket_low, m.units);
      doc.number_attribute("", "lco_absent_from", m.bracket_high, m.units);
    }
    doc.commit();
  }
  s.R.hdf5_files.push_back("preload.h5");
  s.part("preload", true,
         fmt::format("{} levels of {} from 0 to {:.4g} {} {}, up and down with continuation; runs of up to "
                     "{:.4g} s; {}",
                     m.levels.size(), m.key, m.levels.back(), m.units, at_speed, duration, note),
         {"preload.h5"});
  const std::string cls = fmt::format("preload.h5: response_class over {}", sweep_axis_name(m.key));
  s.rows.text("preload_lco_limit", "Preload above which freeplay LCO disappears", m.verdict, cls,
              fmt::format("the level replaces the case's own {} {}; a preload that holds the surface in this "
                          "model is no freeplay clearance (trim loads change with manoeuvres, gusts and wear)",
                          m.key, at_speed));
  s.rows.add("preload_contact_level", "Preload that brings the surface onto a stop", m.direction * m.contact_level,
             m.units, "preload.h5@contact_level", "static equilibrium (equilibrium.hpp)");
  if (std::isfinite(m.hold_off_level))
    s.rows.add("preload_hold_off", "Hold-off estimate: contact load reaches the unloaded LCO's oscillating spring force",
               m.direction * m.hold_off_level, m.units, "preload.h5@hold_off_level",
               fmt::format("common practice, no source; oscillating spring force {:.4g} {}", m.oscillating_force,
                           force_units));
}

// The design-gust gradient sweep, from rest.
void gust_stage(Study& s) {
  const Case& c = s.c;
  if (!has_one_minus_cosine(c)) {
    s.part("gust-sweep", false,
           c.model.gusts.empty() ? "skipped: the case has no [[gust]]"
                                 : "skipped: the case has no one-minus-cosine gust to size over H");
    return;
  }
  s.say("design gust: 1-cos gradient sweep");
  // From rest, so the peaks are the gust's and not the release transient's.
  Derivation gv;
  gv.remove_gusts = false;
  gv.at_rest = true;
  const Case gc = parse_case(derived_case_text(c, gv), c.path + " (design gust, from rest)", c.overrides);
  const GustSweep gs = gust_gradient_sweep(gc, default_gradients(), s.cancel);
  write_gust_sweep_file(s.path("gust.h5"), gc, gs);
  s.R.hdf5_files.push_back("gust.h5");
  s.part("gust-sweep", true,
         fmt::format("{} gust gradients H from {:.4g} to {:.4g} m{}, from rest", gs.points.size(),
                     gs.points.front().gradient, gs.points.back().gradient,
                     c.altitude ? fmt::format(" at {:.4g} m (ISA)", *c.altitude) : std::string()),
         {"gust.h5"});
  // The rule that sized each gust, as the gust report states it
  // (regulation-sized gusts only).
  const auto& profiles = gc.model.gusts.profiles();
  for (std::size_t i = 0; i < profiles.size(); ++i) {
    const GustProfile& p = profiles[i];
    if (p.rule == GustRule::kNone) continue;
    bool vd = false;
    double altitude = 0;
    if (p.rule == GustRule::kCs25 && gc.gust_regulation) {
      vd = gc.gust_regulation->at_dive_speed;
      altitude = gc.gust_regulation->altitude;
    } else if (p.rule == GustRule::kCs23 && gc.small_aircraft_gust) {
      vd = gc.small_aircraft_gust->at_dive_speed;
      altitude = gc.small_aircraft_gust->altitude;
    }
    const std::string where = fmt::format("at {}, altitude {:.6g} m, {:.4g} m s-1 EAS, H = {:.4g} m",
                                          vd ? "V_D" : "V_C", altitude, p.amplitude / p.eas_to_tas, p.gradient);
    const std::string id = profiles.size() > 1 ? fmt::format("gust_{}_design_velocity", i + 1)
                                               : std::string("gust_design_velocity");
    const std::string source = fmt::format("gust.h5: /parameters/gusts/gust_{}_amplitude", i + 1);
    if (p.rule == GustRule::kCs25)
      s.speed_row(id, "Design gust velocity U_ds (design = cs-25, CS-25.341(a)) at the case's H", p.amplitude, source,
                  where + "; re-sized at every H of the sweep");
    else
      s.speed_row(id, "Derived gust velocity U_de (design = cs-23, small-aircraft rule)", p.amplitude, source,
                  where + " (12.5 mean chords); kept at every H of the sweep. Values recalled from memory: check "
                          "them against the applicable rule's text; gust alleviation factor not applied (Kussner "
                          "aerodynamics in time replace it)");
  }
  for (const auto& cr : gs.critical) {
    if (cr.channel != "plunge" && cr.channel != "pitch" && cr.channel != "flap" && cr.channel != "lift" &&
        cr.channel != "pitching_moment" && cr.channel != "hinge_moment")
      continue;
    const bool angle = cr.channel == "pitch" || cr.channel == "flap";
    s.rows.add("gust_peak_" + cr.channel, fmt::format("Design gust: peak {}", cr.channel),
               angle ? cr.value * kDegPerRad : cr.value, angle ? "degree" : cr.units,
               fmt::format("gust.h5: /peaks@critical_value_{}{}", cr.channel, angle ? " (rad in the file)" : ""),
               fmt::format("critical H = {}", s.pr.length(cr.gradient)));
  }
}

// The case as given: initial conditions and gusts (turbulence RMS rows).
void response_stage(Study& s) {
  const Case& c = s.c;
  s.say("response to the case as given");
  const AeroelasticModel model(c.model);
  Hdf5TimeHistoryWriter writer(s.path("response.h5"));
  const SimulationSummary rs = simulate(c, model, writer, s.cancel);
  // (As lco_history_stage: a finished run is listed even when the interrupt
  // came after its last step; a run cut short is response.incomplete.h5.)
  if (rs.completed) s.R.hdf5_files.push_back("response.h5");
  stop_if_cancelled(s.cancel);
  s.part("response", rs.completed,
         fmt::format("{:.4g} s from the case's initial conditions{}", rs.end_time,
                     c.model.gusts.empty() ? std::string(", no gusts")
                                           : fmt::format(" with its {} gust input(s)", c.model.gusts.profiles().size())),
         {"response.h5"});
  if (!has_turbulence(c)) {
    s.part("turbulence", false, "skipped: the case asks for no turbulence");
    return;
  }
  for (const auto& e : rs.extremes)
    if (e.channel == "lift" || e.channel == "pitch" || e.channel == "flap" || e.channel == "hinge_moment") {
      const bool angle = e.channel == "pitch" || e.channel == "flap";
      s.rows.add("turbulence_rms_" + e.channel, fmt::format("Turbulence: RMS {}", e.channel),
                 angle ? e.rms * kDegPerRad : e.rms, angle ? "degree" : e.units,
                 fmt::format("response.h5: {} (RMS of the samples){}", e.channel, angle ? " (rad in the file)" : ""));
    }
}

// What summary.json holds.
nlohmann::json summary_json(const Case& c, const StudyResult& R) {
  nlohmann::json j = report_header(c, "study");
  j["directory"] = R.directory;
  for (const auto& r : R.rows) j["summary"].push_back(row_json(r));
  for (const auto& p : R.parts)
    j["parts"].push_back({{"name", p.name}, {"done", p.done}, {"detail", p.detail}, {"files", p.files}});
  j["hdf5_files"] = R.hdf5_files;
  j["completed"] = R.completed;
  j["started_utc"] = R.started_utc;
  j["inputs"] = nlohmann::json::array();
  for (const auto& in : R.inputs) j["inputs"].push_back({{"role", in.role}, {"path", in.path}, {"sha256", in.sha256}});
  return j;
}

}  // namespace

StudyResult run_study(const Case& c, const std::string& directory, const StudyOptions& o,
                      const std::atomic<bool>* cancel,
                      const std::function<void(const std::string&)>& progress) {
  {
    std::error_code ec;
    fs::create_directories(directory, ec);
    if (ec || !fs::is_directory(directory))
      throw OutputError(directory, fmt::format("cannot create the study directory '{}': {}", directory,
                                               ec ? ec.message() : "not a directory"));
  }
  Study s(c, directory, o, cancel, progress);
  s.R.started_utc = fmt::format("{:%Y-%m-%dT%H:%M:%SZ}", fmt::gmtime(std::time(nullptr)));
  s.R.inputs.push_back({"case", c.path, sha256_hex(c.text)});  // the text as read: the file's bytes
  for (const auto& f : c.input_files) s.R.inputs.push_back({"recorded gust", f, sha256_hex_of_file(f).value_or("")});
  try {
    check_stage(s);
    stop_if_cancelled(cancel);
    flutter_stage(s);
    stop_if_cancelled(cancel);
    lco_stages(s);
    stop_if_cancelled(cancel);
    preload_stage(s);
    stop_if_cancelled(cancel);
    gust_stage(s);
    stop_if_cancelled(cancel);
    response_stage(s);
    s.R.completed = true;
  } catch (const Cancelled&) {
    s.R.completed = false;
    s.part("interrupted", false, "stopped on request: the stages after the last one listed were not run");
  }
  s.R.summary = summary_json(c, s.R);
  write_file_atomically(s.path("summary.json"), s.R.summary.dump(2) + "\n");
  return std::move(s.R);
}

nlohmann::json study_json(const StudyResult& r, const std::vector<StudyFigure>& figures,
                          const std::vector<std::string>& notes, const std::string& html_path) {
  nlohmann::json j = r.summary;
  j["report"] = html_path;
  j["figures"] = nlohmann::json::array();
  for (const auto& f : figures) j["figures"].push_back(f.path);
  j["notes"] = notes;
  return j;
}

std::string study_text(const Case& c, const StudyResult& r, const std::vector<std::string>& notes,
                       const std::string& html_path) {
  std::string t = fmt::format("aerosect study of {}\n\n", c.path);
  for (const auto& row : r.rows)
    t += fmt::format("  {:<70} {:>14} {:<8} {}\n", row.quantity, row.value, row.units, row.note);
  t += "\n";
  for (const auto& p : r.parts) t += fmt::format("  {:<12} {}\n", p.name, p.done ? "done" : p.detail);
  for (const auto& n : notes) t += "  " + n + "\n";
  t += fmt::format("\n{}\n\nreport: {}\n", kSafetyCaution, html_path);
  return t;
}

}  // namespace aerosect
