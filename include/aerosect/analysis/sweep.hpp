#pragma once
// Parameter sweeps with LCO extraction: the map of response class, LCO
// amplitude and frequency against one or two case keys, in both sweep
// directions so hysteresis shows.
//
// A sweep is a set of chains: one per direction (up: ascending values of
// the first key, down: descending) and per value of the second key. Along a
// chain each point starts from the previous point's final state
// (continuation) or from the case's initial state (fresh). Chains are
// independent and run in parallel (OpenMP) on `jobs` threads; every point's
// result depends only on its chain, so the results are identical whatever
// the job count. `--shard K/N` keeps the chains whose index modulo N is K-1.
// Each finished point is handed to `on_point` at once (from the worker
// thread; the callback must be thread-safe), so a caller can flush it;
// points listed in `done` are not recomputed (resume), their final states
// continuing the chain. When `cancel` turns true the points in flight stop
// and are dropped (neither reported nor returned) and no new point starts.
//
// A periodic point's run goes on for one more LCO period, sampled at
// `cycle.samples` instants (sample_settled_cycle in lco.hpp): per DOF mean,
// RMS (about zero and about the mean), harmonic amplitudes 1..K and THD;
// with `traces` the sampled cycle itself is kept too. The point's final
// state (the next point's start under continuation) is the state after
// that period.

#include <atomic>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "aerosect/analysis/lco.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/io/journal.hpp"

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
  double end_time = 0;
  std::int64_t steps = 0, switches = 0;
  std::vector<double> final_state;
  std::vector<int> final_regions;
};

struct SweepRequest {
  std::string case_text, case_path;
  std::vector<std::string> overrides;
  SweepOptions options;
};

// Throws InputError when a swept value is rejected by the case reader
// (each axis value as an override of the case); a caller checks this before
// it makes any file for the sweep.
void check_swept_values(const SweepRequest& r);

// Runs every chain; returns all points (done ones included), sorted by
// (direction, j, i). Throws InputError when a swept value is rejected by the
// case reader (check_swept_values).
std::vector<SweepPoint> run_sweep(const SweepRequest& r, const std::vector<SweepPoint>& done,
                                  const std::function<void(const SweepPoint&)>& on_point,
                                  const std::atomic<bool>* cancel = nullptr);

// The request as JSON (the journal's first line, the file's sweep_request
// attribute) and back.
nlohmann::json request_json(const SweepRequest& r);
SweepRequest request_from_json(const nlohmann::json& j);

// JSON record of a point (the journal line) and back.
nlohmann::json point_json(const SweepPoint& p);
SweepPoint point_from_json(const nlohmann::json& j);

// The journal of a sweep (io/journal.hpp): kind "sweep", this program's
// journal format and the request as identity.
JournalHead sweep_journal_head(const SweepRequest& r);
// The finished points read back from a journal opened with that head.
// Throws InputError naming the journal and the line of a record that is not
// a point of this sweep.
std::vector<SweepPoint> points_from_journal(const Journal& journal, const SweepRequest& r);
// Points this request (this shard) computes.
std::size_t sweep_point_count(const SweepRequest& r);

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
// Throws Cancelled (nothing written) when `cancel` is set meanwhile.
void write_sweep_file(const std::string& path, const Case& c, const SweepRequest& r,
                      const std::vector<SweepPoint>& points, const std::atomic<bool>* cancel = nullptr);

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
