#pragma once
// A sweep's finished points by cell, held as fixed-size records of doubles
// in memory or in a scratch file, so that the sweep command writes its map,
// text and JSON without holding its points: its memory does not grow with
// the number of points (tools/bench, "load").
//
// A record is the point's layout values (SweepTables::point then ::cycle,
// each field's `width` values, NaN where a field is absent) followed by
// what the summaries read besides (the detector's class before a failure,
// the watched DOF, whether the run stopped early, its steps, the cycle's
// period, and the error and refinement-failure texts and the final state
// and spring regions, kept after the records). The map's tables are read
// from it column by column; a point is read back as SweepPoint with every
// field its summaries and continuation use.
//
// The scratch file is made in a given folder (the map's, which the command
// has claimed) and unlinked at once (O_TMPFILE, or a unique name removed
// after opening): nothing is left behind however the process ends. Its
// record region is sparse: a cell not run takes no room. For the map the
// records are first turned into columns (one more pass, after the texts),
// so each table is one contiguous read. `put` is thread-safe; reading while
// points are still put is not.

#include <cstddef>
#include <functional>
#include <memory>
#include <span>
#include <string>
#include <string_view>
#include <tuple>

#include <nlohmann/json.hpp>

#include "aerosect/analysis/sweep.hpp"

namespace aerosect {

// The figures the summaries give of a set of points, gathered one point at
// a time in any order (ties broken by the order run_sweep returns them).
struct SweepTally {
  int j = 0;  // the second axis's index the summary is of
  SweepSummary summary;
  std::size_t points = 0, unsettled = 0, unrefined = 0;
  int watched_dof = -1;  // of the first point in run_sweep's order (-1: none)
  void add(const SweepPoint& p);

 private:
  std::tuple<int, int, int> first_ = {2, 0, 0}, largest_ = {2, 0, 0};  // (direction, j, i) of those
};

class SweepStore {
 public:
  // Records in memory (the library's callers, which hold their points anyway).
  SweepStore(const SweepRequest& r, const SweepTables& t);
  // Records in an unlinked scratch file in `folder`; `owner` (the map's
  // path) names it in errors. Throws OutputError when it cannot be made.
  SweepStore(const SweepRequest& r, const SweepTables& t, const std::string& folder, const std::string& owner);
  ~SweepStore();
  SweepStore(const SweepStore&) = delete;
  SweepStore& operator=(const SweepStore&) = delete;

  // Keeps `p` in its cell: each cell once, and every point before any
  // table, text or JSON is read (InternalError otherwise). Throws
  // OutputError when the scratch file cannot take it (disk full).
  void put(const SweepPoint& p);
  std::size_t size() const;  // points held
  const SweepTables& tables() const;
  // The summaries' figures of the points held (of the second axis's first
  // value), gathered as they were put.
  const SweepTally& tally() const;

  // Whether the point (direction, i, j) is held; that point read back
  // (InternalError when it is not held). Thread-safe beside put.
  bool held(int direction, int i, int j) const;
  SweepPoint get(int direction, int i, int j) const;
  // Calls `f` with every held point, read back from its record, in the
  // order run_sweep returns them (direction, second axis, first axis: chain
  // by chain). Throws OutputError on a read failure.
  void visit(const std::function<void(const SweepPoint&)>& f) const;
  // Values first .. first + out.size() - 1 of field k of the point layout
  // (cycle false) or the cycle layout (cycle true), cell-major: NaN where no
  // point is held or the field is absent.
  void column(bool cycle, std::size_t k, std::size_t first, std::span<double> out) const;

 private:
  struct Records;
  std::unique_ptr<Records> records_;
};


// The map, the --json summary and the text summary from a store; the forms
// of sweep.hpp taking a vector of points put them into a store in memory
// and call these. The JSON's head is every key but "points" (a caller may
// add keys); write_sweep_json then writes it with the points, one at a
// time, exactly as nlohmann::json::dump(2) would the whole. Text goes to
// `out` in pieces.
void write_sweep_tables(TableSink& sink, const Case& c, const SweepRequest& r, const SweepStore& points,
                        const FlutterReport* overlay);
void write_sweep_file(const std::string& path, const Case& c, const SweepRequest& r, const SweepStore& points,
                      const FlutterReport* overlay);
nlohmann::json sweep_json_head(const Case& c, const SweepRequest& r, const SweepStore& points,
                               const std::string& output);
void write_sweep_json(const nlohmann::json& head, const SweepStore& points,
                      const std::function<void(std::string_view)>& out);
void write_sweep_text(const Case& c, const SweepRequest& r, const SweepStore& points, const std::string& output,
                      const std::function<void(std::string_view)>& out);

}  // namespace aerosect
