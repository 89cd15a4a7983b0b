// aerosect merge SHARD... -o FILE: join the shard files of one sweep (a map)
// or of one orbits run (a branch file), by the first file's kind.
// Interrupted, it writes nothing (an existing FILE is left as it was).

#include <memory>

#include "aerosect/analysis/branch_report.hpp"
#include "aerosect/analysis/sweep.hpp"
#include "aerosect/io/hdf5_document.hpp"
#include "aerosect/error.hpp"
#include "command.hpp"

namespace aerosect::cli {

namespace {

struct MergeOptions {
  std::vector<std::string> inputs;
  std::string output;
  bool json = false;
};

int run(const MergeOptions& o) {
  check_output_name("-o", o.output);
  // The kind of the first file decides (a file that is not an aerosect
  // file goes to the sweep merge, which says what it expects).
  bool orbits = false;
  try {
    orbits = read_text_attribute(o.inputs.front(), "aerosect_file_kind") == "orbit_branch";
  } catch (const InputError&) {
  }
  try {
    if (orbits)
      merge_branch_files(o.inputs, o.output, cancel_flag());
    else
      merge_sweep_files(o.inputs, o.output, cancel_flag());
  } catch (const Cancelled&) {
    return report_interrupted("nothing written (" + o.output + " left as it was)");
  }
  print(o.json ? merge_json(o.inputs, o.output).dump(2) + "\n" : merge_text(o.inputs, o.output));
  return 0;
}

}  // namespace

Command add_merge_command(CLI::App& app) {
  auto o = std::make_shared<MergeOptions>();
  CLI::App* cmd = app.add_subcommand(
      "merge", "join the shard files of one sweep into one map, or of one orbits run into one branch file");
  cmd->add_option("FILES", o->inputs, "shard files (from sweep or orbits --shard K/N)")->required();
  cmd->add_option("-o,--output", o->output, "merged HDF5 file")->required();
  cmd->add_flag("--json", o->json, "print a machine-readable summary");
  return {cmd, [o] { return run(*o); }};
}

}  // namespace aerosect::cli
