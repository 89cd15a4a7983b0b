#pragma once
// Reports of an orbit branch (continuation.hpp): the HDF5 branch file
// (layout in README.md, "Orbit branch file"), the JSON summary and its text.

#include <atomic>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "aerosect/analysis/continuation.hpp"
#include "aerosect/analysis/options.hpp"
#include "aerosect/io/case.hpp"

namespace aerosect {

// Writes the branch (also a partial one: root attribute `complete` = 0 and
// `stop_reason` say why it ended). `sweep_file`, when given, names a sweep
// file beside it (relative to the branch file's directory) whose points the
// branch figure draws over the branch (root attribute `overlay_sweep_file`;
// the study's sweep.h5). Throws OutputError.
// `request`, when given (orbits_request_json, dumped), is written as the root
// text attribute orbits_request (what a merge of shards checks).
void write_branch_file(const std::string& path, const Case& c, const Branch& b, const std::string& sweep_file = {},
                       const std::string& request = {});

// --- Sharded runs (aerosect orbits --shard K/N, then aerosect merge) ----------
// The unit of work is a branch: the continuation from one start, which
// depends on nothing else of the run. Unit i belongs to shard (i mod N) + 1,
// as the sweep's units (chains) do. orbits traces one branch per call (unit
// 0), so shard 1/N holds it and shards 2/N..N/N hold none: each writes a
// valid branch file without points (points = 0, complete = 0, stop_reason
// saying so) that merges. The merge is shard 1's file with the shard reset
// to 1/1: the file the unsharded run writes.
inline constexpr int kBranchesPerRun = 1;
bool shard_holds_branch(int branch, int shard_index, int shard_count);
// The request as identity, the root attribute orbits_request of every file
// `orbits` writes: {"format", "case_text", "overrides", the settings
// ("key", "from", "to", "start", "start_amplitude", "points", "watch") and
// "shard": [K, N]}. Shards of one run differ in "shard" only. The case
// file's path is left out (a cluster's nodes may see it elsewhere).
nlohmann::json orbits_request_json(const Case& c, const BranchSettings& s);
// What a shard holding no branch writes (the case's key and start).
Branch empty_shard_branch(const Case& c, const BranchOptions& o, int shard_index, int shard_count);
// Joins the files of the shards 1/N..N/N of one orbits run into the file
// the unsharded run writes. Throws InputError naming the file when one is
// not an orbits file, belongs to another run or series, is given twice, or
// a shard is missing; Cancelled (nothing written) when `cancel` is set.
void merge_branch_files(const std::vector<std::string>& inputs, const std::string& output,
                        const std::atomic<bool>* cancel = nullptr);

nlohmann::json branch_json(const Case& c, const Branch& b, const std::string& output_path);
std::string branch_text(const Case& c, const Branch& b, const std::string& output_path);

}  // namespace aerosect
