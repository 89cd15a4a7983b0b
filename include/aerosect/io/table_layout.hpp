#pragma once
// One layout table per result type: each field of a record once, with its
// name, units, long_name and accessors, from which every writer and reader
// of that record is generated (the HDF5 tables, the journal lines, the
// merge of shard files, provenance strings). A writer writes through a
// TableSink it is handed (Hdf5Document in files, MemoryTables in tests).
//
// Records sit on a grid of cells (e.g. direction x the swept keys of a
// sweep): a field of width W is a dataset over the grid's dimensions plus,
// when W > 1, one more dimension `axis` of length W (harmonics, samples of a
// cycle); row-major, the last dimension fastest. Cells without a record, and
// records for which the field is absent (`present` false), hold the fill
// value the dataset declares: NaN, or kIntegerFill in an integer field.

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <functional>
#include <limits>
#include <map>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "aerosect/error.hpp"
#include "aerosect/integrate/sink.hpp"

namespace aerosect {

// A class variable's codes and their names (CF 1.10 §3.5 flags):
// flag_values and flag_meanings, one blank-free word per value.
struct Flags {
  std::vector<std::int64_t> values;
  std::string meanings;  // e.g. "decayed periodic_lco non_periodic"
};

// The fill value of integer tables (counts and classes are never negative):
// cells without a value hold it, declared as their _FillValue (CF 1.10
// §2.5.1). Double tables use NaN.
inline constexpr std::int64_t kIntegerFill = -1;
// A value of an integer table given as a double: NaN (or any non-finite
// value) is a cell without a value.
inline std::int64_t integer_cell(double v) { return std::isfinite(v) ? static_cast<std::int64_t>(v) : kIntegerFill; }

// Where the tables of a result go. Hdf5Document is one; MemoryTables keeps
// them for tests.
class TableSink {
 public:
  virtual ~TableSink() = default;
  virtual void metadata(const RunMetadata& meta) = 0;
  virtual void axis(const std::string& name, std::span<const double> values, const std::string& units,
                    const std::string& long_name) = 0;
  virtual void integer_axis(const std::string& name, std::span<const std::int32_t> values,
                            const std::string& long_name) = 0;
  virtual void dataset(const std::string& path, const std::vector<std::string>& dims,
                       std::span<const double> data, const std::string& units, const std::string& long_name) = 0;
  // An int64 table (a count, or a class when `flags` has values: then
  // without units, a code being no quantity) whose cells without a value
  // hold kIntegerFill, declared as _FillValue.
  virtual void integer_dataset(const std::string& path, const std::vector<std::string>& dims,
                               std::span<const std::int64_t> data, const std::string& units,
                               const std::string& long_name, const Flags& flags) = 0;
  // A table whose values are asked for block by block: `values(first, out)`
  // fills `out` with the values first .. first + out.size() - 1 (row-major),
  // each asked for once, in ascending blocks, so the whole table need not be
  // in memory (a sweep's map is written from its scratch file). `count` is
  // the number of values (the product of the axes' lengths). By default the
  // values are gathered and written as one table.
  using Blocks = std::function<void(std::size_t first, std::span<double> out)>;
  virtual void dataset_blocks(const std::string& path, const std::vector<std::string>& dims, std::size_t count,
                              const Blocks& values, const std::string& units, const std::string& long_name) {
    std::vector<double> v(count);
    if (count > 0) values(0, v);
    dataset(path, dims, v, units, long_name);
  }
  // An integer table (as integer_dataset) from values given as doubles: a
  // non-finite value is a cell without a value (kIntegerFill).
  virtual void integer_dataset_blocks(const std::string& path, const std::vector<std::string>& dims,
                                      std::size_t count, const Blocks& values, const std::string& units,
                                      const std::string& long_name, const Flags& flags);
  // Declares NaN the _FillValue of the double dataset at `path` (cells
  // without a value: a point not run, a run not periodic).
  virtual void nan_fill(const std::string& path) = 0;
  // Makes the integer axis `name` a class (CF 1.10 §3.5): flag_values in
  // its own type and flag_meanings, and no units.
  virtual void axis_flags(const std::string& name, const Flags& flags) = 0;
  virtual void text_attribute(const std::string& object, const std::string& name, const std::string& value) = 0;
  // A number with its UDUNITS units (NAME_units beside NAME); an integer
  // (a count, flag or index) is dimensionless, units "1".
  virtual void number_attribute(const std::string& object, const std::string& name, double value,
                                const std::string& units) = 0;
  virtual void integer_attribute(const std::string& object, const std::string& name, std::int64_t value) = 0;
};

inline void TableSink::integer_dataset_blocks(const std::string& path, const std::vector<std::string>& dims,
                                              std::size_t count, const Blocks& values, const std::string& units,
                                              const std::string& long_name, const Flags& flags) {
  std::vector<double> v(count);
  if (count > 0) values(0, v);
  std::vector<std::int64_t> n(count);
  for (std::size_t k = 0; k < count; ++k) n[k] = integer_cell(v[k]);
  integer_dataset(path, dims, n, units, long_name, flags);
}

// Tables in memory (tests): datasets by path with their units and long_name.
class MemoryTables : public TableSink {
 public:
  struct Table {
    std::vector<std::string> dims;
    std::vector<double> data;
    std::string units, long_name;
  };
  std::map<std::string, Table> tables;
  std::map<std::string, std::string> text;  // "object@name"
  std::map<std::string, double> numbers;    // "object@name"

  void metadata(const RunMetadata&) override {}
  void axis(const std::string& name, std::span<const double> values, const std::string& units,
            const std::string& long_name) override {
    tables[name] = {{name}, {values.begin(), values.end()}, units, long_name};
  }
  void integer_axis(const std::string& name, std::span<const std::int32_t> values,
                    const std::string& long_name) override {
    tables[name] = {{name}, {values.begin(), values.end()}, "1", long_name};
  }
  void dataset(const std::string& path, const std::vector<std::string>& dims, std::span<const double> data,
               const std::string& units, const std::string& long_name) override {
    tables[path] = {dims, {data.begin(), data.end()}, units, long_name};
  }
  // Integers as doubles, the fill value as NaN; the flags as text.
  void integer_dataset(const std::string& path, const std::vector<std::string>& dims,
                       std::span<const std::int64_t> data, const std::string& units, const std::string& long_name,
                       const Flags& flags) override {
    Table t{dims, {}, units, long_name};
    for (const std::int64_t v : data)
      t.data.push_back(v == kIntegerFill ? std::numeric_limits<double>::quiet_NaN() : static_cast<double>(v));
    tables[path] = std::move(t);
    if (!flags.values.empty()) text[path + "@flag_meanings"] = flags.meanings;
  }
  void nan_fill(const std::string& path) override { text[path + "@_FillValue"] = "NaN"; }
  void axis_flags(const std::string& name, const Flags& flags) override {
    text[name + "@flag_meanings"] = flags.meanings;
    tables[name].units.clear();
  }
  void text_attribute(const std::string& object, const std::string& name, const std::string& value) override {
    text[object + "@" + name] = value;
  }
  void number_attribute(const std::string& object, const std::string& name, double value,
                        const std::string& units) override {
    numbers[object + "@" + name] = value;
    text[object + "@" + name + "_units"] = units;
  }
  void integer_attribute(const std::string& object, const std::string& name, std::int64_t value) override {
    numbers[object + "@" + name] = static_cast<double>(value);
    // assign(1, '1'), not = "1": GCC 12 reports a false -Wrestrict on the
    // latter when inlined into some unity-build translation units.
    text[object + "@" + name + "_units"].assign(1, '1');
  }
};

// One field of a record type T.
template <class T>
struct Field {
  std::string name;       // dataset name, journal key
  std::string units;      // UDUNITS ("1" for a pure number)
  std::string long_name;
  std::size_t width = 1;  // values per record
  std::string axis;       // the extra dimension when width > 1
  std::function<double(const T&, std::size_t)> get;     // value q of the record
  std::function<void(T&, std::size_t, double)> set;     // inverse of get
  std::function<bool(const T&)> present = {};           // empty: always present
  // Values a reader accepts (empty: any number, NaN included) and the words
  // for them in a refusal.
  std::function<bool(double)> valid = {};
  std::string allowed = {};
  // Written as an int64 table (a count or a class) rather than doubles;
  // a class names its codes (CF 1.10 §3.5 flags).
  bool integer = false;
  Flags flags = {};
};
template <class T>
using Layout = std::vector<Field<T>>;

// A field that is written only (no journal reads it back): one number per
// record from `get`; `set` does nothing.
template <class T>
Field<T> written_field(std::string name, std::string units, std::string long_name,
                       std::function<double(const T&)> get) {
  Field<T> f;
  f.name = std::move(name);
  f.units = std::move(units);
  f.long_name = std::move(long_name);
  f.get = [get = std::move(get)](const T& r, std::size_t) { return get(r); };
  f.set = [](T&, std::size_t, double) {};
  return f;
}

// A field is a list (width > 1, or an extra dimension) rather than one number.
template <class T>
bool is_list(const Field<T>& f) {
  return f.width > 1 || !f.axis.empty();
}

// Writes every field of `layout` as a dataset over `dims` (the grid, `cells`
// cells), its values asked for block by block: `column(k, first, out)`
// fills `out` with values first .. of field k (layout[k]), cell-major (a
// cell's `width` values together). Each dataset's path is `prefix` + the
// field's name (prefix "group/" puts the tables in a group). A cell without
// a record, or whose field is absent, holds NaN (the declared fill value; an
// integer field's is kIntegerFill).
template <class T>
void write_layout_columns(TableSink& sink, const Layout<T>& layout, const std::vector<std::string>& dims,
                          std::size_t cells,
                          const std::function<void(std::size_t, std::size_t, std::span<double>)>& column,
                          const std::string& prefix = {}) {
  for (std::size_t k = 0; k < layout.size(); ++k) {
    const Field<T>& f = layout[k];
    std::vector<std::string> d = dims;
    if (is_list(f)) d.push_back(f.axis);
    const TableSink::Blocks values = [&](std::size_t first, std::span<double> out) { column(k, first, out); };
    if (f.integer) {
      sink.integer_dataset_blocks(prefix + f.name, d, cells * f.width, values, f.units, f.long_name, f.flags);
    } else {
      sink.dataset_blocks(prefix + f.name, d, cells * f.width, values, f.units, f.long_name);
      sink.nan_fill(prefix + f.name);
    }
  }
}

// The same from `records` in memory, placed by `cell_of`.
template <class T>
void write_layout(TableSink& sink, const Layout<T>& layout, const std::vector<std::string>& dims,
                  std::size_t cells, const std::vector<T>& records,
                  const std::function<std::size_t(const T&)>& cell_of, const std::string& prefix = {}) {
  std::vector<double> v;  // the column of the field being written
  std::size_t filled = layout.size();
  write_layout_columns<T>(
      sink, layout, dims, cells,
      [&](std::size_t k, std::size_t first, std::span<double> out) {
        const Field<T>& f = layout[k];
        if (filled != k) {
          v.assign(cells * f.width, std::numeric_limits<double>::quiet_NaN());
          for (const T& r : records) {
            if (f.present && !f.present(r)) continue;
            const std::size_t at = cell_of(r) * f.width;
            for (std::size_t q = 0; q < f.width; ++q) v[at + q] = f.get(r, q);
          }
          filled = k;
        }
        std::copy(v.begin() + static_cast<std::ptrdiff_t>(first),
                  v.begin() + static_cast<std::ptrdiff_t>(first + out.size()), out.begin());
      },
      prefix);
}

// One number in JSON: itself when finite, else the text "nan", "inf" or
// "-inf" (JSON has no such numbers; the text reads back exactly).
inline nlohmann::json json_number(double v) {
  if (std::isfinite(v)) return v;
  return std::isnan(v) ? "nan" : v > 0 ? "inf" : "-inf";
}
// The inverse of json_number (null also reads as NaN); nullopt for anything else.
inline std::optional<double> number_from_json(const nlohmann::json& v) {
  if (v.is_number()) return v.get<double>();
  if (v.is_null() || v == "nan") return std::numeric_limits<double>::quiet_NaN();
  if (v == "inf") return std::numeric_limits<double>::infinity();
  if (v == "-inf") return -std::numeric_limits<double>::infinity();
  return std::nullopt;
}

// The record's present fields into the JSON object `j` by name (the journal
// form): a number, or a list of `width` numbers (json_number).
template <class T>
void layout_to_json(nlohmann::json& j, const Layout<T>& layout, const T& record) {
  const auto number = json_number;
  for (const Field<T>& f : layout) {
    if (f.present && !f.present(record)) continue;
    if (!is_list(f)) {
      j[f.name] = number(f.get(record, 0));
      continue;
    }
    nlohmann::json a = nlohmann::json::array();
    for (std::size_t q = 0; q < f.width; ++q) a.push_back(number(f.get(record, q)));
    j[f.name] = std::move(a);
  }
}

// The layout's fields of `record` from the JSON object `j` (the inverse of
// layout_to_json). Every field must be there, be a number (json_number), or
// a list of exactly `width` of them, and pass its `valid`; anything else is
// an InputError at `where` naming the field, the value (cut to 60
// characters) and what is allowed. Nothing is allocated or indexed from a
// count the JSON declares: the sizes come from the layout.
template <class T>
void layout_from_json(const nlohmann::json& j, const Layout<T>& layout, T& record, const SourceLocation& where,
                      const std::string& allowed) {
  auto cut = [](const nlohmann::json& v) { return v.dump().substr(0, 60); };
  for (const Field<T>& f : layout) {
    const auto it = j.find(f.name);
    if (it == j.end()) throw InputError(where, f.name, "", "is missing", allowed);
    const nlohmann::json& v = *it;
    const bool list = is_list(f);
    if (list && (!v.is_array() || v.size() != f.width))
      throw InputError(where, f.name, cut(v), fmt::format("is not a list of {} numbers", f.width),
                       fmt::format("{} numbers or nulls, one per {} (as the request asks)", f.width, f.axis));
    for (std::size_t q = 0; q < f.width; ++q) {
      const nlohmann::json& e = list ? v[q] : v;
      const std::optional<double> n = number_from_json(e);
      if (!n) throw InputError(where, f.name, cut(v), "is not a number", "a number, \"nan\", \"inf\" or \"-inf\"");
      const double x = *n;
      if (f.valid && !f.valid(x)) throw InputError(where, f.name, cut(v), "is out of range", f.allowed);
      f.set(record, q, x);
    }
  }
}

// The dataset paths a layout writes, for "this file holds ..." checks.
template <class T>
std::vector<std::string> layout_names(const Layout<T>& layout) {
  std::vector<std::string> n;
  for (const auto& f : layout) n.push_back(f.name);
  return n;
}

}  // namespace aerosect
