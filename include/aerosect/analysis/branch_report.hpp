#pragma once
// Reports of an orbit branch (continuation.hpp): the HDF5 branch file
// (layout in README.md, "Orbit branch file"), the JSON summary and its text.

#include <string>

#include <nlohmann/json.hpp>

#include "aerosect/analysis/continuation.hpp"
#include "aerosect/io/case.hpp"

namespace aerosect {

// Writes the branch (also a partial one: root attribute `complete` = 0 and
// `stop_reason` say why it ended). `sweep_file`, when given, names a sweep
// file beside it (relative to the branch file's directory) whose points the
// branch figure draws over the branch (root attribute `overlay_sweep_file`;
// the study's sweep.h5). Throws OutputError.
void write_branch_file(const std::string& path, const Case& c, const Branch& b, const std::string& sweep_file = {});

nlohmann::json branch_json(const Case& c, const Branch& b, const std::string& output_path);
std::string branch_text(const Case& c, const Branch& b, const std::string& output_path);

}  // namespace aerosect
