#include "aerosect/analysis/batch.hpp"

#include <cmath>
#include <filesystem>
#include <string_view>

#include <fmt/format.h>

#include "aerosect/analysis/flutter_report.hpp"
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
};

// The row's key results from the flutter command's JSON.
nlohmann::json row_of(const BatchEntry& e, const nlohmann::json& f) {
  nlohmann::json row;
  row["name"] = e.name;
  row["case"] = e.case_path;
  row["overrides"] = joined(e.overrides);
  row["status"] = "ok";
  row["input_form"] = f.at("input_form");
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
  return row;
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
      rows.push_back(row_of(entries[k], flutter_json(cases[k], r, "")));
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
  std::string t = fmt::format("aerosect {} batch: {} cases (linear flutter and divergence, nominal springs)\n\n",
                              kVersion, rows.size());
  t += fmt::format("  {:<24} {:>14} {:>14} {:>14} {:>10}  {}\n", "name", "flutter m s-1", "EAS m s-1",
                   "diverg. m s-1", "margin %", "status");
  auto num = [](const nlohmann::json& r, const char* k) {
    return r.contains(k) && r.at(k).is_number() ? fmt::format("{:.6g}", r.at(k).get<double>()) : std::string("-");
  };
  auto speed = [&](const nlohmann::json& r, const char* k, bool nd) {
    const std::string v = num(r, k);
    return nd && v != "-" ? "U* " + v : v;
  };
  for (const auto& r : rows) {
    // The lower of the two methods' flutter speeds (state-space first when equal).
    const char* fs = "state_space_flutter_speed_m_s";
    const char* fe = "state_space_flutter_speed_eas_m_s";
    if (r.contains("pk_flutter_speed_m_s") &&
        (!r.contains(fs) || r.at("pk_flutter_speed_m_s").get<double>() < r.at(fs).get<double>())) {
      fs = "pk_flutter_speed_m_s";
      fe = "pk_flutter_speed_eas_m_s";
    }
    const char* dv = r.contains("state_space_divergence_speed_m_s") ? "state_space_divergence_speed_m_s"
                                                                     : "pk_divergence_speed_m_s";
    // A nondimensional case in U* (its m s-1 fields are U* times b w_a = 1).
    const bool nd = r.value("input_form", std::string()) == "nondimensional";
    t += fmt::format("  {:<24} {:>14} {:>14} {:>14} {:>10}  {}\n", r.value("name", std::string()),
                     speed(r, fs, nd), nd ? std::string("-") : num(r, fe), speed(r, dv, nd),
                     num(r, "margin_percent"), r.value("status", std::string()));
  }
  t += fmt::format("\n{}\n", kSafetyCaution);
  return t;
}

}  // namespace aerosect
