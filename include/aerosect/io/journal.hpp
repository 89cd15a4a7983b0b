#pragma once
// An append-only journal of JSON records, one per line, after a head line
// that identifies the work it belongs to. A long computation (the sweep)
// appends each finished unit at once and flushes it, so an interruption of
// any kind (Ctrl-C, SIGTERM, kill -9, power loss) loses at most the units in
// flight; the same command run again reads the records back and continues.
//
// File layout (text, UTF-8, '\n' line ends):
//   line 1:  {"aerosect_journal": KIND, "format": F, "identity": {...},
//             "line_check": "fnv1a64"}
//   line 2+: one record (a JSON object) per line, in the order appended,
//            with a last member "line_check": the 16 hex digits of
//            fnv1a64_hex of the record's JSON text without that member
//            (a journal whose head has no "line_check", as written before
//            the check existed, has bare records and is read as such).
// Format history: 1 = the head line was the identity object itself (aerosect
// up to 0.1.0); 2 = the head above; 3 = the head above, the sweep's point
// records generated from its layout table (io/table_layout.hpp). The records of a kind keep their layout
// within a format; a reader lists the formats it can read, and a journal of
// any other format, or of another kind or identity, is refused with an
// InputError naming the file.
//
// Reading back: a record counts when its line ends in a newline, its digest
// matches and it parses as JSON. A run killed while writing leaves at most
// one cut line at the end; it is cut off (the file shortened) before new
// records are appended. A complete line anywhere after the head that fails
// (damage: a changed byte, a lost newline joining two lines, a line longer
// than kMaxJournalLine) is skipped, kept in the file, counted and reported
// in `notes()`: the records before and after it are kept.
// The identity is compared as a whole; a journal of another identity is
// refused naming the identity's fields that differ. Only regular files of at
// most kMaxJournalBytes are read (a FIFO, a device or a larger file is
// refused).

#include <cstdint>
#include <fstream>
#include <functional>
#include <mutex>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json.hpp>

namespace aerosect {

// The longest record line read back; a longer line counts as damaged.
inline constexpr std::size_t kMaxJournalLine = 64u << 20;  // 64 MiB
// The largest journal read back; a larger file is refused (InputError naming
// the file, its size and this cap) before any of it is read. A sweep's point
// record is about 1.3 kB (2 DOFs) to 1.8 kB (3 DOFs), 10.3 kB with --traces
// (3 DOFs, 128 samples per cycle): a journal of the largest sweep
// (kMaxSweepPoints, 1 000 000 points) with traces is about 10.3 GB, a third
// of the cap.
inline constexpr std::uintmax_t kMaxJournalBytes = std::uintmax_t{32} << 30;  // 32 GiB

// FNV-1a 64-bit digest of `bytes` as 16 lower-case hex digits: the
// journal's line check, and a fingerprint of an input's contents for an
// identity (not a cryptographic hash).
std::string fnv1a64_hex(std::string_view bytes);

struct JournalRecord {
  int line = 0;  // 1-based line in the journal file
  nlohmann::json value;
};

struct JournalHead {
  std::string kind;               // e.g. "sweep"
  int format = 2;                 // written by this program
  std::vector<int> readable = {}; // formats read back (format itself always)
  nlohmann::json identity;        // must equal the journal's to resume
};

class Journal {
 public:
  // Opens `path` for appending: an existing journal is read back (see above;
  // InputError when it belongs to other work, OutputError when it cannot be
  // read or shortened), a missing or empty one is created with the head.
  // With `on_record`, each record read back is handed to it, in file order,
  // instead of being kept (records() is then empty): a long journal is
  // never held whole. An exception it throws leaves the constructor.
  Journal(std::string path, JournalHead head, const std::function<void(JournalRecord&&)>& on_record = {});
  Journal(const Journal&) = delete;
  Journal& operator=(const Journal&) = delete;

  // The records read back on opening (resume), in file order.
  const std::vector<JournalRecord>& records() const { return records_; }
  // Lines for the user about what reading back found: a cut last line
  // dropped, damaged lines skipped. Empty for a clean or new journal.
  const std::vector<std::string>& notes() const { return notes_; }
  // The format of the journal as read (the head's format when new).
  int format_read() const { return format_read_; }
  // Complete lines after the head skipped as damaged on opening.
  std::size_t damaged_lines() const { return damaged_; }

  // Appends one record (a JSON object) and flushes it. Thread-safe. Throws OutputError
  // naming the journal when it cannot be written (e.g. no room).
  void append(const nlohmann::json& record);
  // Records appended since opening, plus those read back.
  std::size_t size() const;

  // Closes and deletes the journal (after the result it fed was written).
  void remove();

  const std::string& path() const { return path_; }

 private:
  std::string path_;
  std::vector<JournalRecord> records_;
  std::vector<std::string> notes_;
  int format_read_ = 0;
  std::size_t damaged_ = 0;
  std::size_t read_ = 0;  // records read back (kept or handed on)
  bool line_check_ = true;  // records are written with their digest
  mutable std::mutex mutex_;
  std::ofstream out_;
  std::size_t appended_ = 0;
};

}  // namespace aerosect
