// aerosect batch CASE... [--table FILE] -o PREFIX: the linear flutter and
// divergence analysis (with its LCO prediction) and the design-gust sweep
// of many cases (or of one case over a table of
// parameter sets) in one call, with one summary row per case in PREFIX.csv
// and PREFIX.json (analysis/batch.hpp). Interrupted, it writes the rows of
// the cases completed so far.

#include <memory>
#include <optional>

#include "aerosect/analysis/batch.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/text_file.hpp"
#include "command.hpp"

namespace aerosect::cli {

namespace {

struct BatchOptions {
  std::vector<std::string> cases, overrides;
  std::string table, output, speeds, method = "both";
  bool json = false;
};

int run(const BatchOptions& o) {
  check_output_name("-o", o.output);
  if (!o.table.empty() && o.cases.size() != 1)
    throw InputError({"--table", 0, 0}, "--table", o.table,
                     fmt::format("needs exactly one base case, {} given", o.cases.size()),
                     "one CASE with --table (its lines are parameter sets of that case)");
  FlutterOptions fo = flutter_options(o.speeds, o.method, std::nullopt);
  const std::vector<BatchEntry> entries = o.table.empty()
                                              ? batch_entries(o.cases, o.overrides)
                                              : batch_entries_from_table(o.cases.front(), o.table, o.overrides);
  const nlohmann::json rows = run_batch(entries, fo, cancel_flag());
  // Whatever completed is written, interrupted or not.
  write_file_atomically(o.output + ".csv", batch_summary_csv(rows));
  const std::string summary = batch_summary_json(rows).dump(2) + "\n";
  write_file_atomically(o.output + ".json", summary);
  if (interrupted_signal() != 0)
    return report_interrupted(fmt::format("{} of {} cases in {}.csv and {}.json", rows.size(), entries.size(),
                                          o.output, o.output));
  print(o.json ? summary
               : batch_summary_text(rows) + fmt::format("  written to {}.csv and {}.json\n", o.output, o.output));
  return 0;
}

}  // namespace

Command add_batch_command(CLI::App& app) {
  auto o = std::make_shared<BatchOptions>();
  CLI::App* cmd = app.add_subcommand(
      "batch", "linear flutter and divergence, LCO prediction and design-gust peaks of many cases, or of one "
               "case over a table of parameter sets: a summary row per case (CSV and JSON)");
  cmd->add_option("CASE", o->cases, "case files (TOML); one with --table")->required();
  cmd->add_option("--set", o->overrides, "override a case entry in every case (repeatable)")
      ->type_name("KEY=VALUE");
  cmd->add_option("--table", o->table,
                  "CSV of parameter sets: a header of case keys (and an optional name column), one line per set");
  cmd->add_option("-o,--output", o->output, "PREFIX: writes PREFIX.csv and PREFIX.json")->required();
  add_flutter_speed_options(cmd, o->speeds, o->method);
  cmd->add_flag("--json", o->json, "print the JSON summary on stdout");
  return {cmd, [o] { return run(*o); }};
}

}  // namespace aerosect::cli
