// Hdf5TimeHistoryWriter: the file layout and its conventions are described
// in include/aerosect/io/hdf5_writer.hpp. This file holds the HDF5 calls and
// the translation of every HDF5 failure into OutputError.
//
// Links and attributes are created with creation order tracked and indexed
// (as netCDF-4 itself does), so ncdump and xarray list variables and
// attributes in the order they were written.

#include "aerosect/io/hdf5_writer.hpp"

#include <H5Cpp.h>
#include <hdf5_hl.h>

#include <algorithm>
#include <cerrno>
#include <cstdint>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <map>
#include <set>
#include <system_error>
#include <utility>

#include <fmt/format.h>
#include <fmt/ranges.h>

#include "aerosect/error.hpp"

namespace aerosect {

namespace fs = std::filesystem;

namespace {

constexpr unsigned kCreationOrder = H5P_CRT_ORDER_TRACKED | H5P_CRT_ORDER_INDEXED;
constexpr const char* kTimeName = "time";
constexpr const char* kParametersGroup = "parameters";

// ---------------------------------------------------------------------------
// HDF5 error reporting. HDF5's automatic handler prints the error stack; it
// is replaced (per thread, as the library is thread-safe) by one that keeps
// the innermost message so it can go into the OutputError instead.

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

void quiet_hdf5() {
  H5::Exception::dontPrint();
  H5Eset_auto2(H5E_DEFAULT, record_error_stack, nullptr);  // records, never prints
  recorded_hdf5_error.clear();
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

std::string describe(const H5::Exception& e) {
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
  // The form netCDF-4 itself gives text (NC_CHAR) attributes: fixed length
  // equal to the string's (1 and a NUL when empty), null-terminated padding.
  H5::StrType type(H5::PredType::C_S1, std::max<std::size_t>(value.size(), 1));
  type.setStrpad(H5T_STR_NULLTERM);
  type.setCset(H5T_CSET_UTF8);
  H5::Attribute attribute = object.createAttribute(name, type, H5::DataSpace(H5S_SCALAR));
  attribute.write(type, value.c_str());
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

// ---------------------------------------------------------------------------
// Creation helpers.

H5::DSetCreatPropList series_properties(const std::vector<hsize_t>& chunk, int deflate_level) {
  H5::DSetCreatPropList dcpl;
  dcpl.setChunk(static_cast<int>(chunk.size()), chunk.data());
  if (deflate_level > 0) {
    dcpl.setShuffle();
    dcpl.setDeflate(deflate_level);
  }
  dcpl.setAttrCrtOrder(kCreationOrder);
  return dcpl;
}

// An empty series dataset: [0] or [0 x width], growing along time only.
H5::DataSet create_series(const H5::H5File& file, const std::string& name, int width,
                          std::size_t block_rows, int deflate_level) {
  std::vector<hsize_t> dims{0};
  std::vector<hsize_t> max_dims{H5S_UNLIMITED};
  std::vector<hsize_t> chunk{static_cast<hsize_t>(block_rows)};
  if (width > 1) {
    dims.push_back(static_cast<hsize_t>(width));
    max_dims.push_back(static_cast<hsize_t>(width));
    chunk.push_back(static_cast<hsize_t>(width));
  }
  H5::DataSpace space(static_cast<int>(dims.size()), dims.data(), max_dims.data());
  // No raw-data chunk cache: each block is one whole chunk written straight
  // through, so no unwritten data piles up in memory or waits for close().
  H5::DSetAccPropList dapl;
  dapl.setChunkCache(H5D_CHUNK_CACHE_NSLOTS_DEFAULT, 0, H5D_CHUNK_CACHE_W0_DEFAULT);
  return file.createDataSet(name, H5::PredType::IEEE_F64LE, space,
                            series_properties(chunk, deflate_level), dapl);
}

// Free space needed before writing a block: the block uncompressed plus
// room for the metadata that close() flushes. HDF5 1.10 cannot always close
// a file after a write failed for lack of space (a later close crashes), so
// a full disk is detected here instead, while the file can still be closed.
constexpr std::uintmax_t kMetadataReserve = 1u << 20;

// Empty when there is room (or nothing is known), else the reason.
std::string lack_of_space(const std::string& file, std::uintmax_t block_bytes) {
  fs::path directory = fs::path(file).parent_path();
  if (directory.empty()) directory = ".";
  std::error_code ec;
  const fs::space_info space = fs::space(directory, ec);
  if (ec || space.capacity == 0) return {};
  const std::uintmax_t needed = block_bytes + kMetadataReserve;
  if (space.available >= needed) return {};
  return fmt::format("no space left on the device: {} bytes free in '{}', the next block needs "
                     "up to {}",
                     space.available, directory.string(), needed);
}

// The C++ API cannot pass a group creation property list, which creation
// order tracking needs: the group is made through the C API and reopened.
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

void write_parameter(const H5::Group& group, const ParameterRecord& p) {
  H5::DSetCreatPropList dcpl;
  dcpl.setAttrCrtOrder(kCreationOrder);
  H5::DataSet dataset = group.createDataSet(p.name, H5::PredType::IEEE_F64LE,
                                            H5::DataSpace(H5S_SCALAR), dcpl);
  dataset.write(&p.value, H5::PredType::NATIVE_DOUBLE);
  write_text(dataset, "units", p.units);
  write_text(dataset, "long_name", p.long_name);
}

// ---------------------------------------------------------------------------
// Validation of what the analysis hands over (a mistake there is a bug).

[[noreturn]] void bug(const std::string& what) {
  throw InternalError(__FILE__, __LINE__, "HDF5 writer: " + what);
}

bool valid_link_name(const std::string& name) {
  return !name.empty() && name != "." && name.find('/') == std::string::npos;
}

const std::set<std::string>& reserved_root_attributes() {
  static const std::set<std::string> names{"Conventions", "title",  "aerosect_file_kind",
                                           "complete",    "status", "samples"};
  return names;
}

std::string component_axis_name(const Channel& c) {
  return c.component_axis.empty() ? c.name + "_component" : c.component_axis;
}

void validate(const std::vector<Channel>& channels, const RunMetadata& meta) {
  std::set<std::string> names{kTimeName, kParametersGroup};
  std::map<std::string, const Channel*> axes;
  for (const auto& c : channels) {
    if (!valid_link_name(c.name)) bug(fmt::format("invalid channel name '{}'", c.name));
    if (!names.insert(c.name).second) bug(fmt::format("channel name '{}' used twice", c.name));
    if (c.width < 1) bug(fmt::format("channel '{}' has width {}", c.name, c.width));
    if (c.width == 1) continue;
    if (c.component_names.size() != static_cast<std::size_t>(c.width))
      bug(fmt::format("channel '{}' has width {} but {} component names", c.name, c.width,
                      c.component_names.size()));
    for (const auto& n : c.component_names)
      if (n.find(',') != std::string::npos)
        bug(fmt::format("component name '{}' of channel '{}' contains a comma", n, c.name));
    const std::string axis = component_axis_name(c);
    if (!valid_link_name(axis)) bug(fmt::format("invalid component axis name '{}'", axis));
    auto [it, added] = axes.emplace(axis, &c);
    if (!added && (it->second->width != c.width ||
                   it->second->component_names != c.component_names))
      bug(fmt::format("channels '{}' and '{}' share component axis '{}' with different components",
                      it->second->name, c.name, axis));
  }
  for (const auto& [axis, c] : axes)
    if (names.count(axis) != 0)
      bug(fmt::format("component axis '{}' of channel '{}' clashes with another dataset", axis,
                      c->name));

  std::set<std::string> attributes = reserved_root_attributes();
  for (const auto& [key, value] : meta.text_attributes)
    if (key.empty() || !attributes.insert(key).second)
      bug(fmt::format("root attribute '{}' is empty, reserved or given twice", key));

  std::set<std::pair<std::string, std::string>> parameters;
  for (const auto& p : meta.parameters) {
    if (!valid_link_name(p.group) || !valid_link_name(p.name))
      bug(fmt::format("invalid parameter name '{}/{}'", p.group, p.name));
    if (!parameters.emplace(p.group, p.name).second)
      bug(fmt::format("parameter '{}/{}' given twice", p.group, p.name));
  }
}

}  // namespace

// ---------------------------------------------------------------------------

struct Hdf5TimeHistoryWriter::File {
  struct Series {
    H5::DataSet dataset;
    int width = 1;
    std::size_t buffer_offset = 0;  // first element of this channel's block in `buffer`
  };

  std::unique_ptr<H5::H5File> file;
  H5::DataSet time;
  std::vector<Series> series;
  std::size_t row_width = 0;   // sum of channel widths
  std::vector<double> time_buffer;
  std::vector<double> buffer;  // per channel, a contiguous [block_rows x width] block
  std::size_t buffered = 0;    // rows in the buffers
  hsize_t written = 0;         // rows in the file

  // Objects first: a file whose objects are open stays open after close().
  void close() {
    for (auto& s : series) s.dataset.close();
    series.clear();
    time.close();
    if (file) file->close();
  }

  // Closes whatever is still open, each object once, ignoring failures (an
  // HDF5 id is released even when its close fails; closing it again, e.g.
  // from a C++ destructor, is what must not happen).
  void close_quietly() noexcept {
    auto quietly = [](auto& object) {
      try {
        object.close();
      } catch (...) {
        // Already failing; the file is about to be removed.
      }
    };
    for (auto& s : series) quietly(s.dataset);
    quietly(time);
    if (file) {
      try {
        file->close();
      } catch (...) {
        // The file id stays valid and a second H5Fclose on it crashes
        // HDF5 1.10: the wrapper is let go without its destructor.
        static_cast<void>(file.release());
      }
    }
  }
};

Hdf5TimeHistoryWriter::Hdf5TimeHistoryWriter(std::string path, Hdf5WriterOptions options)
    : path_(std::move(path)), temporary_path_(path_ + ".part"), options_(options) {
  AEROSECT_CHECK(!path_.empty());
  AEROSECT_CHECK(options_.block_rows >= 1);
  AEROSECT_CHECK(options_.deflate_level >= 0 && options_.deflate_level <= 9);
}

Hdf5TimeHistoryWriter::~Hdf5TimeHistoryWriter() {
  if (state_ == State::kOpen) discard();
}

std::string Hdf5TimeHistoryWriter::incomplete_path(const std::string& path) {
  return fs::path(path).replace_extension(".incomplete.h5").string();
}

void Hdf5TimeHistoryWriter::discard() noexcept {
  std::error_code ignored;
  if (file_) {
    file_->close_quietly();
    file_.reset();
  }
  fs::remove(temporary_path_, ignored);
}

void Hdf5TimeHistoryWriter::begin(const Channel& time_channel,
                                  const std::vector<Channel>& channels,
                                  const RunMetadata& meta) {
  AEROSECT_CHECK(state_ == State::kIdle);
  validate(channels, meta);
  quiet_hdf5();

  std::error_code ec;
  if (fs::is_directory(path_, ec))
    throw OutputError(path_, "a directory of that name exists");
  // A plain open first: its errno says why a file cannot be created here
  // ("No such file or directory", "Not a directory", "Permission denied").
  errno = 0;
  if (std::FILE* probe = std::fopen(temporary_path_.c_str(), "wb")) {
    std::fclose(probe);
  } else {
    const int error = errno;
    state_ = State::kFailed;
    failure_ = fmt::format("cannot create the temporary file '{}': {}", temporary_path_,
                           error != 0 ? std::strerror(error) : "unknown reason");
    throw OutputError(path_, failure_);
  }

  try {
    file_ = std::make_unique<File>();
    File& f = *file_;

    H5::FileCreatPropList fcpl;
    check(H5Pset_link_creation_order(fcpl.getId(), kCreationOrder), "H5Pset_link_creation_order");
    check(H5Pset_attr_creation_order(fcpl.getId(), kCreationOrder), "H5Pset_attr_creation_order");
    f.file = std::make_unique<H5::H5File>(temporary_path_, H5F_ACC_TRUNC, fcpl);

    H5::Group root = f.file->openGroup("/");
    write_text(root, "Conventions", "CF-1.8");
    write_text(root, "title", meta.title);
    write_text(root, "aerosect_file_kind", meta.file_kind);
    for (const auto& [key, value] : meta.text_attributes) write_text(root, key, value);

    f.time = create_series(*f.file, kTimeName, 1, options_.block_rows, options_.deflate_level);
    write_text(f.time, "units", time_channel.units);
    write_text(f.time, "long_name", time_channel.long_name);
    write_text(f.time, "standard_name", "time");
    write_text(f.time, "axis", "T");
    check(H5DSset_scale(f.time.getId(), kTimeName), "H5DSset_scale");

    std::map<std::string, H5::DataSet> axes;
    for (const auto& c : channels) {
      File::Series s;
      s.width = c.width;
      s.buffer_offset = f.row_width * options_.block_rows;
      f.row_width += static_cast<std::size_t>(c.width);
      s.dataset = create_series(*f.file, c.name, c.width, options_.block_rows,
                                options_.deflate_level);
      write_text(s.dataset, "units", c.units);
      write_text(s.dataset, "long_name", c.long_name);
      check(H5DSattach_scale(s.dataset.getId(), f.time.getId(), 0), "H5DSattach_scale");

      if (c.width > 1) {
        const std::string axis_name = component_axis_name(c);
        auto axis = axes.find(axis_name);
        if (axis == axes.end()) {
          const hsize_t n = static_cast<hsize_t>(c.width);
          H5::DSetCreatPropList dcpl;
          dcpl.setAttrCrtOrder(kCreationOrder);
          H5::DataSet d = f.file->createDataSet(axis_name, H5::PredType::STD_I32LE,
                                               H5::DataSpace(1, &n), dcpl);
          std::vector<std::int32_t> index(c.width);
          for (int k = 0; k < c.width; ++k) index[k] = k + 1;
          d.write(index.data(), H5::PredType::NATIVE_INT32);
          write_text(d, "units", "1");
          write_text(d, "long_name", fmt::format("index along {} (1-based)", axis_name));
          write_text(d, "component_names", fmt::format("{}", fmt::join(c.component_names, ",")));
          check(H5DSset_scale(d.getId(), axis_name.c_str()), "H5DSset_scale");
          axis = axes.emplace(axis_name, d).first;
        }
        check(H5DSattach_scale(s.dataset.getId(), axis->second.getId(), 1), "H5DSattach_scale");
      }
      f.series.push_back(std::move(s));
    }
    for (auto& [name, d] : axes) d.close();

    if (!meta.parameters.empty()) {
      H5::Group parameters = create_group(root, kParametersGroup);
      std::map<std::string, H5::Group> groups;
      for (const auto& p : meta.parameters) {
        auto group = groups.find(p.group);
        if (group == groups.end())
          group = groups.emplace(p.group, create_group(parameters, p.group)).first;
        write_parameter(group->second, p);
      }
    }
    root.close();

    f.time_buffer.resize(options_.block_rows);
    f.buffer.resize(f.row_width * options_.block_rows);
    state_ = State::kOpen;
  } catch (const H5::Exception& e) {
    discard();
    state_ = State::kFailed;
    failure_ = fmt::format("creating '{}': {}", temporary_path_, describe(e));
    throw OutputError(path_, failure_);
  } catch (...) {
    discard();
    state_ = State::kFailed;
    failure_ = "creating the file failed";
    throw;
  }
}

void Hdf5TimeHistoryWriter::append(double time, std::span<const double> row) {
  AEROSECT_CHECK(state_ == State::kOpen);
  File& f = *file_;
  AEROSECT_CHECK(row.size() == f.row_width);

  const std::size_t r = f.buffered;
  f.time_buffer[r] = time;
  std::size_t column = 0;
  for (const auto& s : f.series) {
    const auto w = static_cast<std::size_t>(s.width);
    std::copy_n(row.begin() + static_cast<std::ptrdiff_t>(column), w,
                f.buffer.begin() + static_cast<std::ptrdiff_t>(s.buffer_offset + r * w));
    column += w;
  }
  if (++f.buffered == options_.block_rows) write_block();
}

void Hdf5TimeHistoryWriter::write_block() {
  File& f = *file_;
  if (f.buffered == 0) return;
  quiet_hdf5();
  const hsize_t first = f.written;
  const hsize_t rows = f.buffered;
  std::string full = lack_of_space(
      temporary_path_, static_cast<std::uintmax_t>(rows) * (1 + f.row_width) * sizeof(double));
  if (!full.empty()) {
    discard();
    state_ = State::kFailed;
    failure_ = std::move(full);
    throw OutputError(path_, failure_);
  }
  try {
    auto put = [&](H5::DataSet& dataset, int width, const double* data) {
      const int rank = width > 1 ? 2 : 1;
      const hsize_t extent[2] = {first + rows, static_cast<hsize_t>(width)};
      const hsize_t start[2] = {first, 0};
      const hsize_t count[2] = {rows, static_cast<hsize_t>(width)};
      dataset.extend(extent);
      H5::DataSpace file_space = dataset.getSpace();
      file_space.selectHyperslab(H5S_SELECT_SET, count, start);
      H5::DataSpace memory_space(rank, count);
      dataset.write(data, H5::PredType::NATIVE_DOUBLE, memory_space, file_space);
    };
    put(f.time, 1, f.time_buffer.data());
    for (auto& s : f.series) put(s.dataset, s.width, f.buffer.data() + s.buffer_offset);
  } catch (const H5::Exception& e) {
    discard();
    state_ = State::kFailed;
    failure_ = fmt::format("writing rows {} to {} of '{}': {}", first, first + rows - 1,
                           temporary_path_, describe(e));
    throw OutputError(path_, failure_);
  }
  f.written += rows;
  f.buffered = 0;
}

void Hdf5TimeHistoryWriter::finish(const RunOutcome& outcome) {
  if (state_ == State::kFailed || state_ == State::kIdle) {
    if (!outcome.completed) return;
    AEROSECT_CHECK(state_ == State::kFailed);
    throw OutputError(path_, "the run completed but its file was abandoned earlier: " + failure_);
  }
  AEROSECT_CHECK(state_ == State::kOpen);

  std::set<std::string> attributes = reserved_root_attributes();
  for (const auto& [key, value] : outcome.numbers)
    if (key.empty() || !attributes.insert(key).second)
      bug(fmt::format("outcome number '{}' is empty, reserved or given twice", key));

  write_block();  // throws OutputError (state kFailed, file removed) on failure
  quiet_hdf5();
  try {
    File& f = *file_;
    H5::Group root = f.file->openGroup("/");
    for (const auto& [key, value] : outcome.numbers)
      if (root.attrExists(key))
        bug(fmt::format("outcome number '{}' clashes with a root attribute", key));
    write_int32(root, "complete", outcome.completed ? 1 : 0);
    write_text(root, "status", outcome.status);
    // The rows actually in the file, which is what a reader needs to agree with.
    write_int64(root, "samples", static_cast<std::int64_t>(f.written));
    for (const auto& [key, value] : outcome.numbers) write_double(root, key, value);
    root.close();
    f.file->flush(H5F_SCOPE_GLOBAL);
    f.close();
    file_.reset();
  } catch (const H5::Exception& e) {
    discard();
    state_ = State::kFailed;
    failure_ = fmt::format("finishing '{}': {}", temporary_path_, describe(e));
    throw OutputError(path_, failure_);
  } catch (...) {
    discard();
    state_ = State::kFailed;
    failure_ = "finishing the file failed";
    throw;
  }

  state_ = State::kFinished;
  const std::string target = outcome.completed ? path_ : incomplete_path(path_);
  std::error_code ec;
  fs::rename(temporary_path_, target, ec);
  if (ec) {
    final_path_ = temporary_path_;
    throw OutputError(path_, fmt::format("cannot rename '{}' to '{}': {}; the data is kept in '{}'",
                                         temporary_path_, target, ec.message(), temporary_path_));
  }
  final_path_ = target;
}

}  // namespace aerosect
