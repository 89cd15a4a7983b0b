#include "aerosect/error.hpp"

#include <algorithm>
#include <cstdint>

#include <fmt/format.h>

namespace aerosect {

std::string printable(const std::string& s, bool keep_newlines) {
  std::string out;
  out.reserve(s.size());
  auto escape = [&out](unsigned char c) { out += fmt::format("\\x{:02X}", c); };
  for (std::size_t i = 0; i < s.size();) {
    const auto c = static_cast<unsigned char>(s[i]);
    if (c < 0x80) {
      if ((c < 0x20 && !(keep_newlines && c == '\n')) || c == 0x7F) escape(c);
      else out += static_cast<char>(c);
      ++i;
      continue;
    }
    // Length and smallest code point of a UTF-8 sequence starting with c.
    const int len = (c & 0xE0) == 0xC0 ? 2 : (c & 0xF0) == 0xE0 ? 3 : (c & 0xF8) == 0xF0 ? 4 : 0;
    bool ok = len > 0 && i + static_cast<std::size_t>(len) <= s.size();
    std::uint32_t cp = len == 2 ? (c & 0x1Fu) : len == 3 ? (c & 0x0Fu) : (c & 0x07u);
    for (int k = 1; ok && k < len; ++k) {
      const auto d = static_cast<unsigned char>(s[i + static_cast<std::size_t>(k)]);
      ok = (d & 0xC0) == 0x80;
      cp = (cp << 6) | (d & 0x3Fu);
    }
    static constexpr std::uint32_t kMin[5] = {0, 0, 0x80, 0x800, 0x10000};
    ok = ok && cp >= kMin[len] && cp <= 0x10FFFF && !(cp >= 0xD800 && cp <= 0xDFFF) &&
         !(cp >= 0x80 && cp <= 0x9F);
    if (!ok) {
      escape(c);
      ++i;
      continue;
    }
    out.append(s, i, static_cast<std::size_t>(len));
    i += static_cast<std::size_t>(len);
  }
  return out;
}

namespace {
// Messages show at most kShownKey characters of a key (room for three
// alternatives "a | b | c"; an unknown key may be any length) and kShownValue
// of a value or a command-line option.
constexpr std::size_t kShownKey = 90, kShownValue = 60;

std::string shown(const std::string& raw, std::size_t limit = kShownValue) {
  const std::string s = printable(raw);
  if (s.size() <= limit) return s;
  std::size_t cut = limit - 3;
  while (cut > 0 && (static_cast<unsigned char>(s[cut]) & 0xC0) == 0x80) --cut;  // UTF-8 boundary
  return s.substr(0, cut) + "...";
}

}  // namespace

std::string shown_text(const std::string& raw, std::size_t limit) { return shown(raw, limit); }

std::string wrapped(const std::string& text, std::size_t width) {
  std::string out;
  std::size_t start = 0;
  while (start <= text.size()) {
    const std::size_t nl = std::min(text.find('\n', start), text.size());
    std::string line = text.substr(start, nl - start);
    while (line.size() > width) {
      std::size_t cut = line.rfind(' ', width);
      if (cut == std::string::npos || cut < 8) cut = line.find(' ', width);
      if (cut == std::string::npos) break;
      const std::size_t next = line.find_first_not_of(' ', cut);
      if (next == std::string::npos) break;  // only spaces beyond the limit
      out += line.substr(0, cut) + "\n";
      line = "    " + line.substr(next);
    }
    out += line;
    if (nl == text.size()) break;
    out += "\n";
    start = nl + 1;
  }
  return out;
}

namespace {

std::string format_input_error(const SourceLocation& w, const std::string& key,
                               const std::string& value, const std::string& problem,
                               const std::string& allowed) {
  // A command-line option ("--set KEY=VALUE") is shown shortened; a file path whole.
  const std::string file = w.file.empty()              ? std::string("<input>")
                           : w.file.rfind("--", 0) == 0 ? shown(w.file)
                                                        : printable(w.file);
  const std::string line = w.line > 0 ? fmt::format(":{}", w.line) : std::string();
  const std::string column = w.line > 0 && w.column > 0 ? fmt::format(":{}", w.column) : std::string();
  const std::string what = key.empty() && value.empty() ? std::string()
                           : value.empty()              ? fmt::format("key '{}': ", shown(key, kShownKey))
                           : key.empty()                ? fmt::format("{}: ", shown(value))
                                           : fmt::format("key '{}' = {}: ", shown(key, kShownKey), shown(value));
  const std::string tail = allowed.empty() ? std::string() : fmt::format("\n  allowed: {}", allowed);
  return fmt::format("{}{}{}: {}{}{}", file, line, column, what, printable(problem, true), tail);
}
}  // namespace

InputError::InputError(SourceLocation where, std::string key, std::string value,
                       std::string problem, std::string allowed)
    : Error(format_input_error(where, key, value, problem, allowed)),
      where_(std::move(where)),
      key_(std::move(key)),
      value_(std::move(value)),
      problem_(std::move(problem)),
      allowed_(std::move(allowed)) {}

NumericalError::NumericalError(double time, std::string message)
    : Error(fmt::format("numerical trouble at t = {:.9g} s: {}", time, message)), time_(time) {}

OutputError::OutputError(std::string path, std::string message)
    : Error(fmt::format("cannot write '{}': {}", path, message)), path_(std::move(path)) {}

InternalError::InternalError(const char* file, int line, const std::string& condition)
    : Error(fmt::format("internal error (please report): {}:{}: check failed: {}", file, line,
                        condition)) {}

Cancelled::Cancelled() : Error("stopped on request (cancel flag set)") {}

}  // namespace aerosect
