// aerosect gust CASE [-o FILE]: discrete-gust gradient sweep of the case's
// one-minus-cosine gusts. Interrupted, it writes nothing (an existing FILE is
// left as it was).

#include <memory>

#include "aerosect/analysis/gust_sweep.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/case.hpp"
#include "command.hpp"

namespace aerosect::cli {

namespace {

struct GustOptions : CaseOptions {
  std::string output, gradients;
  bool keep_initial = false;
  const CLI::Option* output_option = nullptr;  // given even as -o ""?
};

int run(const GustOptions& o) {
  // Every option is checked before the case is read and any work is done.
  if (o.output_option->count() > 0) check_output_name("-o", o.output);
  const std::vector<double> g = gust_gradients(o.gradients);
  const Case c = load_case(o.case_path, o.overrides);
  return analyse_write_print(
      o.output, [&] { return gust_gradient_sweep(c, g, cancel_flag(), o.keep_initial ? GustStart::kCaseInitial : GustStart::kRest); },
      [&](const std::string& path, const GustSweep& s) { write_gust_sweep_file(path, c, s); },
      [&](const GustSweep& s, const std::string& written) {
        return o.json ? gust_sweep_json(c, s, written).dump(2) + "\n" : gust_sweep_text(c, s, written);
      });
}

}  // namespace

Command add_gust_command(CLI::App& app) {
  auto o = std::make_shared<GustOptions>();
  CLI::App* cmd = app.add_subcommand(
      "gust", "discrete-gust gradient sweep of the case's one-minus-cosine gusts (peaks, critical H)");
  add_case_options(cmd, *o);
  o->output_option = cmd->add_option("-o,--output", o->output, "HDF5 file for the peaks against H");
  cmd->add_flag("--keep-initial", o->keep_initial,
                "start every run from the case's [initial] conditions (default: from rest, so the peaks are the gust's)");
  cmd->add_option("--gradients", o->gradients, "gust gradients FROM:TO:N in m (default 12 over 9.144..106.68 m)");
  return {cmd, [o] { return run(*o); }};
}

}  // namespace aerosect::cli
