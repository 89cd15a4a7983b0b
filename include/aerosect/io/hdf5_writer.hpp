#pragma once
// A TimeHistorySink that writes one run to an HDF5 file readable as netCDF-4
// (CF-1.8 metadata), so that h5py, ncdump and xarray all understand it.
//
// Layout (every string attribute is a scalar variable-length UTF-8 string,
// netCDF-4's NC_STRING, which h5py reads as str):
//   /                       attributes Conventions = "CF-1.8", title,
//                           aerosect_file_kind, each RunMetadata text
//                           attribute; written by finish(): complete (int32
//                           0/1), status (string), samples (int64, the rows
//                           in the file) and each RunOutcome number (double)
//   /time                   double [n], unlimited; dimension scale "time";
//                           units, long_name, comment: elapsed time, not a
//                           calendar time, so no standard_name or axis
//                           (CF 1.10 §4.4 asks those for "s since EPOCH")
//   /<channel>              double [n] (width 1) or [n x width] (width > 1);
//                           units, long_name; dimension 0 attached to /time
//   /<component axis>       int32 [width], values 1..width; dimension scale
//                           attached to dimension 1 of every channel naming
//                           it; units = "1", long_name, component_names
//                           (comma-separated). The name is
//                           Channel::component_axis, or "<channel>_component"
//                           when that is empty.
//   /parameters/<group>/<name>  scalar double; units, long_name
// Units are UDUNITS strings as given by the channels (SI: s, m, rad, N m-1).
// The time axis is always named "time"; the time channel gives its units
// and long_name. Every time-dependent dataset is chunked block_rows rows deep
// (RunMetadata::expected_rows deep when the run says it writes fewer) with
// the shuffle and deflate filters (none when the run says it writes fewer
// than kMinCompressedRows rows: zlib's set-up, a 256 KiB state per chunk,
// then costs more than the file saves); rows are buffered and written one block
// (one chunk) at a time, so memory use does not grow with the length of the
// run. Before each block the free space is checked, so a full disk is
// reported while the file can still be closed and removed.
//
// The file is written to `path + ".part"` and renamed by finish(): onto
// `path` when the run completed, onto incomplete_path(path) when it did not,
// so a complete result is never replaced by a partial one. Destroying the
// writer before finish() removes the temporary file. Every failure (directory
// missing or unwritable, disk full, HDF5 error) is thrown as OutputError.

#include <cstddef>
#include <cstdint>
#include <memory>
#include <span>
#include <string>
#include <vector>

#include "aerosect/integrate/sink.hpp"

namespace aerosect {

struct Hdf5WriterOptions {
  // Rows per chunk and per write, >= 1. Large enough that the chunk index
  // HDF5 keeps in memory stays small for 1e7-sample runs (it grows with the
  // number of chunks), small enough for a bounded buffer (~4 MiB at 15 columns).
  std::size_t block_rows = 32768;
  int deflate_level = 4;          // 0..9; 0 writes without shuffle/deflate
};

// A run expected to write fewer rows is written without filters.
inline constexpr std::int64_t kMinCompressedRows = 256;

class Hdf5TimeHistoryWriter final : public TimeHistorySink {
 public:
  explicit Hdf5TimeHistoryWriter(std::string path, Hdf5WriterOptions options = {});
  ~Hdf5TimeHistoryWriter() override;

  Hdf5TimeHistoryWriter(const Hdf5TimeHistoryWriter&) = delete;
  Hdf5TimeHistoryWriter& operator=(const Hdf5TimeHistoryWriter&) = delete;

  void begin(const Channel& time_channel, const std::vector<Channel>& channels,
             const RunMetadata& meta) override;
  void append(double time, std::span<const double> row) override;
  // Writes the buffered rows and the outcome attributes, closes the file and
  // renames it. Throws OutputError when that fails; the temporary file is
  // removed then. After a failed begin() or append() (already reported by
  // an exception) a finish() with completed == false does nothing.
  void finish(const RunOutcome& outcome) override;

  const std::string& path() const { return path_; }
  const std::string& temporary_path() const { return temporary_path_; }
  // Where the file is after finish(); empty before, or when nothing was kept.
  const std::string& final_path() const { return final_path_; }

  // `path` with its extension replaced by ".incomplete.h5"
  // ("out/run.h5" -> "out/run.incomplete.h5").
  static std::string incomplete_path(const std::string& path);

 private:
  struct File;  // the open HDF5 objects and the row buffer

  enum class State { kIdle, kOpen, kFinished, kFailed };

  void write_block();
  void discard() noexcept;

  std::string path_;
  std::string temporary_path_;
  std::string final_path_;
  Hdf5WriterOptions options_;
  State state_ = State::kIdle;
  std::string failure_;  // message of the error that put the writer in kFailed
  std::unique_ptr<File> file_;
};

// True once HDF5 failed on a file of this process (a time history, an
// Hdf5Document or a file read), e.g. a write refused for the file size
// limit, a disk quota or an I/O error, which the free-space check cannot
// foresee. The failure was thrown as OutputError and the temporary file
// removed, but HDF5 1.10 may keep the file half-open and then crash or loop
// when it shuts down at process exit: a program should end with std::_Exit
// once its own output is flushed (aerosect's main does).
bool hdf5_shutdown_unsafe() noexcept;

}  // namespace aerosect
