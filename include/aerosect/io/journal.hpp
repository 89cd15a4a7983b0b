#pragma once
// An append-only journal of JSON records, one per line, after a head line
// that identifies the work it belongs to. A long computation (the sweep)
// appends each finished unit at once and flushes it, so an interruption of
// any kind (Ctrl-C, SIGTERM, kill -9, power loss) loses at most the units in
// flight; the same command run again reads the records back and continues.
//
// File layout (text, UTF-8, '\n' line ends):
//   line 1:  {"aerosect_journal": KIND, "format": F, "identity": {...}}
//   line 2+: one record per line, in the order they were appended.
// Format history: 1 = the head line was the identity object itself (aerosect
// up to 0.1.0); 2 = the head above. The records of a kind keep their layout
// within a format; a reader lists the formats it can read, and a journal of
// any other format, or of another kind or identity, is refused with an
// InputError naming the file.
//
// Reading back: a record counts when its line ends in a newline and parses
// as JSON. A run killed while writing leaves at most one cut line at the
// end; it is cut off (the file shortened) before new records are appended. A
// complete line in the middle that does not parse (damage) is skipped, kept
// in the file, and reported in `notes()`: the records after it are kept.
// Only regular files are read (a FIFO or a device is refused).

#include <cstdint>
#include <fstream>
#include <mutex>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

namespace aerosect {

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
  Journal(std::string path, JournalHead head);
  Journal(const Journal&) = delete;
  Journal& operator=(const Journal&) = delete;

  // The records read back on opening (resume), in file order.
  const std::vector<JournalRecord>& records() const { return records_; }
  // Lines for the user about what reading back found: a cut last line
  // dropped, damaged lines skipped. Empty for a clean or new journal.
  const std::vector<std::string>& notes() const { return notes_; }
  // The format of the journal as read (the head's format when new).
  int format_read() const { return format_read_; }

  // Appends one record and flushes it. Thread-safe. Throws OutputError
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
  mutable std::mutex mutex_;
  std::ofstream out_;
  std::size_t appended_ = 0;
};

}  // namespace aerosect
