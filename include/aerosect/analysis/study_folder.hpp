#pragma once
// A study folder holds one study: never files of two runs side by side.
//
// Before a study writes into DIR, set_aside_earlier_study looks for the
// files a study writes there (study_file_names: case.toml, check.json, the
// HDF5 files, their figures, summary.json, report.html):
//  - a complete earlier study (summary.json says "completed": true and
//    report.html exists) is moved whole into DIR/previous_study/, replacing
//    an older one there; it stays there, untouched, until the new study
//    completes (remove_earlier_study), so an interruption of any kind
//    leaves DIR with the new study's files only and the earlier complete
//    study beside them in previous_study/;
//  - the files of an interrupted earlier study (no report.html, or
//    "completed": false) are removed: nothing complete is lost, and what is
//    left in DIR is the new run's alone.
// Other files in DIR (the user's own, lock files) are left alone. Throws
// OutputError naming the file that cannot be moved or removed.

#include <string>

namespace aerosect {

// True when `name` (a file name, no folder) is one a study writes.
bool is_study_file_name(const std::string& name);

// The sub-folder an earlier complete study is kept in while a new one runs.
inline constexpr const char* kPreviousStudyFolder = "previous_study";

// As described above; returns DIR/previous_study when an earlier complete
// study was moved there, "" otherwise.
std::string set_aside_earlier_study(const std::string& directory);

// Removes DIR/previous_study (the new study is complete).
void remove_earlier_study(const std::string& directory);

}  // namespace aerosect
