#include "aerosect/analysis/sweep_store.hpp"

#include <algorithm>
#include <cerrno>
#include <cmath>
#include <cstring>
#include <filesystem>
#include <limits>
#include <mutex>
#include <vector>

#include <fcntl.h>
#include <fmt/format.h>
#include <unistd.h>

#include "aerosect/error.hpp"

namespace aerosect {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// The values after the layouts' in a record (see sweep_store.hpp).
enum Extra : std::size_t {
  kHeld,           // 1 for a held point; 0 (a hole of the scratch file) otherwise
  kResponse,       // LcoResult::response (the detector's class, also of a failed point)
  kWatchedDof,
  kStoppedEarly,
  kSteps,
  kHasCycle,
  kCyclePeriod,
  kErrorAt,        // the error text: offset in the text region, length
  kErrorLength,
  kFailureAt,      // the refinement failure text: offset, length
  kFailureLength,
  kStateAt,        // the final state (doubles) and spring regions (ints), as bytes: offset, length
  kStateLength,
  kRegionsAt,
  kRegionsLength,
  kExtras
};

// Cells read at a time: a bounded buffer whatever the sweep's size.
constexpr std::size_t kBlockCells = 256;

}  // namespace

struct SweepStore::Records {
  SweepTables t;
  std::vector<double> values1, values2;  // the axes' values
  std::size_t cells = 0;
  std::size_t point_offset = 0, width = 0;  // the layouts' first value, the record's length (doubles)
  std::vector<std::size_t> point_at, cycle_at;  // each field's first value in the record

  // In memory: records by slot, slots by cell (0: none, else slot + 1).
  std::vector<double> memory;
  std::vector<std::size_t> slot_of_cell;
  std::string memory_text;
  // In a scratch file: the record of cell c at c * width doubles; texts
  // after the record region.
  int fd = -1;
  std::string owner, folder;
  std::uint64_t text_end = 0;  // bytes of text written after the records

  std::vector<bool> is_held;  // by cell: a bit per cell, not a point
  SweepTally tally;           // of the points held, gathered as they are put
  // The columns (each record value's slot over every cell, after the texts
  // of the file), made on the first column() call, once every point is in:
  // then each table is read in one contiguous run instead of every record
  // being read once per table.
  mutable bool transposed = false;
  mutable std::uint64_t columns_base = 0;
  mutable std::mutex mutex;

  Records(const SweepRequest& r, const SweepTables& tables) : t(tables) {
    values1 = r.options.axes.at(0).values;
    if (r.options.axes.size() > 1) values2 = r.options.axes[1].values;
    cells = 2 * t.n1 * t.n2;
    is_held.assign(cells, false);
    std::size_t at = kExtras;
    point_offset = at;
    for (const auto& f : t.point) {
      point_at.push_back(at);
      at += f.width;
    }
    for (const auto& f : t.cycle) {
      cycle_at.push_back(at);
      at += f.width;
    }
    width = at;
  }

  std::uint64_t record_bytes() const { return static_cast<std::uint64_t>(width) * sizeof(double); }
  std::uint64_t text_base() const { return record_bytes() * cells; }

  [[noreturn]] void fail(const std::string& what) const {
    throw OutputError(owner, fmt::format("{} the scratch file of the finished points in '{}' failed: {}", what,
                                         folder, std::strerror(errno)));
  }

  // Writes the file, not this object: const, for the columns made on reading.
  void write_at(const void* data, std::size_t bytes, std::uint64_t offset) const {
    const char* p = static_cast<const char*>(data);
    while (bytes > 0) {
      const ssize_t n = ::pwrite(fd, p, bytes, static_cast<off_t>(offset));
      if (n < 0 && errno == EINTR) continue;
      if (n <= 0) {
        if (n == 0) errno = ENOSPC;
        fail("writing to");
      }
      p += n;
      bytes -= static_cast<std::size_t>(n);
      offset += static_cast<std::uint64_t>(n);
    }
  }

  // Bytes past the end of the file read as zeros (a cell never written).
  void read_at(void* data, std::size_t bytes, std::uint64_t offset) const {
    char* p = static_cast<char*>(data);
    while (bytes > 0) {
      const ssize_t n = ::pread(fd, p, bytes, static_cast<off_t>(offset));
      if (n < 0 && errno == EINTR) continue;
      if (n < 0) fail("reading");
      if (n == 0) {
        std::memset(p, 0, bytes);
        return;
      }
      p += n;
      bytes -= static_cast<std::size_t>(n);
      offset += static_cast<std::uint64_t>(n);
    }
  }

  // Records of cells [first, first + n) into `out` (n * width doubles; a
  // cell not held has kHeld 0).
  void read(std::size_t first, std::size_t n, std::vector<double>& out) const {
    out.assign(n * width, 0.0);
    if (fd >= 0) {
      read_at(out.data(), n * width * sizeof(double), first * record_bytes());
      return;
    }
    for (std::size_t q = 0; q < n; ++q)
      if (const std::size_t s = slot_of_cell[first + q]; s > 0)
        std::copy_n(memory.begin() + static_cast<std::ptrdiff_t>((s - 1) * width), width,
                    out.begin() + static_cast<std::ptrdiff_t>(q * width));
  }

  template <class T>
  std::pair<double, double> keep_values(const std::vector<T>& v) {
    return keep_text(std::string(reinterpret_cast<const char*>(v.data()), v.size() * sizeof(T)));
  }
  template <class T>
  std::vector<T> values(double at, double length) const {
    const std::string bytes = text(at, length);
    std::vector<T> v(bytes.size() / sizeof(T));
    if (!v.empty()) std::memcpy(v.data(), bytes.data(), v.size() * sizeof(T));  // (memcpy from null is UB)
    return v;
  }

  std::pair<double, double> keep_text(const std::string& s) {
    if (s.empty()) return {0.0, 0.0};
    std::uint64_t at = 0;
    if (fd >= 0) {
      at = text_end;
      write_at(s.data(), s.size(), text_base() + at);
      text_end += s.size();
    } else {
      at = memory_text.size();
      memory_text += s;
    }
    return {static_cast<double>(at), static_cast<double>(s.size())};
  }

  std::string text(double at, double length) const {
    std::string s(static_cast<std::size_t>(length), '\0');
    if (s.empty()) return s;
    if (fd >= 0)
      read_at(s.data(), s.size(), text_base() + static_cast<std::uint64_t>(at));
    else
      s = memory_text.substr(static_cast<std::size_t>(at), s.size());
    return s;
  }

  // The file's records as columns (see `transposed`), a block of cells at
  // a time: slot u of cell c at columns_base + (u * cells + c) doubles.
  void transpose() const {
    columns_base = (text_base() + text_end + 7) / 8 * 8;
    std::vector<double> block, column(kBlockCells);
    for (std::size_t at = 0; at < cells; at += kBlockCells) {
      const std::size_t n = std::min(kBlockCells, cells - at);
      read(at, n, block);
      for (std::size_t u = point_offset; u < width; ++u) {
        for (std::size_t q = 0; q < n; ++q) {
          const double* rec = block.data() + q * width;
          column[q] = rec[kHeld] != 0.0 ? rec[u] : kNaN;
        }
        write_at(column.data(), n * sizeof(double), columns_base + (u * cells + at) * sizeof(double));
      }
    }
    transposed = true;
  }

  SweepPoint point(std::size_t cell, const double* rec) const {
    SweepPoint p;
    p.direction = static_cast<int>(cell / (t.n1 * t.n2));
    p.i = static_cast<int>(cell / t.n2 % t.n1);
    p.j = static_cast<int>(cell % t.n2);
    p.value1 = values1[static_cast<std::size_t>(p.i)];
    p.value2 = values2.empty() ? 0.0 : values2[static_cast<std::size_t>(p.j)];
    for (std::size_t k = 0; k < t.point.size(); ++k)
      for (std::size_t q = 0; q < t.point[k].width; ++q) t.point[k].set(p, q, rec[point_at[k] + q]);
    if (rec[kHasCycle] != 0.0) {
      for (std::size_t k = 0; k < t.cycle.size(); ++k)
        for (std::size_t q = 0; q < t.cycle[k].width; ++q) t.cycle[k].set(p, q, rec[cycle_at[k] + q]);
      p.cycle.samples = static_cast<int>(t.samples);
      p.cycle.period = rec[kCyclePeriod];
    }
    p.lco.response = static_cast<ResponseClass>(static_cast<int>(rec[kResponse]));
    p.lco.watched_dof = static_cast<int>(rec[kWatchedDof]);
    p.lco.stopped_early = rec[kStoppedEarly] != 0.0;
    p.steps = static_cast<std::int64_t>(rec[kSteps]);
    p.error = text(rec[kErrorAt], rec[kErrorLength]);
    p.refinement_failure = text(rec[kFailureAt], rec[kFailureLength]);
    p.final_state = values<double>(rec[kStateAt], rec[kStateLength]);
    p.final_regions = values<int>(rec[kRegionsAt], rec[kRegionsLength]);
    return p;
  }
};

SweepStore::SweepStore(const SweepRequest& r, const SweepTables& t) : records_(std::make_unique<Records>(r, t)) {
  records_->slot_of_cell.assign(records_->cells, 0);
}

SweepStore::SweepStore(const SweepRequest& r, const SweepTables& t, const std::string& folder,
                       const std::string& owner)
    : records_(std::make_unique<Records>(r, t)) {
  Records& s = *records_;
  s.owner = owner;
  s.folder = folder.empty() ? std::string(".") : folder;
  s.fd = ::open(s.folder.c_str(), O_TMPFILE | O_RDWR | O_CLOEXEC, 0600);
  if (s.fd < 0) {
    // A file system without O_TMPFILE: a unique name, unlinked once open.
    std::string name = (std::filesystem::path(s.folder) / ".aerosect-points-XXXXXX").string();
    s.fd = ::mkostemp(name.data(), O_CLOEXEC);
    if (s.fd < 0) s.fail("making");
    ::unlink(name.c_str());
  }
  // The record region's size, as a hole: reads of cells not run give zeros.
  if (::ftruncate(s.fd, static_cast<off_t>(s.text_base())) != 0) s.fail("sizing");
}

SweepStore::~SweepStore() {
  if (records_ && records_->fd >= 0) ::close(records_->fd);
}

const SweepTables& SweepStore::tables() const { return records_->t; }

std::size_t SweepStore::size() const {
  const std::lock_guard<std::mutex> lock(records_->mutex);
  return records_->tally.points;
}

void SweepStore::put(const SweepPoint& p) {
  Records& s = *records_;
  std::vector<double> rec(s.width, kNaN);
  for (std::size_t k = 0; k < s.t.point.size(); ++k) {
    const auto& f = s.t.point[k];
    if (f.present && !f.present(p)) continue;
    for (std::size_t q = 0; q < f.width; ++q) rec[s.point_at[k] + q] = f.get(p, q);
  }
  const bool cycle = p.cycle.samples > 0;
  for (std::size_t k = 0; cycle && k < s.t.cycle.size(); ++k) {
    const auto& f = s.t.cycle[k];
    if (f.present && !f.present(p)) continue;
    for (std::size_t q = 0; q < f.width; ++q) rec[s.cycle_at[k] + q] = f.get(p, q);
  }
  rec[kHeld] = 1.0;
  rec[kResponse] = static_cast<double>(p.lco.response);
  rec[kWatchedDof] = p.lco.watched_dof;
  rec[kStoppedEarly] = p.lco.stopped_early ? 1.0 : 0.0;
  rec[kSteps] = static_cast<double>(p.steps);
  rec[kHasCycle] = cycle ? 1.0 : 0.0;
  rec[kCyclePeriod] = cycle ? p.cycle.period : kNaN;
  const std::size_t cell = s.t.cell(p);
  AEROSECT_CHECK(cell < s.cells);
  const std::lock_guard<std::mutex> lock(s.mutex);
  std::tie(rec[kErrorAt], rec[kErrorLength]) = s.keep_text(p.error);
  std::tie(rec[kFailureAt], rec[kFailureLength]) = s.keep_text(p.refinement_failure);
  std::tie(rec[kStateAt], rec[kStateLength]) = s.keep_values(p.final_state);
  std::tie(rec[kRegionsAt], rec[kRegionsLength]) = s.keep_values(p.final_regions);
  AEROSECT_CHECK(!s.is_held[cell] && !s.transposed);  // each cell once, before any table is read
  if (s.fd >= 0) {
    s.write_at(rec.data(), rec.size() * sizeof(double), cell * s.record_bytes());
  } else {
    s.memory.insert(s.memory.end(), rec.begin(), rec.end());
    s.slot_of_cell[cell] = s.memory.size() / s.width;
  }
  s.is_held[cell] = true;
  s.tally.add(p);
}

const SweepTally& SweepStore::tally() const { return records_->tally; }

bool SweepStore::held(int direction, int i, int j) const {
  const Records& s = *records_;
  const std::size_t cell = s.t.cell(direction, i, j);
  const std::lock_guard<std::mutex> lock(s.mutex);
  return cell < s.cells && s.is_held[cell];
}

SweepPoint SweepStore::get(int direction, int i, int j) const {
  const Records& s = *records_;
  const std::size_t cell = s.t.cell(direction, i, j);
  const std::lock_guard<std::mutex> lock(s.mutex);
  AEROSECT_CHECK(cell < s.cells && s.is_held[cell]);
  std::vector<double> rec;
  s.read(cell, 1, rec);
  return s.point(cell, rec.data());
}

void SweepStore::visit(const std::function<void(const SweepPoint&)>& f) const {
  const Records& s = *records_;
  std::vector<double> block;
  auto each = [&](std::size_t cell, std::size_t n) {
    s.read(cell, n, block);
    for (std::size_t q = 0; q < n; ++q) {
      const double* rec = block.data() + q * s.width;
      if (rec[kHeld] != 0.0) f(s.point(cell + q, rec));
    }
  };
  if (s.t.n2 == 1) {  // cell order is chain order: blocks of cells
    for (std::size_t at = 0; at < s.cells; at += kBlockCells) each(at, std::min(kBlockCells, s.cells - at));
    return;
  }
  for (std::size_t d = 0; d < 2; ++d)  // a chain's cells are n2 apart: one at a time
    for (std::size_t j = 0; j < s.t.n2; ++j)
      for (std::size_t i = 0; i < s.t.n1; ++i) each((d * s.t.n1 + i) * s.t.n2 + j, 1);
}

void SweepStore::column(bool cycle, std::size_t k, std::size_t first, std::span<double> out) const {
  const Records& s = *records_;
  const auto& layout = cycle ? s.t.cycle : s.t.point;
  const std::size_t w = layout.at(k).width, at = (cycle ? s.cycle_at : s.point_at)[k];
  if (s.fd >= 0) {
    const std::lock_guard<std::mutex> lock(s.mutex);
    if (!s.transposed) s.transpose();
    // Slot at + e holds value e of every cell: one run per value of the
    // field's width over the cells `out` covers.
    const std::size_t c0 = first / w, c1 = (first + out.size() - 1) / w + 1;
    std::vector<double> run(c1 - c0);
    for (std::size_t e = 0; e < w; ++e) {
      s.read_at(run.data(), run.size() * sizeof(double), s.columns_base + ((at + e) * s.cells + c0) * sizeof(double));
      for (std::size_t c = c0; c < c1; ++c) {
        const std::size_t value = c * w + e;
        if (value >= first && value < first + out.size()) out[value - first] = run[c - c0];
      }
    }
    return;
  }
  std::vector<double> block;
  std::size_t v = first;  // the next value wanted
  const std::size_t end = first + out.size();
  while (v < end) {
    const std::size_t cell = v / w, n = std::min(kBlockCells, (end - 1) / w + 1 - cell);
    s.read(cell, n, block);
    for (std::size_t q = 0; q < n; ++q) {
      const double* rec = block.data() + q * s.width;
      for (std::size_t e = 0; e < w; ++e) {
        const std::size_t value = (cell + q) * w + e;
        if (value < first || value >= end) continue;
        out[value - first] = rec[kHeld] != 0.0 ? rec[at + e] : kNaN;
      }
    }
    v = (cell + n) * w;
  }
}

void SweepTally::add(const SweepPoint& p) {
  ++points;
  const std::tuple<int, int, int> key{p.direction, p.j, p.i};
  if (watched_dof < 0 || key < first_) {
    watched_dof = p.lco.watched_dof;
    first_ = key;
  }
  if (p.ok && p.lco.response == ResponseClass::kUnsettled) ++unsettled;
  if (p.ok && p.lco.response == ResponseClass::kPeriodic && !p.refined) ++unrefined;
  if (p.j != j || p.lco.response != ResponseClass::kPeriodic) return;
  // The first periodic value going up, and the last going down (both the
  // smallest value: the down chain runs from the top).
  std::optional<double>& edge = p.direction == 0 ? summary.onset_up : summary.disappearance_down;
  if (!edge || p.value1 < *edge) edge = p.value1;
  // The largest amplitude; of equal ones, the first in run_sweep's order.
  const double a = p.lco.dof[static_cast<std::size_t>(p.lco.watched_dof)].amplitude;
  if (!summary.largest_amplitude || a > *summary.largest_amplitude ||
      (a == *summary.largest_amplitude && key < largest_)) {
    summary.largest_amplitude = a;
    summary.largest_at = p.value1;
    summary.largest_direction = p.direction;
    largest_ = key;
  }
}

}  // namespace aerosect
