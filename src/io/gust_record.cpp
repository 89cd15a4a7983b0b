#include "aerosect/io/gust_record.hpp"

#include <H5Cpp.h>

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <fstream>
#include <sstream>

#include <fmt/format.h>

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

GustRecord read_csv(const std::string& path, const SourceLocation& where, const std::string& key) {
  std::ifstream in(path);
  if (!in)
    throw InputError(where, key, path, "cannot open the recorded gust file",
                     "a readable CSV or HDF5 file (relative paths are from the case file's folder)");
  GustRecord r;
  std::string line;
  int n = 0;
  bool first = true;
  while (std::getline(in, line)) {
    ++n;
    const auto b = line.find_first_not_of(" \t\r");
    if (b == std::string::npos || line[b] == '#') continue;
    for (char& ch : line)
      if (ch == ',' || ch == ';' || ch == '\t') ch = ' ';
    std::istringstream ls(line);
    double x = 0, w = 0;
    if (!(ls >> x >> w)) {
      if (first) {  // a header line
        first = false;
        continue;
      }
      throw InputError({path, n, 0}, key, line, "is not two numbers",
                       "lines of `base, velocity` (time s or distance m, gust velocity m/s)");
    }
    first = false;
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
  const H5::DataSet d = f.openDataSet(name);
  const H5::DataSpace sp = d.getSpace();
  if (sp.getSimpleExtentNdims() != 1)
    throw InputError(where, key, path, fmt::format("dataset '{}' is not 1-D", name), "1-D datasets");
  hsize_t n = 0;
  sp.getSimpleExtentDims(&n);
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
