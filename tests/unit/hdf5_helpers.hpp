#pragma once
// Helpers of the unit tests that write and read HDF5 files: a scratch
// folder and readers of attributes and datasets (HDF5 C++ API).
#include <H5Cpp.h>
#include <unistd.h>

#include <atomic>
#include <filesystem>
#include <string>
#include <system_error>
#include <vector>

namespace aerosect::test {

// A fresh folder under the system's temporary folder, removed with its
// contents at the end of its scope.
class TempDir {
 public:
  explicit TempDir(const std::string& prefix = "aerosect_test_") {
    static std::atomic<int> counter{0};
    path_ = std::filesystem::temp_directory_path() /
            (prefix + std::to_string(::getpid()) + "_" + std::to_string(counter++));
    std::filesystem::remove_all(path_);
    std::filesystem::create_directories(path_);
  }
  ~TempDir() {
    std::error_code ec;
    std::filesystem::remove_all(path_, ec);
  }
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;
  std::string file(const std::string& name) const { return (path_ / name).string(); }

 private:
  std::filesystem::path path_;
};

inline std::string text_attribute(const H5::H5Object& object, const std::string& name) {
  H5::Attribute a = object.openAttribute(name);
  std::string value;
  a.read(a.getStrType(), value);
  while (!value.empty() && value.back() == '\0') value.pop_back();
  return value;
}

template <typename T>
T numeric_attribute(const H5::H5Object& object, const std::string& name, const H5::PredType& memory_type) {
  T value{};
  object.openAttribute(name).read(memory_type, &value);
  return value;
}

inline std::vector<hsize_t> dims_of(const H5::DataSet& d) {
  H5::DataSpace space = d.getSpace();
  std::vector<hsize_t> dims(static_cast<std::size_t>(space.getSimpleExtentNdims()));
  space.getSimpleExtentDims(dims.data());
  return dims;
}

inline std::vector<double> read_all(const H5::DataSet& d) {
  hsize_t n = 1;
  for (auto k : dims_of(d)) n *= k;
  std::vector<double> values(n);
  if (n > 0) d.read(values.data(), H5::PredType::NATIVE_DOUBLE);
  return values;
}

// HDF5 H5F docs (H5Fget_obj_count): open files, datasets, groups and
// attributes of every file (datatypes left out: the C++ API keeps its
// predefined types open).
inline ssize_t open_hdf5_objects() {
  return H5Fget_obj_count(static_cast<hid_t>(H5F_OBJ_ALL),
                          H5F_OBJ_FILE | H5F_OBJ_DATASET | H5F_OBJ_GROUP | H5F_OBJ_ATTR);
}

}  // namespace aerosect::test
