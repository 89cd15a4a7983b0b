#include "aerosect/io/gust_record.hpp"

#include <H5Cpp.h>

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstdint>
#include <limits>
#include <string_view>

#include <fmt/format.h>

#include "aerosect/io/text_file.hpp"

namespace aerosect {

namespace {

bool ends_with(const std::string& s, const std::string& e) {
  return s.size() >= e.size() && std::equal(e.rbegin(), e.rend(), s.rbegin());
}

void validate(GustRecord& r, const std::string& path, const SourceLocation& where,
              const std::string& key) {
  if (r.base.size() < 2)
    throw InputError(where, key, path, "the recorded gust has fewer than two samples",
                     "a series of at least two (base, velocity) samples");
  for (std::size_t i = 0; i < r.base.size(); ++i) {
    if (!std::isfinite(r.base[i]) || !std::isfinite(r.velocity[i]))
      throw InputError(where, key, path, fmt::format("sample {} is not finite", i + 1),
                       "finite numbers");
    if (i > 0 && !(r.base[i] > r.base[i - 1]))
      throw InputError(where, key, path,
                       fmt::format("the base is not strictly increasing at sample {}", i + 1),
                       "strictly increasing time (s) or distance (m)");
  }
}

// One field as a number: the whole field, nothing after it ("5x" is not 5).
bool parse_number(std::string_view field, double& value) {
  if (field.empty()) return false;
  if (field.front() == '+') field.remove_prefix(1);
  const auto [end, ec] = std::from_chars(field.data(), field.data() + field.size(), value);
  return ec == std::errc() && end == field.data() + field.size();
}

// The fields of one line, split at commas, semicolons, tabs and spaces
// (several in a row count as one separator).
std::vector<std::string_view> fields_of(std::string_view line) {
  std::vector<std::string_view> out;
  std::size_t i = 0;
  auto separator = [](char c) { return c == ',' || c == ';' || c == '\t' || c == ' '; };
  while (i < line.size()) {
    while (i < line.size() && separator(line[i])) ++i;
    const std::size_t b = i;
    while (i < line.size() && !separator(line[i])) ++i;
    if (i > b) out.push_back(line.substr(b, i - b));
  }
  return out;
}

constexpr const char* kCsvAllowed =
    "lines of `base, velocity` (time s or distance m, gust velocity m/s; decimal points, "
    "separated by a comma, semicolon, tab or spaces), an optional header line, '#' comments";

GustRecord read_csv(const std::string& path, const SourceLocation& where, const std::string& key) {
  std::string text = read_input_file(
      path, kMaxGustCsvBytes, "recorded gust file", where, key,
      "a readable CSV or HDF5 file (relative paths are from the case file's folder)");
  // A UTF-8 byte-order mark is not part of the first line.
  if (text.rfind("\xEF\xBB\xBF", 0) == 0) text.erase(0, 3);
  // Line ends: LF, CR LF or a lone CR (old Macintosh files).
  std::string lines;
  lines.reserve(text.size());
  for (std::size_t i = 0; i < text.size(); ++i) {
    if (text[i] == '\r') {
      lines += '\n';
      if (i + 1 < text.size() && text[i + 1] == '\n') ++i;
    } else {
      lines += text[i];
    }
  }
  GustRecord r;
  int n = 0;
  bool first = true;
  std::size_t pos = 0;
  while (pos < lines.size()) {
    std::size_t e = lines.find('\n', pos);
    if (e == std::string::npos) e = lines.size();
    const std::string_view line(lines.data() + pos, e - pos);
    pos = e + 1;
    ++n;
    const auto b = line.find_first_not_of(" \t");
    if (b == std::string_view::npos || line[b] == '#') continue;
    const auto f = fields_of(line);
    double x = 0, w = 0;
    const bool numeric_start = !f.empty() && parse_number(f[0], x);
    if (first && !numeric_start) {  // a header line (its first field is not a number)
      first = false;
      continue;
    }
    first = false;
    const std::string shown(line);
    if (line.find(';') != std::string_view::npos && line.find(',') != std::string_view::npos)
      throw InputError({path, n, 0}, key, shown,
                       "has both semicolons and commas (decimal commas?): numbers need a decimal point",
                       kCsvAllowed);
    if (f.size() != 2)
      throw InputError({path, n, 0}, key, shown, fmt::format("has {} fields, not two", f.size()),
                       kCsvAllowed);
    if (!numeric_start || !parse_number(f[1], w))
      throw InputError({path, n, 0}, key, shown, "is not two numbers", kCsvAllowed);
    if (r.base.size() >= kMaxGustRecordSamples)
      throw InputError({path, n, 0}, key, path,
                       fmt::format("the record has more than {} samples", kMaxGustRecordSamples),
                       fmt::format("at most {} samples", kMaxGustRecordSamples));
    r.base.push_back(x);
    r.velocity.push_back(w);
  }
  return r;
}

std::vector<double> read_1d(const H5::H5File& f, const std::string& name, const std::string& path,
                            const SourceLocation& where, const std::string& key) {
  if (!f.nameExists(name))
    throw InputError(where, key, path, fmt::format("the file has no dataset '{}'", name),
                     "1-D datasets named by base_dataset and velocity_dataset");
  if (f.childObjType(name) != H5O_TYPE_DATASET)
    throw InputError(where, key, path, fmt::format("'{}' is not a dataset", name),
                     "1-D datasets named by base_dataset and velocity_dataset");
  const H5::DataSet d = f.openDataSet(name);
  if (d.getTypeClass() != H5T_FLOAT && d.getTypeClass() != H5T_INTEGER)
    throw InputError(where, key, path, fmt::format("dataset '{}' is not numeric", name),
                     "1-D datasets of floating-point or integer numbers");
  const H5::DataSpace sp = d.getSpace();
  if (sp.getSimpleExtentNdims() != 1)
    throw InputError(where, key, path, fmt::format("dataset '{}' is not 1-D", name), "1-D datasets");
  hsize_t n = 0;
  sp.getSimpleExtentDims(&n);
  // The declared length decides the allocation: check it first (a damaged
  // or hostile file may declare 2^33 samples).
  if (n > kMaxGustRecordSamples)
    throw InputError(where, key, path,
                     fmt::format("dataset '{}' declares {} samples", name, static_cast<unsigned long long>(n)),
                     fmt::format("at most {} samples", kMaxGustRecordSamples));
  std::vector<double> v(n);
  if (n > 0) d.read(v.data(), H5::PredType::NATIVE_DOUBLE);
  return v;
}

}  // namespace

GustRecord read_gust_record(const std::string& path, const std::string& base_dataset,
                            const std::string& velocity_dataset, const SourceLocation& where,
                            const std::string& key) {
  GustRecord r;
  if (ends_with(path, ".h5") || ends_with(path, ".hdf5") || ends_with(path, ".nc")) {
    check_input_file(path, std::numeric_limits<std::uint64_t>::max(), "recorded gust file", where, key,
                     "a readable CSV or HDF5 file (relative paths are from the case file's folder)");
    H5::Exception::dontPrint();
    try {
      const H5::H5File f(path, H5F_ACC_RDONLY);
      r.base = read_1d(f, base_dataset, path, where, key);
      r.velocity = read_1d(f, velocity_dataset, path, where, key);
    } catch (const H5::Exception& e) {
      throw InputError(where, key, path, fmt::format("cannot read the HDF5 file ({})", e.getDetailMsg()),
                       "a readable HDF5 file with the base and velocity datasets");
    }
    if (r.base.size() != r.velocity.size())
      throw InputError(where, key, path,
                       fmt::format("datasets '{}' and '{}' differ in length ({} and {})", base_dataset,
                                   velocity_dataset, r.base.size(), r.velocity.size()),
                       "datasets of equal length");
  } else {
    r = read_csv(path, where, key);
  }
  validate(r, path, where, key);
  return r;
}

}  // namespace aerosect
