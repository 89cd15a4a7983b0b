#include "aerosect/analysis/batch.hpp"

#include <cmath>
#include <filesystem>
#include <string_view>
#include <utility>

#include <fmt/format.h>

#include "aerosect/analysis/flutter_report.hpp"
#include "aerosect/analysis/gust_sweep.hpp"
#include "aerosect/analysis/report.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/io/text_file.hpp"
#include "aerosect/version.hpp"

namespace aerosect {

namespace {

constexpr std::uint64_t kMaxTableBytes = 16ull << 20;  // like a case file
constexpr std::size_t kMaxTableRows = 100000;
constexpr const char* kTableAllowed =
    "a CSV file: a header line of case keys (as --set takes them) and an optional `name` column, "
    "then one line per parameter set with one TOML value per key, separated by commas; '#' comments";

std::string trim(std::string_view s) {
  const auto b = s.find_first_not_of(" \t");
  if (b == std::string_view::npos) return {};
  const auto e = s.find_last_not_of(" \t");
  return std::string(s.substr(b, e - b + 1));
}

// Fields split at commas (a value with a comma inside, such as a TOML
// array, is not supported in a table).
std::vector<std::string> split_commas(std::string_view line) {
  std::vector<std::string> out;
  std::size_t b = 0;
  while (true) {
    const std::size_t e = line.find(',', b);
    out.push_back(trim(line.substr(b, e == std::string_view::npos ? std::string_view::npos : e - b)));
    if (e == std::string_view::npos) break;
    b = e + 1;
  }
  return out;
}

// The overrides as one text, "; " between them.
std::string joined(const std::vector<std::string>& overrides) {
  std::string out;
  for (const auto& o : overrides) {
    if (!out.empty()) out += "; ";
    out += o;
  }
  return out;
}

std::string stem(const std::string& path) { return std::filesystem::path(path).stem().string(); }

// The columns of a row, in a fixed order (CSV header and text table).
struct Column {
  const char* name;
  const char* units;  // "" for text and counts
};
constexpr Column kColumns[] = {
    {"name", ""},
    {"case", ""},
    {"overrides", ""},
    {"status", ""},
    {"input_form", ""},
    {"airspeed_m_s", "m s-1"},
    {"state_space_flutter_speed_m_s", "m s-1"},
    {"state_space_flutter_speed_eas_m_s", "m s-1"},
    {"state_space_flutter_reduced_speed", "1"},
    {"state_space_flutter_frequency_hz", "Hz"},
    {"state_space_divergence_speed_m_s", "m s-1"},
    {"pk_flutter_speed_m_s", "m s-1"},
    {"pk_flutter_speed_eas_m_s", "m s-1"},
    {"pk_flutter_reduced_speed", "1"},
    {"pk_flutter_frequency_hz", "Hz"},
    {"pk_divergence_speed_m_s", "m s-1"},
    {"critical", ""},
    {"critical_eas_m_s", "m s-1"},
    {"dive_speed_eas_m_s", "m s-1"},
    {"required_eas_m_s", "m s-1"},
    {"margin_percent", "%"},
    {"margin_met", ""},
    // LCO: the freeplay band and onset of the flutter command, and its
    // describing-function curve.
    {"lco_gap_open_flutter_speed_m_s", "m s-1"},
    {"lco_gap_closed_flutter_speed_m_s", "m s-1"},
    {"lco_onset_eas_m_s", "m s-1"},
    {"lco_spring", ""},
    {"lco_df_lowest_stable_speed_m_s", "m s-1"},
    {"lco_df_highest_stable_speed_m_s", "m s-1"},
    {"lco_df_stable_cycles", "1"},
    {"lco_df_amplitude_deg", "degree"},
    {"lco_df_amplitude_m", "m"},
    {"lco_df_frequency_hz", "Hz"},
    {"lco_note", ""},
    // Design gust: the gust command's critical peaks (signed value of the
    // largest magnitude over the gradients) and the gradient giving each.
    {"gust_peak_plunge_m", "m"},
    {"gust_peak_plunge_gradient_m", "m"},
    {"gust_peak_pitch_rad", "rad"},
    {"gust_peak_pitch_gradient_m", "m"},
    {"gust_peak_flap_rad", "rad"},
    {"gust_peak_flap_gradient_m", "m"},
    {"gust_peak_lift_n_per_m", "N m-1"},
    {"gust_peak_lift_gradient_m", "m"},
    {"gust_peak_pitching_moment_n_m_per_m", "N m m-1"},
    {"gust_peak_pitching_moment_gradient_m", "m"},
    {"gust_peak_hinge_moment_n_m_per_m", "N m m-1"},
    {"gust_peak_hinge_moment_gradient_m", "m"},
    {"gust_note", ""},
};

// The gust channels of the row: (channel, column of its value).
constexpr std::pair<const char*, const char*> kGustChannels[] = {
    {"plunge", "gust_peak_plunge_m"},
    {"pitch", "gust_peak_pitch_rad"},
    {"flap", "gust_peak_flap_rad"},
    {"lift", "gust_peak_lift_n_per_m"},
    {"pitching_moment", "gust_peak_pitching_moment_n_m_per_m"},
    {"hinge_moment", "gust_peak_hinge_moment_n_m_per_m"},
};

// The row's LCO columns from the flutter command's JSON, and why those left
// empty are.
void lco_columns(nlohmann::json& row, const nlohmann::json& f) {
  std::vector<std::string> notes;
  const nlohmann::json& band = f.at("freeplay_band");
  if (band.is_object()) {
    if (band.at("gap_open_flutter_m_s").is_number())
      row["lco_gap_open_flutter_speed_m_s"] = band.at("gap_open_flutter_m_s");
    else
      notes.push_back("no gap-open flutter in the speed range");
    if (band.at("gap_closed_flutter_m_s").is_number())
      row["lco_gap_closed_flutter_speed_m_s"] = band.at("gap_closed_flutter_m_s");
  } else {
    notes.push_back("no freeplay band (no spring with a gap)");
  }
  const nlohmann::json& m = f.at("margin");
  if (m.is_object() && m.at("lco_onset_eas_m_s").is_number())
    row["lco_onset_eas_m_s"] = m.at("lco_onset_eas_m_s");
  else if (band.is_object())
    notes.push_back(m.is_object() ? "no LCO onset (no gap-open flutter)" : "no LCO onset EAS (no [envelope] dive speed)");
  const nlohmann::json& p = f.at("lco_prediction");
  if (!p.is_object()) {
    const std::string why = f.value("lco_prediction_omitted", std::string());
    notes.push_back("no describing-function prediction" + (why.empty() ? std::string() : ": " + why));
  } else {
    row["lco_spring"] = p.at("spring");
    if (p.at("stable_speed_range_m_s").is_array()) {
      row["lco_df_lowest_stable_speed_m_s"] = p.at("stable_speed_range_m_s").at(0);
      row["lco_df_highest_stable_speed_m_s"] = p.at("stable_speed_range_m_s").at(1);
    } else {
      notes.push_back("no stable predicted LCO at any speed");
    }
    // The largest stable predicted cycle at the case's airspeed.
    const nlohmann::json* largest = nullptr;
    int stable = 0;
    for (const auto& q : p.at("at_case_airspeed").at("cycles")) {
      if (!q.at("stable").get<bool>()) continue;
      ++stable;
      if (!largest || q.at("amplitude").get<double>() > largest->at("amplitude").get<double>()) largest = &q;
    }
    row["lco_df_stable_cycles"] = stable;
    if (largest) {
      row[p.at("amplitude_units") == "degree" ? "lco_df_amplitude_deg" : "lco_df_amplitude_m"] =
          largest->at("amplitude");
      row["lco_df_frequency_hz"] = largest->at("frequency_hz");
    } else {
      notes.push_back("no stable predicted LCO at the case airspeed");
    }
  }
  row["lco_note"] = joined(notes);
}

// The row's key results from the flutter command's JSON.
nlohmann::json row_of(const BatchEntry& e, const Case& c, const nlohmann::json& f) {
  nlohmann::json row;
  row["name"] = e.name;
  row["case"] = e.case_path;
  row["overrides"] = joined(e.overrides);
  row["status"] = "ok";
  row["input_form"] = f.at("input_form");
  row["airspeed_m_s"] = c.model.flow.airspeed;
  const nlohmann::json& lin = f.at("linearisations").at(0);  // the nominal springs
  for (const auto& m : lin.at("methods")) {
    const std::string method = m.at("method").get<std::string>();
    const std::string p = method == "p-k" ? "pk_" : "state_space_";
    const auto& fl = m.at("flutter");
    if (fl.value("found", false)) {
      for (const char* k : {"speed_m_s", "speed_eas_m_s", "reduced_speed", "frequency_hz"})
        if (fl.contains(k)) row[p + "flutter_" + k] = fl.at(k);
    }
    if (m.contains("divergence") && m.at("divergence").value("found", false) &&
        m.at("divergence").contains("speed_m_s"))
      row[p + "divergence_speed_m_s"] = m.at("divergence").at("speed_m_s");
  }
  if (f.contains("margin") && f.at("margin").is_object())
    for (const char* k : {"critical", "critical_eas_m_s", "dive_speed_eas_m_s", "required_eas_m_s",
                          "margin_percent", "margin_met"})
      if (f.at("margin").contains(k)) row[k] = f.at("margin").at(k);
  lco_columns(row, f);
  return row;
}

// The row's gust columns from the gust command's JSON.
void gust_columns(nlohmann::json& row, const nlohmann::json& g) {
  std::vector<std::string> absent;
  const nlohmann::json& cr = g.at("critical");
  for (const auto& [channel, column] : kGustChannels) {
    if (!cr.contains(channel)) {
      absent.push_back(channel);
      continue;
    }
    row[column] = cr.at(channel).at("value");
    row[fmt::format("gust_peak_{}_gradient_m", channel)] = cr.at(channel).at("gradient_m");
  }
  std::string note;
  for (const auto& a : absent) note += (note.empty() ? "no channel " : ", ") + a;
  row["gust_note"] = note.empty() ? note : note + " in this case";
}

std::string cell(const nlohmann::json& v) {
  if (v.is_null()) return "";
  if (v.is_boolean()) return v.get<bool>() ? "true" : "false";
  if (v.is_number()) return fmt::format("{:.17g}", v.get<double>());
  std::string s = v.get<std::string>();
  // RFC 4180 quoting when the text has a comma, quote or line end.
  if (s.find_first_of(",\"\n\r") != std::string::npos) {
    std::string q = "\"";
    for (char ch : s) {
      q += ch;
      if (ch == '"') q += '"';
    }
    q += '"';
    return q;
  }
  return s;
}

}  // namespace

std::vector<BatchEntry> batch_entries(const std::vector<std::string>& case_paths,
                                      const std::vector<std::string>& overrides) {
  std::vector<BatchEntry> out;
  for (const auto& p : case_paths) out.push_back({stem(p), p, overrides, "", 0});
  return out;
}

std::vector<BatchEntry> batch_entries_from_table(const std::string& base_case, const std::string& table_path,
                                                 const std::vector<std::string>& overrides) {
  std::string text = read_input_file(table_path, kMaxTableBytes, "parameter table", {table_path, 0, 0},
                                     "--table", kTableAllowed);
  if (text.rfind("\xEF\xBB\xBF", 0) == 0) text.erase(0, 3);  // a UTF-8 byte-order mark
  std::vector<std::string> header;
  int name_column = -1;
  std::vector<BatchEntry> out;
  int n = 0;
  std::size_t pos = 0;
  while (pos < text.size()) {
    std::size_t e = text.find('\n', pos);
    if (e == std::string::npos) e = text.size();
    std::string_view line(text.data() + pos, e - pos);
    pos = e + 1;
    ++n;
    if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
    const std::string t = trim(line);
    if (t.empty() || t.front() == '#') continue;
    const std::vector<std::string> f = split_commas(line);
    if (header.empty()) {
      for (std::size_t k = 0; k < f.size(); ++k) {
        if (f[k].empty())
          throw InputError({table_path, n, 0}, "", t, fmt::format("has an empty column name (column {})", k + 1),
                           kTableAllowed);
        for (std::size_t j = 0; j < k; ++j)
          if (f[j] == f[k])
            throw InputError({table_path, n, 0}, f[k], t, "names a column twice", kTableAllowed);
        if (f[k] == "name") name_column = static_cast<int>(k);
      }
      header = f;
      continue;
    }
    if (f.size() != header.size())
      throw InputError({table_path, n, 0}, "", t,
                       fmt::format("has {} fields, the header {}", f.size(), header.size()), kTableAllowed);
    if (out.size() >= kMaxTableRows)
      throw InputError({table_path, n, 0}, "", table_path, fmt::format("has more than {} rows", kMaxTableRows),
                       fmt::format("at most {} parameter sets", kMaxTableRows));
    BatchEntry b;
    b.case_path = base_case;
    b.table_path = table_path;
    b.table_line = n;
    b.overrides = overrides;
    for (std::size_t k = 0; k < f.size(); ++k) {
      if (static_cast<int>(k) == name_column) continue;
      if (f[k].empty())
        throw InputError({table_path, n, 0}, header[k], t, "has no value for this column", kTableAllowed);
      b.overrides.push_back(header[k] + "=" + f[k]);
    }
    b.name = name_column >= 0 && !f[static_cast<std::size_t>(name_column)].empty()
                 ? f[static_cast<std::size_t>(name_column)]
                 : fmt::format("{}:{}", stem(base_case), n);
    out.push_back(std::move(b));
  }
  if (out.empty())
    throw InputError({table_path, 0, 0}, "", table_path, "has no parameter set (no line after the header)",
                     kTableAllowed);
  return out;
}

nlohmann::json run_batch(const std::vector<BatchEntry>& entries, const FlutterOptions& options,
                         const std::atomic<bool>* cancel) {
  // Every case first: bad input stops the batch before any work.
  std::vector<Case> cases;
  cases.reserve(entries.size());
  for (const auto& e : entries) {
    try {
      cases.push_back(load_case(e.case_path, e.overrides));
    } catch (const InputError& err) {
      // An override from the table: name the table's line.
      if (!e.table_path.empty() && err.where().file.rfind("--set ", 0) == 0)
        throw InputError({e.table_path, e.table_line, 0}, err.key(), err.value(), err.problem(), err.allowed());
      throw;
    }
  }
  nlohmann::json rows = nlohmann::json::array();
  for (std::size_t k = 0; k < entries.size(); ++k) {
    if (cancel && cancel->load()) break;
    FlutterOptions o = options;
    o.cancel = cancel;
    try {
      const FlutterReport r = flutter_analysis(cases[k], o);
      nlohmann::json row = row_of(entries[k], cases[k], flutter_json(cases[k], r, ""));
      // The design gust: the gust command's sweep (default gradients, from rest).
      if (!has_one_minus_cosine(cases[k])) {
        row["gust_note"] = cases[k].model.gusts.empty() ? "no [[gust]] in the case"
                                                        : "no one-minus-cosine [[gust]] to size over H";
      } else {
        try {
          const GustSweep g = gust_gradient_sweep(cases[k], default_gradients(), cancel, GustStart::kRest);
          gust_columns(row, gust_sweep_json(cases[k], g, ""));
        } catch (const NumericalError& err) {
          if (cancel && cancel->load()) break;
          row["status"] = std::string("gust numerical-error: ") + err.what();
          row["gust_note"] = "the gust sweep failed (see status)";
        }
      }
      rows.push_back(std::move(row));
    } catch (const Cancelled&) {
      break;  // the rows so far are the caller's to keep
    } catch (const NumericalError& err) {
      if (cancel && cancel->load()) break;
      nlohmann::json row = {{"name", entries[k].name}, {"case", entries[k].case_path}};
      row["overrides"] = joined(entries[k].overrides);
      row["status"] = std::string("numerical-error: ") + err.what();
      rows.push_back(row);
    }
  }
  // Every column in every row: null where a value does not apply (the
  // notes and the status say why).
  for (auto& row : rows)
    for (const auto& c : kColumns)
      if (!row.contains(c.name)) row[c.name] = nullptr;
  return rows;
}

nlohmann::json batch_summary_json(const nlohmann::json& rows) {
  nlohmann::json j;
  j["command"] = "batch";
  j["aerosect_version"] = kVersion;
  j["caution"] = kSafetyCaution;
  nlohmann::json units;
  for (const auto& c : kColumns)
    if (*c.units) units[c.name] = c.units;
  j["units"] = units;
  j["cases"] = rows;
  return j;
}

std::string batch_summary_csv(const nlohmann::json& rows) {
  std::string out = fmt::format("# {}\n", kSafetyCaution);
  for (std::size_t k = 0; k < std::size(kColumns); ++k) {
    if (k) out += ',';
    out += kColumns[k].name;
  }
  out += '\n';
  for (const auto& r : rows) {
    for (std::size_t k = 0; k < std::size(kColumns); ++k) {
      if (k) out += ',';
      if (r.contains(kColumns[k].name)) out += cell(r.at(kColumns[k].name));
    }
    out += '\n';
  }
  return out;
}

std::string batch_summary_text(const nlohmann::json& rows) {
  std::string t = fmt::format("aerosect {} batch: {} cases (linear flutter and divergence, nominal springs; "
                              "describing-function LCO; design gust)\n\n",
                              kVersion, rows.size());
  t += fmt::format("  {:<24} {:>14} {:>14} {:>14} {:>10} {:>16} {:>14}  {}\n", "name", "flutter m s-1", "EAS m s-1",
                   "diverg. m s-1", "margin %", "LCO at U (DF)", "gust lift N/m", "status");
  auto has = [](const nlohmann::json& r, const char* k) { return r.contains(k) && r.at(k).is_number(); };
  auto num = [&](const nlohmann::json& r, const char* k) {
    return has(r, k) ? fmt::format("{:.6g}", r.at(k).get<double>()) : std::string("-");
  };
  auto text = [](const nlohmann::json& r, const char* k) {
    return r.contains(k) && r.at(k).is_string() ? r.at(k).get<std::string>() : std::string();
  };
  auto speed = [&](const nlohmann::json& r, const char* k, bool nd) {
    const std::string v = num(r, k);
    return nd && v != "-" ? "U* " + v : v;
  };
  for (const auto& r : rows) {
    // The lower of the two methods' flutter speeds (state-space first when equal).
    const char* fs = "state_space_flutter_speed_m_s";
    const char* fe = "state_space_flutter_speed_eas_m_s";
    if (has(r, "pk_flutter_speed_m_s") &&
        (!has(r, fs) || r.at("pk_flutter_speed_m_s").get<double>() < r.at(fs).get<double>())) {
      fs = "pk_flutter_speed_m_s";
      fe = "pk_flutter_speed_eas_m_s";
    }
    const char* dv = has(r, "state_space_divergence_speed_m_s") ? "state_space_divergence_speed_m_s"
                                                                 : "pk_divergence_speed_m_s";
    // A nondimensional case in U* (its m s-1 fields are U* times b w_a = 1).
    const bool nd = text(r, "input_form") == "nondimensional";
    // The largest stable describing-function LCO at the case's airspeed.
    std::string lco = "-";
    if (has(r, "lco_df_amplitude_deg")) lco = num(r, "lco_df_amplitude_deg") + " deg";
    else if (has(r, "lco_df_amplitude_m")) lco = num(r, "lco_df_amplitude_m") + " m";
    t += fmt::format("  {:<24} {:>14} {:>14} {:>14} {:>10} {:>16} {:>14}  {}\n", text(r, "name"), speed(r, fs, nd),
                     nd ? std::string("-") : num(r, fe), speed(r, dv, nd), num(r, "margin_percent"), lco,
                     num(r, "gust_peak_lift_n_per_m"), text(r, "status"));
  }
  t += fmt::format("\n{}\n", kSafetyCaution);
  return t;
}

}  // namespace aerosect
