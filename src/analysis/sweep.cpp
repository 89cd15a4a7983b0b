#include "aerosect/analysis/sweep.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <numbers>
#include <tuple>

#include <fmt/format.h>

#include "aerosect/analysis/flutter.hpp"
#include "aerosect/analysis/report.hpp"
#include "aerosect/analysis/simulate.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/hdf5_document.hpp"
#include "aerosect/units.hpp"
#include "aerosect/version.hpp"

namespace aerosect {

namespace {

using Key = std::tuple<int, int, int>;  // direction, j, i

struct Chain {
  int direction, j;
};

// Runs one point; nullopt when `cancel` stopped it (an unfinished point is
// neither reported nor kept: a resumed sweep runs it again).
std::optional<SweepPoint> run_point(const SweepRequest& r, int d, int i, int j,
                                    const SweepPoint* previous, const std::atomic<bool>* cancel) {
  const SweepOptions& o = r.options;
  SweepPoint p;
  p.direction = d;
  p.i = i;
  p.j = j;
  p.value1 = o.axes[0].values[static_cast<std::size_t>(i)];
  p.value2 = o.axes.size() > 1 ? o.axes[1].values[static_cast<std::size_t>(j)] : 0.0;
  std::vector<std::string> ov = r.overrides;
  ov.push_back(fmt::format("{}={:.17g}", o.axes[0].key, p.value1));
  if (o.axes.size() > 1) ov.push_back(fmt::format("{}={:.17g}", o.axes[1].key, p.value2));
  const Case c = parse_case(r.case_text, r.case_path, ov);
  const AeroelasticModel model(c.model);
  RunState run;
  // A divergent or failed point's final state is no start for the next.
  const bool carry = o.continuation && previous && previous->ok &&
                     previous->lco.response != ResponseClass::kDivergent &&
                     static_cast<int>(previous->final_state.size()) == model.state_size() &&
                     static_cast<int>(previous->final_regions.size()) == model.n_dof();
  if (carry) {
    run.x = previous->final_state;
    run.regions = previous->final_regions;
  } else {
    run.x = model.initial_state(c.simulation.initial_displacement, c.simulation.initial_velocity,
                                c.simulation.steady_lag_states);
    run.regions = model.regions_of(run.x.data());
  }
  LcoTracker tracker(model, o.lco);
  try {
    const IntegrationResult res =
        integrate(model, run, c.simulation.duration, c.simulation.integrator,
                  OutputSchedule::none(),
                  {{}, [&tracker](int dof, double t, const std::vector<double>& x) {
                     return tracker.on_peak(dof, t, x);
                   }, cancel});
    if (res.reason == StopReason::kCancelled) return std::nullopt;
    p.lco = tracker.result();
    // A settled cycle: one more period, sampled, for RMS and harmonics.
    if (p.lco.response == ResponseClass::kPeriodic && p.lco.frequency > 0) {
      p.cycle = sample_settled_cycle(model, run, 1.0 / p.lco.frequency, c.simulation.integrator,
                                     o.cycle, p.lco.watched_dof);
      if (!o.traces)
        for (auto& t : p.cycle.trace) t.clear();
    }
  } catch (const NumericalError& e) {
    p.ok = false;
    p.error = e.what();
    p.lco = tracker.result();
    p.cycle = {};
  }
  p.end_time = run.time;
  p.steps = run.steps;
  p.switches = run.switches;
  p.final_state = run.x;
  p.final_regions = run.regions;
  // The next point starts from this one's state at t = 0 of its own run.
  return p;
}

}  // namespace

void check_swept_values(const SweepRequest& r) {
  for (const auto& ax : r.options.axes)
    for (double v : ax.values) {
      std::vector<std::string> o2 = r.overrides;
      o2.push_back(fmt::format("{}={:.17g}", ax.key, v));
      (void)parse_case(r.case_text, r.case_path, o2);
    }
}

std::vector<SweepPoint> run_sweep(const SweepRequest& r, const std::vector<SweepPoint>& done,
                                  const std::function<void(const SweepPoint&)>& on_point,
                                  const std::atomic<bool>* cancel) {
  const SweepOptions& o = r.options;
  AEROSECT_CHECK(!o.axes.empty() && o.axes.size() <= 2);
  const int n1 = static_cast<int>(o.axes[0].values.size());
  const int n2 = o.axes.size() > 1 ? static_cast<int>(o.axes[1].values.size()) : 1;
  std::vector<Chain> chains;
  for (int d : {0, 1}) {
    if ((d == 0 && !o.up) || (d == 1 && !o.down)) continue;
    for (int j = 0; j < n2; ++j) chains.push_back({d, j});
  }
  std::vector<Chain> mine;
  for (std::size_t c = 0; c < chains.size(); ++c)
    if (static_cast<int>(c % static_cast<std::size_t>(o.shard_count)) == o.shard_index - 1)
      mine.push_back(chains[c]);
  std::map<Key, SweepPoint> known;
  for (const auto& p : done) known[{p.direction, p.j, p.i}] = p;

  std::vector<std::vector<SweepPoint>> results(mine.size());
  // Validate the swept values once, up front (bad input is an error before any work).
  check_swept_values(r);
  std::exception_ptr failure;
#pragma omp parallel for schedule(dynamic, 1) num_threads(std::max(1, o.jobs))
  for (std::size_t c = 0; c < mine.size(); ++c) {
    try {
      const Chain ch = mine[c];
      const SweepPoint* previous = nullptr;
      std::vector<SweepPoint>& out = results[c];
      out.reserve(static_cast<std::size_t>(n1));
      for (int k = 0; k < n1; ++k) {
        if (cancel && cancel->load()) break;
        const int i = ch.direction == 0 ? k : n1 - 1 - k;
        auto it = known.find({ch.direction, ch.j, i});
        if (it != known.end()) {
          out.push_back(it->second);
        } else {
          std::optional<SweepPoint> p = run_point(r, ch.direction, i, ch.j, previous, cancel);
          if (!p) break;
          out.push_back(std::move(*p));
          if (on_point) on_point(out.back());
        }
        previous = &out.back();
      }
    } catch (...) {
#pragma omp critical
      failure = std::current_exception();
    }
  }
  if (failure) std::rethrow_exception(failure);
  std::vector<SweepPoint> all;
  for (auto& v : results)
    for (auto& p : v) all.push_back(std::move(p));
  std::sort(all.begin(), all.end(), [](const SweepPoint& a, const SweepPoint& b) {
    return std::tie(a.direction, a.j, a.i) < std::tie(b.direction, b.j, b.i);
  });
  return all;
}

nlohmann::json request_json(const SweepRequest& r) {
  nlohmann::json id;
  id["case_text"] = r.case_text;
  id["case_path"] = r.case_path;
  id["overrides"] = r.overrides;
  for (const auto& ax : r.options.axes) id["axes"].push_back({ax.key, ax.values});
  id["up"] = r.options.up;
  id["down"] = r.options.down;
  id["continuation"] = r.options.continuation;
  id["shard"] = {r.options.shard_index, r.options.shard_count};
  id["traces"] = r.options.traces;
  id["cycle_samples"] = r.options.cycle.samples;
  id["harmonics"] = r.options.cycle.harmonics;
  return id;
}

SweepRequest request_from_json(const nlohmann::json& j) {
  SweepRequest r;
  r.case_text = j.at("case_text");
  r.case_path = j.at("case_path");
  r.overrides = j.at("overrides").get<std::vector<std::string>>();
  for (const auto& a : j.at("axes")) r.options.axes.push_back({a.at(0), a.at(1).get<std::vector<double>>()});
  r.options.up = j.at("up");
  r.options.down = j.at("down");
  r.options.continuation = j.at("continuation");
  r.options.shard_index = j.at("shard").at(0);
  r.options.shard_count = j.at("shard").at(1);
  r.options.traces = j.value("traces", false);
  r.options.cycle.samples = j.value("cycle_samples", CycleSettings{}.samples);
  r.options.cycle.harmonics = j.value("harmonics", CycleSettings{}.harmonics);
  return r;
}

nlohmann::json point_json(const SweepPoint& p) {
  nlohmann::json j;
  j["direction"] = p.direction;
  j["i"] = p.i;
  j["j"] = p.j;
  j["value1"] = p.value1;
  j["value2"] = p.value2;
  j["ok"] = p.ok;
  j["error"] = p.error;
  j["class"] = to_string(p.lco.response);
  j["class_code"] = static_cast<int>(p.lco.response);
  j["watched_dof"] = p.lco.watched_dof;
  j["cycles"] = p.lco.cycles;
  j["frequency_hz"] = p.lco.frequency;
  j["spread"] = p.lco.spread;
  j["stopped_early"] = p.lco.stopped_early;
  for (int k = 0; k < 3; ++k)
    j["dof"].push_back({p.lco.dof[k].amplitude, p.lco.dof[k].max, p.lco.dof[k].min});
  if (p.cycle.samples > 0) {
    nlohmann::json cj;
    cj["samples"] = p.cycle.samples;
    cj["period_s"] = p.cycle.period;
    for (int k = 0; k < 3; ++k) {
      const DofHarmonics& h = p.cycle.dof[k];
      cj["dof"].push_back({{"mean", h.mean}, {"rms", h.rms}, {"rms_about_mean", h.rms_about_mean},
                           {"harmonics", h.harmonics}, {"thd", h.thd}});
    }
    if (!p.cycle.trace[0].empty())
      for (int k = 0; k < 3; ++k) cj["trace"].push_back(p.cycle.trace[k]);
    j["cycle"] = cj;
  } else {
    j["cycle"] = nullptr;
  }
  j["end_time"] = p.end_time;
  j["steps"] = p.steps;
  j["switches"] = p.switches;
  j["final_state"] = p.final_state;
  j["final_regions"] = p.final_regions;
  return j;
}

SweepPoint point_from_json(const nlohmann::json& j) {
  SweepPoint p;
  p.direction = j.at("direction");
  p.i = j.at("i");
  p.j = j.at("j");
  p.value1 = j.at("value1");
  p.value2 = j.at("value2");
  p.ok = j.at("ok");
  p.error = j.at("error");
  p.lco.response = static_cast<ResponseClass>(j.at("class_code").get<int>());
  p.lco.watched_dof = j.at("watched_dof");
  p.lco.cycles = j.at("cycles");
  p.lco.frequency = j.at("frequency_hz");
  p.lco.spread = j.at("spread");
  p.lco.stopped_early = j.at("stopped_early");
  for (int k = 0; k < 3; ++k) {
    const auto& d = j.at("dof").at(static_cast<std::size_t>(k));
    p.lco.dof[k] = {d.at(0), d.at(1), d.at(2)};
  }
  if (j.contains("cycle") && !j.at("cycle").is_null()) {
    const auto& cj = j.at("cycle");
    p.cycle.samples = cj.at("samples");
    p.cycle.period = cj.at("period_s");
    for (int k = 0; k < 3; ++k) {
      const auto& d = cj.at("dof").at(static_cast<std::size_t>(k));
      DofHarmonics& h = p.cycle.dof[k];
      h.mean = d.at("mean");
      h.rms = d.at("rms");
      h.rms_about_mean = d.at("rms_about_mean");
      h.harmonics = d.at("harmonics").get<std::vector<double>>();
      h.thd = d.at("thd");
    }
    if (cj.contains("trace"))
      for (int k = 0; k < 3; ++k)
        p.cycle.trace[k] = cj.at("trace").at(static_cast<std::size_t>(k)).get<std::vector<double>>();
  }
  p.end_time = j.at("end_time");
  p.steps = j.at("steps");
  p.switches = j.at("switches");
  p.final_state = j.at("final_state").get<std::vector<double>>();
  p.final_regions = j.at("final_regions").get<std::vector<int>>();
  return p;
}

JournalHead sweep_journal_head(const SweepRequest& r) {
  JournalHead h;
  h.kind = "sweep";
  h.format = 2;
  h.readable = {1};  // format 1 had the request as the head line; the point records are the same
  h.identity = request_json(r);
  return h;
}

std::vector<SweepPoint> points_from_journal(const Journal& journal, const SweepRequest& r) {
  (void)r;
  std::vector<SweepPoint> done;
  for (const auto& rec : journal.records()) {
    try {
      done.push_back(point_from_json(rec.value));
    } catch (const nlohmann::json::exception& e) {
      throw InputError({journal.path(), rec.line, 0}, "", "",
                       std::string("is not a sweep point record: ") + e.what(),
                       "the lines aerosect sweep wrote (remove the journal to start the sweep again)");
    }
  }
  return done;
}

std::size_t sweep_point_count(const SweepRequest& r) {
  const SweepOptions& o = r.options;
  const std::size_t n1 = o.axes.empty() ? 0 : o.axes[0].values.size();
  const std::size_t n2 = o.axes.size() > 1 ? o.axes[1].values.size() : 1;
  std::size_t chains = 0, mine = 0;
  for (int d : {0, 1}) {
    if ((d == 0 && !o.up) || (d == 1 && !o.down)) continue;
    for (std::size_t j = 0; j < n2; ++j, ++chains)
      if (static_cast<int>(chains % static_cast<std::size_t>(o.shard_count)) == o.shard_index - 1) ++mine;
  }
  return mine * n1;
}

SweepSummary summarize(const std::vector<SweepPoint>& points, int jj) {
  SweepSummary s;
  std::vector<const SweepPoint*> up, down;
  for (const auto& p : points) {
    if (p.j != jj) continue;
    (p.direction == 0 ? up : down).push_back(&p);
    const double a = p.lco.dof[static_cast<std::size_t>(p.lco.watched_dof)].amplitude;
    if (p.lco.response == ResponseClass::kPeriodic && (!s.largest_amplitude || a > *s.largest_amplitude)) {
      s.largest_amplitude = a;
      s.largest_at = p.value1;
      s.largest_direction = p.direction;
    }
  }
  std::sort(up.begin(), up.end(), [](auto a, auto b) { return a->i < b->i; });
  std::sort(down.begin(), down.end(), [](auto a, auto b) { return a->i < b->i; });
  for (const SweepPoint* p : up)
    if (p->lco.response == ResponseClass::kPeriodic) {
      s.onset_up = p->value1;
      break;
    }
  for (const SweepPoint* p : down)
    if (p->lco.response == ResponseClass::kPeriodic) {
      s.disappearance_down = p->value1;
      break;
    }
  return s;
}

nlohmann::json sweep_json(const Case& c, const SweepRequest& r, const std::vector<SweepPoint>& p,
                          const std::string& output) {
  nlohmann::json j = report_header(c, "sweep");
  j["output"] = output;
  for (const auto& ax : r.options.axes)
    j["vary"].push_back({{"key", ax.key}, {"from", ax.values.front()}, {"to", ax.values.back()},
                         {"count", ax.values.size()}});
  j["continuation"] = r.options.continuation;
  j["points_computed"] = p.size();
  const SweepSummary s = summarize(p);
  auto opt = [](const std::optional<double>& v) { return v ? nlohmann::json(*v) : nlohmann::json(nullptr); };
  j["lco_onset_up"] = opt(s.onset_up);
  j["lco_disappearance_down"] = opt(s.disappearance_down);
  if (s.onset_up && s.disappearance_down && *s.disappearance_down < *s.onset_up)
    j["hysteresis_band"] = {*s.disappearance_down, *s.onset_up};
  else
    j["hysteresis_band"] = nullptr;
  j["largest_amplitude"] = opt(s.largest_amplitude);
  j["largest_amplitude_at"] = s.largest_amplitude ? nlohmann::json(s.largest_at) : nlohmann::json(nullptr);
  j["points"] = nlohmann::json::array();
  for (const auto& q : p) {
    nlohmann::json pj = point_json(q);
    pj.erase("final_state");
    pj.erase("final_regions");
    if (pj["cycle"].is_object()) pj["cycle"].erase("trace");  // in the file, not the summary
    j["points"].push_back(pj);
  }
  return j;
}

std::string sweep_text(const Case& c, const SweepRequest& r, const std::vector<SweepPoint>& p,
                       const std::string& output) {
  std::string t = fmt::format("aerosect {} sweep: {}\n", kVersion, c.path);
  if (!c.title.empty()) t += fmt::format("  {}\n", c.title);
  for (const auto& ax : r.options.axes)
    t += fmt::format("  {} from {:.6g} to {:.6g} ({} values)\n", ax.key, ax.values.front(),
                     ax.values.back(), ax.values.size());
  t += fmt::format("  {}; {} points\n\n", r.options.continuation ? "continuation" : "fresh starts",
                   p.size());
  t += fmt::format("  {:>4} {:>14} {:>13} {:>12} {:>10} {:>7}\n", "dir", r.options.axes[0].key, "class",
                   "amplitude", "freq Hz", "cycles");
  for (const auto& q : p) {
    const int w = q.lco.watched_dof;
    const bool angle = w != kPlunge;
    t += fmt::format("  {:>4} {:>14.6g} {:>13} {:>9.5g} {:<2} {:>10.4g} {:>7}{}\n",
                     q.direction == 0 ? "up" : "down", q.value1,
                     q.ok ? to_string(q.lco.response) : "failed",
                     q.lco.dof[static_cast<std::size_t>(w)].amplitude * (angle ? kDegPerRad : 1.0),
                     angle ? "°" : "m", q.lco.frequency, q.lco.cycles,
                     q.ok ? "" : "  " + q.error.substr(0, 60));
  }
  const SweepSummary s = summarize(p);
  t += "\n";
  t += s.onset_up ? fmt::format("  LCO onset going up: {:.6g}\n", *s.onset_up) : "  no LCO going up\n";
  if (r.options.down)
    t += s.disappearance_down ? fmt::format("  LCO persists going down to: {:.6g}\n", *s.disappearance_down)
                              : "  no LCO going down\n";
  if (s.onset_up && s.disappearance_down && *s.disappearance_down < *s.onset_up)
    t += fmt::format("  hysteresis band: {:.6g} .. {:.6g}\n", *s.disappearance_down, *s.onset_up);
  if (s.largest_amplitude)
    t += fmt::format("  largest LCO amplitude of the {}: {:.5g} at {:.6g}\n",
                     kDofNames[p.front().lco.watched_dof], *s.largest_amplitude, s.largest_at);
  if (!output.empty()) t += fmt::format("\nwritten to {}\n", output);
  t += "\n";
  t += kSafetyCaution;
  t += "\n";
  return t;
}

void write_sweep_file(const std::string& path, const Case& c, const SweepRequest& r,
                      const std::vector<SweepPoint>& points, const std::atomic<bool>* cancel) {
  Hdf5Document doc(path);
  RunMetadata meta = case_metadata(c, "sweep");
  meta.text_attributes.push_back({"continuation", r.options.continuation ? "continue" : "fresh"});
  doc.metadata(meta);
  const auto& o = r.options;
  const std::size_t n1 = o.axes[0].values.size();
  const std::size_t n2 = o.axes.size() > 1 ? o.axes[1].values.size() : 1;
  const std::vector<std::int32_t> dirs = {0, 1};
  doc.integer_axis("direction", dirs, "sweep direction: 0 up (ascending), 1 down");
  doc.text_attribute("direction", "names", "up,down");
  doc.axis("value_1", o.axes[0].values, "1", "swept value of " + o.axes[0].key);
  doc.text_attribute("value_1", "key", o.axes[0].key);
  std::vector<std::string> dims = {"direction", "value_1"};
  if (o.axes.size() > 1) {
    doc.axis("value_2", o.axes[1].values, "1", "swept value of " + o.axes[1].key);
    doc.text_attribute("value_2", "key", o.axes[1].key);
    dims.push_back("value_2");
  }
  const double nan = std::numeric_limits<double>::quiet_NaN();
  const std::size_t N = 2 * n1 * n2;
  auto at = [&](const SweepPoint& p) {
    return (static_cast<std::size_t>(p.direction) * n1 + static_cast<std::size_t>(p.i)) * n2 +
           static_cast<std::size_t>(p.j);
  };
  auto table = [&](const std::string& name, auto&& f, const std::string& units, const std::string& ln) {
    std::vector<double> v(N, nan);
    for (const auto& p : points) v[at(p)] = f(p);
    doc.dataset(name, dims, v, units, ln);
  };
  table("response_class", [](const SweepPoint& p) { return p.ok ? static_cast<double>(p.lco.response) : 4.0; },
        "1", "0 decayed, 1 periodic LCO, 2 non-periodic, 3 divergent, 4 failed (NaN: not run)");
  table("frequency", [](const SweepPoint& p) { return p.lco.frequency; }, "Hz", "LCO frequency");
  table("cycles", [](const SweepPoint& p) { return static_cast<double>(p.lco.cycles); }, "1",
        "complete cycles of the watched DOF");
  table("spread", [](const SweepPoint& p) { return p.lco.spread; }, "1",
        "relative spread of the cycle amplitude over the last cycles");
  table("end_time", [](const SweepPoint& p) { return p.end_time; }, "s", "time the run ended");
  table("switches", [](const SweepPoint& p) { return static_cast<double>(p.switches); }, "1",
        "spring switching points crossed");
  for (int k = 0; k < c.model.section.dof; ++k) {
    const std::string u = k == kPlunge ? "m" : "rad";
    const std::string n = kDofNames[k];
    table(n + "_amplitude", [k](const SweepPoint& p) { return p.lco.dof[k].amplitude; }, u,
          n + " half peak-to-peak amplitude over the last cycles");
    table(n + "_max", [k](const SweepPoint& p) { return p.lco.dof[k].max; }, u, n + " largest value");
    table(n + "_min", [k](const SweepPoint& p) { return p.lco.dof[k].min; }, u, n + " smallest value");
  }
  // Content of the settled cycle (periodic points; NaN elsewhere).
  const int nh = o.cycle.harmonics, ns = o.cycle.samples;
  auto cycle_table = [&](const std::string& name, const std::string& axis, int width, auto&& f,
                         const std::string& units, const std::string& ln) {
    std::vector<double> v(N * static_cast<std::size_t>(width), nan);
    for (const auto& p : points)
      if (p.cycle.samples > 0)
        for (int q = 0; q < width; ++q) v[at(p) * static_cast<std::size_t>(width) + q] = f(p, q);
    std::vector<std::string> d = dims;
    if (!axis.empty()) d.push_back(axis);
    doc.dataset(name, d, v, units, ln);
  };
  std::vector<std::int32_t> harmonic(static_cast<std::size_t>(nh));
  for (int q = 0; q < nh; ++q) harmonic[static_cast<std::size_t>(q)] = q + 1;
  doc.integer_axis("harmonic", harmonic, "harmonic number k of the LCO frequency");
  if (o.traces) {
    std::vector<double> phase(static_cast<std::size_t>(ns));
    for (int q = 0; q < ns; ++q) phase[static_cast<std::size_t>(q)] = static_cast<double>(q) / ns;
    doc.axis("cycle_phase", phase, "1",
             "time since the phase origin (the watched DOF's largest sample) over the LCO period");
  }
  for (int k = 0; k < c.model.section.dof; ++k) {
    const std::string u = k == kPlunge ? "m" : "rad";
    const std::string n = kDofNames[k];
    cycle_table(n + "_mean", "", 1, [k](const SweepPoint& p, int) { return p.cycle.dof[k].mean; }, u,
                n + " mean over one settled LCO period");
    cycle_table(n + "_rms", "", 1, [k](const SweepPoint& p, int) { return p.cycle.dof[k].rms; }, u,
                n + " RMS about zero over one settled LCO period");
    cycle_table(n + "_rms_about_mean", "", 1,
                [k](const SweepPoint& p, int) { return p.cycle.dof[k].rms_about_mean; }, u,
                n + " RMS about the mean over one settled LCO period");
    cycle_table(n + "_harmonics", "harmonic", nh,
                [k](const SweepPoint& p, int q) { return p.cycle.dof[k].harmonics[static_cast<std::size_t>(q)]; },
                u, n + " amplitude of harmonic k of the LCO (one-period DFT)");
    cycle_table(n + "_thd", "", 1, [k](const SweepPoint& p, int) { return p.cycle.dof[k].thd; }, "1",
                n + " total harmonic distortion relative to the fundamental");
    if (o.traces)
      cycle_table(n + "_cycle", "cycle_phase", ns,
                  [k](const SweepPoint& p, int q) { return p.cycle.trace[k][static_cast<std::size_t>(q)]; }, u,
                  n + " over one settled LCO period from the phase origin");
  }
  doc.integer_attribute("", "cycle_samples", ns);
  if (!points.empty())
    doc.text_attribute("", "watched_dof", kDofNames[points.front().lco.watched_dof]);
  // Linear flutter speeds and the describing-function LCO curve, in the
  // units of the swept key, for the bifurcation plot's overlay (when the
  // first key is the airspeed or the reduced speed).
  const std::string& key = o.axes[0].key;
  if (key == "flow.airspeed" || key == "nondimensional.reduced_speed") {
    const double per = key == "flow.airspeed" ? 1.0 : 1.0 / (c.model.section.semichord *
                                                            uncoupled_frequencies(c.model.section).pitch);
    FlutterOptions fo;
    fo.pk = false;
    fo.cancel = cancel;
    const FlutterReport fr = flutter_analysis(c, fo);
    const char* names[4] = {"linear_flutter_value", "gap_closed_flutter_value", "gap_open_flutter_value",
                            "describing_function_flutter_value"};
    for (const auto& lr : fr.results) {
      const Crossing& x = lr.methods.front().flutter;
      if (x.found) doc.number_attribute("", names[static_cast<int>(lr.linearisation)], x.speed * per);
    }
    if (fr.lco.available) {
      std::vector<double> v, a, st, br;
      for (const auto& pt : fr.lco.points) {
        br.push_back(pt.branch);
        v.push_back(pt.speed * per);
        a.push_back(pt.amplitude);
        st.push_back(pt.stable ? 1.0 : 0.0);
      }
      std::vector<double> idx(v.size());
      for (std::size_t q = 0; q < idx.size(); ++q) idx[q] = static_cast<double>(q);
      doc.axis("lco_prediction_point", idx, "1", "point of the describing-function curve");
      const std::vector<std::string> pd = {"lco_prediction_point"};
      doc.dataset("lco_prediction/value", pd, v, "1", "swept value (" + key + ") of the predicted LCO");
      doc.dataset("lco_prediction/amplitude", pd, a, fr.lco.spring == kPlunge ? "m" : "rad",
                  std::string("predicted LCO amplitude of the ") + kDofNames[fr.lco.spring]);
      doc.dataset("lco_prediction/stable", pd, st, "1", "1 stable branch, 0 unstable");
      doc.dataset("lco_prediction/branch", pd, br, "1",
                  "neutral speed of the equivalent linear system counted from below (0 lowest)");
    }
  }
  // Everything needed to merge shards into the file an unsharded run writes.
  doc.text_attribute("", "sweep_request", request_json(r).dump());
  doc.commit();
}

}  // namespace aerosect

namespace aerosect {

nlohmann::json merge_json(const std::vector<std::string>& inputs, const std::string& output) {
  return {{"command", "merge"}, {"inputs", inputs}, {"output", output}};
}

std::string merge_text(const std::vector<std::string>& inputs, const std::string& output) {
  return fmt::format("merged {} shard files into {}\n", inputs.size(), output);
}

void merge_sweep_files(const std::vector<std::string>& inputs, const std::string& output,
                       const std::atomic<bool>* cancel) {
  std::optional<nlohmann::json> request;
  std::vector<int> shards;
  int count = 0;
  std::map<Key, SweepPoint> merged;
  for (const auto& path : inputs) {
    stop_if_cancelled(cancel);
    nlohmann::json req = nlohmann::json::parse(read_text_attribute(path, "sweep_request"), nullptr, false);
    if (req.is_discarded())
      throw InputError({path, 0, 0}, "", "", "is not an aerosect sweep file", "files written by aerosect sweep");
    const int k = req.at("shard").at(0), n = req.at("shard").at(1);
    req["shard"] = {1, 1};
    if (request && *request != req)
      throw InputError({path, 0, 0}, "", "", "is a shard of a different sweep than " + inputs.front(),
                       "the shard files of one sweep command");
    if (count && n != count)
      throw InputError({path, 0, 0}, "", "", fmt::format("is shard {}/{}, the others are of {}", k, n, count),
                       "shards of one --shard K/N series");
    if (std::find(shards.begin(), shards.end(), k) != shards.end())
      throw InputError({path, 0, 0}, "", "", fmt::format("shard {}/{} is given twice", k, n), "each shard once");
    request = req;
    count = n;
    shards.push_back(k);
    // Points of this shard: the entries its tables hold (NaN: not run here).
    const SweepRequest r = request_from_json(req);
    const std::size_t n1 = r.options.axes[0].values.size();
    const std::size_t n2 = r.options.axes.size() > 1 ? r.options.axes[1].values.size() : 1;
    auto table = [&](const std::string& name) { return read_double_dataset(path, name); };
    const auto cls = table("response_class");
    const auto freq = table("frequency"), cyc = table("cycles"), spr = table("spread");
    const auto end = table("end_time"), sw = table("switches");
    const std::string watched = read_text_attribute(path, "watched_dof");
    const int w = dof_index(watched) >= 0 ? dof_index(watched) : kPitch;
    const int ndof = static_cast<int>(parse_case(r.case_text, r.case_path, r.overrides).model.section.dof);
    std::vector<std::vector<double>> amp(3), mx(3), mn(3);
    for (int d = 0; d < ndof; ++d) {
      amp[d] = table(std::string(kDofNames[d]) + "_amplitude");
      mx[d] = table(std::string(kDofNames[d]) + "_max");
      mn[d] = table(std::string(kDofNames[d]) + "_min");
    }
    const std::size_t nh = static_cast<std::size_t>(r.options.cycle.harmonics);
    const std::size_t ns = static_cast<std::size_t>(r.options.cycle.samples);
    std::vector<std::vector<double>> cmean(3), crms(3), crms0(3), cthd(3), charm(3), ctrace(3);
    for (int d = 0; d < ndof; ++d) {
      const std::string n = kDofNames[d];
      cmean[d] = table(n + "_mean");
      crms[d] = table(n + "_rms");
      crms0[d] = table(n + "_rms_about_mean");
      cthd[d] = table(n + "_thd");
      charm[d] = table(n + "_harmonics");
      if (r.options.traces) ctrace[d] = table(n + "_cycle");
    }
    for (int dir = 0; dir < 2; ++dir)
      for (std::size_t i = 0; i < n1; ++i)
        for (std::size_t j = 0; j < n2; ++j) {
          const std::size_t at = (static_cast<std::size_t>(dir) * n1 + i) * n2 + j;
          if (std::isnan(cls[at])) continue;
          SweepPoint p;
          p.direction = dir;
          p.i = static_cast<int>(i);
          p.j = static_cast<int>(j);
          p.value1 = r.options.axes[0].values[i];
          p.value2 = n2 > 1 ? r.options.axes[1].values[j] : 0.0;
          p.ok = cls[at] != 4.0;
          p.lco.response = p.ok ? static_cast<ResponseClass>(static_cast<int>(cls[at])) : ResponseClass::kNonPeriodic;
          p.lco.watched_dof = w;
          p.lco.frequency = freq[at];
          p.lco.cycles = static_cast<int>(cyc[at]);
          p.lco.spread = spr[at];
          p.end_time = end[at];
          p.switches = static_cast<std::int64_t>(sw[at]);
          for (int d = 0; d < ndof; ++d) p.lco.dof[d] = {amp[d][at], mx[d][at], mn[d][at]};
          if (!std::isnan(cmean[0][at])) {
            p.cycle.samples = static_cast<int>(ns);
            p.cycle.period = 1.0 / p.lco.frequency;
            for (int d = 0; d < ndof; ++d) {
              DofHarmonics& h = p.cycle.dof[d];
              h.mean = cmean[d][at];
              h.rms = crms[d][at];
              h.rms_about_mean = crms0[d][at];
              h.thd = cthd[d][at];
              h.harmonics.assign(charm[d].begin() + static_cast<long>(at * nh),
                                 charm[d].begin() + static_cast<long>((at + 1) * nh));
              if (r.options.traces)
                p.cycle.trace[d].assign(ctrace[d].begin() + static_cast<long>(at * ns),
                                        ctrace[d].begin() + static_cast<long>((at + 1) * ns));
            }
          }
          merged[{dir, p.j, p.i}] = p;
        }
  }
  if (!request || static_cast<int>(shards.size()) != count)
    throw InputError({inputs.empty() ? "" : inputs.front(), 0, 0}, "", "",
                     fmt::format("{} of {} shards given", shards.size(), count),
                     "every shard file 1/N..N/N of the sweep");
  const SweepRequest r = request_from_json(*request);
  std::vector<SweepPoint> points;
  for (auto& [key, p] : merged) points.push_back(std::move(p));
  const Case c = parse_case(r.case_text, r.case_path, r.overrides);
  stop_if_cancelled(cancel);
  write_sweep_file(output, c, r, points, cancel);
}

}  // namespace aerosect
