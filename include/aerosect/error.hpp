#pragma once
// Error types of the engine. Three tiers (see DEVELOPERS.md):
//  - internal invariants: assert() in debug builds;
//  - conditions that must always hold: AEROSECT_CHECK, which throws
//    InternalError with the source file and line (never silently continues);
//  - bad user input: InputError, carrying where the value came from (file,
//    line, column or the command line), the key, the value given and what is
//    allowed.
// The engine never prints or exits; the command-line driver turns these into
// messages and exit codes.

#include <atomic>
#include <stdexcept>
#include <string>

namespace aerosect {

// Base of every error the engine throws on purpose.
class Error : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

// Where a value came from: a line of a case file or a --set override.
struct SourceLocation {
  std::string file;  // case-file path, or "--set" for a command-line override
  int line = 0;      // 1-based; 0 when unknown
  int column = 0;    // 1-based; 0 when unknown
};

// Bad user input. what() is the complete one-screen message:
//   FILE:LINE:COL: key 'KEY' = VALUE: PROBLEM
//     allowed: ALLOWED
// with the key shown to at most 90 characters, the value to 60 (the accessors
// return them whole); `wrapped` fits it to a screen's width.
class InputError : public Error {
 public:
  InputError(SourceLocation where, std::string key, std::string value,
             std::string problem, std::string allowed);

  const SourceLocation& where() const noexcept { return where_; }
  const std::string& key() const noexcept { return key_; }
  const std::string& value() const noexcept { return value_; }
  const std::string& problem() const noexcept { return problem_; }
  const std::string& allowed() const noexcept { return allowed_; }

 private:
  SourceLocation where_;
  std::string key_, value_, problem_, allowed_;
};

// The integration could not continue (NaN/Inf state, step-size collapse).
class NumericalError : public Error {
 public:
  NumericalError(double time, std::string message);
  double time() const noexcept { return time_; }

 private:
  double time_;
};

// A result file could not be written.
class OutputError : public Error {
 public:
  OutputError(std::string path, std::string message);
  const std::string& path() const noexcept { return path_; }

 private:
  std::string path_;
};

// A condition that must always hold did not (a bug in aerosect).
class InternalError : public Error {
 public:
  InternalError(const char* file, int line, const std::string& condition);
};

// The run was stopped because its caller turned the cancel flag it handed
// the engine to true (the command-line driver does so on SIGINT/SIGTERM).
// Not a failure of the run: nothing after the point of stopping was
// written. Analyses that return a partial result instead (simulate, the
// sweep) say so in their result and do not throw this.
class Cancelled : public Error {
 public:
  Cancelled();
};

// True when `cancel` is given and set. Engine loops poll it between units
// of work (a speed, a gust gradient, a sweep point, a study stage).
inline bool cancel_requested(const std::atomic<bool>* cancel) {
  return cancel != nullptr && cancel->load(std::memory_order_relaxed);
}
// Throws Cancelled when cancel_requested(cancel).
inline void stop_if_cancelled(const std::atomic<bool>* cancel) {
  if (cancel_requested(cancel)) throw Cancelled();
}

// `text` with every line wider than `width` columns broken at its last space
// before the limit, the continuation indented by four spaces (a word wider
// than the limit stays whole). For showing messages on a terminal.
std::string wrapped(const std::string& text, std::size_t width = 100);

// Bytes from a file or the command line, safe to show on a terminal: control
// characters (NUL, ESC, BEL, ..., DEL, the C1 controls U+0080..U+009F) and
// bytes that are not UTF-8 as \xNN; printable UTF-8 text kept as it is
// (newlines too when `keep_newlines`). Every message quoting outside bytes
// goes through it.
std::string printable(const std::string& s, bool keep_newlines = false);
// `raw` as a message quotes it: printable, and cut to `limit` characters
// with "..." (at a UTF-8 boundary) when longer.
std::string shown_text(const std::string& raw, std::size_t limit = 60);

#define AEROSECT_CHECK(cond)                                         \
  do {                                                               \
    if (!(cond)) throw ::aerosect::InternalError(__FILE__, __LINE__, #cond); \
  } while (false)

}  // namespace aerosect
