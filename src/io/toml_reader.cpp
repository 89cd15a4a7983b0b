#include "aerosect/io/toml_reader.hpp"

#include <algorithm>
#include <limits>
#include <cmath>
#include <sstream>

#include <fmt/format.h>

namespace aerosect::toml_input {

namespace {

std::string leaf_of(const std::string& path) {
  const auto p = path.rfind('.');
  return p == std::string::npos ? path : path.substr(p + 1);
}

std::string parent_of(const std::string& path) {
  const auto p = path.rfind('.');
  return p == std::string::npos ? std::string() : path.substr(0, p);
}

// An override's value as TOML in a table {v = value}; a bare word is a string.
toml::table override_value(const std::string& value) {
  try {
    return toml::parse(std::string_view("v = " + value));
  } catch (const toml::parse_error&) {
    toml::table t;
    t.insert("v", value);
    return t;
  }
}

}  // namespace

Schema::Schema(std::vector<std::string> keys, std::vector<std::string> array_tables,
               std::string reference, std::string override_example, std::string document)
    : keys_(std::move(keys)),
      array_tables_(std::move(array_tables)),
      reference_(std::move(reference)),
      override_example_(std::move(override_example)),
      document_(std::move(document)) {}

// Tables that may appear (prefixes of known keys).
bool Schema::is_known_table(const std::string& path) const {
  const std::string prefix = path + ".";
  return std::any_of(keys_.begin(), keys_.end(), [&](const std::string& k) { return k.starts_with(prefix); });
}
bool Schema::is_known_key(const std::string& path) const {
  return std::find(keys_.begin(), keys_.end(), path) != keys_.end();
}
bool Schema::is_array_table(const std::string& path) const {
  return std::find(array_tables_.begin(), array_tables_.end(), path) != array_tables_.end();
}

// An unknown table is matched against tables only ([springs.roll] is no
// 'simulation.hold').
std::string Schema::suggestion_for(const std::string& path, bool is_table) const {
  std::vector<std::string> candidates;
  if (!is_table) candidates = keys_;
  for (const auto& k : keys_) {
    for (auto p = k.find('.'); p != std::string::npos; p = k.find('.', p + 1))
      candidates.push_back(k.substr(0, p));
  }
  const std::string leaf = leaf_of(path), parent = parent_of(path);
  const std::size_t limit = std::max<std::size_t>(2, leaf.size() / 3);
  for (bool same_table : {true, false}) {
    std::string best;
    std::size_t best_d = std::numeric_limits<std::size_t>::max();
    for (const auto& c : candidates) {
      if (same_table != (parent_of(c) == parent)) continue;
      const std::string cand = leaf_of(c);
      // In the same table a key holding the leaf whole ('speed' in
      // 'airspeed') is a hint at any distance; otherwise at most `limit`.
      const bool part = same_table && leaf.size() >= 4 && cand.find(leaf) != std::string::npos;
      const std::size_t allowed = part ? cand.size() : limit;
      // The edit distance is at least the length difference: a candidate
      // that cannot beat the best so far is not measured (a 30 000-character
      // key then costs nothing).
      const std::size_t gap = leaf.size() > cand.size() ? leaf.size() - cand.size() : cand.size() - leaf.size();
      if (gap >= best_d || gap > allowed || (!part && gap >= leaf.size())) continue;
      const std::size_t d = edit_distance(leaf, cand);
      // A candidate sharing nothing with the leaf ('x' -> 'cg') is no hint.
      if (d < best_d && d <= allowed && (part || d < leaf.size())) {
        best_d = d;
        best = c;
      }
    }
    if (!best.empty()) return best;
  }
  return std::string();
}

std::string join(const std::vector<std::string>& v, const char* sep) {
  std::string s;
  for (std::size_t i = 0; i < v.size(); ++i) s += (i ? sep : "") + v[i];
  return s;
}

std::string quoted_list(const std::vector<std::string>& v) {
  std::vector<std::string> q;
  for (const auto& s : v) q.push_back("\"" + s + "\"");
  return join(q);
}

std::string node_text(const toml::node& n) {
  std::string s;
  if (n.is_table()) {
    s = "(table)";
  } else if (auto* a = n.as_array()) {
    s = "[";
    for (std::size_t i = 0; i < a->size() && s.size() <= 60; ++i)
      s += (i ? ", " : "") + node_text(*a->get(i));
    s += "]";
  } else if (auto* f = n.as_floating_point()) {
    const double v = f->get();
    s = std::isnan(v) ? std::string("nan") : fmt::format("{}", v);
    if (std::isfinite(v) && s.find_first_of(".e") == std::string::npos) s += ".0";
  } else {
    std::ostringstream os;
    n.visit([&](auto&& v) { os << v; });
    s = os.str();
  }
  if (s.size() > 60) s = s.substr(0, 57) + "...";
  return s;
}

std::size_t edit_distance(std::string_view a, std::string_view b) {
  std::vector<std::size_t> prev(b.size() + 1), cur(b.size() + 1);
  for (std::size_t j = 0; j <= b.size(); ++j) prev[j] = j;
  for (std::size_t i = 1; i <= a.size(); ++i) {
    cur[0] = i;
    for (std::size_t j = 1; j <= b.size(); ++j) {
      const std::size_t sub = prev[j - 1] + (a[i - 1] == b[j - 1] ? 0 : 1);
      cur[j] = std::min({prev[j] + 1, cur[j - 1] + 1, sub});
    }
    std::swap(prev, cur);
  }
  return prev[b.size()];
}

// ---------------------------------------------------------------------------
// Table: typed reads at a source position.

SourceLocation Table::where(std::string_view key) const {
  const std::string kp = override_path_.empty() ? std::string(key) : override_path_ + "." + std::string(key);
  if (auto it = ctx_.overrides.find(kp); it != ctx_.overrides.end())
    return {"--set " + it->second, 0, 0};
  if (const toml::node* n = node(key)) {
    const auto& src = n->source();
    return {ctx_.file, static_cast<int>(src.begin.line), static_cast<int>(src.begin.column)};
  }
  return where_table();
}

SourceLocation Table::where_table() const {
  if (t_) {
    const auto& src = t_->source();
    return {ctx_.file, static_cast<int>(src.begin.line), 0};
  }
  return {ctx_.file, 0, 0};
}

void Table::fail(std::string_view key, const std::string& problem,
                 const std::string& allowed) const {
  const toml::node* n = node(key);
  throw InputError(where(key), key_path(key), n ? node_text(*n) : std::string(), problem,
                   allowed);
}

std::optional<double> Table::number(std::string_view key) const {
  const toml::node* n = node(key);
  if (!n) return std::nullopt;
  std::optional<double> v = n->value<double>();
  if (!v || n->is_boolean()) fail(key, "must be a number", "a finite number");
  if (!std::isfinite(*v)) fail(key, "must be finite", "a finite number (not nan or inf)");
  return v;
}

double Table::required_number(std::string_view key, const std::string& what) const {
  auto v = number(key);
  if (!v) missing(key, what);
  return *v;
}

void Table::missing(std::string_view key, const std::string& what) const {
  throw InputError(where_table(), key_path(key), "",
                   fmt::format("missing{}", present() ? "" : fmt::format(" (no [{}] table)", path_)),
                   what);
}

std::optional<std::string> Table::string(std::string_view key) const {
  const toml::node* n = node(key);
  if (!n) return std::nullopt;
  auto v = n->value<std::string>();
  if (!v) fail(key, "must be a string", "a quoted string");
  return v;
}

std::string Table::choice(std::string_view key, const std::vector<std::string>& allowed,
                          const std::string& def) const {
  auto v = string(key);
  if (!v) return def;
  if (std::find(allowed.begin(), allowed.end(), *v) == allowed.end()) {
    std::string hint;
    std::size_t best = 3;
    for (const auto& a : allowed) {
      const std::size_t d = edit_distance(*v, a);
      if (d < best) {
        best = d;
        hint = a;
      }
    }
    fail(key, hint.empty() ? "is not one of the choices"
                           : fmt::format("is not one of the choices (did you mean \"{}\"?)", hint),
         quoted_list(allowed));
  }
  return *v;
}

std::optional<bool> Table::boolean(std::string_view key) const {
  const toml::node* n = node(key);
  if (!n) return std::nullopt;
  if (!n->is_boolean()) fail(key, "must be true or false", "true or false");
  return n->value<bool>();
}

std::optional<std::vector<double>> Table::numbers(std::string_view key) const {
  const toml::node* n = node(key);
  if (!n) return std::nullopt;
  const toml::array* a = n->as_array();
  if (!a) fail(key, "must be an array of numbers", "an array such as [0.165, 0.335]");
  std::vector<double> out;
  for (const auto& e : *a) {
    auto v = e.value<double>();
    if (!v || e.is_boolean()) fail(key, "must be an array of numbers", "finite numbers");
    if (!std::isfinite(*v)) fail(key, "must hold finite numbers", "finite numbers");
    out.push_back(*v);
  }
  return out;
}

std::optional<std::vector<std::string>> Table::strings(std::string_view key) const {
  const toml::node* n = node(key);
  if (!n) return std::nullopt;
  const toml::array* a = n->as_array();
  if (!a) fail(key, "must be an array of strings", "an array such as [\"plunge\"]");
  std::vector<std::string> out;
  for (const auto& e : *a) {
    auto v = e.value<std::string>();
    if (!v) fail(key, "must be an array of strings", "strings");
    out.push_back(*v);
  }
  return out;
}

std::string Table::one_of(const std::vector<std::string>& keys) const {
  std::string found;
  for (const auto& k : keys) {
    if (!has(k)) continue;
    if (!found.empty())
      fail(k, fmt::format("conflicts with '{}': give only one of them", key_path(found)),
           "one of " + join(keys));
    found = k;
  }
  return found;
}

std::string Table::required_one_of(const std::vector<std::string>& keys,
                                   const std::string& what) const {
  std::string k = one_of(keys);
  if (k.empty()) {
    std::vector<std::string> full;
    for (const auto& x : keys) full.push_back(key_path(x));
    throw InputError(where_table(), join(full, " | "), "",
                     fmt::format("missing: give one of {}", join(full)), what);
  }
  return k;
}

Table Table::sub(std::string_view key) const {
  const toml::node* n = node(key);
  if (n && !n->is_table())
    fail(key, "must be a table", fmt::format("a [{}] table", key_path(key)));
  return Table(ctx_, n ? n->as_table() : nullptr, key_path(key));
}

double positive(const Table& t, std::string_view key, const std::string& units) {
  const double v = t.required_number(key, "a positive number, " + units);
  t.require(v > 0, key, "must be positive", "a positive number, " + units);
  return v;
}

double nonnegative_or(const Table& t, std::string_view key, double def, const std::string& what) {
  auto v = t.number(key);
  if (!v) return def;
  t.require(*v >= 0, key, "must not be negative", what);
  return *v;
}

// ---------------------------------------------------------------------------
// The document: parsing, overrides, unknown keys.

toml::table parse_document(std::string_view text, const std::string& path) {
  try {
    return toml::parse(text, std::string_view(path));
  } catch (const toml::parse_error& e) {
    const auto& src = e.source();
    throw InputError({path, static_cast<int>(src.begin.line), static_cast<int>(src.begin.column)},
                     "", "", fmt::format("not valid TOML: {}", e.description()),
                     "TOML syntax (https://toml.io): key = value lines under [table] headers");
  }
}

void apply_override(toml::table& root, const std::string& text, const Schema& schema, Context& ctx) {
  const auto eq = text.find('=');
  if (eq == std::string::npos || eq == 0)
    throw InputError({"--set " + text, 0, 0}, "", text, "is not of the form key=value",
                     schema.override_example());
  auto trim = [](std::string s) {
    const auto b = s.find_first_not_of(" \t"), e = s.find_last_not_of(" \t");
    return b == std::string::npos ? std::string() : s.substr(b, e - b + 1);
  };
  const std::string key = trim(text.substr(0, eq));
  const std::string value = trim(text.substr(eq + 1));
  // An entry of an array of tables: ARRAY.K.KEY (K from 1).
  for (const auto& array : schema.array_tables()) {
    if (key.rfind(array + ".", 0) != 0) continue;
    const std::string rest = key.substr(array.size() + 1);
    const auto dot = rest.find('.');
    const std::string index = rest.substr(0, dot);
    const bool numbered = !index.empty() && index.find_first_not_of("0123456789") == std::string::npos;
    toml::node* n = root.get(array);
    const std::size_t count = n && n->is_array_of_tables() ? n->as_array()->size() : 0;
    const std::string entries =
        count == 0 ? fmt::format("none: the {} has no [[{}]] table", schema.document(), array)
        : count == 1 ? fmt::format("{}.1.KEY (the {} has one [[{}]] table)", array, schema.document(), array)
                     : fmt::format("{0}.1.KEY to {0}.{1}.KEY (the {2} has {1} [[{0}]] tables, numbered from 1 "
                                   "in file order)", array, count, schema.document());
    if (!numbered) {
      if (schema.is_known_key(key))
        throw InputError({"--set " + text, 0, 0}, key, value,
                         fmt::format("does not say which [[{}]] table it sets", array),
                         "the table's number before the key: " + entries);
      break;  // an unknown key: the "did you mean" below
    }
    const std::string leaf = dot == std::string::npos ? std::string() : rest.substr(dot + 1);
    if (leaf.empty() || leaf.find('.') != std::string::npos || !schema.is_known_key(array + "." + leaf)) {
      std::string hint = leaf.empty() ? std::string() : schema.suggestion_for(array + "." + leaf);
      if (hint.rfind(array + ".", 0) != 0) hint.clear();
      throw InputError({"--set " + text, 0, 0}, key, value,
                       hint.empty() ? fmt::format("is not a key of a [[{}]] table", array)
                                    : fmt::format("is not a key of a [[{}]] table (did you mean '{}.{}.{}'?)",
                                                  array, array, index, hint.substr(array.size() + 1)),
                       schema.reference());
    }
    const unsigned long k = index.size() > 6 ? 0 : std::stoul(index);
    if (k < 1 || k > count)
      throw InputError({"--set " + text, 0, 0}, key, value,
                       fmt::format("names [[{}]] table {}, which the {} does not have", array, index,
                                   schema.document()),
                       entries);
    const toml::table parsed = override_value(value);
    n->as_array()->get(k - 1)->as_table()->insert_or_assign(leaf, *parsed.get("v"));
    ctx.overrides[key] = text;
    return;
  }
  if (schema.is_known_table(key)) {
    const auto& keys = schema.keys();
    const auto first = std::find_if(keys.begin(), keys.end(), [&](const std::string& k) {
      return k.rfind(key + ".", 0) == 0;
    });
    throw InputError({"--set " + text, 0, 0}, key, value, "is a table, not a key",
                     fmt::format("a key inside it, such as --set {}=...", *first));
  }
  if (!schema.is_known_key(key)) {
    const std::string hint = schema.suggestion_for(key);
    throw InputError({"--set " + text, 0, 0}, key, value,
                     hint.empty() ? "unknown key" : fmt::format("unknown key (did you mean '{}'?)", hint),
                     schema.reference());
  }
  const toml::table parsed = override_value(value);
  // Walk/create the tables on the path.
  toml::table* t = &root;
  std::size_t start = 0;
  while (true) {
    const auto dot = key.find('.', start);
    if (dot == std::string::npos) break;
    const std::string part = key.substr(start, dot - start);
    toml::node* n = t->get(part);
    if (!n) {
      t->insert(part, toml::table{});
      n = t->get(part);
    }
    if (!n->is_table())
      throw InputError({"--set " + text, 0, 0}, key, value,
                       fmt::format("'{}' is not a table in the {}", key.substr(0, dot), schema.document()),
                       fmt::format("a [{}] table in the {}", key.substr(0, dot), schema.document()));
    t = n->as_table();
    start = dot + 1;
  }
  const std::string leaf = key.substr(start);
  t->insert_or_assign(leaf, *parsed.get("v"));
  ctx.overrides[key] = text;
}

// Unknown keys anywhere in the document.
void check_unknown_keys(const Context& ctx, const Schema& schema, const toml::table& t,
                        const std::string& prefix) {
  for (const auto& [k, v] : t) {
    const std::string path = prefix.empty() ? std::string(k.str()) : prefix + "." + std::string(k.str());
    if (v.is_table() && schema.is_known_table(path)) {
      check_unknown_keys(ctx, schema, *v.as_table(), path);
      continue;
    }
    // [[gust]]: an array of tables, each checked against the table's keys.
    if (schema.is_array_table(path) && v.is_array_of_tables()) {
      for (const auto& e : *v.as_array()) check_unknown_keys(ctx, schema, *e.as_table(), path);
      continue;
    }
    if (!v.is_table() && schema.is_known_key(path)) continue;
    // A value where a table belongs (`section = 3`, `[[section]]`): left to
    // Table::sub, which reports "must be a table" at the value.
    if (!v.is_table() && schema.is_known_table(path)) continue;
    SourceLocation where{ctx.file, static_cast<int>(k.source().begin.line),
                         static_cast<int>(k.source().begin.column)};
    if (where.line == 0) {
      where.line = static_cast<int>(v.source().begin.line);
      where.column = static_cast<int>(v.source().begin.column);
    }
    if (auto it = ctx.overrides.find(path); it != ctx.overrides.end())
      where = {"--set " + it->second, 0, 0};
    const std::string hint = schema.suggestion_for(path, v.is_table() && !schema.is_known_key(path));
    std::string problem = v.is_table() && !schema.is_known_table(path) && schema.is_known_key(path)
                              ? "must be a value, not a table"
                              : "unknown key";
    if (!hint.empty() && hint != path) problem += fmt::format(" (did you mean '{}'?)", hint);
    throw InputError(where, path, v.is_table() ? "" : node_text(v), problem,
                     schema.reference());
  }
}

}  // namespace aerosect::toml_input
