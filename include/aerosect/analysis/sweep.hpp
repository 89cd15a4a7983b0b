#pragma once
// Parameter sweeps with LCO extraction: the map of response class, LCO
// amplitude and frequency against one or two case keys, in both sweep
// directions so hysteresis shows.
//
// A sweep is a set of chains: one per direction (up: ascending values of
// the first key, down: descending) and per value of the second key. Along a
// chain each point starts from the previous point's final state
// (continuation) or from the case's initial state (fresh). Chains are
// independent and run in parallel on `jobs` threads; every point's
// result depends only on its chain, so the results are identical whatever
// the job count. `--shard K/N` keeps the chains whose index modulo N is K-1.
// Each finished point is handed to `on_point` at once (from the worker
// thread; the callback must be thread-safe), so a caller can flush it;
// points listed in `done` are not recomputed (resume), their final states
// continuing the chain. When `cancel` turns true the points in flight stop
// and are dropped (neither reported nor returned) and no new point starts.
//
// A periodic point is refined to its periodic orbit (orbit.hpp: shooting
// by chord iterations, flows at rtol 1e-10, to a scaled residual of 1e-8,
// seeded with the state at the maximum of the watched DOF where the
// detector recognised the cycle, and its period): the point's frequency,
// per-DOF amplitude, max and min are the converged orbit's, its residual
// and largest non-trivial Floquet multiplier (of the monodromy at the
// detected cycle, the chord's matrix: as accurate as the detected cycle,
// about 1e-4) are kept, and
// its cycle content (per DOF mean, RMS about zero and about the mean,
// harmonic amplitudes 1..K and THD; with `traces` the sampled cycle) is one
// period of the orbit sampled at `cycle.samples` instants (lco.hpp). The
// refinement is accepted only when Newton converges, the orbit is stable
// (the march settled on it) and its period and watched amplitude are within
// 5 % and 10 % of the marched cycle's; otherwise the point keeps the
// marched figures, `refined` is false and `refinement_failure` says why,
// and its run goes on for one more period, sampled as above. The point's
// final state (the next point's start under continuation) is the orbit's
// state on its section, or the state after that marched period.

#include <atomic>
#include <functional>
#include <limits>
#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json.hpp>

#include "aerosect/analysis/flutter.hpp"
#include "aerosect/analysis/lco.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/io/journal.hpp"
#include "aerosect/io/table_layout.hpp"

namespace aerosect {

struct SweepAxis {
  std::string key;             // dotted case key, e.g. "flow.airspeed"
  std::vector<double> values;  // ascending
};

struct SweepOptions {
  std::vector<SweepAxis> axes;  // one or two
  bool up = true, down = true;
  bool continuation = true;
  int jobs = 1;
  int shard_index = 1, shard_count = 1;  // K/N
  LcoSettings lco;
  CycleSettings cycle;
  bool traces = false;  // keep the sampled settled cycle of each periodic point
  // The case's [[gust]] entries are left out unless asked: a gust response
  // is no limit cycle, and a map point is a property of the section at that
  // value, not of one encounter. With gusts, every point runs them.
  bool with_gusts = false;
  bool refine = true;  // refine periodic points to their orbit (above)
};

struct SweepPoint {
  int direction = 0;  // 0 up, 1 down
  int i = 0, j = 0;   // indices on axis 1 and axis 2
  double value1 = 0, value2 = 0;
  bool ok = true;
  std::string error;  // numerical trouble, when !ok
  LcoResult lco;
  SettledCycle cycle;  // periodic points only (cycle.samples == 0 otherwise);
                       // traces empty unless SweepOptions::traces
  // Refinement to the periodic orbit (periodic points; see above).
  bool refined = false;
  double orbit_residual = std::numeric_limits<double>::quiet_NaN();      // scaled Newton residual
  double floquet_multiplier = std::numeric_limits<double>::quiet_NaN();  // largest non-trivial |mu|
  std::string refinement_failure;  // why not refined, for a periodic point
  double end_time = 0;
  std::int64_t steps = 0, switches = 0;
  std::vector<double> final_state;
  std::vector<int> final_regions;
};

struct SweepRequest {
  std::string case_text, case_path;
  std::vector<std::string> overrides;
  SweepOptions options;
  // The case text parsed once (optional; run_sweep makes it when absent):
  // each point's case is read from it instead of parsing the text again.
  std::shared_ptr<const CaseDocument> document;
};

// Throws InputError when a swept value is rejected by the case reader
// (each axis value as an override of the case), or when a swept key or an
// override sets a [[gust]] entry of a sweep that leaves the gusts out
// (it would change nothing); a caller checks this before it makes any file
// for the sweep.
// The sweep journal's format (io/journal.hpp): raised whenever a record's
// fields change (4: refined orbits, decay reasons, the unsettled class).
inline constexpr int kSweepJournalFormat = 4;

void check_swept_values(const SweepRequest& r);

// The case of one sweep point: the request's case with its overrides and
// `point_overrides` (the swept values), without its gusts unless the
// request asks for them.
Case sweep_point_case(const SweepRequest& r, const std::vector<std::string>& point_overrides = {});

// What the sweep did with the case's gusts, in words (the text summary, the
// JSON and the map's `gusts` attribute): "none in the case", "included"
// or "left out (...)".
std::string sweep_gust_note(const Case& c, const SweepRequest& r);

// Runs every chain; returns all points (done ones included), sorted by
// (direction, j, i). Throws InputError when a swept value is rejected by the
// case reader (check_swept_values). `beside`, when given, is one more work
// item for the same `jobs` threads, taken first (e.g. the overlay, which
// does not depend on the points); it must not throw.
std::vector<SweepPoint> run_sweep(const SweepRequest& r, const std::vector<SweepPoint>& done,
                                  const std::function<void(const SweepPoint&)>& on_point,
                                  const std::atomic<bool>* cancel = nullptr,
                                  const std::function<void()>& beside = {});

// The streaming form of run_sweep: every point (the done ones too, with
// `computed` false) is handed to `each` as its chain reaches it (from the
// worker threads: `each` must be thread-safe), and none is kept but each
// chain's previous point, so memory does not grow with the number of
// points (the sweep command puts them into a SweepStore, sweep_store.hpp).
// A point for which `held(direction, i, j)` is true is finished and kept by
// the caller: it is neither run nor reported, and `done` need only hold the
// finished points whose successor in their chain is to run (their final
// states start it); so a resumed sweep need not hold its journal.
void sweep_each(const SweepRequest& r, const std::vector<SweepPoint>& done,
                const std::function<void(const SweepPoint&, bool computed)>& each,
                const std::atomic<bool>* cancel = nullptr, const std::function<void()>& beside = {},
                const std::function<bool(int direction, int i, int j)>& held = {});

// The `done` a resumed sweep hands to sweep_each with `held`: the held
// points whose successor in their chain (the next value going up, the one
// before going down) is not held, read with `get`; none with fresh starts.
std::vector<SweepPoint> continuation_starts(const SweepRequest& r,
                                            const std::function<bool(int direction, int i, int j)>& held,
                                            const std::function<SweepPoint(int direction, int i, int j)>& get);

// Most values per axis, and most points in one sweep (both directions, the
// whole grid): each point is a run, and the map holds every point's rows.
// The command refuses larger sweeps; a request read from a file asking for
// more is refused before anything is allocated for it.
inline constexpr long kMaxAxisValues = 100000;
inline constexpr long kMaxSweepPoints = 1000000;
// Longest final state a journal record may hold (a model's state vector is
// far shorter: 2 or 3 DOFs with their aerodynamic lag states).
inline constexpr std::size_t kMaxStateSize = 4096;

// The request as JSON (the journal's identity, the file's sweep_request
// attribute) and back. The second form checks every count and index of a
// request read from a file and throws InputError at `where`.
nlohmann::json request_json(const SweepRequest& r);
SweepRequest request_from_json(const nlohmann::json& j);
SweepRequest request_from_json(const nlohmann::json& j, const SourceLocation& where);

// The --json summary record of a point (keys in README.md, "JSON output").
nlohmann::json point_json(const SweepPoint& p);

// The layout of a sweep's point records (table_layout.hpp): `point` holds the
// fields of every point, `cycle` those of a settled cycle (periodic points;
// NaN elsewhere). Each field once, with name, units and long_name: the HDF5
// tables, the journal records and the merge are generated from it.
// The map's axis of a swept case key: the key with '.' as '_'
// ("flow.airspeed" -> "flow_airspeed"), a netCDF name of letters, digits and
// underscores (CF 1.10 §2.3).
std::string sweep_axis_name(const std::string& key);

struct SweepTables {
  int ndof = 2;
  std::size_t n1 = 0, n2 = 1;         // values of axis 1 and 2 (1 without a second axis)
  std::string axis1, axis2;           // their names in the map (sweep_axis_name)
  std::size_t harmonics = 0, samples = 0;
  bool traces = false;
  Layout<SweepPoint> point, cycle;
  // Index of a point's cell in the (direction, axis 1, axis 2) grid.
  std::size_t cell(const SweepPoint& p) const;
  std::size_t cell(int direction, int i, int j) const;
  // The field named `name` (InternalError when the layout has none): the
  // study's provenance rows name the map's tables through it.
  const Field<SweepPoint>& field(std::string_view name) const;
  // "name[direction d, flow_airspeed index i]" (", AXIS2 index j" with a
  // second axis): where a point's value of that field is in the map.
  std::string cite(std::string_view name, const SweepPoint& p) const;
};
SweepTables sweep_tables(const SweepRequest& r, int ndof);

// A point as a journal record (the layout's fields by name, plus the run's
// final state for continuation) and back. The reader checks every index,
// count and list length against the request and the layout and throws
// InputError at `where` (the journal and line) for a record that is not a
// point of this sweep.
nlohmann::json point_record(const SweepPoint& p, const SweepTables& t);
SweepPoint point_from_record(const nlohmann::json& j, const SweepRequest& r, const SweepTables& t,
                             const SourceLocation& where);

// The journal of a sweep (io/journal.hpp): kind "sweep", this program's
// journal format and the request as identity.
JournalHead sweep_journal_head(const SweepRequest& r);
// One record read back from the journal at path `journal` as a point of
// this sweep (point_from_record at its line); InputError naming the line
// when `seen(point)` says an earlier record held that point.
SweepPoint journal_point(const JournalRecord& rec, const std::string& journal, const SweepRequest& r,
                         const SweepTables& t, const std::function<bool(const SweepPoint&)>& seen);
// The finished points read back from a journal opened with that head.
// Throws InputError naming the journal and the line of a record that is not
// a point of this sweep (or holds a point twice).
std::vector<SweepPoint> points_from_journal(const Journal& journal, const SweepRequest& r,
                                            const SweepTables& t);
// Points this request (this shard) computes.
std::size_t sweep_point_count(const SweepRequest& r);

// A point's run: the case's run length, extended by that length at a time
// while the motion has not settled (no class decided and not stationary,
// lco.hpp), up to kSweepRunCap times it; still unsettled then, the point is
// classed unsettled and the summaries warn.
inline constexpr double kSweepRunCap = 10.0;
// Unsettled points (ok ones classed unsettled), and the warning about them.
std::size_t unsettled_points(const std::vector<SweepPoint>& points);
std::string unsettled_warning(const Case& c, std::size_t n);
// Periodic points not refined to their orbit, and the note about them.
std::size_t unrefined_points(const std::vector<SweepPoint>& points);
std::string unrefined_warning(std::size_t n);

struct SweepSummary {
  std::optional<double> onset_up;         // first periodic value going up (axis 1)
  std::optional<double> disappearance_down;  // last periodic value going down
  std::optional<double> largest_amplitude;   // watched DOF, m or rad
  double largest_at = 0;                  // axis-1 value
  int largest_direction = 0;
};
SweepSummary summarize(const std::vector<SweepPoint>& points, int j = 0);

nlohmann::json sweep_json(const Case& c, const SweepRequest& r, const std::vector<SweepPoint>& p,
                          const std::string& output);
std::string sweep_text(const Case& c, const SweepRequest& r, const std::vector<SweepPoint>& p,
                       const std::string& output);
// Swept value per m/s TAS of the first key (1 for flow.airspeed, 1/(b w_a)
// for nondimensional.reduced_speed), 0 for any other key.
double sweep_value_per_speed(const Case& c, const std::string& key);
// The linear flutter analysis (state-space) of the map's overlay, when the
// first key is the airspeed or the reduced speed; nullopt otherwise, and for
// a shard (shard_count > 1): a shard file is only merged, and the merge
// computes the overlay once for the whole map (before, each of N shards
// computed it too: about 0.5-1 s of a short shard's run on the demo). Throws
// Cancelled when `cancel` is set.
std::optional<FlutterReport> sweep_overlay(const Case& c, const SweepRequest& r,
                                           const std::atomic<bool>* cancel = nullptr);
// The map (layout in README.md, "LCO sweeps") into a sink, and into an HDF5
// file. `overlay` (from sweep_overlay, or nullptr) adds the flutter speeds
// and the describing-function curve in the units of the swept key; the
// writer runs no analysis.
void write_sweep_tables(TableSink& sink, const Case& c, const SweepRequest& r,
                        const std::vector<SweepPoint>& points, const FlutterReport* overlay);
void write_sweep_file(const std::string& path, const Case& c, const SweepRequest& r,
                      const std::vector<SweepPoint>& points, const FlutterReport* overlay);

// Joins the files of the shards 1/N..N/N of one sweep into the file the
// unsharded sweep writes (same request, every point once). Throws
// InputError when the files are not shards of one sweep or one is missing;
// Cancelled (nothing written) when `cancel` is set before the map is written.
void merge_sweep_files(const std::vector<std::string>& inputs, const std::string& output,
                       const std::atomic<bool>* cancel = nullptr);
// Summaries of a merge.
nlohmann::json merge_json(const std::vector<std::string>& inputs, const std::string& output);
std::string merge_text(const std::vector<std::string>& inputs, const std::string& output);

}  // namespace aerosect
