// Hdf5TimeHistoryWriter: the file layout and its conventions are described
// in include/aerosect/io/hdf5_writer.hpp. This file holds the streaming
// (blocks of rows, growing chunked datasets) and the translation of every
// HDF5 failure into OutputError; the HDF5 details it shares with
// Hdf5Document (error recording, creation order, text attributes, metadata,
// the temporary file) are in hdf5_support.hpp.

#include "aerosect/io/hdf5_writer.hpp"

#include <H5Cpp.h>
#include <hdf5_hl.h>

#include <algorithm>
#include <cstdint>
#include <filesystem>
#include <map>
#include <set>
#include <system_error>
#include <utility>

#include <fmt/format.h>
#include <fmt/ranges.h>

#include "aerosect/error.hpp"
#include "hdf5_support.hpp"

namespace aerosect {

namespace fs = std::filesystem;
using namespace hdf5_detail;

namespace {

constexpr const char* kTimeName = "time";

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
                            chunked_properties(chunk, deflate_level), dapl);
}

// ---------------------------------------------------------------------------
// Validation of what the analysis hands over (a mistake there is a bug).

[[noreturn]] void bug(const std::string& what) {
  throw InternalError(__FILE__, __LINE__, "HDF5 writer: " + what);
}

const std::set<std::string>& reserved_root_attributes() {
  static const std::set<std::string> names{"Conventions", "title",  "aerosect_file_kind",
                                           "complete",    "status", "samples",
                                           "complete_units", "samples_units"};
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

  const std::string problem = metadata_problem(meta, reserved_root_attributes());
  if (!problem.empty()) bug(problem);
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
  std::size_t block_rows = 0;  // rows per chunk and per write of this file
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
    for (auto& s : series) hdf5_detail::close_quietly(s.dataset);
    hdf5_detail::close_quietly(time);
    hdf5_detail::close_quietly(file);
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

  require_not_directory(path_);
  // A plain open first: its errno says why a file cannot be created here
  // ("No such file or directory", "Not a directory", "Permission denied").
  if (std::string reason = cannot_create(temporary_path_); !reason.empty()) {
    state_ = State::kFailed;
    failure_ = std::move(reason);
    throw OutputError(path_, failure_);
  }

  try {
    file_ = std::make_unique<File>();
    File& f = *file_;
    // Blocks (chunks and buffers) no longer than the run: a 3-sample run
    // writes 3-row chunks and touches a few hundred bytes of buffer, not
    // block_rows rows per channel zeroed, filtered and compressed.
    f.block_rows = options_.block_rows;
    if (meta.expected_rows > 0)
      f.block_rows = std::min(f.block_rows, static_cast<std::size_t>(meta.expected_rows));

    const int deflate_level =
        meta.expected_rows > 0 && meta.expected_rows < kMinCompressedRows ? 0 : options_.deflate_level;
    f.file = create_file(temporary_path_);

    H5::Group root = f.file->openGroup("/");
    write_root_attributes(root, meta);

    f.time = create_series(*f.file, kTimeName, 1, f.block_rows, deflate_level);
    write_text(f.time, "units", time_channel.units);
    write_text(f.time, "long_name", time_channel.long_name);
    // Elapsed time of the run, not a date: no reference epoch, so neither
    // standard_name "time" nor axis "T", which claim a CF time coordinate
    // with units "s since <epoch>" (CF 1.10 §4.4).
    write_text(f.time, "comment", "elapsed time since the start of the run, not a calendar time");
    set_scale(f.time, kTimeName);

    std::map<std::string, H5::DataSet> axes;
    for (const auto& c : channels) {
      File::Series s;
      s.width = c.width;
      s.buffer_offset = f.row_width * f.block_rows;
      f.row_width += static_cast<std::size_t>(c.width);
      s.dataset = create_series(*f.file, c.name, c.width, f.block_rows, deflate_level);
      write_text(s.dataset, "units", c.units);
      write_text(s.dataset, "long_name", c.long_name);
      attach_scale(s.dataset, f.time, 0);

      if (c.width > 1) {
        const std::string axis_name = component_axis_name(c);
        auto axis = axes.find(axis_name);
        if (axis == axes.end()) {
          const hsize_t n = static_cast<hsize_t>(c.width);
          H5::DataSet d = f.file->createDataSet(axis_name, H5::PredType::STD_I32LE,
                                               H5::DataSpace(1, &n), plain_properties());
          std::vector<std::int32_t> index(c.width);
          for (int k = 0; k < c.width; ++k) index[k] = k + 1;
          d.write(index.data(), H5::PredType::NATIVE_INT32);
          write_text(d, "units", "1");
          write_text(d, "long_name", fmt::format("index along {} (1-based)", axis_name));
          write_text(d, "component_names", fmt::format("{}", fmt::join(c.component_names, ",")));
          set_scale(d, axis_name);
          axis = axes.emplace(axis_name, d).first;
        }
        attach_scale(s.dataset, axis->second, 1);
      }
      f.series.push_back(std::move(s));
    }
    try {
      for (auto& [name, d] : axes) close_now(d);
    } catch (...) {
      for (auto& [name, d] : axes) close_quietly(d);  // the rest, without a word each
      throw;
    }

    write_parameters(root, meta);
    root.close();

    f.time_buffer.resize(f.block_rows);
    f.buffer.resize(f.row_width * f.block_rows);
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
  if (++f.buffered == f.block_rows) write_block();
}

void Hdf5TimeHistoryWriter::write_block() {
  File& f = *file_;
  if (f.buffered == 0) return;
  quiet_hdf5();
  const hsize_t first = f.written;
  const hsize_t rows = f.buffered;
  std::string full = lack_of_space(
      temporary_path_, static_cast<std::uintmax_t>(rows) * (1 + f.row_width) * sizeof(double),
      "the next block");
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

  // Each number and count is a root attribute NAME with its units in
  // NAME_units (attributes have no attributes of their own).
  std::set<std::string> attributes = reserved_root_attributes();
  std::vector<std::string> names;
  for (const auto& n : outcome.numbers) names.push_back(n.name);
  for (const auto& [key, value] : outcome.counts) names.push_back(key);
  for (const auto& key : names)
    if (key.empty() || !attributes.insert(key).second || !attributes.insert(units_name(key)).second)
      bug(fmt::format("outcome number '{}' is empty, reserved or given twice", key));

  write_block();  // throws OutputError (state kFailed, file removed) on failure
  quiet_hdf5();
  try {
    File& f = *file_;
    H5::Group root = f.file->openGroup("/");
    for (const auto& key : names)
      if (root.attrExists(key) || root.attrExists(units_name(key)))
        bug(fmt::format("outcome number '{}' clashes with a root attribute", key));
    write_int32(root, "complete", outcome.completed ? 1 : 0);
    write_text(root, units_name("complete"), "1");
    write_text(root, "status", outcome.status);
    // The rows actually in the file, which is what a reader needs to agree with.
    write_int64(root, "samples", static_cast<std::int64_t>(f.written));
    write_text(root, units_name("samples"), "1");
    for (const auto& [key, value] : outcome.counts) {
      write_int64(root, key, value);
      write_text(root, units_name(key), "1");
    }
    for (const auto& n : outcome.numbers) {
      write_double(root, n.name, n.value);
      write_text(root, units_name(n.name), n.units);
    }
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
  if (std::string problem = rename_into_place(temporary_path_, target); !problem.empty()) {
    final_path_ = temporary_path_;
    throw OutputError(path_, problem);
  }
  final_path_ = target;
}

bool hdf5_shutdown_unsafe() noexcept { return shutdown_unsafe(); }

}  // namespace aerosect
