// aerosect flutter CASE [-o FILE]: linear flutter and divergence (state-space
// and p-k) over the spring linearisations the case needs. Interrupted, it
// writes nothing (an existing FILE is left as it was).

#include <memory>
#include <optional>

#include "aerosect/analysis/flutter.hpp"
#include "aerosect/analysis/flutter_report.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/case.hpp"
#include "command.hpp"

namespace aerosect::cli {

namespace {

struct FlutterCommandOptions : CaseOptions {
  std::string output, speeds, method = "both";
  std::optional<double> amplitude;
  const CLI::Option* output_option = nullptr;  // given even as -o ""?
};

int run(const FlutterCommandOptions& o) {
  // Every option is checked before the case is read and any work is done.
  if (o.output_option->count() > 0) check_output_name("-o", o.output);
  FlutterOptions fo = flutter_options(o.speeds, o.method, o.amplitude);
  const Case c = load_case(o.case_path, o.overrides);
  fo.cancel = cancel_flag();
  return analyse_write_print(
      o.output, [&] { return flutter_analysis(c, fo); },
      [&](const std::string& path, const FlutterReport& r) { write_flutter_file(path, c, r); },
      [&](const FlutterReport& r, const std::string& written) {
        return o.json ? flutter_json(c, r, written).dump(2) + "\n" : flutter_text(c, r, written);
      });
}

}  // namespace

Command add_flutter_command(CLI::App& app) {
  auto o = std::make_shared<FlutterCommandOptions>();
  CLI::App* cmd = app.add_subcommand(
      "flutter", "linear flutter and divergence: state-space eigenvalues and p-k (exact Theodorsen)");
  add_case_options(cmd, *o);
  o->output_option = cmd->add_option("-o,--output", o->output, "HDF5 file for the V-g / V-f tables");
  add_flutter_speed_options(cmd, o->speeds, o->method);
  cmd->add_option("--amplitude", o->amplitude,
                  "also linearise nonlinear springs by their describing function at this "
                  "amplitude (degrees for pitch/flap springs, m for plunge)");
  return {cmd, [o] { return run(*o); }};
}

}  // namespace aerosect::cli
