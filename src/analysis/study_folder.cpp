#include "aerosect/analysis/study_folder.hpp"

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <system_error>
#include <vector>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "aerosect/error.hpp"

namespace aerosect {

namespace fs = std::filesystem;

namespace {

bool ends_with(const std::string& s, const std::string& tail) {
  return s.size() >= tail.size() && s.compare(s.size() - tail.size(), tail.size(), tail) == 0;
}

bool starts_with(const std::string& s, const std::string& head) { return s.rfind(head, 0) == 0; }

// summary.json says the study completed (and the report was written after it).
bool earlier_study_complete(const fs::path& dir) {
  std::error_code ec;
  if (!fs::is_regular_file(dir / "report.html", ec) || !fs::is_regular_file(dir / "summary.json", ec)) return false;
  // Not an input of the run (read_input_file would register it as one, and
  // the new summary.json is written at the same path).
  const auto size = fs::file_size(dir / "summary.json", ec);
  if (ec || size > (64u << 20)) return false;
  std::ifstream in(dir / "summary.json", std::ios::binary);
  const nlohmann::json j = nlohmann::json::parse(in, nullptr, false);
  return j.is_object() && j.contains("completed") && j["completed"] == true;
}

}  // namespace

bool is_study_file_name(const std::string& name) {
  static const std::vector<std::string> exact = {"case.toml", "check.json", "summary.json", "report.html"};
  static const std::vector<std::string> stems = {"flutter", "sweep", "branch", "lco", "lco_orbit", "preload", "gust", "response"};
  for (const auto& e : exact)
    if (name == e) return true;
  for (const auto& s : stems)
    if (name == s + ".h5" || name == s + ".incomplete.h5" || (starts_with(name, s + "_") && ends_with(name, ".png")))
      return true;
  return false;
}

std::string set_aside_earlier_study(const std::string& directory) {
  const fs::path dir(directory);
  std::error_code ec;
  if (!fs::is_directory(dir, ec)) return "";
  std::vector<fs::path> files;
  for (fs::directory_iterator it(dir, ec), end; !ec && it != end; it.increment(ec))
    if (is_study_file_name(it->path().filename().string()) && !it->is_directory(ec)) files.push_back(it->path());
  if (ec) throw OutputError(directory, "cannot list the study folder: " + ec.message());
  if (files.empty()) return "";
  if (!earlier_study_complete(dir)) {
    for (const auto& f : files) {
      fs::remove(f, ec);
      if (ec) throw OutputError(f.string(), "cannot remove this file of an interrupted earlier study: " + ec.message());
    }
    return "";
  }
  const fs::path keep = dir / kPreviousStudyFolder;
  fs::remove_all(keep, ec);
  if (ec) throw OutputError(keep.string(), "cannot remove the older kept study: " + ec.message());
  fs::create_directory(keep, ec);
  if (ec) throw OutputError(keep.string(), "cannot create the folder for the earlier study: " + ec.message());
  // report.html first: from then on the top level no longer looks complete.
  std::stable_partition(files.begin(), files.end(), [](const fs::path& f) { return f.filename() == "report.html"; });
  for (const auto& f : files) {
    fs::rename(f, keep / f.filename(), ec);
    if (ec) throw OutputError(f.string(), fmt::format("cannot move it into {}: {}", keep.string(), ec.message()));
  }
  return keep.string();
}

void remove_earlier_study(const std::string& directory) {
  std::error_code ec;
  fs::remove_all(fs::path(directory) / kPreviousStudyFolder, ec);
}

}  // namespace aerosect
