#pragma once
// The generic layer of the input readers over toml++: where each value came
// from (file, line, column, or the `--set` override that put it there),
// typed and checked reads that throw InputError naming the file, line, key,
// value and what is allowed, unknown keys with a "did you mean", and
// command-line overrides. It knows no schema of its own: a reader hands it a
// Schema (the dotted keys its files may hold) and reads its tables through
// Table. io/case.cpp holds the case schema.
//
// Messages are part of the interface: tests/unit/test_case.cpp and
// tests/bad_cases/ check them byte for byte.

#include <cstddef>
#include <map>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <toml++/toml.h>

#include "aerosect/error.hpp"

namespace aerosect::toml_input {

// The keys a document may hold, as dotted paths ("section.mass"); a table is
// any proper prefix of a key. `array_tables` are the tables given as arrays
// of tables ([[gust]]), each element checked against the table's keys.
// `reference` says where the keys are listed (the "allowed" part of an
// unknown-key message), `override_example` is shown for a malformed --set,
// `document` names the kind of file ("case file").
class Schema {
 public:
  Schema(std::vector<std::string> keys, std::vector<std::string> array_tables, std::string reference,
         std::string override_example, std::string document);

  const std::vector<std::string>& keys() const { return keys_; }
  const std::vector<std::string>& array_tables() const { return array_tables_; }
  bool is_known_table(const std::string& path) const;
  bool is_known_key(const std::string& path) const;
  bool is_array_table(const std::string& path) const;
  // Closest known key (or table) to an unknown dotted path, or "": first
  // among the keys of the same table, then anywhere (a key put in the wrong
  // table). An unknown table is matched against tables only; an unknown
  // value against keys and tables.
  std::string suggestion_for(const std::string& path, bool is_table = false) const;
  const std::string& reference() const { return reference_; }
  const std::string& override_example() const { return override_example_; }
  const std::string& document() const { return document_; }

 private:
  std::vector<std::string> keys_;
  std::vector<std::string> array_tables_;
  std::string reference_;
  std::string override_example_;
  std::string document_;
};

// Reading context: the file being read and the overrides applied to it
// (dotted key -> "key=value" as given).
struct Context {
  std::string file;
  std::map<std::string, std::string> overrides;
};

// One table of the document (possibly absent: every read then finds no
// value). Reads throw InputError at the value's source position, or at the
// override that set it.
class Table {
 public:
  Table(const Context& ctx, const toml::table* t, std::string path)
      : ctx_(ctx), t_(t), path_(std::move(path)), override_path_(path_) {}
  // An entry of an array of tables ([[gust]] number k): keys are named by
  // `path` ("gust.amplitude") in messages, overrides by `override_path`
  // ("gust.2", as `--set gust.2.amplitude=...` gives them).
  Table(const Context& ctx, const toml::table* t, std::string path, std::string override_path)
      : ctx_(ctx), t_(t), path_(std::move(path)), override_path_(std::move(override_path)) {}

  bool present() const { return t_ != nullptr; }
  const std::string& path() const { return path_; }
  std::string key_path(std::string_view key) const {
    return path_.empty() ? std::string(key) : path_ + "." + std::string(key);
  }

  const toml::node* node(std::string_view key) const { return t_ ? t_->get(key) : nullptr; }
  bool has(std::string_view key) const { return node(key) != nullptr; }

  SourceLocation where(std::string_view key) const;
  SourceLocation where_table() const;

  [[noreturn]] void fail(std::string_view key, const std::string& problem,
                         const std::string& allowed) const;
  [[noreturn]] void missing(std::string_view key, const std::string& what) const;

  // A number (integers accepted), or nullopt when absent.
  std::optional<double> number(std::string_view key) const;
  double required_number(std::string_view key, const std::string& what) const;
  std::optional<std::string> string(std::string_view key) const;
  // One of `allowed` (with a "did you mean" for a near miss), `def` when absent.
  std::string choice(std::string_view key, const std::vector<std::string>& allowed,
                     const std::string& def) const;
  std::optional<bool> boolean(std::string_view key) const;
  std::optional<std::vector<double>> numbers(std::string_view key) const;
  std::optional<std::vector<std::string>> strings(std::string_view key) const;

  // Which one of alternative keys is given; "" when none. Two given: error.
  std::string one_of(const std::vector<std::string>& keys) const;
  std::string required_one_of(const std::vector<std::string>& keys, const std::string& what) const;

  // Value checks.
  void require(bool ok, std::string_view key, const std::string& problem,
               const std::string& allowed) const {
    if (!ok) fail(key, problem, allowed);
  }
  // The sub-table `key` (absent when not given; an error when not a table).
  Table sub(std::string_view key) const;

 private:
  const Context& ctx_;
  const toml::table* t_;
  std::string path_;
  std::string override_path_;
};

// Checked reads shared by the schemas.
double positive(const Table& t, std::string_view key, const std::string& units);
double nonnegative_or(const Table& t, std::string_view key, double def, const std::string& what);

// The document, or an InputError at the syntax error ("not valid TOML: ...").
toml::table parse_document(std::string_view text, const std::string& path);
// Applies one "key=value" override (the value read as TOML; a bare word is a
// string) and records it in ctx. Unknown keys and tables are errors. A key
// of an entry of an array of tables is reached by the entry's number,
// counted from 1 in file order: `gust.2.amplitude` is the `amplitude` of the
// second [[gust]] table; an entry the document does not have is an error
// naming the entries it has.
void apply_override(toml::table& root, const std::string& text, const Schema& schema, Context& ctx);
// Throws InputError at the first key of `t` (under `prefix`) the schema does
// not know, with a "did you mean".
void check_unknown_keys(const Context& ctx, const Schema& schema, const toml::table& t,
                        const std::string& prefix = "");

// Small text helpers of the messages.
std::size_t edit_distance(std::string_view a, std::string_view b);
std::string join(const std::vector<std::string>& v, const char* sep = ", ");
std::string quoted_list(const std::vector<std::string>& v);
// A value on one line as the user would write it: numbers in their shortest
// round-trip form (0.1, not 0.10000000000000001), arrays element by element,
// at most 60 characters.
std::string node_text(const toml::node& n);

}  // namespace aerosect::toml_input
