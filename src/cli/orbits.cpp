// aerosect orbits CASE -o FILE: limit cycles solved by shooting and continued
// in a case key. Interrupted, the orbits found so far are written to FILE
// (root attribute complete = 0). With --shard K/N, the K-th of N parts: the
// unit is a branch (branch_report.hpp), one per run, in shard 1/N; the other
// shards write a file without points that `aerosect merge` joins.

#include <chrono>
#include <cmath>
#include <cstdio>
#include <iostream>
#include <memory>
#include <optional>

#include <fmt/format.h>
#include <unistd.h>

#include "aerosect/analysis/branch_report.hpp"
#include "aerosect/analysis/continuation.hpp"
#include "aerosect/analysis/options.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/units.hpp"
#include "command.hpp"

namespace aerosect::cli {

namespace {

struct OrbitsOptions : CaseOptions {
  std::string output, key, start = "auto", watch, shard;
  std::optional<double> from, to, start_amplitude;
  int points = 200;
};

int run(const OrbitsOptions& oo) {
  // The options that need no case are checked before it is read.
  check_output_name("-o", oo.output);
  const BranchSettings settings{.key = oo.key,
                               .from = oo.from,
                               .to = oo.to,
                               .start = oo.start,
                               .start_amplitude = oo.start_amplitude,
                               .points = oo.points,
                               .watch = oo.watch,
                               .shard = oo.shard};
  check_branch_settings(settings);
  const auto [shard_index, shard_count] = parse_shard(oo.shard);
  const Case c = load_case(oo.case_path, oo.overrides);
  const BranchOptions bo = branch_options(c, settings);
  const std::string request = orbits_request_json(c, settings).dump();
  if (!shard_holds_branch(0, shard_index, shard_count)) {
    const Branch none = empty_shard_branch(c, bo, shard_index, shard_count);
    write_branch_file(oo.output, c, none, {}, request);
    print(oo.json ? branch_json(c, none, oo.output).dump(2) + "\n" : branch_text(c, none, oo.output));
    return 0;
  }
  const bool tty = isatty(2);
  const auto t0 = std::chrono::steady_clock::now();
  auto progress = [&](const BranchPoint& p, int n) {
    if (!tty) return;
    const double el = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    std::fprintf(stderr, "\r  %d orbits, parameter %.6g, %s, %.1f s elapsed   ", n, p.parameter,
                 p.orbit.stable ? "stable  " : "unstable", el);
  };
  const Branch b = continue_branch(c, bo, cancel_flag(), progress);
  if (tty) std::fprintf(stderr, "\n");
  write_branch_file(oo.output, c, b, {}, request);
  if (interrupted_signal() != 0)
    return report_interrupted(fmt::format("the {} orbits found so far are kept in {} (complete = 0)", b.points.size(),
                                          oo.output));
  print(oo.json ? branch_json(c, b, oo.output).dump(2) + "\n" : branch_text(c, b, oo.output));
  return 0;
}

}  // namespace

Command add_orbits_command(CLI::App& app) {
  auto o = std::make_shared<OrbitsOptions>();
  CLI::App* cmd = app.add_subcommand("orbits",
                                     "limit cycles solved by shooting and continued in a case key: stable and unstable "
                                     "branches, Floquet multipliers, folds -> HDF5 branch file");
  add_case_options(cmd, *o);
  cmd->add_option("-o,--output", o->output, "HDF5 branch file")->required();
  cmd->add_option("--key", o->key,
                  "numeric case key to continue in (default flow.airspeed, or "
                  "nondimensional.reduced_speed for a nondimensional case)");
  cmd->add_option("--from", o->from, "parameter window start (default: a tenth of the case's value)");
  cmd->add_option("--to", o->to, "parameter window end (default: four times the case's value)");
  cmd->add_option("--start", o->start, "auto, hopf, march or describing")
      ->check(CLI::IsMember({"auto", "hopf", "march", "describing"}))
      ->capture_default_str();
  cmd->add_option("--start-amplitude", o->start_amplitude,
                  "hopf start: amplitude of the first orbit (degrees for pitch/flap, m for plunge)");
  cmd->add_option("--points", o->points, "most orbits on the branch")->capture_default_str();
  cmd->add_option("--watch", o->watch, "DOF whose maxima define the section (plunge, pitch, flap)");
  cmd->add_option("--shard", o->shard,
                  "K/N: run the K-th of N parts (the unit is a branch; a run traces one, in shard 1/N); "
                  "join the files with aerosect merge");
  return {cmd, [o] { return run(*o); }};
}

}  // namespace aerosect::cli
