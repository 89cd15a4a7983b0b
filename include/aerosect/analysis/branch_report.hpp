#pragma once
// Reports of an orbit branch (continuation.hpp): the HDF5 branch file
// (layout in README.md, "Orbit branch file"), the JSON summary and its text.

#include <string>

#include <nlohmann/json.hpp>

#include "aerosect/analysis/continuation.hpp"
#include "aerosect/io/case.hpp"

namespace aerosect {

// Writes the branch (also a partial one: root attribute `complete` = 0 and
// `stop_reason` say why it ended). Throws OutputError.
void write_branch_file(const std::string& path, const Case& c, const Branch& b);

nlohmann::json branch_json(const Case& c, const Branch& b, const std::string& output_path);
std::string branch_text(const Case& c, const Branch& b, const std::string& output_path);

}  // namespace aerosect
