// The HDF5 details shared by the two writers of aerosect files; see
// hdf5_support.hpp.

#include "hdf5_support.hpp"

#include "aerosect/io/output_claim.hpp"

#include <hdf5_hl.h>

#include <algorithm>
#include <atomic>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <map>
#include <new>
#include <system_error>
#include <utility>

#include <fmt/format.h>

#include "aerosect/error.hpp"

namespace aerosect::hdf5_detail {

namespace fs = std::filesystem;

// ---------------------------------------------------------------------------
// HDF5 error reporting. HDF5's automatic handler prints the error stack; it
// is replaced (per thread, as the library is thread-safe) by one that keeps
// the innermost message so it can go into the OutputError instead.

namespace {

thread_local std::string recorded_hdf5_error;

herr_t keep_innermost(unsigned n, const H5E_error2_t* entry, void* data) {
  if (n == 0 && entry->desc != nullptr) *static_cast<std::string*>(data) = entry->desc;
  return 0;
}

herr_t record_error_stack(hid_t stack, void* /*client_data*/) {
  std::string innermost;
  H5Ewalk2(stack, H5E_WALK_UPWARD, keep_innermost, &innermost);
  recorded_hdf5_error = std::move(innermost);
  return 0;
}

// Low-level file errors carry "..., error message = 'REASON', ..." among many
// numbers; only the operation and REASON are worth showing.
std::string shorten(const std::string& desc) {
  const std::string marker = "error message = '";
  const auto at = desc.find(marker);
  if (at == std::string::npos) return desc;
  const auto begin = at + marker.size();
  const auto end = desc.find('\'', begin);
  const auto colon = desc.find(':');
  std::string operation = colon == std::string::npos ? std::string() : desc.substr(0, colon);
  std::string reason = desc.substr(begin, end == std::string::npos ? end : end - begin);
  return operation.empty() ? reason : operation + ": " + reason;
}

}  // namespace

void quiet_hdf5() {
  H5::Exception::dontPrint();
  H5Eset_auto2(H5E_DEFAULT, record_error_stack, nullptr);  // records, never prints
  recorded_hdf5_error.clear();
}

namespace {
std::atomic<bool> g_hdf5_failed{false};
}  // namespace

std::string describe(const H5::Exception& e) {
  // Every HDF5 failure the program sees passes here (see shutdown_unsafe).
  g_hdf5_failed.store(true);
  std::string msg = fmt::format("HDF5 {}: {}", e.getFuncName(), e.getDetailMsg());
  if (!recorded_hdf5_error.empty()) msg += " (" + shorten(recorded_hdf5_error) + ")";
  recorded_hdf5_error.clear();
  return msg;
}

// C API calls report failure by a negative return; turned into the same
// exception type the C++ API throws, so one handler translates both.
void check(herr_t status, const char* function) {
  if (status < 0) throw H5::Exception(function, "failed");
}

hid_t check_id(hid_t id, const char* function) {
  if (id < 0) throw H5::Exception(function, "failed");
  return id;
}

// ---------------------------------------------------------------------------
// Attributes.

void write_text(const H5::H5Object& object, const std::string& name, const std::string& value) {
  // A variable-length UTF-8 string (netCDF-4 NC_STRING, CF 1.10 §2.2
  // allows string attributes): h5py reads it as str, netCDF-4 and xarray
  // as text. A fixed-length one (NC_CHAR) reads as bytes in h5py.
  H5::StrType type(H5::PredType::C_S1, H5T_VARIABLE);
  type.setCset(H5T_CSET_UTF8);
  H5::Attribute attribute = object.createAttribute(name, type, H5::DataSpace(H5S_SCALAR));
  const char* text = value.c_str();
  attribute.write(type, &text);
}

void write_double(const H5::H5Object& object, const std::string& name, double value) {
  H5::Attribute attribute =
      object.createAttribute(name, H5::PredType::IEEE_F64LE, H5::DataSpace(H5S_SCALAR));
  attribute.write(H5::PredType::NATIVE_DOUBLE, &value);
}

void write_int32(const H5::H5Object& object, const std::string& name, std::int32_t value) {
  H5::Attribute attribute =
      object.createAttribute(name, H5::PredType::STD_I32LE, H5::DataSpace(H5S_SCALAR));
  attribute.write(H5::PredType::NATIVE_INT32, &value);
}

void write_int64(const H5::H5Object& object, const std::string& name, std::int64_t value) {
  H5::Attribute attribute =
      object.createAttribute(name, H5::PredType::STD_I64LE, H5::DataSpace(H5S_SCALAR));
  attribute.write(H5::PredType::NATIVE_INT64, &value);
}

void write_int32_array(const H5::H5Object& object, const std::string& name,
                       const std::vector<std::int32_t>& values) {
  const hsize_t n = values.size();
  H5::Attribute attribute = object.createAttribute(name, H5::PredType::STD_I32LE, H5::DataSpace(1, &n));
  attribute.write(H5::PredType::NATIVE_INT32, values.data());
}

void write_int64_array(const H5::H5Object& object, const std::string& name,
                       const std::vector<std::int64_t>& values) {
  const hsize_t n = values.size();
  H5::Attribute attribute = object.createAttribute(name, H5::PredType::STD_I64LE, H5::DataSpace(1, &n));
  attribute.write(H5::PredType::NATIVE_INT64, values.data());
}

// ---------------------------------------------------------------------------
// Creation.

H5::DSetCreatPropList plain_properties() {
  H5::DSetCreatPropList dcpl;
  dcpl.setAttrCrtOrder(kCreationOrder);
  return dcpl;
}

H5::DSetCreatPropList chunked_properties(const std::vector<hsize_t>& chunk, int deflate_level) {
  H5::DSetCreatPropList dcpl;
  dcpl.setChunk(static_cast<int>(chunk.size()), chunk.data());
  if (deflate_level > 0) {
    dcpl.setShuffle();
    dcpl.setDeflate(deflate_level);
  }
  dcpl.setAttrCrtOrder(kCreationOrder);
  return dcpl;
}

std::unique_ptr<H5::H5File> create_file(const std::string& path) {
  H5::FileCreatPropList fcpl;
  check(H5Pset_link_creation_order(fcpl.getId(), kCreationOrder), "H5Pset_link_creation_order");
  check(H5Pset_attr_creation_order(fcpl.getId(), kCreationOrder), "H5Pset_attr_creation_order");
  return std::make_unique<H5::H5File>(path, H5F_ACC_TRUNC, fcpl);
}

H5::Group create_group(const H5::Group& parent, const std::string& name) {
  H5::PropList gcpl(H5P_GROUP_CREATE);
  check(H5Pset_link_creation_order(gcpl.getId(), kCreationOrder), "H5Pset_link_creation_order");
  check(H5Pset_attr_creation_order(gcpl.getId(), kCreationOrder), "H5Pset_attr_creation_order");
  const hid_t id = check_id(
      H5Gcreate2(parent.getId(), name.c_str(), H5P_DEFAULT, gcpl.getId(), H5P_DEFAULT),
      "H5Gcreate2");
  check(H5Gclose(id), "H5Gclose");
  return parent.openGroup(name);
}

void set_scale(const H5::DataSet& dataset, const std::string& name) {
  check(H5DSset_scale(dataset.getId(), name.c_str()), "H5DSset_scale");
}

void attach_scale(const H5::DataSet& dataset, const H5::DataSet& scale, unsigned dimension) {
  check(H5DSattach_scale(dataset.getId(), scale.getId(), dimension), "H5DSattach_scale");
}

// ---------------------------------------------------------------------------
// Metadata.

bool valid_link_name(const std::string& name) {
  return !name.empty() && name != "." && name.find('/') == std::string::npos;
}

std::string metadata_problem(const RunMetadata& meta, std::set<std::string> reserved) {
  for (const auto& [key, value] : meta.text_attributes)
    if (key.empty() || !reserved.insert(key).second)
      return fmt::format("root attribute '{}' is empty, reserved or given twice", key);

  std::set<std::pair<std::string, std::string>> parameters;
  for (const auto& p : meta.parameters) {
    if (!valid_link_name(p.group) || !valid_link_name(p.name))
      return fmt::format("invalid parameter name '{}/{}'", p.group, p.name);
    if (!parameters.emplace(p.group, p.name).second)
      return fmt::format("parameter '{}/{}' given twice", p.group, p.name);
  }
  return {};
}

void write_root_attributes(const H5::Group& root, const RunMetadata& meta) {
  write_text(root, "Conventions", "CF-1.8");
  write_text(root, "title", meta.title);
  write_text(root, "aerosect_file_kind", meta.file_kind);
  for (const auto& [key, value] : meta.text_attributes) write_text(root, key, value);
}

namespace {

void write_parameter(const H5::Group& group, const ParameterRecord& p) {
  H5::DataSet dataset = group.createDataSet(p.name, H5::PredType::IEEE_F64LE,
                                            H5::DataSpace(H5S_SCALAR), plain_properties());
  dataset.write(&p.value, H5::PredType::NATIVE_DOUBLE);
  write_text(dataset, "units", p.units);
  write_text(dataset, "long_name", p.long_name);
  close_now(dataset);
}

}  // namespace

void write_parameters(const H5::Group& root, const RunMetadata& meta) {
  if (meta.parameters.empty()) return;
  H5::Group parameters = create_group(root, kParametersGroup);
  std::map<std::string, H5::Group> groups;
  for (const auto& p : meta.parameters) {
    auto group = groups.find(p.group);
    if (group == groups.end())
      group = groups.emplace(p.group, create_group(parameters, p.group)).first;
    write_parameter(group->second, p);
  }
}

// ---------------------------------------------------------------------------
// The file on disk.

void require_not_directory(const std::string& target) {
  // Also: not a device or FIFO, not an input of this run, not another run's
  // output (output_claim.hpp).
  claim_output(target);
}

std::string cannot_create(const std::string& temporary_path) {
  // A plain open first: its errno says why a file cannot be created here.
  errno = 0;
  if (std::FILE* probe = std::fopen(temporary_path.c_str(), "wb")) {
    std::fclose(probe);
    return {};
  }
  const int error = errno;
  return fmt::format("cannot create the temporary file '{}': {}", temporary_path,
                     error != 0 ? std::strerror(error) : "unknown reason");
}

namespace {
constexpr std::uintmax_t kMetadataReserve = 1u << 20;
}  // namespace

std::string lack_of_space(const std::string& file, std::uintmax_t bytes, const std::string& what) {
  fs::path directory = fs::path(file).parent_path();
  if (directory.empty()) directory = ".";
  std::error_code ec;
  const fs::space_info space = fs::space(directory, ec);
  if (ec || space.capacity == 0) return {};
  const std::uintmax_t needed = bytes + kMetadataReserve;
  if (space.available >= needed) return {};
  return fmt::format("no space left on the device: {} bytes free in '{}', {} needs up to {}",
                     space.available, directory.string(), what, needed);
}

std::string rename_into_place(const std::string& from, const std::string& to) {
  std::error_code ec;
  fs::rename(from, to, ec);
  if (!ec) return {};
  return fmt::format("cannot rename '{}' to '{}': {}; the data is kept in '{}'", from, to,
                     ec.message(), from);
}

bool shutdown_unsafe() noexcept { return g_hdf5_failed.load(); }

void close_now(H5::DataSet& dataset) {
  try {
    dataset.close();
  } catch (...) {
    new (&dataset) H5::DataSet();  // as in close_quietly: the id is gone
    throw;
  }
}

void close_quietly(H5::DataSet& dataset) noexcept {
  try {
    dataset.close();
  } catch (...) {
    // H5Dclose releases the id even when the close fails, but the wrapper
    // keeps it, and its destructor would close it again (and print to
    // stderr): the wrapper is replaced without running its destructor.
    new (&dataset) H5::DataSet();
  }
}

void close_quietly(std::unique_ptr<H5::H5File>& file) noexcept {
  if (!file) return;
  try {
    file->close();
  } catch (...) {
    // The file id stays valid and a second H5Fclose on it crashes HDF5 1.10:
    // the wrapper is let go without its destructor. HDF5's own shutdown at
    // process exit closes it again and crashes the same way (see
    // shutdown_unsafe).
    static_cast<void>(file.release());
  }
}

}  // namespace aerosect::hdf5_detail
