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

// "FROM:TO:N" -> N speeds from FROM to TO (m/s), ascending.
std::vector<double> parse_speeds(const std::string& text) {
  const auto r = parse_range(text);
  if (!r || !(r->from >= 0) || !(r->to > r->from) || !(r->to < 1000) || r->n < 2 || r->n > 100000 ||
      !distinct_values(*r))
    throw InputError({"--speeds " + text, 0, 0}, "--speeds", text, "is not a valid speed range",
                     "FROM:TO:N with 0 <= FROM < TO < 1000 (m s-1, true airspeed; the theory is "
                     "incompressible), 2 <= N <= 100000 distinct speeds, e.g. --speeds 10:120:221");
  std::vector<double> s = r->values();
  if (s.front() == 0.0) s.front() = 1e-6 * r->to;  // U = 0 has no reduced frequency
  return s;
}

int run(const FlutterCommandOptions& o) {
  // Every option is checked before the case is read and any work is done.
  if (o.output_option->count() > 0) check_output_name("-o", o.output);
  FlutterOptions fo;
  if (!o.speeds.empty()) fo.speeds = parse_speeds(o.speeds);
  if (o.amplitude)
    check_number("--amplitude", *o.amplitude, 0, 1e6, true,
                 "a positive finite amplitude (degrees for pitch/flap springs, m for plunge)");
  const Case c = load_case(o.case_path, o.overrides);
  fo.state_space = o.method != "pk";
  fo.pk = o.method != "state-space";
  fo.amplitude = o.amplitude;
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
  cmd->add_option("--speeds", o->speeds, "airspeeds FROM:TO:N in m s-1 (true airspeed)");
  cmd->add_option("--method", o->method, "state-space, pk or both")
      ->check(CLI::IsMember({"state-space", "pk", "both"}))
      ->capture_default_str();
  cmd->add_option("--amplitude", o->amplitude,
                  "also linearise nonlinear springs by their describing function at this "
                  "amplitude (degrees for pitch/flap springs, m for plunge)");
  return {cmd, [o] { return run(*o); }};
}

}  // namespace aerosect::cli
