#include "aerosect/io/journal.hpp"

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <filesystem>
#include <optional>

#include <fmt/format.h>

#include "aerosect/error.hpp"

namespace aerosect {

namespace fs = std::filesystem;

namespace {

constexpr const char* kLineCheck = "fnv1a64";

nlohmann::json head_json(const JournalHead& h) {
  return {{"aerosect_journal", h.kind}, {"format", h.format}, {"identity", h.identity}, {"line_check", kLineCheck}};
}

std::string formats_text(const JournalHead& h) {
  std::vector<int> f = h.readable;
  f.push_back(h.format);
  std::sort(f.begin(), f.end());
  f.erase(std::unique(f.begin(), f.end()), f.end());
  std::string t;
  for (int x : f) t += (t.empty() ? "" : ", ") + std::to_string(x);
  return t;
}

struct HeadRead {
  int format = 0;
  bool line_check = false;
};

// Checks the head line against what this run expects (kind, format and
// identity; a different identity is refused naming the fields that differ).
HeadRead read_head(const std::string& path, const std::string& line, const JournalHead& want) {
  const nlohmann::json head = nlohmann::json::parse(line, nullptr, false);
  const std::string restart = "the same command as the interrupted run, or remove the journal / choose another -o";
  if (head.is_discarded() || !head.is_object())
    throw InputError({path, 1, 0}, "", "", "the first line is not a journal head (not a JSON object)", restart);
  HeadRead h;
  h.format = 1;
  nlohmann::json identity = head;
  if (head.contains("aerosect_journal")) {
    const auto& k = head["aerosect_journal"];
    const auto& f = head.contains("format") ? head["format"] : nlohmann::json();
    if (!k.is_string() || k.get<std::string>() != want.kind)
      throw InputError({path, 1, 0}, "aerosect_journal", k.dump().substr(0, 60),
                       "is the journal of another kind of work", "a " + want.kind + " journal");
    if (!f.is_number_integer())
      throw InputError({path, 1, 0}, "format", f.dump().substr(0, 60), "is not a journal format number",
                       "format " + formats_text(want));
    h.format = f.get<int>();
    identity = head.contains("identity") ? head["identity"] : nlohmann::json();
    if (head.contains("line_check")) {
      const auto& c = head["line_check"];
      if (!c.is_string() || c.get<std::string>() != kLineCheck)
        throw InputError({path, 1, 0}, "line_check", c.dump().substr(0, 60), "is not a line check this aerosect knows",
                         std::string("\"") + kLineCheck + "\" (or remove the journal to start again)");
      h.line_check = true;
    }
  }
  const bool readable = h.format == want.format ||
                        std::find(want.readable.begin(), want.readable.end(), h.format) != want.readable.end();
  // A format-1 head is the identity itself: a line that is not this work's
  // identity is another work's journal (or not a journal), refused as such
  // below whatever its format.
  const bool foreign = h.format == 1 && identity != want.identity;
  if (!readable && !foreign)
    throw InputError({path, 1, 0}, "format", std::to_string(h.format),
                     "was written in a journal format this aerosect cannot read back",
                     fmt::format("format {} (finish the sweep with the aerosect that wrote the journal, or "
                                 "remove it to start again)",
                                 formats_text(want)));
  if (identity != want.identity) {
    // The names that differ, the journal's own as the file has them (any
    // bytes, any length): each shown printable and cut, at most kListed.
    std::vector<std::string> names;
    if (identity.is_object() && want.identity.is_object()) {
      for (const auto& [k, v] : want.identity.items())
        if (!identity.contains(k) || identity[k] != v) names.push_back(k);
      for (const auto& [k, v] : identity.items())
        if (!want.identity.contains(k)) names.push_back(shown_text(k, 40));
    }
    constexpr std::size_t kListed = 12;
    std::string differences;
    for (std::size_t q = 0; q < names.size() && q < kListed; ++q) {
      if (q > 0) differences += ", ";
      differences += names[q];
    }
    if (names.size() > kListed) differences += fmt::format(" and {} more", names.size() - kListed);
    throw InputError({path, 1, 0}, "", "",
                     differences.empty() ? std::string("this journal belongs to a different sweep")
                                         : "this journal belongs to a different sweep (its " + differences +
                                               " differ from this run's)",
                     "the same command and inputs as the interrupted run, or remove the journal / choose "
                     "another -o");
  }
  return h;
}

// One line of `in` into `line` (without its '\n'), reading at most
// `max_bytes` of it (the rest of a longer line is skipped).
enum class LineRead { kEnd, kComplete, kCut, kTooLong };
LineRead read_line(std::istream& in, std::string& line, std::size_t max_bytes, std::uintmax_t& bytes) {
  line.clear();
  std::streambuf* sb = in.rdbuf();
  bool any = false, too_long = false;
  for (;;) {
    const int c = sb->sbumpc();
    if (c == std::char_traits<char>::eof()) return !any ? LineRead::kEnd : LineRead::kCut;
    any = true;
    ++bytes;
    if (c == '\n') return too_long ? LineRead::kTooLong : LineRead::kComplete;
    if (line.size() < max_bytes)
      line.push_back(static_cast<char>(c));
    else
      too_long = true;
  }
}

// A record's line: its JSON object with the digest of that JSON text as a
// last member, {...,"line_check":"0123456789abcdef"}: the line stays one
// JSON object, and the record's own text is the line without that member.
constexpr std::string_view kCheckMember = "\"line_check\":\"";
constexpr std::size_t kDigestDigits = 16;

std::string record_line(const std::string& record_text) {
  const std::string digest = fnv1a64_hex(record_text);
  const std::string_view body = std::string_view(record_text).substr(0, record_text.size() - 1);  // without '}'
  return std::string(body) + (body.size() > 1 ? "," : "") + std::string(kCheckMember) + digest + "\"}";
}

// The JSON of a record line, or nullopt when the line is damaged.
std::optional<nlohmann::json> record_of(const std::string& line, bool line_check) {
  std::string text = line;
  if (line_check) {
    const std::size_t tail = kCheckMember.size() + kDigestDigits + 2;  // member, digest, "}
    if (line.size() < tail + 1 || line.compare(line.size() - 2, 2, "\"}") != 0) return std::nullopt;
    const std::size_t member = line.size() - tail;
    if (line.compare(member, kCheckMember.size(), kCheckMember) != 0) return std::nullopt;
    const std::string digest = line.substr(member + kCheckMember.size(), kDigestDigits);
    const char before = line[member - 1];
    if (before == ',')
      text = line.substr(0, member - 1) + "}";
    else if (before == '{' && member == 1)
      text = "{}";
    else
      return std::nullopt;
    if (fnv1a64_hex(text) != digest) return std::nullopt;
  }
  nlohmann::json j = nlohmann::json::parse(text, nullptr, false);
  if (j.is_discarded()) return std::nullopt;
  return j;
}

}  // namespace

std::string fnv1a64_hex(std::string_view bytes) {
  std::uint64_t h = 14695981039346656037ull;
  for (const char c : bytes) {
    h ^= static_cast<unsigned char>(c);
    h *= 1099511628211ull;
  }
  return fmt::format("{:016x}", h);
}

Journal::Journal(std::string path, JournalHead head, const std::function<void(JournalRecord&&)>& on_record)
    : path_(std::move(path)) {
  std::error_code ec;
  const auto status = fs::status(path_, ec);
  std::uintmax_t good_end = 0;  // bytes of the complete lines read
  bool has_head = false;
  if (fs::exists(status)) {
    if (!fs::is_regular_file(status))
      throw InputError({path_, 0, 0}, "", "", "the sweep journal is not a regular file",
                       "a regular file written by aerosect, or no file (choose another -o)");
    const std::uintmax_t file_bytes = fs::file_size(path_, ec);
    if (!ec && file_bytes > kMaxJournalBytes)
      throw InputError({path_, 0, 0}, "", "",
                       fmt::format("the sweep journal is {} bytes, more than a journal may hold ({} bytes, {} GiB)",
                                   file_bytes, kMaxJournalBytes, kMaxJournalBytes >> 30),
                       "a journal written by aerosect sweep (a sweep of the largest size writes about a third of "
                       "that), or remove it / choose another -o to start the sweep again");
    std::ifstream in(path_, std::ios::binary);
    if (!in) throw OutputError(path_, fmt::format("cannot read the journal: {}", std::strerror(errno)));
    std::string line;
    int number = 0;
    std::uintmax_t bytes = 0;
    LineRead got = read_line(in, line, kMaxJournalLine, bytes);
    if (got == LineRead::kComplete || got == LineRead::kTooLong) {
      ++number;
      if (got == LineRead::kTooLong)
        throw InputError({path_, 1, 0}, "", "", "the first line is not a journal head (too long)",
                         "the same command as the interrupted run, or remove the journal / choose another -o");
      const HeadRead h = read_head(path_, line, head);
      format_read_ = h.format;
      line_check_ = h.line_check;
      has_head = true;
      good_end = bytes;
      std::vector<int> damaged;
      while ((got = read_line(in, line, kMaxJournalLine, bytes)) == LineRead::kComplete ||
             got == LineRead::kTooLong) {
        ++number;
        good_end = bytes;
        std::optional<nlohmann::json> j;
        if (got == LineRead::kComplete) j = record_of(line, line_check_);
        if (j) {
          ++read_;
          if (on_record)
            on_record({number, std::move(*j)});
          else
            records_.push_back({number, std::move(*j)});
        } else {
          damaged.push_back(number);
        }
      }
      damaged_ = damaged.size();
      if (!damaged.empty()) {
        std::string lines;
        for (std::size_t q = 0; q < damaged.size() && q < 10; ++q) lines += (q ? ", " : "") + std::to_string(damaged[q]);
        if (damaged.size() > 10) lines += ", ...";
        notes_.push_back(fmt::format("{}: {} damaged line(s) skipped (line {}); the {} intact points are kept and "
                                     "the damaged ones computed again",
                                     path_, damaged.size(), lines, read_));
      }
    }
    in.close();
    const auto size = fs::file_size(path_, ec);
    if (has_head && !ec && size > good_end) {
      fs::resize_file(path_, good_end, ec);
      if (ec) throw OutputError(path_, "cannot cut off its incomplete last line: " + ec.message());
      notes_.push_back(fmt::format("{}: dropped {} bytes after the last complete point (cut by the interruption)",
                                   path_, size - good_end));
    }
  }
  if (!has_head) {
    format_read_ = head.format;
    line_check_ = true;
  }
  out_.open(path_, has_head ? std::ios::binary | std::ios::app : std::ios::binary | std::ios::trunc);
  if (!out_)
    throw OutputError(path_, fmt::format("cannot open the sweep journal for writing: {}", std::strerror(errno)));
  if (!has_head) {
    errno = 0;
    out_ << head_json(head).dump() << "\n" << std::flush;
    if (!out_)
      throw OutputError(path_, fmt::format("cannot write the sweep journal: {}",
                                           errno != 0 ? std::strerror(errno) : "write failed"));
  }
}

void Journal::append(const nlohmann::json& record) {
  // Invalid UTF-8 in a string (a message quoting a file) is replaced, not thrown.
  AEROSECT_CHECK(record.is_object());
  std::string text = record.dump(-1, ' ', false, nlohmann::json::error_handler_t::replace);
  if (line_check_) text = record_line(text);
  text += "\n";
  std::lock_guard<std::mutex> lock(mutex_);
  errno = 0;
  out_.write(text.data(), static_cast<std::streamsize>(text.size()));
  out_.flush();
  if (!out_)
    throw OutputError(path_, errno != 0 ? std::strerror(errno) : std::string("write failed"));
  ++appended_;
}

std::size_t Journal::size() const {
  std::lock_guard<std::mutex> lock(mutex_);
  return read_ + appended_;
}

void Journal::remove() {
  std::lock_guard<std::mutex> lock(mutex_);
  out_.close();
  std::error_code ec;
  fs::remove(path_, ec);
}

}  // namespace aerosect
