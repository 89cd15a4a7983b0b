#include "aerosect/analysis/sweep.hpp"
#include "aerosect/analysis/sweep_store.hpp"

#include "aerosect/analysis/equilibrium.hpp"

#include <algorithm>
#include <atomic>
#include <cmath>
#include <limits>
#include <map>
#include <mutex>
#include <numbers>
#include <set>
#include <thread>
#include <tuple>

#include <fmt/format.h>

#include "aerosect/analysis/flutter.hpp"
#include "aerosect/analysis/flutter_report.hpp"
#include "aerosect/analysis/orbit.hpp"
#include "aerosect/analysis/report.hpp"
#include "aerosect/analysis/simulate.hpp"
#include "aerosect/error.hpp"
#include "aerosect/integrate/exact_flow.hpp"
#include "aerosect/io/hdf5_document.hpp"
#include "aerosect/units.hpp"
#include "aerosect/version.hpp"

namespace aerosect {

namespace {

using Key = std::tuple<int, int, int>;  // direction, j, i



struct Chain {
  int direction, j;
};

// A shard's and a thread's unit of work: the independent runs of a sweep.
// With continuation a whole chain (each point starts from the one before);
// with fresh starts a single point (steps k_begin..k_end - 1 along the
// chain's direction). So any shard count gets work while there are units.
struct Unit {
  Chain chain;
  int k_begin, k_end;
};

// This shard's units (unit index modulo N == K - 1), in a fixed order.
std::vector<Unit> shard_units(const SweepOptions& o) {
  const int n1 = o.axes.empty() ? 0 : static_cast<int>(o.axes[0].values.size());
  const int n2 = o.axes.size() > 1 ? static_cast<int>(o.axes[1].values.size()) : 1;
  std::vector<Unit> mine;
  std::size_t index = 0;
  auto offer = [&](const Unit& u) {
    if (static_cast<int>(index++ % static_cast<std::size_t>(o.shard_count)) == o.shard_index - 1) mine.push_back(u);
  };
  for (int d : {0, 1}) {
    if ((d == 0 && !o.up) || (d == 1 && !o.down)) continue;
    for (int j = 0; j < n2; ++j) {
      if (o.continuation) {
        offer({{d, j}, 0, n1});
      } else {
        for (int k = 0; k < n1; ++k) offer({{d, j}, k, k + 1});
      }
    }
  }
  return mine;
}

// Every spring region index inside its law's regions 0..n (n breakpoints):
// a state read back from a journal is used only then.
bool valid_regions(const Case& c, const std::vector<int>& regions) {
  for (std::size_t k = 0; k < regions.size() && k < c.model.springs.size(); ++k)
    if (regions[k] < 0 || regions[k] > static_cast<int>(c.model.springs[k].breakpoints().size())) return false;
  return true;
}

// Refinement: the orbit's flows at rtol 1e-10 (atol 1e-13) and chord
// iterations (orbit.hpp) to a scaled residual of 1e-8; refined figures are
// then accurate to about 1e-8 relative, four orders beyond the detector's
// 1e-4.
constexpr double kRefineRtol = 1e-10, kRefineAtol = 1e-13, kRefineTolerance = 1e-8;
// Chord iterations (orbit.hpp) from a settled cycle: each gains about four
// digits, so a seed that needs more is no settled cycle.
constexpr int kRefineIterations = 8;

// The periodic orbit of a point the detector found periodic (sweep.hpp):
// nullopt, with p.refinement_failure set, when it is not accepted.
std::optional<Orbit> refine_point(const AeroelasticModel& model, const LcoTracker& tracker, SweepPoint& p,
                                  const SweepOptions& o, const std::atomic<bool>* cancel) {
  OrbitSettings os;
  os.integrator.relative_tolerance = kRefineRtol;
  os.integrator.absolute_tolerance = kRefineAtol;
  os.tolerance = kRefineTolerance;
  // With exact propagation the monodromy costs little: full Newton, so the
  // Floquet multipliers are the converged orbit's (the chord iteration's
  // are its seed's); else chord iterations.
  const bool exact = exact_propagation_eligible(model);
  os.chord = !exact;
  if (exact) os.tolerance = 1e-10;
  os.max_iterations = kRefineIterations;
  os.watched_dof = p.lco.watched_dof;
  os.cycle = o.cycle;
  OrbitSeed seed{tracker.periodic_state(), 1.0 / p.lco.frequency};
  if (static_cast<int>(seed.x0.size()) != model.state_size()) {
    p.refinement_failure = "no state on the cycle was recorded";
    return std::nullopt;
  }
  seed.x0[static_cast<std::size_t>(model.layout().velocity + p.lco.watched_dof)] = 0.0;
  Orbit orbit = solve_orbit(model, seed, os, cancel);
  p.orbit_residual = orbit.residual;
  if (!orbit.converged) {
    p.refinement_failure = "Newton shooting did not converge: " + orbit.failure;
    return std::nullopt;
  }
  p.floquet_multiplier = orbit.largest_nontrivial;
  const int w = p.lco.watched_dof;
  const double a_march = p.lco.dof[static_cast<std::size_t>(w)].amplitude;
  const double a_orbit = orbit.dof[static_cast<std::size_t>(w)].amplitude;
  if (!orbit.stable) {
    p.refinement_failure = fmt::format("the orbit found is unstable (largest multiplier modulus {:.6g}): "
                                       "not the cycle the run settled on", orbit.largest_nontrivial);
    return std::nullopt;
  }
  if (std::abs(orbit.period * p.lco.frequency - 1.0) > 0.05 || std::abs(a_orbit - a_march) > 0.1 * a_march) {
    p.refinement_failure = fmt::format("the orbit found (period {:.6g} s, amplitude {:.6g}) is not the marched "
                                       "cycle (period {:.6g} s, amplitude {:.6g})",
                                       orbit.period, a_orbit, 1.0 / p.lco.frequency, a_march);
    return std::nullopt;
  }
  p.refined = true;
  return orbit;
}

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
  std::vector<std::string> ov;
  ov.push_back(fmt::format("{}={:.17g}", o.axes[0].key, p.value1));
  if (o.axes.size() > 1) ov.push_back(fmt::format("{}={:.17g}", o.axes[1].key, p.value2));
  const Case c = sweep_point_case(r, ov);
  const AeroelasticModel model(c.model);
  ExactFlowCache regions;  // the point's runs share their region exponentials
  RunState run;
  run.exact_cache = &regions;
  // A divergent or failed point's final state is no start for the next.
  const bool carry = o.continuation && previous && previous->ok &&
                     previous->lco.response != ResponseClass::kDivergent &&
                     static_cast<int>(previous->final_state.size()) == model.state_size() &&
                     static_cast<int>(previous->final_regions.size()) == model.n_dof() &&
                     valid_regions(c, previous->final_regions);
  if (carry) {
    run.x = previous->final_state;
    run.regions = previous->final_regions;
  } else {
    // The case's start: about the point's static equilibrium with a steady
    // condition, absolute without (equilibrium.hpp, run_start).
    RunStart rs = run_start(model, c.simulation.initial_displacement, c.simulation.initial_velocity,
                            c.simulation.steady_lag_states);
    run.x = std::move(rs.x);
    run.regions = std::move(rs.regions);
  }
  LcoTracker tracker(model, o.lco);
  try {
    // The case's run length, then more of it while the motion has not
    // settled (no class decided, not stationary), up to the cap.
    const double segment = c.simulation.duration;
    const double cap = kSweepRunCap * segment;
    for (double end = segment;; end = std::min(cap, end + segment)) {
      const IntegrationResult res =
          integrate(model, run, end, c.simulation.integrator, OutputSchedule::none(),
                    {{}, [&tracker](int dof, double t, const std::vector<double>& x) {
                       return tracker.on_peak(dof, t, x);
                     }, cancel});
      if (res.reason == StopReason::kCancelled) return std::nullopt;
      if (tracker.decided() || tracker.stationary() || end >= cap) break;
    }
    p.lco = tracker.result();
    if (p.lco.response == ResponseClass::kPeriodic && p.lco.frequency > 0) {
      std::optional<Orbit> orbit;
      if (o.refine) orbit = refine_point(model, tracker, p, o, cancel);
      if (orbit) {
        // The converged orbit's figures; the next point starts on it.
        p.lco.frequency = orbit->frequency();
        p.lco.peaks_per_period = orbit->peaks_per_period;
        p.lco.dof = orbit->dof;
        p.cycle.period = orbit->period;
        p.cycle.samples = o.cycle.samples;
        p.cycle.dof = orbit->content;
        p.cycle.trace = orbit->trace;
        run.x = orbit->x0;
        run.regions = model.regions_of(run.x.data());
      } else {
        if (cancel && cancel->load()) return std::nullopt;
        // The marched cycle: one more period, sampled, for RMS and harmonics.
        p.cycle = sample_settled_cycle(model, run, 1.0 / p.lco.frequency, c.simulation.integrator,
                                       o.cycle, p.lco.watched_dof);
      }
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

Case sweep_point_case(const SweepRequest& r, const std::vector<std::string>& point_overrides) {
  std::vector<std::string> ov = r.overrides;
  ov.insert(ov.end(), point_overrides.begin(), point_overrides.end());
  Case c = r.document ? r.document->with(ov) : parse_case(r.case_text, r.case_path, ov);
  if (!r.options.with_gusts) c.model.gusts = GustField();
  return c;
}

std::string sweep_gust_note(const Case& c, const SweepRequest& r) {
  const std::size_t n = c.model.gusts.profiles().size();
  if (n == 0) return "none in the case";
  if (r.options.with_gusts) return fmt::format("included (the case's {} [[gust]] table{})", n, n == 1 ? "" : "s");
  return fmt::format("left out (the case's {} [[gust]] table{} not run; --with-gusts runs them)", n,
                     n == 1 ? " is" : "s are");
}

namespace {
bool is_gust_key(const std::string& key) { return key.rfind("gust.", 0) == 0; }

// A swept key's units (a key of a list value, or one the schema does not
// know, has none to give: "1").
std::string axis_units(const std::string& key) {
  const std::string u = case_key_units(key);
  return u.empty() ? "1" : u;
}
}  // namespace

void check_swept_values(const SweepRequest& r) {
  if (!r.options.with_gusts) {
    for (const auto& ax : r.options.axes)
      if (is_gust_key(ax.key))
        throw InputError({"--vary " + ax.key, 0, 0}, "--vary", ax.key,
                         "varies a [[gust]] key, but the sweep leaves the case's gusts out",
                         "--with-gusts to run the gusts at every point, or a key outside [[gust]]");
    for (const auto& o : r.overrides)
      if (is_gust_key(o.substr(0, o.find('='))))
        throw InputError({"--set " + o, 0, 0}, "--set", o,
                         "sets a [[gust]] key, but the sweep leaves the case's gusts out",
                         "--with-gusts to run the gusts at every point, or no --set of a [[gust]] key");
  }
  // The case's TOML parsed once (the request's own, else here).
  const std::shared_ptr<const CaseDocument> doc =
      r.document ? r.document : std::make_shared<const CaseDocument>(r.case_text, r.case_path);
  for (const auto& ax : r.options.axes)
    for (double v : ax.values) {
      std::vector<std::string> o2 = r.overrides;
      o2.push_back(fmt::format("{}={:.17g}", ax.key, v));
      try {
        (void)doc->with(o2);
      } catch (const InputError& e) {
        // The swept value is applied as an override: name the option that
        // gave it, not a --set the user never wrote.
        if (e.where().file != "--set " + o2.back()) throw;
        throw InputError({fmt::format("--vary {}={:.17g}", ax.key, v), 0, 0}, e.key(), e.value(), e.problem(),
                         e.allowed());
      }
    }
}

void sweep_each(const SweepRequest& request, const std::vector<SweepPoint>& done,
                const std::function<void(const SweepPoint&, bool)>& each, const std::atomic<bool>* cancel,
                const std::function<void()>& beside, const std::function<bool(int, int, int)>& held) {
  SweepRequest parsed = request;
  if (!parsed.document) parsed.document = std::make_shared<const CaseDocument>(request.case_text, request.case_path);
  const SweepRequest& r = parsed;
  const SweepOptions& o = r.options;
  AEROSECT_CHECK(!o.axes.empty() && o.axes.size() <= 2);
  const int n1 = static_cast<int>(o.axes[0].values.size());
  const std::vector<Unit> mine = shard_units(o);
  std::map<Key, const SweepPoint*> known;
  for (const auto& p : done) known[{p.direction, p.j, p.i}] = &p;
  // Validate the swept values once, up front (bad input is an error before any work).
  check_swept_values(r);
  // Work item 0 is `beside` (when given), then one per chain. `jobs`
  // threads (this one and jobs - 1 more) take the next item until none is
  // left. Plain threads rather than OpenMP: libgomp's load and set-up were a
  // sixth of every aerosect process's start-up (tools/bench, "start-up").
  const std::size_t first = beside ? 1 : 0;
  const std::size_t items = mine.size() + first;
  std::atomic<std::size_t> next_item{0};
  std::mutex failure_mutex;
  std::exception_ptr failure;
  auto work = [&]() {
    for (std::size_t item = next_item++; item < items; item = next_item++) {
      try {
        if (item < first) {
          beside();
          continue;
        }
        const Unit& u = mine[item - first];
        const Chain ch = u.chain;
        // The chain's previous point (its final state starts the next):
        // the only point a chain holds.
        SweepPoint previous;
        bool has_previous = false;
        for (int k = u.k_begin; k < u.k_end; ++k) {
          if (cancel && cancel->load()) break;
          const int i = ch.direction == 0 ? k : n1 - 1 - k;
          auto it = known.find({ch.direction, ch.j, i});
          if (it != known.end()) {
            each(*it->second, false);
            previous = *it->second;
          } else if (held && held(ch.direction, i, ch.j)) {
            // Finished before and kept by the caller: not reported, and no
            // start for the next point (which, when it is to run, has its
            // start in `done`).
            has_previous = false;
            continue;
          } else {
            std::optional<SweepPoint> p = run_point(r, ch.direction, i, ch.j, has_previous ? &previous : nullptr, cancel);
            if (!p) break;
            each(*p, true);
            previous = std::move(*p);
          }
          has_previous = true;
        }
      } catch (...) {
        const std::lock_guard<std::mutex> lock(failure_mutex);
        failure = std::current_exception();
      }
    }
  };
  {
    const std::size_t helpers =
        std::min(items, static_cast<std::size_t>(std::max(1, o.jobs))) - (items > 0 ? 1 : 0);
    std::vector<std::jthread> threads;
    threads.reserve(helpers);
    for (std::size_t t = 0; t < helpers; ++t) threads.emplace_back(work);
    work();
  }  // the jthreads join here
  if (failure) std::rethrow_exception(failure);
}

std::vector<SweepPoint> continuation_starts(const SweepRequest& r, const std::function<bool(int, int, int)>& held,
                                            const std::function<SweepPoint(int, int, int)>& get) {
  std::vector<SweepPoint> starts;
  if (!r.options.continuation) return starts;
  const int n1 = static_cast<int>(r.options.axes.at(0).values.size());
  const int n2 = r.options.axes.size() > 1 ? static_cast<int>(r.options.axes[1].values.size()) : 1;
  for (int d = 0; d < 2; ++d)
    for (int j = 0; j < n2; ++j)
      for (int i = 0; i < n1; ++i) {
        const int next = d == 0 ? i + 1 : i - 1;  // a chain's order (sweep_each)
        if (next >= 0 && next < n1 && held(d, i, j) && !held(d, next, j)) starts.push_back(get(d, i, j));
      }
  return starts;
}

std::vector<SweepPoint> run_sweep(const SweepRequest& request, const std::vector<SweepPoint>& done,
                                  const std::function<void(const SweepPoint&)>& on_point,
                                  const std::atomic<bool>* cancel, const std::function<void()>& beside) {
  std::mutex mutex;
  std::vector<SweepPoint> all;
  all.reserve(sweep_point_count(request));
  sweep_each(
      request, done,
      [&](const SweepPoint& p, bool computed) {
        if (computed && on_point) on_point(p);
        const std::lock_guard<std::mutex> lock(mutex);
        all.push_back(p);
      },
      cancel, beside);
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
  id["with_gusts"] = r.options.with_gusts;
  id["cycle_samples"] = r.options.cycle.samples;
  id["harmonics"] = r.options.cycle.harmonics;
  return id;
}

SweepRequest request_from_json(const nlohmann::json& j, const SourceLocation& where) {
  try {
    SweepRequest r = request_from_json(j);
    const SweepOptions& o = r.options;
    auto bad = [&](const std::string& key, const std::string& value, const std::string& allowed) {
      return InputError(where, key, value, "is not a valid value of the sweep request", allowed);
    };
    if (o.axes.empty() || o.axes.size() > 2)
      throw bad("axes", std::to_string(o.axes.size()) + " axes", "one or two axes");
    if (!o.up && !o.down) throw bad("up", "false", "up or down (or both) true");
    long points = (o.up ? 1 : 0) + (o.down ? 1 : 0);  // as the command counts them
    for (const auto& ax : o.axes) {
      if (ax.values.size() < 2 || ax.values.size() > static_cast<std::size_t>(kMaxAxisValues))
        throw bad("axes", std::to_string(ax.values.size()) + " values of " + ax.key,
                  fmt::format("2 to {} values per axis", kMaxAxisValues));
      points *= static_cast<long>(ax.values.size());
    }
    if (points > kMaxSweepPoints)
      throw bad("axes", fmt::format("{} points", points),
                fmt::format("at most {} points over both directions and the whole grid", kMaxSweepPoints));
    if (o.shard_count < 1 || o.shard_index < 1 || o.shard_index > o.shard_count)
      throw bad("shard", fmt::format("{}/{}", o.shard_index, o.shard_count), "K/N with 1 <= K <= N");
    if (o.cycle.samples < 2 || o.cycle.samples > 1 << 16)
      throw bad("cycle_samples", std::to_string(o.cycle.samples), "2 to 65536");
    if (o.cycle.harmonics < 1 || 2 * o.cycle.harmonics > o.cycle.samples)
      throw bad("harmonics", std::to_string(o.cycle.harmonics), "1 to cycle_samples / 2");
    return r;
  } catch (const nlohmann::json::exception& e) {
    throw InputError(where, "", "", std::string("the sweep request cannot be read: ") + e.what(),
                     "the request aerosect sweep wrote");
  }
}

namespace {
// An int of a request: an integer JSON number in int's range (a float or a
// huge number is a type error, not a conversion).
int request_int(const nlohmann::json& v, const char* key) {
  if (!v.is_number_integer() || (v.is_number_unsigned() && v.get<std::uint64_t>() > std::uint64_t{1} << 31) ||
      v.get<std::int64_t>() < std::numeric_limits<int>::min() || v.get<std::int64_t>() > std::numeric_limits<int>::max())
    throw nlohmann::json::type_error::create(302, fmt::format("'{}' is not an integer in range: {}", key,
                                                              v.dump().substr(0, 40)), &v);
  return static_cast<int>(v.get<std::int64_t>());
}
}  // namespace

SweepRequest request_from_json(const nlohmann::json& j) {
  SweepRequest r;
  r.case_text = j.at("case_text");
  r.case_path = j.at("case_path");
  r.overrides = j.at("overrides").get<std::vector<std::string>>();
  for (const auto& a : j.at("axes")) r.options.axes.push_back({a.at(0), a.at(1).get<std::vector<double>>()});
  r.options.up = j.at("up");
  r.options.down = j.at("down");
  r.options.continuation = j.at("continuation");
  r.options.shard_index = request_int(j.at("shard").at(0), "shard");
  r.options.shard_count = request_int(j.at("shard").at(1), "shard");
  r.options.traces = j.value("traces", false);
  r.options.with_gusts = j.value("with_gusts", false);
  r.options.cycle.samples =
      j.contains("cycle_samples") ? request_int(j["cycle_samples"], "cycle_samples") : CycleSettings{}.samples;
  r.options.cycle.harmonics = j.contains("harmonics") ? request_int(j["harmonics"], "harmonics") : CycleSettings{}.harmonics;
  return r;
}

// The --json summary form of a point (keys in README.md, "JSON output").
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
  j["decay_reason"] = p.lco.response == ResponseClass::kDecayed ? nlohmann::json(to_string(p.lco.decay_reason))
                                                                : nlohmann::json(nullptr);
  j["watched_dof"] = p.lco.watched_dof;
  j["cycles"] = p.lco.cycles;
  // A decayed run has no LCO: no frequency (the HDF5 file keeps the dying
  // motion's, documented as such).
  j["frequency_hz"] = p.lco.response == ResponseClass::kDecayed ? nlohmann::json(nullptr)
                                                                : json_number(p.lco.frequency);
  j["spread"] = p.lco.spread;
  j["stopped_early"] = p.lco.stopped_early;
  j["refined"] = p.refined;
  j["orbit_residual"] = json_number(p.orbit_residual);
  j["floquet_multiplier"] = json_number(p.floquet_multiplier);
  j["refinement_failure"] = p.refinement_failure.empty() ? nlohmann::json(nullptr) : nlohmann::json(p.refinement_failure);
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

JournalHead sweep_journal_head(const SweepRequest& r) {
  JournalHead h;
  h.kind = "sweep";
  // 3: point records generated from the layout (point_record); 4: the class
  // unsettled (5), decay_reason, the orbit refinement's fields and the
  // request's with_gusts. Older formats are refused with journal.cpp's
  // message: 1 had the request as the head line, 1 and 2 the point records
  // in the --json form, 3 no refinement and another meaning of the classes.
  h.format = kSweepJournalFormat;
  h.identity = request_json(r);
  return h;
}

SweepPoint journal_point(const JournalRecord& rec, const std::string& journal, const SweepRequest& r,
                         const SweepTables& t, const std::function<bool(const SweepPoint&)>& seen) {
  SweepPoint p = point_from_record(rec.value, r, t, {journal, rec.line, 0});
  if (seen(p))
    throw InputError({journal, rec.line, 0}, "", "",
                     fmt::format("holds the point (direction {}, i {}, j {}) a second time", p.direction, p.i, p.j),
                     "each point once (remove the journal to start the sweep again)");
  return p;
}

std::vector<SweepPoint> points_from_journal(const Journal& journal, const SweepRequest& r,
                                            const SweepTables& t) {
  std::vector<SweepPoint> done;
  std::set<Key> seen;
  for (const auto& rec : journal.records())
    done.push_back(journal_point(rec, journal.path(), r, t, [&seen](const SweepPoint& p) {
      return !seen.insert({p.direction, p.j, p.i}).second;
    }));
  return done;
}

std::size_t sweep_point_count(const SweepRequest& r) {
  const SweepOptions& o = r.options;
  std::size_t points = 0;
  for (const Unit& u : shard_units(o)) points += static_cast<std::size_t>(u.k_end - u.k_begin);
  return points;
}

SweepSummary summarize(const std::vector<SweepPoint>& points, int jj) {
  SweepTally t;
  t.j = jj;
  for (const auto& p : points) t.add(p);
  return t.summary;
}

std::size_t unsettled_points(const std::vector<SweepPoint>& points) {
  SweepTally t;
  for (const auto& p : points) t.add(p);
  return t.unsettled;
}

std::string unsettled_warning(const Case& c, std::size_t n) {
  return fmt::format("{} point{} did not settle within {:g} times the case's run length ({:.4g} s): class "
                     "'unsettled', their amplitudes are not an answer (the motion was still growing or dying "
                     "out); run them longer with --set simulation.duration=...",
                     n, n == 1 ? "" : "s", kSweepRunCap, kSweepRunCap * c.simulation.duration);
}

std::size_t unrefined_points(const std::vector<SweepPoint>& points) {
  SweepTally t;
  for (const auto& p : points) t.add(p);
  return t.unrefined;
}

std::string unrefined_warning(std::size_t n) {
  return fmt::format("{} periodic point{} could not be refined to the periodic orbit (refinement_failure in "
                     "the JSON says why): amplitudes and frequency of the time-marched cycle, settled to 1e-4",
                     n, n == 1 ? "" : "s");
}

namespace {

// A point in the --json summary: point_json without what only continuation
// needs and without the sampled cycle (in the file, not the summary).
nlohmann::json summary_point_json(const SweepPoint& q) {
  nlohmann::json pj = point_json(q);
  pj.erase("final_state");
  pj.erase("final_regions");
  if (pj["cycle"].is_object()) pj["cycle"].erase("trace");
  return pj;
}

// The points of `p` in a store in memory (the vector forms below).
std::unique_ptr<SweepStore> store_of(const Case& c, const SweepRequest& r, const std::vector<SweepPoint>& p) {
  auto s = std::make_unique<SweepStore>(r, sweep_tables(r, c.model.section.dof));
  for (const auto& q : p) s->put(q);
  return s;
}

}  // namespace

nlohmann::json sweep_json_head(const Case& c, const SweepRequest& r, const SweepStore& p,
                               const std::string& output) {
  nlohmann::json j = report_header(c, "sweep");
  j["output"] = output;
  for (const auto& ax : r.options.axes)
    j["vary"].push_back({{"key", ax.key}, {"from", ax.values.front()}, {"to", ax.values.back()},
                         {"count", ax.values.size()}});
  j["continuation"] = r.options.continuation;
  j["gusts_included"] = r.options.with_gusts && !c.model.gusts.empty();
  j["gusts"] = sweep_gust_note(c, r);
  const SweepTally& t = p.tally();
  const SweepSummary& s = t.summary;
  j["points_computed"] = t.points;
  auto opt = [](const std::optional<double>& v) { return v ? nlohmann::json(*v) : nlohmann::json(nullptr); };
  j["lco_onset_up"] = opt(s.onset_up);
  j["lco_disappearance_down"] = opt(s.disappearance_down);
  if (s.onset_up && s.disappearance_down && *s.disappearance_down < *s.onset_up)
    j["hysteresis_band"] = {*s.disappearance_down, *s.onset_up};
  else
    j["hysteresis_band"] = nullptr;
  j["largest_amplitude"] = opt(s.largest_amplitude);
  j["largest_amplitude_at"] = s.largest_amplitude ? nlohmann::json(s.largest_at) : nlohmann::json(nullptr);
  j["run_cap_factor"] = kSweepRunCap;
  j["unsettled_points"] = t.unsettled;
  j["warnings"] = nlohmann::json::array();
  if (t.unsettled > 0) j["warnings"].push_back(unsettled_warning(c, t.unsettled));
  j["unrefined_points"] = t.unrefined;
  if (t.unrefined > 0) j["warnings"].push_back(unrefined_warning(t.unrefined));
  return j;
}

void write_sweep_json(const nlohmann::json& head, const SweepStore& points,
                      const std::function<void(std::string_view)>& out) {
  // The head with an empty "points" list, dumped; the list is then written
  // where its "[]" stands, a point at a time, indented as dump(2) indents
  // the whole (its top-level key at two spaces, a list element at four).
  nlohmann::json j = head;
  j["points"] = nlohmann::json::array();
  const std::string text = j.dump(2);
  const std::string mark = "\n  \"points\": []";
  const std::size_t at = text.find(mark);
  AEROSECT_CHECK(at != std::string::npos);
  const std::size_t list = at + mark.size() - 1;  // the "]"
  out(std::string_view(text).substr(0, list - 1));
  std::string block;
  bool any = false;
  points.visit([&](const SweepPoint& q) {
    block += any ? ",\n    " : "[\n    ";
    any = true;
    const std::string pj = summary_point_json(q).dump(2);
    for (const char ch : pj) {
      block += ch;
      if (ch == '\n') block += "    ";
    }
    if (block.size() > 65536) {
      out(block);
      block.clear();
    }
  });
  block += any ? "\n  ]" : "[]";
  out(block);
  out(std::string_view(text).substr(list + 1));
}

nlohmann::json sweep_json(const Case& c, const SweepRequest& r, const std::vector<SweepPoint>& p,
                          const std::string& output) {
  const auto s = store_of(c, r, p);
  nlohmann::json j = sweep_json_head(c, r, *s, output);
  j["points"] = nlohmann::json::array();
  s->visit([&](const SweepPoint& q) { j["points"].push_back(summary_point_json(q)); });
  return j;
}

void write_sweep_text(const Case& c, const SweepRequest& r, const SweepStore& p, const std::string& output,
                      const std::function<void(std::string_view)>& out) {
  const SweepTally& tl = p.tally();
  std::string t = fmt::format("aerosect {} sweep: {}\n", kVersion, c.path);
  if (!c.title.empty()) t += fmt::format("  {}\n", c.title);
  for (const auto& ax : r.options.axes)
    t += fmt::format("  {} from {:.6g} to {:.6g} ({} values)\n", ax.key, ax.values.front(),
                     ax.values.back(), ax.values.size());
  t += fmt::format("  {}; {} points\n", r.options.continuation ? "continuation" : "fresh starts",
                   tl.points);
  t += fmt::format("  gusts: {}\n\n", sweep_gust_note(c, r));
  // Every swept key is a column, headed with its units (case_key_units);
  // amplitudes in the unit said on each row.
  const bool two = r.options.axes.size() > 1;
  const std::string u1 = axis_units(r.options.axes[0].key);
  const std::string u2 = two ? axis_units(r.options.axes[1].key) : std::string();
  auto with_units = [](const std::string& key, const std::string& u) { return u == "1" ? key : key + " " + u; };
  const std::string h1 = with_units(r.options.axes[0].key, u1);
  const std::string h2 = two ? with_units(r.options.axes[1].key, u2) : std::string();
  const std::size_t w1 = std::max<std::size_t>(14, h1.size()), w2 = std::max<std::size_t>(14, h2.size());
  t += fmt::format("  {:>4} {:>{}}", "dir", h1, w1);
  if (two) t += fmt::format(" {:>{}}", h2, w2);
  // Amplitudes and frequencies as the Presenter shows them (degree, m or
  // semichords; Hz or w/w_a for a nondimensional case).
  const Presenter pr = presenter(c);
  t += fmt::format(" {:>13} {:>16} {:>10} {:>7}\n", "class", "amplitude", pr.frequency_heading(), "cycles");
  // The rows a block at a time: the text is never held whole.
  p.visit([&](const SweepPoint& q) {
    const int w = q.lco.watched_dof;
    t += fmt::format("  {:>4} {:>{}.6g}", q.direction == 0 ? "up" : "down", q.value1, w1);
    if (two) t += fmt::format(" {:>{}.6g}", q.value2, w2);
    // A decayed run has no LCO: no amplitude or frequency is shown for it.
    const bool decayed = q.ok && q.lco.response == ResponseClass::kDecayed;
    const std::string amp =
        decayed ? "-" : fmt::format("{:.5g}", pr.displacement_value(w, q.lco.dof[static_cast<std::size_t>(w)].amplitude));
    t += fmt::format(" {:>13} {:>9} {:<6} {:>10} {:>7}{}\n",
                     !q.ok ? std::string("failed")
                     : q.lco.response == ResponseClass::kPeriodic && !q.refined
                         ? std::string("periodic*")
                         : std::string(to_string(q.lco.response)),
                     amp, decayed ? "" : pr.displacement_unit(w),
                     decayed ? std::string("-") : fmt::format("{:.4g}", pr.frequency_value(q.lco.frequency)),
                     q.lco.cycles,
                     q.ok ? "" : "  " + q.error.substr(0, 60));
    if (t.size() > 65536) {
      out(t);
      t.clear();
    }
  });
  const SweepSummary& s = tl.summary;
  t += "\n";
  const std::string at_units = u1 == "1" ? "" : " " + u1;
  t += s.onset_up ? fmt::format("  LCO onset going up: {:.6g}{}\n", *s.onset_up, at_units) : "  no LCO going up\n";
  if (r.options.down)
    t += s.disappearance_down
             ? fmt::format("  LCO persists going down to: {:.6g}{}\n", *s.disappearance_down, at_units)
             : "  no LCO going down\n";
  if (s.onset_up && s.disappearance_down && *s.disappearance_down < *s.onset_up)
    t += fmt::format("  hysteresis band: {:.6g} .. {:.6g}{}\n", *s.disappearance_down, *s.onset_up, at_units);
  if (s.largest_amplitude) {
    const int w = tl.watched_dof;
    t += fmt::format("  largest LCO amplitude of the {}: {:.5g} {} at {:.6g}{}\n", kDofNames[w],
                     pr.displacement_value(w, *s.largest_amplitude), pr.displacement_unit(w), s.largest_at, at_units);
  }
  if (tl.unsettled > 0) t += "\n  warning: " + unsettled_warning(c, tl.unsettled) + "\n";
  if (tl.unrefined > 0) t += "\n  * " + unrefined_warning(tl.unrefined) + "\n";
  if (!output.empty()) t += fmt::format("\nwritten to {}\n", output);
  t += "\n";
  t += kSafetyCaution;
  t += "\n";
  out(t);
}

std::string sweep_text(const Case& c, const SweepRequest& r, const std::vector<SweepPoint>& p,
                       const std::string& output) {
  std::string t;
  write_sweep_text(c, r, *store_of(c, r, p), output, [&t](std::string_view piece) { t += piece; });
  return t;
}


// ---------------------------------------------------------------------------
// The layout of a sweep point: every field once. The HDF5 tables, the journal
// records and the merge of shard files are generated from it.

namespace {

Field<SweepPoint> scalar(std::string name, std::string units, std::string long_name,
                         std::function<double(const SweepPoint&)> get, std::function<void(SweepPoint&, double)> set,
                         std::string allowed = {}, std::function<bool(double)> valid = {}) {
  Field<SweepPoint> f;
  f.name = std::move(name);
  f.units = std::move(units);
  f.long_name = std::move(long_name);
  f.get = [get](const SweepPoint& p, std::size_t) { return get(p); };
  f.set = [set](SweepPoint& p, std::size_t, double v) { set(p, v); };
  f.allowed = std::move(allowed);
  f.valid = std::move(valid);
  return f;
}

// A double member `m` of the part `of(point)` of a sweep point.
template <class Of, class S>
Field<SweepPoint> member(std::string name, std::string units, std::string long_name, Of of, double S::*m) {
  return scalar(
      std::move(name), std::move(units), std::move(long_name), [of, m](const SweepPoint& p) { return of(p).*m; },
      [of, m](SweepPoint& p, double v) { of(p).*m = v; });
}

// A list of `width` values along `axis`: the vector `of(point)`.
template <class Of>
Field<SweepPoint> list(std::string name, std::string units, std::string long_name, std::string axis,
                       std::size_t width, Of of) {
  Field<SweepPoint> f;
  f.name = std::move(name);
  f.units = std::move(units);
  f.long_name = std::move(long_name);
  f.width = width;
  f.axis = std::move(axis);
  f.get = [of](const SweepPoint& p, std::size_t q) { return of(p).at(q); };
  f.set = [of, width](SweepPoint& p, std::size_t q, double v) {
    std::vector<double>& a = of(p);
    if (a.size() != width) a.assign(width, 0.0);
    a.at(q) = v;
  };
  return f;
}

bool is_count(double v) { return v >= 0 && v <= 9.0e15 && v == std::floor(v); }

}  // namespace

SweepTables sweep_tables(const SweepRequest& r, int ndof) {
  AEROSECT_CHECK(ndof >= 2 && ndof <= 3);
  SweepTables t;
  const SweepOptions& o = r.options;
  t.ndof = ndof;
  t.n1 = o.axes.empty() ? 0 : o.axes[0].values.size();
  t.n2 = o.axes.size() > 1 ? o.axes[1].values.size() : 1;
  if (!o.axes.empty()) t.axis1 = sweep_axis_name(o.axes[0].key);
  if (o.axes.size() > 1) t.axis2 = sweep_axis_name(o.axes[1].key);
  t.harmonics = static_cast<std::size_t>(o.cycle.harmonics);
  t.samples = static_cast<std::size_t>(o.cycle.samples);
  t.traces = o.traces;
  auto& P = t.point;
  P.push_back(scalar(
      "response_class", "1",
      "response class: 0 decayed, 1 periodic LCO, 2 non-periodic, 3 divergent, 4 failed, 5 unsettled "
      "(fill value: not run)",
      [](const SweepPoint& p) { return p.ok ? static_cast<double>(p.lco.response) : 4.0; },
      [](SweepPoint& p, double v) {
        p.ok = v != 4.0;
        p.lco.response = p.ok ? static_cast<ResponseClass>(static_cast<int>(v)) : ResponseClass::kUnsettled;
      },
      "0, 1, 2, 3, 4 or 5", [](double v) { return v == 0 || v == 1 || v == 2 || v == 3 || v == 4 || v == 5; }));
  P.push_back(scalar(
      "decay_reason", "1", "why a decayed point is decayed: 1 to rest, 2 into the gap (0: not decayed)",
      [](const SweepPoint& p) { return static_cast<double>(p.lco.decay_reason); },
      [](SweepPoint& p, double v) { p.lco.decay_reason = static_cast<DecayReason>(static_cast<int>(v)); }, "0, 1 or 2",
      [](double v) { return v == 0 || v == 1 || v == 2; }));
  P.push_back(scalar(
      "refined", "1", "1: periodic point refined to its periodic orbit (figures of the converged orbit); 0: not",
      [](const SweepPoint& p) { return p.refined ? 1.0 : 0.0; }, [](SweepPoint& p, double v) { p.refined = v == 1.0; },
      "0 or 1", [](double v) { return v == 0 || v == 1; }));
  P.push_back(scalar("orbit_residual", "1", "scaled Newton residual of the periodic orbit (NaN: not tried)",
                     [](const SweepPoint& p) { return p.orbit_residual; },
                     [](SweepPoint& p, double v) { p.orbit_residual = v; }));
  P.push_back(scalar("floquet_multiplier", "1",
                     "largest modulus of the orbit's non-trivial Floquet multipliers (NaN: no converged orbit)",
                     [](const SweepPoint& p) { return p.floquet_multiplier; },
                     [](SweepPoint& p, double v) { p.floquet_multiplier = v; }));
  P.push_back(scalar("frequency", "Hz",
                     "frequency of the last cycles of the watched DOF: the LCO frequency where response_class = 1; "
                     "for a decayed run the frequency of the dying motion, not an LCO",
                     [](const SweepPoint& p) { return p.lco.frequency; },
                     [](SweepPoint& p, double v) { p.lco.frequency = v; }));
  P.push_back(scalar(
      "cycles", "1", "complete cycles of the watched DOF", [](const SweepPoint& p) { return static_cast<double>(p.lco.cycles); },
      [](SweepPoint& p, double v) { p.lco.cycles = static_cast<int>(v); }, "a count 0..2^31-1",
      [](double v) { return is_count(v) && v < 2147483648.0; }));
  P.push_back(scalar("spread", "1", "relative spread of the cycle amplitude over the last cycles",
                     [](const SweepPoint& p) { return p.lco.spread; }, [](SweepPoint& p, double v) { p.lco.spread = v; }));
  P.push_back(scalar("end_time", "s", "time the run ended", [](const SweepPoint& p) { return p.end_time; },
                     [](SweepPoint& p, double v) { p.end_time = v; }));
  P.push_back(scalar(
      "switches", "1", "spring switching points crossed", [](const SweepPoint& p) { return static_cast<double>(p.switches); },
      [](SweepPoint& p, double v) { p.switches = static_cast<std::int64_t>(v); }, "a count", is_count));
  // Classes and counts are integers (int64, fill value kIntegerFill where
  // a point was not run); a class names its codes (CF 1.10 §3.5 flags).
  const auto integer = [&P](const std::string& name, Flags flags) {
    for (auto& f : P)
      if (f.name == name) {
        f.integer = true;
        f.flags = std::move(flags);
      }
  };
  integer("response_class", {{0, 1, 2, 3, 4, 5}, "decayed periodic_lco non_periodic divergent failed unsettled"});
  integer("decay_reason", {{0, 1, 2}, "not_decayed to_rest into_gap"});
  integer("refined", {{0, 1}, "not_refined refined"});
  integer("cycles", {});
  integer("switches", {});
  for (int k = 0; k < ndof; ++k) {
    const std::string u = kDofUnits[k], n = kDofNames[k];
    const auto peaks = [k](auto& p) -> auto& { return p.lco.dof[k]; };
    P.push_back(member(n + "_amplitude", u, n + " half peak-to-peak amplitude over the last cycles", peaks,
                       &DofCycle::amplitude));
    P.push_back(member(n + "_max", u, n + " largest value", peaks, &DofCycle::max));
    P.push_back(member(n + "_min", u, n + " smallest value", peaks, &DofCycle::min));
  }
  // Content of the settled cycle (periodic points; NaN elsewhere).
  auto& C = t.cycle;
  auto has_cycle = [](const SweepPoint& p) { return p.cycle.samples > 0; };
  for (int k = 0; k < ndof; ++k) {
    const std::string u = kDofUnits[k], n = kDofNames[k];
    const auto content = [k](auto& p) -> auto& { return p.cycle.dof[k]; };
    C.push_back(member(n + "_mean", u, n + " mean over one settled LCO period", content, &DofHarmonics::mean));
    C.push_back(member(n + "_rms", u, n + " RMS about zero over one settled LCO period", content, &DofHarmonics::rms));
    C.push_back(member(n + "_rms_about_mean", u, n + " RMS about the mean over one settled LCO period", content,
                       &DofHarmonics::rms_about_mean));
    C.push_back(list(n + "_harmonics", u, n + " amplitude of harmonic k of the LCO (one-period DFT)", "harmonic",
                     t.harmonics, [k](auto& p) -> auto& { return p.cycle.dof[k].harmonics; }));
    C.push_back(member(n + "_thd", "1", n + " total harmonic distortion relative to the fundamental", content,
                       &DofHarmonics::thd));
    if (t.traces)
      C.push_back(list(n + "_cycle", u, n + " over one settled LCO period from the phase origin", "cycle_phase",
                       t.samples, [k](auto& p) -> auto& { return p.cycle.trace[k]; }));
  }
  for (auto& f : C) f.present = has_cycle;
  return t;
}

const Field<SweepPoint>& SweepTables::field(std::string_view name) const {
  for (const auto* layout : {&point, &cycle})
    for (const auto& f : *layout)
      if (f.name == name) return f;
  throw InternalError(__FILE__, __LINE__, fmt::format("no field '{}' in the sweep point layout", name));
}

std::string SweepTables::cite(std::string_view name, const SweepPoint& p) const {
  std::string t = fmt::format("{}[direction {}, {} index {}", field(name).name, p.direction, axis1, p.i);
  if (n2 > 1) t += fmt::format(", {} index {}", axis2, p.j);
  return t + "]";
}

std::size_t SweepTables::cell(const SweepPoint& p) const { return cell(p.direction, p.i, p.j); }

std::size_t SweepTables::cell(int direction, int i, int j) const {
  return (static_cast<std::size_t>(direction) * n1 + static_cast<std::size_t>(i)) * n2 + static_cast<std::size_t>(j);
}

nlohmann::json point_record(const SweepPoint& p, const SweepTables& t) {
  nlohmann::json j;
  j["direction"] = p.direction;
  j["i"] = p.i;
  j["j"] = p.j;
  j["value1"] = json_number(p.value1);  // the axis values at i and j, checked on reading
  j["value2"] = json_number(p.value2);
  j["error"] = p.error;
  j["refinement_failure"] = p.refinement_failure;
  j["watched_dof"] = p.lco.watched_dof;
  j["stopped_early"] = p.lco.stopped_early;
  j["steps"] = p.steps;
  // A failed point's table class is 4; the detector's class before the
  // failure is kept for the summaries (the --json `class`).
  if (!p.ok) j["class_before_failure"] = static_cast<int>(p.lco.response);

  layout_to_json(j, t.point, p);
  layout_to_json(j, t.cycle, p);
  if (p.cycle.samples > 0) j["cycle_period"] = json_number(p.cycle.period);
  j["final_state"] = nlohmann::json::array();
  for (double x : p.final_state) j["final_state"].push_back(json_number(x));
  j["final_regions"] = p.final_regions;
  return j;
}

SweepPoint point_from_record(const nlohmann::json& j, const SweepRequest& r, const SweepTables& t,
                             const SourceLocation& where) {
  const std::string written = "the lines aerosect sweep wrote (remove the journal to start the sweep again)";
  auto fail = [&](const std::string& key, const nlohmann::json& value, const std::string& problem,
                  const std::string& allowed) { return InputError(where, key, value.dump().substr(0, 60), problem, allowed); };
  if (!j.is_object()) throw fail("", j, "is not a sweep point record", written);
  auto field = [&](const char* key) -> const nlohmann::json& {
    const auto it = j.find(key);
    if (it == j.end()) throw fail(key, nullptr, "is missing", written);
    return *it;
  };
  auto integer = [&](const char* key, std::int64_t lo, std::int64_t hi) -> std::int64_t {
    const nlohmann::json& v = field(key);
    if (!v.is_number_integer() || (v.is_number_unsigned() && v.get<std::uint64_t>() > static_cast<std::uint64_t>(hi)) ||
        v.get<std::int64_t>() < lo || v.get<std::int64_t>() > hi)
      throw fail(key, v, "is out of range", fmt::format("an integer from {} to {}", lo, hi));
    return v.get<std::int64_t>();
  };
  SweepPoint p;
  p.direction = static_cast<int>(integer("direction", 0, 1));
  p.i = static_cast<int>(integer("i", 0, static_cast<std::int64_t>(t.n1) - 1));
  p.j = static_cast<int>(integer("j", 0, static_cast<std::int64_t>(t.n2) - 1));
  if ((p.direction == 0 && !r.options.up) || (p.direction == 1 && !r.options.down))
    throw fail("direction", p.direction, "is a direction this sweep does not run", r.options.up ? "0 (up)" : "1 (down)");
  p.value1 = r.options.axes[0].values[static_cast<std::size_t>(p.i)];
  p.value2 = r.options.axes.size() > 1 ? r.options.axes[1].values[static_cast<std::size_t>(p.j)] : 0.0;
  for (const auto& [key, want] : {std::pair<const char*, double>{"value1", p.value1}, {"value2", p.value2}}) {
    const nlohmann::json& v = field(key);
    const std::optional<double> x = number_from_json(v);
    if (!x || *x != want)
      throw fail(key, v, "is not the request's axis value at this point's index", fmt::format("{:.17g}", want));
  }
  p.lco.watched_dof = static_cast<int>(integer("watched_dof", 0, t.ndof - 1));
  p.steps = integer("steps", 0, std::numeric_limits<std::int64_t>::max());
  if (const nlohmann::json& e = field("error"); e.is_string())
    p.error = e.get<std::string>();
  else
    throw fail("error", e, "is not text", "a JSON string (empty when the point ran)");
  if (const nlohmann::json& e = field("refinement_failure"); e.is_string())
    p.refinement_failure = e.get<std::string>();
  else
    throw fail("refinement_failure", e, "is not text", "a JSON string (empty when refined or not periodic)");
  if (const nlohmann::json& e = field("stopped_early"); e.is_boolean())
    p.lco.stopped_early = e.get<bool>();
  else
    throw fail("stopped_early", e, "is not true or false", "true or false");
  layout_from_json(j, t.point, p, where, written);
  if (!p.ok && j.contains("class_before_failure")) {
    const auto before = integer("class_before_failure", 0, 5);
    if (before == 4) throw fail("class_before_failure", before, "is not a detector's class", "0, 1, 2, 3 or 5");
    p.lco.response = static_cast<ResponseClass>(before);
  }

  // A settled cycle is recorded for periodic points only: its fields are all
  // there or none is.
  if (!t.cycle.empty() && j.contains(t.cycle.front().name)) {
    layout_from_json(j, t.cycle, p, where, written);
    p.cycle.samples = static_cast<int>(t.samples);
    const nlohmann::json& cp = field("cycle_period");
    const std::optional<double> period = number_from_json(cp);
    if (!period || !(*period > 0)) throw fail("cycle_period", cp, "is not a period", "a positive number of seconds");
    p.cycle.period = *period;
  }
  // The run's final state, for continuation to the next point: one value
  // per state of the model and one spring region per DOF (run_point uses it
  // only when the sizes and regions fit the model).
  const nlohmann::json& xs = field("final_state");
  if (!xs.is_array() || xs.size() > kMaxStateSize)
    throw fail("final_state", xs, "is not the run's state vector", fmt::format("a list of at most {} numbers", kMaxStateSize));
  for (const auto& x : xs) {
    const std::optional<double> v = number_from_json(x);
    if (!v) throw fail("final_state", x, "is not a number", "a list of numbers");
    p.final_state.push_back(*v);
  }
  const nlohmann::json& rs = field("final_regions");
  if (!rs.is_array() || rs.size() > static_cast<std::size_t>(t.ndof))
    throw fail("final_regions", rs, "is not one spring region per DOF", fmt::format("a list of at most {} integers", t.ndof));
  for (const auto& x : rs) {
    if (!x.is_number_integer() || x.get<std::int64_t>() < 0 || x.get<std::int64_t>() > 1000000)
      throw fail("final_regions", x, "is not a spring region", "an integer from 0 to the law's number of breakpoints");
    p.final_regions.push_back(x.get<int>());
  }
  return p;
}

// Writes the map's tables, axes and attributes (the layout of sweep.hpp).
void write_sweep_tables(TableSink& doc, const Case& c, const SweepRequest& r, const SweepStore& points,
                        const FlutterReport* overlay) {
  RunMetadata meta = case_metadata(c, "sweep");
  meta.text_attributes.push_back({"continuation", r.options.continuation ? "continue" : "fresh"});
  meta.text_attributes.push_back({"gusts", sweep_gust_note(c, r)});
  doc.metadata(meta);
  const auto& o = r.options;
  const SweepTables t = sweep_tables(r, c.model.section.dof);
  const std::vector<std::int32_t> dirs = {0, 1};
  doc.integer_axis("direction", dirs, "sweep direction: 0 up (ascending), 1 down");
  doc.text_attribute("direction", "names", "up,down");
  doc.axis_flags("direction", {{0, 1}, "up down"});
  // Each swept axis is named after its key and has the key's units.
  std::vector<std::string> dims = {"direction"};
  for (std::size_t a = 0; a < o.axes.size() && a < 2; ++a) {
    const std::string name = a == 0 ? t.axis1 : t.axis2;
    doc.axis(name, o.axes[a].values, axis_units(o.axes[a].key), "swept value of " + o.axes[a].key);
    doc.text_attribute(name, "key", o.axes[a].key);
    dims.push_back(name);
  }
  const std::size_t cells = 2 * t.n1 * t.n2;
  // Each table from the store, a chunk at a time.
  write_layout_columns<SweepPoint>(doc, t.point, dims, cells,
                                   [&](std::size_t k, std::size_t first, std::span<double> out) {
                                     points.column(false, k, first, out);
                                   });
  std::vector<std::int32_t> harmonic(t.harmonics);
  for (std::size_t q = 0; q < t.harmonics; ++q) harmonic[q] = static_cast<std::int32_t>(q + 1);
  doc.integer_axis("harmonic", harmonic, "harmonic number k of the LCO frequency");
  if (o.traces) {
    std::vector<double> phase(t.samples);
    for (std::size_t q = 0; q < t.samples; ++q) phase[q] = static_cast<double>(q) / static_cast<double>(t.samples);
    doc.axis("cycle_phase", phase, "1",
             "time since the phase origin (the watched DOF's largest sample) over the LCO period");
  }
  write_layout_columns<SweepPoint>(doc, t.cycle, dims, cells,
                                   [&](std::size_t k, std::size_t first, std::span<double> out) {
                                     points.column(true, k, first, out);
                                   });
  doc.integer_attribute("", "cycle_samples", o.cycle.samples);
  // From the case, so that a shard without points (more shards than
  // units) writes the same attribute and merges.
  doc.text_attribute("", "watched_dof", kDofNames[lco_watched_dof(AeroelasticModel(c.model), o.lco)]);
  // Linear flutter speeds and the describing-function LCO curve, in the
  // units of the swept key, for the bifurcation plot's overlay.
  if (overlay) {
    const std::string& key = o.axes[0].key;
    const double per = sweep_value_per_speed(c, key);
    const FlutterReport& fr = *overlay;
    const char* names[4] = {"linear_flutter_value", "gap_closed_flutter_value", "gap_open_flutter_value",
                            "describing_function_flutter_value"};
    for (const auto& lr : fr.results) {
      const Crossing& x = lr.methods.front().flutter;
      if (x.found) doc.number_attribute("", names[static_cast<int>(lr.linearisation)], x.speed * per, axis_units(key));
    }
    if (fr.lco.available) write_lco_prediction(doc, fr.lco, per, key);
  }
  // Everything needed to merge shards into the file an unsharded run writes.
  doc.text_attribute("", "sweep_request", request_json(r).dump());
}

std::string sweep_axis_name(const std::string& key) {
  std::string name = key;
  for (char& ch : name)
    if (ch == '.') ch = '_';
  return name;
}

double sweep_value_per_speed(const Case& c, const std::string& key) {
  if (key == "flow.airspeed") return 1.0;
  if (key == "nondimensional.reduced_speed")
    return 1.0 / (c.model.section.semichord * uncoupled_frequencies(c.model.section).pitch);
  return 0.0;
}

std::optional<FlutterReport> sweep_overlay(const Case& c, const SweepRequest& r, const std::atomic<bool>* cancel) {
  if (r.options.shard_count > 1 || sweep_value_per_speed(c, r.options.axes[0].key) == 0.0) return std::nullopt;
  FlutterOptions fo;
  fo.pk = false;
  fo.cancel = cancel;
  return flutter_analysis(c, fo);
}

void write_sweep_tables(TableSink& doc, const Case& c, const SweepRequest& r, const std::vector<SweepPoint>& points,
                        const FlutterReport* overlay) {
  write_sweep_tables(doc, c, r, *store_of(c, r, points), overlay);
}

void write_sweep_file(const std::string& path, const Case& c, const SweepRequest& r, const SweepStore& points,
                      const FlutterReport* overlay) {
  Hdf5Document doc(path);
  write_sweep_tables(doc, c, r, points, overlay);
  doc.commit();
}

void write_sweep_file(const std::string& path, const Case& c, const SweepRequest& r,
                      const std::vector<SweepPoint>& points, const FlutterReport* overlay) {
  write_sweep_file(path, c, r, *store_of(c, r, points), overlay);
}

}  // namespace aerosect

namespace aerosect {

nlohmann::json merge_json(const std::vector<std::string>& inputs, const std::string& output) {
  return {{"command", "merge"}, {"inputs", inputs}, {"output", output}};
}

std::string merge_text(const std::vector<std::string>& inputs, const std::string& output) {
  return fmt::format("merged {} shard files into {}\n", inputs.size(), output);
}

namespace {

// The points a shard file holds: every cell whose response_class is not NaN,
// each table read through the layout and checked against the request.
void read_shard_points(const std::string& path, const SweepRequest& r, const SweepTables& t,
                       std::map<Key, SweepPoint>& merged) {
  const std::size_t cells = 2 * t.n1 * t.n2;
  const std::string watched = read_text_attribute(path, "watched_dof");
  int w = -1;
  for (int k = 0; k < t.ndof; ++k)
    if (watched == kDofNames[k]) w = k;
  if (w < 0)
    throw InputError({path, 0, 0}, "watched_dof", watched.substr(0, 60), "is not a DOF of the sweep's case",
                     t.ndof == 3 ? "plunge, pitch or flap" : "plunge or pitch");
  auto read = [&](const Field<SweepPoint>& f) { return read_double_dataset(path, f.name, cells * f.width); };
  const std::vector<double> cls = read(t.point.front());
  std::vector<SweepPoint*> at(cells, nullptr);
  std::vector<SweepPoint> points;
  points.reserve(cells);
  for (int dir = 0; dir < 2; ++dir)
    for (std::size_t i = 0; i < t.n1; ++i)
      for (std::size_t j = 0; j < t.n2; ++j) {
        SweepPoint p;
        p.direction = dir;
        p.i = static_cast<int>(i);
        p.j = static_cast<int>(j);
        if (std::isnan(cls[t.cell(p)])) continue;
        p.value1 = r.options.axes[0].values[i];
        p.value2 = t.n2 > 1 ? r.options.axes[1].values[j] : 0.0;
        p.lco.watched_dof = w;
        points.push_back(p);
      }
  for (auto& p : points) at[t.cell(p)] = &p;
  auto fill = [&](const Layout<SweepPoint>& layout, bool cycle) {
    std::vector<double> first;
    for (const auto& f : layout) {
      const std::vector<double> v = read(f);
      if (cycle && first.empty()) first = v;
      for (std::size_t c = 0; c < cells; ++c) {
        SweepPoint* p = at[c];
        if (!p || (cycle && std::isnan(first[c]))) continue;
        for (std::size_t q = 0; q < f.width; ++q) {
          const double x = v[c * f.width + q];
          if (f.valid && !f.valid(x))
            throw InputError({path, 0, 0}, f.name, fmt::format("{}", x), "is out of range in this shard", f.allowed);
          f.set(*p, q, x);
        }
        if (cycle) {
          p->cycle.samples = static_cast<int>(t.samples);
          p->cycle.period = 1.0 / p->lco.frequency;
        }
      }
    }
  };
  fill(t.point, false);
  fill(t.cycle, true);
  for (auto& p : points) merged[{p.direction, p.j, p.i}] = std::move(p);
}

}  // namespace

void merge_sweep_files(const std::vector<std::string>& inputs, const std::string& output,
                       const std::atomic<bool>* cancel) {
  std::optional<nlohmann::json> request;
  std::vector<int> shards;
  int count = 0;
  std::map<Key, SweepPoint> merged;
  for (const auto& path : inputs) {
    stop_if_cancelled(cancel);
    nlohmann::json req = nlohmann::json::parse(read_text_attribute(path, "sweep_request"), nullptr, false);
    if (req.is_discarded() || !req.is_object())
      throw InputError({path, 0, 0}, "", "", "is not an aerosect sweep file", "files written by aerosect sweep");
    const SweepRequest shard = request_from_json(req, {path, 0, 0});
    const int k = shard.options.shard_index, n = shard.options.shard_count;
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
    const int ndof = sweep_point_case(shard).model.section.dof;
    read_shard_points(path, shard, sweep_tables(shard, ndof), merged);
  }
  if (!request || static_cast<int>(shards.size()) != count)
    throw InputError({inputs.empty() ? "" : inputs.front(), 0, 0}, "", "",
                     fmt::format("{} of {} shards given", shards.size(), count),
                     "every shard file 1/N..N/N of the sweep");
  const SweepRequest r = request_from_json(*request);
  std::vector<SweepPoint> points;
  for (auto& [key, p] : merged) points.push_back(std::move(p));
  const Case c = parse_case(r.case_text, r.case_path, r.overrides);
  const std::optional<FlutterReport> overlay = sweep_overlay(c, r, cancel);
  stop_if_cancelled(cancel);
  write_sweep_file(output, c, r, points, overlay ? &*overlay : nullptr);
}

}  // namespace aerosect
