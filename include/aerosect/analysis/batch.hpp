#pragma once
// Batch over cases: many case files, or one case and a table of parameter
// sets, through the linear flutter and divergence analysis (and the design-gust sweep) in one call,
// with one summary row of key results per case (CSV and JSON).
//
// A parameter table is a CSV file: a header line of case keys (the keys
// --set takes, e.g. flow.airspeed, springs.flap.total_gap_deg) and an
// optional `name` column, then one line per parameter set, its fields the
// values (TOML values: numbers, "strings", true/false). Each line is the base
// case with those overrides. '#' lines and blank lines are skipped.
//
// Every entry is loaded (and so checked) before any analysis runs: bad
// input is an InputError naming the table's file, line and column key, or
// the case file's. A case whose analysis fails numerically gets a row whose
// status says why; the others are unaffected.
//
// Key results per row (from the same FlutterReport as `aerosect flutter`,
// its JSON fields, so the numbers are those of the flutter command): for each
// method of the nominal linearisation the flutter speed (true airspeed and
// EAS, m s-1, and U* = U / (b w_a)), frequency (Hz) and the divergence speed;
// the clearance margin when the case gives a dive speed; the LCO columns
// from the same JSON (the freeplay band, the LCO onset EAS, the
// describing-function curve's stable speeds and its largest stable cycle at
// the case's airspeed); and, for a case with a one-minus-cosine gust, the
// critical peaks of the gust command's gradient sweep (default gradients,
// from rest; gust_sweep_json). Every column is in every row, null where it
// does not apply, and lco_note / gust_note say why.

#include <atomic>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "aerosect/analysis/flutter.hpp"

namespace aerosect {

struct BatchEntry {
  std::string name;                     // the table's `name`, else the case file's stem (or stem:line)
  std::string case_path;
  std::vector<std::string> overrides;   // KEY=VALUE, as --set takes them
  std::string table_path;               // the parameter table it comes from ("" for a case file of its own)
  int table_line = 0;                   // its line there
};

// One entry per case file, each with the common overrides.
std::vector<BatchEntry> batch_entries(const std::vector<std::string>& case_paths,
                                      const std::vector<std::string>& overrides);
// One entry per line of the parameter table (the common overrides first,
// the line's after them). Throws InputError naming the table file and line.
std::vector<BatchEntry> batch_entries_from_table(const std::string& base_case, const std::string& table_path,
                                                 const std::vector<std::string>& overrides);

// Loads every entry's case (throws the first InputError), then runs the
// flutter analysis of each and returns one JSON row per entry, in order.
// Stops early when `cancel` is set, returning the rows of the entries
// completed so far (an interrupted batch keeps them).
nlohmann::json run_batch(const std::vector<BatchEntry>& entries, const FlutterOptions& options,
                         const std::atomic<bool>* cancel = nullptr);

// The summary: {"caution", "aerosect_version", "cases": rows} as JSON, and
// as CSV (a '#' caution line, a header of the columns, one line per row;
// numbers to 17 significant digits, empty where a value does not apply).
nlohmann::json batch_summary_json(const nlohmann::json& rows);
std::string batch_summary_csv(const nlohmann::json& rows);
// The summary as a text table for the terminal.
std::string batch_summary_text(const nlohmann::json& rows);

}  // namespace aerosect
