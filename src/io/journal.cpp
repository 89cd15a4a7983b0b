#include "aerosect/io/journal.hpp"

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <filesystem>

#include <fmt/format.h>

#include "aerosect/error.hpp"

namespace aerosect {

namespace fs = std::filesystem;

namespace {

nlohmann::json head_json(const JournalHead& h) {
  return {{"aerosect_journal", h.kind}, {"format", h.format}, {"identity", h.identity}};
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

// Checks the head line against what this run expects; returns its format.
int check_head(const std::string& path, const std::string& line, const JournalHead& want) {
  const nlohmann::json head = nlohmann::json::parse(line, nullptr, false);
  const std::string restart = "the same command as the interrupted run, or remove the journal / choose another -o";
  if (head.is_discarded() || !head.is_object())
    throw InputError({path, 1, 0}, "", "", "the first line is not a journal head (not a JSON object)", restart);
  int format = 1;
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
    format = f.get<int>();
    identity = head.contains("identity") ? head["identity"] : nlohmann::json();
  }
  const bool readable = format == want.format ||
                        std::find(want.readable.begin(), want.readable.end(), format) != want.readable.end();
  if (!readable)
    throw InputError({path, 1, 0}, "format", std::to_string(format),
                     "was written in a journal format this aerosect cannot read back",
                     fmt::format("format {} (finish the sweep with the aerosect that wrote the journal, or "
                                 "remove it to start again)",
                                 formats_text(want)));
  if (identity != want.identity)
    throw InputError({path, 1, 0}, "", "", "this journal belongs to a different sweep", restart);
  return format;
}

}  // namespace

Journal::Journal(std::string path, JournalHead head) : path_(std::move(path)) {
  std::error_code ec;
  const auto status = fs::status(path_, ec);
  std::uintmax_t good_end = 0;  // bytes of the complete lines read
  bool has_head = false;
  if (fs::exists(status)) {
    if (!fs::is_regular_file(status))
      throw InputError({path_, 0, 0}, "", "", "the sweep journal is not a regular file",
                       "a regular file written by aerosect, or no file (choose another -o)");
    std::ifstream in(path_, std::ios::binary);
    if (!in) throw OutputError(path_, fmt::format("cannot read the journal: {}", std::strerror(errno)));
    std::string line;
    int number = 0;
    auto complete_line = [&] { return std::getline(in, line) && !in.eof(); };
    if (complete_line()) {
      ++number;
      format_read_ = check_head(path_, line, head);
      has_head = true;
      good_end = static_cast<std::uintmax_t>(in.tellg());
      std::vector<int> damaged;
      while (complete_line()) {
        ++number;
        good_end = static_cast<std::uintmax_t>(in.tellg());
        nlohmann::json j = nlohmann::json::parse(line, nullptr, false);
        if (j.is_discarded())
          damaged.push_back(number);
        else
          records_.push_back({number, std::move(j)});
      }
      if (!damaged.empty()) {
        std::string lines;
        for (std::size_t q = 0; q < damaged.size() && q < 10; ++q) lines += (q ? ", " : "") + std::to_string(damaged[q]);
        if (damaged.size() > 10) lines += ", ...";
        notes_.push_back(fmt::format("{}: {} damaged line(s) skipped (line {}); their points are computed again",
                                     path_, damaged.size(), lines));
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
  if (!has_head) format_read_ = head.format;
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
  const std::string text = record.dump() + "\n";
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
  return records_.size() + appended_;
}

void Journal::remove() {
  std::lock_guard<std::mutex> lock(mutex_);
  out_.close();
  std::error_code ec;
  fs::remove(path_, ec);
}

}  // namespace aerosect
