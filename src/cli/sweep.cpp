// aerosect sweep CASE --vary KEY=FROM:TO:N -o MAP: the LCO map. Every
// finished point goes to the journal MAP.journal at once (io/journal.hpp);
// interrupted, the journal keeps every finished point and the same command
// continues from it. The journal is removed once MAP is written.

#include <chrono>
#include <cstdio>
#include <exception>
#include <filesystem>
#include <iostream>
#include <memory>
#include <mutex>
#include <sstream>

#include <fmt/format.h>
#include <unistd.h>

#include "aerosect/analysis/sweep.hpp"
#include "aerosect/analysis/sweep_store.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/io/journal.hpp"
#include "aerosect/io/output_claim.hpp"
#include "command.hpp"

namespace aerosect::cli {

namespace {

struct SweepCommandOptions : CaseOptions {
  std::string output, direction = "both", restart = "continue", shard;
  std::vector<std::string> vary;
  std::optional<int> jobs;
  bool traces = false;
  bool with_gusts = false;
};

// The request from the options alone (the case text comes later): every
// option is checked here, before the case is read and any file is made.
SweepRequest make_request(const SweepCommandOptions& o) {
  check_output_name("-o", o.output);
  return sweep_request({.overrides = o.overrides,
                        .vary = o.vary,
                        .direction = o.direction,
                        .restart = o.restart,
                        .jobs = o.jobs,
                        .shard = o.shard,
                        .traces = o.traces,
                        .with_gusts = o.with_gusts});
}

// The journal's head: the request, and a digest of each recorded gust's
// samples as read (their files are not in the case text), so a sweep is not
// resumed after a gust file changed. A case without recorded gusts has the
// request alone (as journals written before the digests).
JournalHead journal_head(const SweepRequest& req, const Case& c) {
  JournalHead h = sweep_journal_head(req);
  for (const auto& g : c.model.gusts.profiles()) {
    if (g.shape != GustShape::kRecorded) continue;
    std::string bytes;
    for (const auto* v : {&g.record_time, &g.record_velocity})
      bytes.append(reinterpret_cast<const char*>(v->data()), v->size() * sizeof(double));
    h.identity["recorded_gusts"].push_back(
        {{"label", g.label}, {"samples", g.record_time.size()}, {"fnv1a64", fnv1a64_hex(bytes)}});
  }
  return h;
}

// One progress line on a terminal: points done of the total, elapsed, ETA.
class Progress {
 public:
  Progress(std::size_t resumed, std::size_t total) : resumed_(resumed), total_(total), tty_(isatty(2)) {}
  void point_done(std::size_t finished) const {
    if (!tty_) return;
    const double el = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0_).count();
    const double eta = finished > resumed_ ? el / static_cast<double>(finished - resumed_) *
                                                 static_cast<double>(total_ > finished ? total_ - finished : 0)
                                           : 0.0;
    std::fprintf(stderr, "\r  %zu/%zu points, %.1f s elapsed, ETA %.1f s   ", finished, total_, el, eta);
  }
  void end() const {
    if (tty_) std::fprintf(stderr, "\n");
  }

 private:
  std::size_t resumed_, total_;
  bool tty_;
  std::chrono::steady_clock::time_point t0_ = std::chrono::steady_clock::now();
};

int run(const SweepCommandOptions& o) {
  SweepRequest req = make_request(o);
  const Case c = load_case(o.case_path, o.overrides);
  req.case_text = c.text;
  req.case_path = c.path;
  // Every swept value is checked before the journal is made: a refused
  // sweep leaves no journal behind to refuse the corrected command.
  check_swept_values(req);
  // The map and its journal are this run's from the start (a second run
  // with the same -o is refused before it touches the journal).
  claim_output(o.output);
  claim_output(o.output + ".journal");
  const SweepTables tables = sweep_tables(req, c.model.section.dof);
  // The finished points wait for the map in a scratch file beside it
  // (unlinked: nothing is left behind), not in memory: the command's memory
  // does not grow with the number of points, resumed ones included.
  const std::string folder = std::filesystem::path(o.output).parent_path().string();
  SweepStore store(req, tables, folder.empty() ? "." : folder, o.output);
  const std::string journal_path = o.output + ".journal";
  std::size_t resumed = 0;
  Journal journal(journal_path, journal_head(req, c), [&](JournalRecord&& rec) {
    store.put(journal_point(rec, journal_path, req, tables,
                            [&](const SweepPoint& p) { return store.held(p.direction, p.i, p.j); }));
    ++resumed;
  });
  for (const auto& n : journal.notes()) std::cerr << "aerosect: " << n << "\n";
  if (resumed > 0)
    std::cerr << "aerosect: resuming: " << resumed << " finished points read from " << journal.path() << "\n";
  // Of the finished points, only those whose successor in their chain is
  // to run are held in memory: their final states start it.
  const auto held = [&store](int d, int i, int j) { return store.held(d, i, j); };
  const std::vector<SweepPoint> starts =
      resumed > 0 ? continuation_starts(req, held, [&store](int d, int i, int j) { return store.get(d, i, j); })
                  : std::vector<SweepPoint>{};

  std::mutex mu;
  std::string journal_failure;  // why a point could not be journaled or kept; the sweep stops then
  std::size_t finished = resumed;
  const Progress progress(resumed, sweep_point_count(req));
  auto on_point = [&](const SweepPoint& p, bool computed) {
    if (!computed) return;  // a start read from the journal: kept already
    std::lock_guard<std::mutex> lock(mu);
    if (!journal_failure.empty()) return;
    try {
      journal.append(point_record(p, tables));
      store.put(p);
    } catch (const OutputError& e) {
      journal_failure = e.what();
      request_stop();
      return;
    }
    progress.point_done(++finished);
  };
  // The overlay (linear flutter speeds, describing-function curve) does not
  // depend on the points: one more work item of the sweep's threads.
  std::optional<FlutterReport> overlay;
  std::exception_ptr overlay_failure;
  sweep_each(
      req, starts, on_point, cancel_flag(),
      [&] {
        try {
          overlay = sweep_overlay(c, req, cancel_flag());
        } catch (...) {
          overlay_failure = std::current_exception();
        }
      },
      held);
  progress.end();
  if (!journal_failure.empty())
    throw OutputError(journal.path(), fmt::format("writing a finished point failed ({}); the {} points "
                                                  "before it are kept there: make room and run the "
                                                  "same command again to continue",
                                                  journal_failure, finished));
  const std::string kept = fmt::format("{} finished points kept in {} (run the same command again to continue)",
                                      finished, journal.path());
  if (interrupted_signal() != 0) return report_interrupted(kept);
  try {
    if (overlay_failure) std::rethrow_exception(overlay_failure);
  } catch (const Cancelled&) {
    return report_interrupted(kept);
  }
  write_sweep_file(o.output, c, req, store, overlay ? &*overlay : nullptr);
  journal.remove();
  const auto out = [](std::string_view piece) { print(piece); };
  if (o.json) {
    nlohmann::json head = sweep_json_head(c, req, store, o.output);
    head["points_resumed"] = resumed;  // read from the journal, not recomputed
    write_sweep_json(head, store, out);
    out("\n");
  } else {
    write_sweep_text(c, req, store, o.output, out);
  }
  return 0;
}

}  // namespace

Command add_sweep_command(CLI::App& app) {
  auto o = std::make_shared<SweepCommandOptions>();
  CLI::App* cmd = app.add_subcommand(
      "sweep", "LCO map: response class, amplitude and frequency against one or two case keys");
  add_case_options(cmd, *o);
  cmd->add_option("-o,--output", o->output, "HDF5 file for the map")->required();
  cmd->add_option("--vary", o->vary, "KEY=FROM:TO:N (once or twice)")->required();
  cmd->add_option("--direction", o->direction, "up, down or both")
      ->check(CLI::IsMember({"up", "down", "both"}))
      ->capture_default_str();
  cmd->add_option("--restart", o->restart, "continue (each point from the previous point's final state) or fresh")
      ->check(CLI::IsMember({"continue", "fresh"}))
      ->capture_default_str();
  cmd->add_option("--jobs", o->jobs, "threads (default: all cores)");
  cmd->add_option("--shard", o->shard, "K/N: run the K-th of N deterministic parts");
  cmd->add_flag("--with-gusts", o->with_gusts,
                "run the case's [[gust]] tables at every point (left out by default: a gust response is no LCO)");
  cmd->add_flag("--traces", o->traces, "keep one settled cycle of every DOF per periodic point in the map");
  return {cmd, [o] { return run(*o); }};
}

}  // namespace aerosect::cli
