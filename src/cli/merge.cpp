// aerosect merge SHARD... -o MAP: join the shard files of one sweep.
// Interrupted, it writes nothing (an existing MAP is left as it was).

#include <memory>

#include "aerosect/analysis/sweep.hpp"
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
  try {
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
  CLI::App* cmd = app.add_subcommand("merge", "join the shard files of one sweep into one map");
  cmd->add_option("FILES", o->inputs, "shard files (from sweep --shard K/N)")->required();
  cmd->add_option("-o,--output", o->output, "merged HDF5 map")->required();
  cmd->add_flag("--json", o->json, "print a machine-readable summary");
  return {cmd, [o] { return run(*o); }};
}

}  // namespace aerosect::cli
