// Hdf5Document: the layout and its conventions are described in
// include/aerosect/io/hdf5_document.hpp; the HDF5 details it shares with
// Hdf5TimeHistoryWriter (error recording, creation order, text attributes,
// metadata, the temporary file) are in hdf5_support.hpp.
//
// Failures come in two kinds, both thrown as OutputError:
//  - a request that cannot be honoured (unknown axis, wrong number of
//    values, a name already taken, a path through a dataset) is refused
//    before anything is written: the document stays usable;
//  - a failure of HDF5 or of the disk abandons the document: the temporary
//    file is closed and removed, and every later call throws, naming the
//    first failure.

#include "aerosect/io/hdf5_document.hpp"

#include <H5Cpp.h>

#include <array>
#include <cstddef>
#include <filesystem>
#include <limits>
#include <map>
#include <numeric>
#include <set>
#include <system_error>
#include <utility>

#include <fmt/format.h>
#include <fmt/ranges.h>

#include "aerosect/error.hpp"
#include "hdf5_support.hpp"

namespace aerosect {

namespace fs = std::filesystem;

namespace hdf5_detail {
namespace {

// Datasets above this size are chunked (chunks of at most this size) and
// compressed; smaller ones are contiguous.
constexpr std::uintmax_t kChunkBytes = 64 * 1024;
constexpr int kDeflateLevel = 4;

// Halves the leading dimensions (the slowest varying first) until a chunk
// holds at most kChunkBytes, so a chunk is a slab of whole trailing rows
// whenever a row fits.
std::vector<hsize_t> chunk_shape(std::vector<hsize_t> dims) {
  auto bytes = [&] {
    return std::accumulate(dims.begin(), dims.end(), std::uintmax_t{sizeof(double)},
                           [](std::uintmax_t a, hsize_t b) { return a * b; });
  };
  for (std::size_t k = 0; k < dims.size() && bytes() > kChunkBytes; ++k)
    while (dims[k] > 1 && bytes() > kChunkBytes) dims[k] = (dims[k] + 1) / 2;
  return dims;
}

// The chunk of a dataset of shape `dims`: none (empty) for a scalar or one
// of at most kChunkBytes, which stays contiguous.
std::vector<hsize_t> chunk_of(const std::vector<hsize_t>& dims) {
  std::uintmax_t bytes = sizeof(double);
  for (auto n : dims) bytes *= n;
  if (dims.empty() || bytes <= kChunkBytes) return {};
  return chunk_shape(dims);
}

H5::DSetCreatPropList array_properties(const std::vector<hsize_t>& dims) {
  const std::vector<hsize_t> chunk = chunk_of(dims);
  return chunk.empty() ? plain_properties() : chunked_properties(chunk, kDeflateLevel);
}

// "a/b/c" or "/a/b/c" -> {"a", "b", "c"}; "" and "/" -> {}. Empty when a
// component is not a link name (reported by the caller as invalid).
std::vector<std::string> split_path(const std::string& path, bool& valid) {
  std::vector<std::string> parts;
  valid = true;
  std::size_t begin = path.empty() || path[0] != '/' ? 0 : 1;
  if (begin >= path.size()) return parts;
  while (true) {
    const std::size_t end = path.find('/', begin);
    std::string part = path.substr(begin, end == std::string::npos ? end : end - begin);
    if (!valid_link_name(part)) {
      valid = false;
      return {};
    }
    parts.push_back(std::move(part));
    if (end == std::string::npos) break;
    begin = end + 1;
  }
  return parts;
}

std::string join(const std::vector<std::string>& parts, std::size_t count) {
  std::string path;
  for (std::size_t k = 0; k < count; ++k) path += (k == 0 ? "" : "/") + parts[k];
  return path;
}

}  // namespace

// The open document. Hdf5Document is its handle; this class holds the
// state and does the work. (Not in the anonymous namespace: it is the base
// of Hdf5Document::File.)
class Document {
 public:
  Document(std::string path, std::string temporary_path)
      : path_(std::move(path)), temporary_path_(std::move(temporary_path)) {}

  void create() {
    if (path_.empty()) throw OutputError(path_, "no file name given");
    require_not_directory(path_);
    if (std::string reason = cannot_create(temporary_path_); !reason.empty())
      throw OutputError(path_, reason);
    run(fmt::format("creating '{}'", temporary_path_),
        [&] { file_ = create_file(temporary_path_); });
  }

  void metadata(const RunMetadata& meta) {
    usable();
    if (metadata_written_) refuse("the metadata was already written");
    const std::string problem =
        metadata_problem(meta, {"Conventions", "title", "aerosect_file_kind"});
    if (!problem.empty()) refuse(problem);
    run("writing the metadata", [&] {
      H5::Group root = file_->openGroup("/");
      for (const char* name : {"Conventions", "title", "aerosect_file_kind"})
        if (root.attrExists(name)) refuse(fmt::format("root attribute '{}' already written", name));
      for (const auto& [key, value] : meta.text_attributes)
        if (root.attrExists(key)) refuse(fmt::format("root attribute '{}' already written", key));
      if (!meta.parameters.empty() && root.nameExists(kParametersGroup))
        refuse(fmt::format("'{}' already exists", kParametersGroup));
      write_root_attributes(root, meta);
      write_parameters(root, meta);
      metadata_written_ = true;
    });
  }

  void axis(const std::string& name, std::span<const double> values, const std::string& units,
            const std::string& long_name) {
    Axis a;
    a.reals.assign(values.begin(), values.end());
    a.length = values.size();
    a.units = units;
    a.long_name = long_name;
    new_axis(name, std::move(a));
  }

  void integer_axis(const std::string& name, std::span<const std::int32_t> values,
                    const std::string& long_name) {
    Axis a;
    a.integer = true;
    a.integers.assign(values.begin(), values.end());
    a.length = values.size();
    // assign(count, char), not = "1": GCC 12 warns (-Wrestrict, a false
    // positive of its memcpy bounds analysis) on the literal once this file
    // is compiled in a unity batch.
    a.units.assign(1, '1');
    a.long_name = long_name;
    new_axis(name, std::move(a));
  }

  void dataset(const std::string& path, const std::vector<std::string>& dims,
               std::span<const double> data, const std::string& units,
               const std::string& long_name) {
    write_dataset(path, dims, data.size(), data.data(), {}, false, units, long_name, {});
  }

  // The same with the values asked for block by block (TableSink::Blocks):
  // one chunk at a time, so no more than a chunk is held.
  void dataset_blocks(const std::string& path, const std::vector<std::string>& dims, std::size_t count,
                      const TableSink::Blocks& values, const std::string& units, const std::string& long_name) {
    write_dataset(path, dims, count, nullptr, values, false, units, long_name, {});
  }
  void integer_dataset_blocks(const std::string& path, const std::vector<std::string>& dims, std::size_t count,
                              const TableSink::Blocks& values, const std::string& units,
                              const std::string& long_name, const Flags& flags) {
    write_dataset(path, dims, count, nullptr, values, true, units, long_name, flags);
  }

  // An int64 table; kIntegerFill declared as _FillValue (the same type as
  // the data, CF 1.10 §2.5.1), and for a class flag_values (int64, the
  // data's type) and flag_meanings (CF 1.10 §3.5) and no units.
  void integer_dataset(const std::string& path, const std::vector<std::string>& dims,
                       std::span<const std::int64_t> data, const std::string& units,
                       const std::string& long_name, const Flags& flags) {
    write_dataset(path, dims, data.size(), data.data(), {}, true, units, long_name, flags);
  }

  // Writes `values` values: from `data` at once (native doubles, or int64
  // for an integer table), or else asked from `blocks` one chunk at a time.
  void write_dataset(const std::string& path, const std::vector<std::string>& dims,
                     std::size_t values, const void* data, const TableSink::Blocks& blocks, bool integer,
                     const std::string& units, const std::string& long_name, const Flags& flags) {
    usable();
    bool valid = false;
    const auto parts = split_path(path, valid);
    if (!valid || parts.empty()) refuse(fmt::format("invalid dataset path '{}'", path));
    std::vector<hsize_t> shape;
    std::size_t count = 1;
    for (const auto& d : dims) {
      const auto a = axes_.find(d);
      if (a == axes_.end())
        refuse(fmt::format("dataset '{}' names the unknown axis '{}'", path, d));
      shape.push_back(a->second.length);
      count *= static_cast<std::size_t>(a->second.length);
    }
    if (values != count)
      refuse(fmt::format("dataset '{}' has {} values but its axes ({}) hold {}", path,
                         values, fmt::join(dims, ", "), count));
    const std::string name = join(parts, parts.size());
    const std::string group = join(parts, parts.size() - 1);
    for (const auto& d : dims) check_local_axis(d, group, name);

    run(fmt::format("writing dataset '{}'", name), [&] {
      if (existing_prefix(parts, name) == parts.size()) refuse(fmt::format("'{}' already exists", name));
      room_for(values * sizeof(double), fmt::format("dataset '{}'", name));
      // The group's own copy of each axis from elsewhere (local_axis; it
      // may create the group).
      std::vector<const H5::DataSet*> scales;
      for (const auto& d : dims) scales.push_back(&local_axis(d, group).dataset);
      const std::size_t existing = existing_prefix(parts, name);
      H5::Group parent = make_groups(parts, existing, parts.size() - 1);
      H5::DataSpace space = shape.empty()
                                ? H5::DataSpace(H5S_SCALAR)
                                : H5::DataSpace(static_cast<int>(shape.size()), shape.data());
      H5::DSetCreatPropList properties = array_properties(shape);
      if (integer) properties.setFillValue(H5::PredType::NATIVE_INT64, &kIntegerFill);
      H5::DataSet d = parent.createDataSet(
          parts.back(), integer ? H5::PredType::STD_I64LE : H5::PredType::IEEE_F64LE, space, properties);
      if (values > 0 && data) d.write(data, integer ? H5::PredType::NATIVE_INT64 : H5::PredType::NATIVE_DOUBLE);
      if (values > 0 && !data) write_blocks(d, shape, blocks, integer);
      if (flags.values.empty()) write_text(d, "units", units);
      write_text(d, "long_name", long_name);
      if (integer) write_int64(d, "_FillValue", kIntegerFill);
      if (!flags.values.empty()) {
        write_int64_array(d, "flag_values", flags.values);
        write_text(d, "flag_meanings", flags.meanings);
      }
      for (std::size_t k = 0; k < scales.size(); ++k)
        attach_scale(d, *scales[k], static_cast<unsigned>(k));
      close_now(d);
    });
  }

  // Fills the dataset `d` of `shape` from `blocks`, one slab at a time: a
  // chunk (chunk_shape: ones, then a part of one dimension, then whole
  // trailing dimensions, so a contiguous run of values), or the whole
  // dataset when it is not chunked (at most kChunkBytes).
  static void write_blocks(H5::DataSet& d, const std::vector<hsize_t>& shape, const TableSink::Blocks& blocks,
                           bool integer) {
    std::vector<hsize_t> chunk = chunk_of(shape);
    if (chunk.empty()) chunk = shape;  // contiguous: one block
    // The last dimension the chunk takes a part of (rank: none, one block);
    // the ones before it are taken one index at a time (chunk_shape halved
    // them to 1), the ones after it whole.
    std::size_t k_split = shape.size();
    for (std::size_t k = 0; k < shape.size(); ++k)
      if (chunk[k] < shape[k]) k_split = k;
    if (k_split < shape.size())
      for (std::size_t k = 0; k < k_split; ++k) AEROSECT_CHECK(chunk[k] == 1);
    const bool whole = k_split == shape.size();
    hsize_t trailing = 1, outer = 1;
    for (std::size_t k = 0; k < shape.size(); ++k) {
      if (whole || k > k_split) trailing *= shape[k];
      if (!whole && k < k_split) outer *= shape[k];
    }
    const hsize_t along = whole ? 1 : shape[k_split];
    const hsize_t part = whole ? 1 : chunk[k_split];
    std::vector<double> values;
    std::vector<std::int64_t> integers;
    H5::DataSpace file_space = d.getSpace();
    std::vector<hsize_t> start(shape.size(), 0), count(shape.begin(), shape.end());
    for (hsize_t o = 0; o < outer; ++o) {
      hsize_t rest = o;  // o as indices of the leading dimensions
      for (std::size_t k = whole ? 0 : k_split; k-- > 0;) {
        start[k] = rest % shape[k];
        count[k] = 1;
        rest /= shape[k];
      }
      for (hsize_t at = 0; at < along; at += part) {
        const hsize_t n = std::min(part, along - at);
        if (!whole) {
          start[k_split] = at;
          count[k_split] = n;
        }
        const std::size_t first = static_cast<std::size_t>((o * along + at) * trailing);
        values.resize(static_cast<std::size_t>(n * trailing));
        blocks(first, values);
        H5::DataSpace memory_space(1, std::array<hsize_t, 1>{n * trailing}.data());
        if (!shape.empty()) file_space.selectHyperslab(H5S_SELECT_SET, count.data(), start.data());
        if (integer) {
          integers.resize(values.size());
          for (std::size_t q = 0; q < values.size(); ++q) integers[q] = integer_cell(values[q]);
          d.write(integers.data(), H5::PredType::NATIVE_INT64, memory_space, file_space);
        } else {
          d.write(values.data(), H5::PredType::NATIVE_DOUBLE, memory_space, file_space);
        }
      }
    }
  }

  // Writes one attribute with `write(object)` on the root, a group or a
  // dataset; a missing object is created as a group.
  template <typename Write>
  void attribute(const std::string& object, const std::string& name, Write write) {
    usable();
    bool valid = false;
    const auto parts = split_path(object, valid);
    if (!valid) refuse(fmt::format("invalid object path '{}'", object));
    if (name.empty()) refuse(fmt::format("empty attribute name on '{}'", object));
    const std::string where = parts.empty() ? "/" : join(parts, parts.size());

    run(fmt::format("writing attribute '{}' of '{}'", name, where), [&] {
      H5::Group root = file_->openGroup("/");
      const std::size_t existing = existing_prefix(parts, where);
      if (existing == parts.size() && !parts.empty() &&
          file_->childObjType(where) == H5O_TYPE_DATASET) {
        H5::DataSet d = file_->openDataSet(where);
        if (d.attrExists(name))
          refuse(fmt::format("attribute '{}' of '{}' already written", name, where));
        write(d);
        close_now(d);
        return;
      }
      if (existing == parts.size()) {
        H5::Group g = parts.empty() ? root : file_->openGroup(where);
        if (g.attrExists(name))
          refuse(fmt::format("attribute '{}' of '{}' already written", name, where));
        write(g);
        return;
      }
      write(make_groups(parts, existing, parts.size()));
    });
  }

  void commit() {
    usable();
    run(fmt::format("closing '{}'", temporary_path_), [&] {
      file_->flush(H5F_SCOPE_GLOBAL);
      // Objects first: a file whose objects are open stays open after close().
      for (auto& [name, a] : axes_) a.dataset.close();
      axes_.clear();
      file_->close();
      file_.reset();
    });
    committed_ = true;
    if (std::string problem = rename_into_place(temporary_path_, path_); !problem.empty())
      throw OutputError(path_, problem);
  }

  // What the handle's destructor does: an uncommitted document is
  // discarded; after commit() the file is left where it is (on the target
  // path, or kept in the temporary file when the rename failed).
  void release() noexcept {
    if (!committed_) discard();
  }

  // Closes whatever is open and removes the temporary file (never throws).
  void discard() noexcept {
    for (auto& [name, a] : axes_) close_quietly(a.dataset);
    axes_.clear();
    close_quietly(file_);
    file_.reset();
    std::error_code ignored;
    fs::remove(temporary_path_, ignored);
  }

 private:
  struct Axis {
    H5::DataSet dataset;
    hsize_t length = 0;
    bool integer = false;
    std::vector<double> reals;          // the values, for the copies in groups
    std::vector<std::int32_t> integers;
    std::string units, long_name;
  };

  // The group of an axis or dataset path ("a/b/time" -> "a/b", "time" -> "").
  static std::string group_of(const std::string& path) {
    const auto slash = path.rfind('/');
    return slash == std::string::npos ? std::string() : path.substr(0, slash);
  }
  static std::string leaf_of(const std::string& path) {
    const auto slash = path.rfind('/');
    return slash == std::string::npos ? path : path.substr(slash + 1);
  }

  // A dataset in group G over an axis defined elsewhere (the root's
  // "speed" under "nominal/pk") is attached to G's own copy of the axis,
  // "G/speed", made on first use: a netCDF-4 reader opening the group
  // alone (xarray's open_dataset(group=...)) then finds its coordinate
  // variables there (netCDF-4 dimensions are visible in subgroups, but
  // coordinate variables are read per group). The copy has the axis's
  // values, units and long_name.
  std::string local_axis_name(const std::string& axis, const std::string& group) const {
    if (group_of(axis) == group) return axis;
    return group.empty() ? leaf_of(axis) : group + "/" + leaf_of(axis);
  }

  // Refuses (before anything is written) a copy whose name is taken by
  // something that is not that copy.
  void check_local_axis(const std::string& axis, const std::string& group, const std::string& user) {
    const std::string local = local_axis_name(axis, group);
    if (local == axis || axes_.count(local)) {
      const Axis& a = axes_.at(local);
      const Axis& from = axes_.at(axis);
      if (local != axis && (a.reals != from.reals || a.integers != from.integers))
        refuse(fmt::format("dataset '{}' over axis '{}' needs its copy '{}', which holds other values",
                           user, axis, local));
      return;
    }
    bool valid = false;
    const auto parts = split_path(local, valid);
    bool taken = false;  // refused here when a component on the way is a dataset
    run("looking up '" + local + "'", [&] { taken = existing_prefix(parts, user) == parts.size(); });
    if (taken)
      refuse(fmt::format("dataset '{}' over axis '{}' needs its copy '{}', a name already taken",
                         user, axis, local));
  }

  const Axis& local_axis(const std::string& axis, const std::string& group) {
    const std::string local = local_axis_name(axis, group);
    if (const auto found = axes_.find(local); found != axes_.end()) return found->second;
    Axis copy = axes_.at(axis);
    copy.dataset = H5::DataSet();
    bool valid = false;
    return create_axis(local, split_path(local, valid), std::move(copy), axis);
  }

  [[noreturn]] void refuse(const std::string& why) const { throw OutputError(path_, why); }

  void usable() const {
    if (committed_) refuse("the document was already committed");
    if (!failure_.empty())
      refuse("the document was abandoned after an earlier failure: " + failure_);
    if (!file_) refuse("the document is not open");
  }

  // Runs HDF5 calls. A refusal (OutputError thrown before anything was
  // written) passes through; any other failure abandons the document.
  template <typename Body>
  void run(const std::string& what, Body body) {
    quiet_hdf5();
    try {
      body();
    } catch (const OutputError&) {
      throw;
    } catch (const H5::Exception& e) {
      abandon(fmt::format("{}: {}", what, describe(e)));
    } catch (...) {
      discard();
      failure_ = what + " failed";
      throw;
    }
  }

  [[noreturn]] void abandon(std::string why) {
    discard();
    failure_ = std::move(why);
    throw OutputError(path_, failure_);
  }

  void room_for(std::uintmax_t bytes, const std::string& what) {
    if (std::string full = lack_of_space(temporary_path_, bytes, what); !full.empty())
      abandon(std::move(full));
  }

  // How many leading components of `parts` exist; every existing component
  // but the last must be a group.
  std::size_t existing_prefix(const std::vector<std::string>& parts, const std::string& path) {
    for (std::size_t k = 0; k < parts.size(); ++k) {
      const std::string prefix = join(parts, k + 1);
      if (!file_->nameExists(prefix)) return k;
      if (k + 1 < parts.size() && file_->childObjType(prefix) != H5O_TYPE_GROUP)
        refuse(fmt::format("'{}' in '{}' is not a group", prefix, path));
    }
    return parts.size();
  }

  // Opens parts[0..existing) and creates parts[existing..end) as groups;
  // returns the group parts[0..end) (the root when end is 0).
  H5::Group make_groups(const std::vector<std::string>& parts, std::size_t existing,
                        std::size_t end) {
    H5::Group group = file_->openGroup("/");
    for (std::size_t k = 0; k < end; ++k)
      group = k < existing ? group.openGroup(parts[k]) : create_group(group, parts[k]);
    return group;
  }

  void new_axis(const std::string& name, Axis a) {
    usable();
    // A root axis, or a group's own ("history/time": a netCDF dimension
    // `time` of that group); named in dataset dims by its full path.
    bool valid = false;
    const auto parts = split_path(name, valid);
    if (!valid || parts.empty() || parts.front() == kParametersGroup)
      refuse(fmt::format("invalid axis name '{}'", name));
    run(fmt::format("writing axis '{}'", name), [&] { create_axis(name, parts, std::move(a), ""); });
  }

  // Writes axis `a` at `name` (split into `parts`) as a dimension scale;
  // `copy_of` names the axis it copies into a group, if any.
  const Axis& create_axis(const std::string& name, const std::vector<std::string>& parts, Axis a,
                          const std::string& copy_of) {
    const std::size_t existing = existing_prefix(parts, name);
    if (existing == parts.size()) refuse(fmt::format("'{}' already exists", name));
    const H5::PredType& file_type = a.integer ? H5::PredType::STD_I32LE : H5::PredType::IEEE_F64LE;
    room_for(a.length * file_type.getSize(), fmt::format("axis '{}'", name));
    H5::Group parent = make_groups(parts, existing, parts.size() - 1);
    const std::vector<hsize_t> dims{a.length};
    H5::DataSet d = parent.createDataSet(parts.back(), file_type, H5::DataSpace(1, dims.data()),
                                         array_properties(dims));
    if (a.length > 0) {
      if (a.integer)
        d.write(a.integers.data(), H5::PredType::NATIVE_INT32);
      else
        d.write(a.reals.data(), H5::PredType::NATIVE_DOUBLE);
    }
    write_text(d, "units", a.units);
    write_text(d, "long_name", a.long_name);
    if (!copy_of.empty())
      write_text(d, "comment", fmt::format("the coordinate /{} again, so that this group has its own axes",
                                           copy_of));
    set_scale(d, parts.back());
    a.dataset = d;
    return axes_.emplace(name, std::move(a)).first->second;
  }

  std::string path_, temporary_path_;
  std::unique_ptr<H5::H5File> file_;
  std::map<std::string, Axis> axes_;
  bool metadata_written_ = false;
  bool committed_ = false;
  std::string failure_;  // why the document was abandoned; empty while usable
};

}  // namespace hdf5_detail

// ---------------------------------------------------------------------------

struct Hdf5Document::File : hdf5_detail::Document {
  using Document::Document;
};

Hdf5Document::Hdf5Document(std::string path)
    : path_(std::move(path)),
      temporary_path_(path_ + ".part"),
      file_(std::make_unique<File>(path_, temporary_path_)) {
  file_->create();  // on failure nothing is left behind: create() discards
}

Hdf5Document::~Hdf5Document() { file_->release(); }

void Hdf5Document::metadata(const RunMetadata& meta) { file_->metadata(meta); }

void Hdf5Document::axis(const std::string& name, std::span<const double> values,
                        const std::string& units, const std::string& long_name) {
  file_->axis(name, values, units, long_name);
}

void Hdf5Document::integer_axis(const std::string& name, std::span<const std::int32_t> values,
                                const std::string& long_name) {
  file_->integer_axis(name, values, long_name);
}

void Hdf5Document::dataset(const std::string& path, const std::vector<std::string>& dims,
                           std::span<const double> data, const std::string& units,
                           const std::string& long_name) {
  file_->dataset(path, dims, data, units, long_name);
}

void Hdf5Document::integer_dataset(const std::string& path, const std::vector<std::string>& dims,
                                   std::span<const std::int64_t> data, const std::string& units,
                                   const std::string& long_name, const Flags& flags) {
  file_->integer_dataset(path, dims, data, units, long_name, flags);
}

void Hdf5Document::dataset_blocks(const std::string& path, const std::vector<std::string>& dims, std::size_t count,
                                  const Blocks& values, const std::string& units, const std::string& long_name) {
  file_->dataset_blocks(path, dims, count, values, units, long_name);
}

void Hdf5Document::integer_dataset_blocks(const std::string& path, const std::vector<std::string>& dims,
                                          std::size_t count, const Blocks& values, const std::string& units,
                                          const std::string& long_name, const Flags& flags) {
  file_->integer_dataset_blocks(path, dims, count, values, units, long_name, flags);
}

void Hdf5Document::nan_fill(const std::string& path) {
  file_->attribute(path, "_FillValue", [&](const H5::H5Object& o) {
    hdf5_detail::write_double(o, "_FillValue", std::numeric_limits<double>::quiet_NaN());
  });
}

void Hdf5Document::axis_flags(const std::string& name, const Flags& flags) {
  std::vector<std::int32_t> values;
  for (const std::int64_t v : flags.values) values.push_back(static_cast<std::int32_t>(v));
  file_->attribute(name, "flag_values", [&](const H5::H5Object& o) {
    const auto* axis = dynamic_cast<const H5::DataSet*>(&o);
    if (axis == nullptr || axis->getTypeClass() != H5T_INTEGER)
      throw OutputError(path_, fmt::format("'{}' is not an integer axis: no flags", name));
    if (axis->attrExists("units")) axis->removeAttr("units");
    hdf5_detail::write_int32_array(o, "flag_values", values);
  });
  text_attribute(name, "flag_meanings", flags.meanings);
}

void Hdf5Document::text_attribute(const std::string& object, const std::string& name,
                                  const std::string& value) {
  file_->attribute(object, name,
                   [&](const H5::H5Object& o) { hdf5_detail::write_text(o, name, value); });
}

void Hdf5Document::number_attribute(const std::string& object, const std::string& name,
                                    double value, const std::string& units) {
  file_->attribute(object, name,
                   [&](const H5::H5Object& o) { hdf5_detail::write_double(o, name, value); });
  text_attribute(object, hdf5_detail::units_name(name), units);
}

void Hdf5Document::integer_attribute(const std::string& object, const std::string& name,
                                     std::int64_t value) {
  file_->attribute(object, name,
                   [&](const H5::H5Object& o) { hdf5_detail::write_int64(o, name, value); });
  text_attribute(object, hdf5_detail::units_name(name), "1");
}

void Hdf5Document::commit() {
  file_->commit();  // the document itself records when its file is closed
  committed_ = true;
}

}  // namespace aerosect

namespace aerosect {

std::string read_text_attribute(const std::string& path, const std::string& name) {
  H5::Exception::dontPrint();
  try {
    const H5::H5File f(path, H5F_ACC_RDONLY);
    const H5::Group root = f.openGroup("/");
    if (!root.attrExists(name))
      throw InputError({path, 0, 0}, "", "", fmt::format("has no attribute '{}'", name),
                       "a file written by the aerosect command that makes it");
    const H5::Attribute a = root.openAttribute(name);
    std::string v;
    a.read(a.getStrType(), v);
    return v;
  } catch (const H5::Exception& e) {
    throw InputError({path, 0, 0}, "", "", "cannot read the HDF5 file (" + e.getDetailMsg() + ")",
                     "a readable HDF5 file written by aerosect");
  }
}

void copy_with_text_attribute(const std::string& source, const std::string& target, const std::string& name,
                              const std::string& value) {
  read_text_attribute(source, name);  // an aerosect file with that attribute (InputError otherwise)
  hdf5_detail::require_not_directory(target);
  const std::string part = target + ".part";
  std::error_code ec;
  std::filesystem::copy_file(source, part, std::filesystem::copy_options::overwrite_existing, ec);
  if (ec) throw OutputError(target, fmt::format("cannot write '{}': {}", part, ec.message()));
  H5::Exception::dontPrint();
  try {
    H5::H5File f(part, H5F_ACC_RDWR);
    const H5::Group root = f.openGroup("/");
    root.removeAttr(name);
    hdf5_detail::write_text(root, name, value);
    f.close();
  } catch (const H5::Exception& e) {
    std::filesystem::remove(part, ec);
    throw OutputError(target, "cannot set attribute '" + name + "' in the copy (" + e.getDetailMsg() + ")");
  }
  const std::string failed = hdf5_detail::rename_into_place(part, target);
  if (!failed.empty()) throw OutputError(target, failed);
}

std::vector<double> read_double_dataset(const std::string& path, const std::string& name,
                                        std::size_t expected) {
  H5::Exception::dontPrint();
  try {
    const H5::H5File f(path, H5F_ACC_RDONLY);
    if (!f.nameExists(name))
      throw InputError({path, 0, 0}, "", "", fmt::format("has no dataset '{}'", name),
                       "a file written by the aerosect command that makes it");
    const H5::DataSet d = f.openDataSet(name);
    const hssize_t n = d.getSpace().getSimpleExtentNpoints();
    if (n < 0 || static_cast<std::size_t>(n) != expected)
      throw InputError({path, 0, 0}, name, fmt::format("{} values", n),
                       fmt::format("holds {} values where the file's request declares {}", n, expected),
                       "the tables aerosect wrote for that request");
    std::vector<double> v(static_cast<std::size_t>(n));
    if (n > 0) d.read(v.data(), H5::PredType::NATIVE_DOUBLE);
    // An integer table's declared fill value (a cell without a value) reads
    // as NaN, as in a double table.
    if (d.getTypeClass() == H5T_INTEGER && d.attrExists("_FillValue")) {
      std::int64_t fill = 0;
      const H5::Attribute a = d.openAttribute("_FillValue");
      if (a.getTypeClass() == H5T_INTEGER && a.getSpace().getSimpleExtentNpoints() == 1) {
        a.read(H5::PredType::NATIVE_INT64, &fill);
        for (double& x : v)
          if (x == static_cast<double>(fill)) x = std::numeric_limits<double>::quiet_NaN();
      }
    }
    return v;
  } catch (const H5::Exception& e) {
    throw InputError({path, 0, 0}, "", "", "cannot read the HDF5 file (" + e.getDetailMsg() + ")",
                     "a readable HDF5 file written by aerosect");
  }
}

}  // namespace aerosect
