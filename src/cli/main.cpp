// aerosect command-line driver: parses arguments, dispatches to the engine,
// prints its reports and turns its typed errors into messages and exit codes.
//   0 success; 1 internal error; 2 bad input; 3 numerical trouble;
//   4 output could not be written; 130 interrupted.

#include <atomic>
#include <csignal>
#include <cstdio>
#include <cmath>
#include <iostream>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>

#include "aerosect/analysis/flutter.hpp"
#include "aerosect/analysis/flutter_report.hpp"
#include "aerosect/analysis/gust_sweep.hpp"
#include "aerosect/analysis/report.hpp"
#include "aerosect/analysis/simulate.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/io/hdf5_writer.hpp"
#include "aerosect/version.hpp"

namespace {

std::atomic<bool> g_interrupted{false};
extern "C" void on_signal(int) { g_interrupted.store(true); }

struct Common {
  std::string case_path;
  std::vector<std::string> overrides;
  bool json = false;
};

void add_common(CLI::App* cmd, Common& c) {
  cmd->add_option("CASE", c.case_path, "case file (TOML)")->required();
  cmd->add_option("--set", c.overrides,
                  "override a case entry, e.g. --set flow.airspeed=42 (repeatable)")
      ->type_name("KEY=VALUE");
  cmd->add_flag("--json", c.json, "print a machine-readable summary on stdout");
}

void print(const std::string& s) { std::fwrite(s.data(), 1, s.size(), stdout); }

int run_check(const Common& o) {
  const aerosect::Case c = aerosect::load_case(o.case_path, o.overrides);
  const aerosect::CheckReport r = aerosect::check_case(c);
  print(o.json ? aerosect::check_json(c, r).dump(2) + "\n" : aerosect::check_text(c, r));
  return 0;
}

int run_simulate(const Common& o, const std::string& output) {
  const aerosect::Case c = aerosect::load_case(o.case_path, o.overrides);
  const aerosect::AeroelasticModel model(c.model);
  aerosect::Hdf5TimeHistoryWriter writer(output);
  const aerosect::SimulationSummary s = aerosect::simulate(c, model, writer, &g_interrupted);
  print(o.json ? aerosect::simulation_json(c, s, writer.final_path()).dump(2) + "\n"
               : aerosect::simulation_text(c, s, writer.final_path()));
  if (!s.completed) {
    std::cerr << "aerosect: run " << s.status << " at t = " << s.end_time
              << " s; partial result kept in " << writer.final_path() << "\n";
    return g_interrupted ? 130 : 3;
  }
  return 0;
}

// "FROM:TO:N" -> N speeds from FROM to TO (m/s), ascending.
std::vector<double> parse_speeds(const std::string& text) {
  double from = 0, to = 0;
  long n = 0;
  char c1 = 0, c2 = 0;
  std::istringstream in(text);
  in >> from >> c1 >> to >> c2 >> n;
  if (!in || c1 != ':' || c2 != ':' || !(in >> std::ws).eof() || !(from >= 0) || !(to > from) ||
      n < 2 || n > 100000 || !std::isfinite(to))
    throw aerosect::InputError({"--speeds " + text, 0, 0}, "--speeds", text,
                               "is not a valid speed range",
                               "FROM:TO:N with 0 <= FROM < TO (m/s, true airspeed) and 2 <= N "
                               "<= 100000, e.g. --speeds 10:120:221");
  std::vector<double> s(static_cast<std::size_t>(n));
  for (long i = 0; i < n; ++i) s[static_cast<std::size_t>(i)] = from + (to - from) * i / (n - 1);
  if (s.front() == 0.0) s.front() = 1e-6 * to;  // U = 0 has no reduced frequency
  return s;
}

int run_flutter(const Common& o, const std::string& output, const std::string& speeds,
                const std::string& method, std::optional<double> amplitude) {
  const aerosect::Case c = aerosect::load_case(o.case_path, o.overrides);
  aerosect::FlutterOptions fo;
  if (!speeds.empty()) fo.speeds = parse_speeds(speeds);
  fo.state_space = method != "pk";
  fo.pk = method != "state-space";
  fo.amplitude = amplitude;
  const aerosect::FlutterReport r = aerosect::flutter_analysis(c, fo);
  std::string written;
  if (!output.empty()) {
    aerosect::write_flutter_file(output, c, r);
    written = output;
  }
  print(o.json ? aerosect::flutter_json(c, r, written).dump(2) + "\n"
               : aerosect::flutter_text(c, r, written));
  return 0;
}

// "FROM:TO:N" in metres for gust gradients.
std::vector<double> parse_gradients(const std::string& text) {
  double from = 0, to = 0;
  long n = 0;
  char c1 = 0, c2 = 0;
  std::istringstream in(text);
  in >> from >> c1 >> to >> c2 >> n;
  if (!in || c1 != ':' || c2 != ':' || !(in >> std::ws).eof() || !(from > 0) || !(to >= from) ||
      n < 1 || n > 10000 || !std::isfinite(to))
    throw aerosect::InputError({"--gradients " + text, 0, 0}, "--gradients", text,
                               "is not a valid gradient range",
                               "FROM:TO:N with 0 < FROM <= TO (m) and 1 <= N <= 10000, e.g. "
                               "--gradients 9.144:106.68:12");
  std::vector<double> g;
  for (long i = 0; i < n; ++i) g.push_back(n == 1 ? from : from + (to - from) * i / (n - 1));
  return g;
}

int run_gust(const Common& o, const std::string& output, const std::string& gradients) {
  const aerosect::Case c = aerosect::load_case(o.case_path, o.overrides);
  const std::vector<double> g =
      gradients.empty() ? aerosect::default_gradients() : parse_gradients(gradients);
  const aerosect::GustSweep s = aerosect::gust_gradient_sweep(c, g);
  std::string written;
  if (!output.empty()) {
    aerosect::write_gust_sweep_file(output, c, s);
    written = output;
  }
  print(o.json ? aerosect::gust_sweep_json(c, s, written).dump(2) + "\n"
               : aerosect::gust_sweep_text(c, s, written));
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  std::signal(SIGINT, on_signal);
  std::signal(SIGTERM, on_signal);

  CLI::App app{"aerosect: time-domain nonlinear aeroelastic simulation of a typical section"};
  app.set_version_flag("--version", std::string("aerosect ") + aerosect::kVersion);
  app.require_subcommand(1);

  Common check_opts, sim_opts;
  CLI::App* check = app.add_subcommand("check", "validate a case and print its derived quantities");
  add_common(check, check_opts);

  std::string output = "run.h5";
  CLI::App* sim = app.add_subcommand("simulate", "time response to the initial conditions -> HDF5");
  add_common(sim, sim_opts);
  sim->add_option("-o,--output", output, "HDF5 file to write")->capture_default_str();

  Common flutter_opts;
  std::string flutter_out, flutter_speeds, flutter_method = "both";
  std::optional<double> flutter_amplitude;
  CLI::App* flutter = app.add_subcommand(
      "flutter", "linear flutter and divergence: state-space eigenvalues and p-k (exact Theodorsen)");
  add_common(flutter, flutter_opts);
  flutter->add_option("-o,--output", flutter_out, "HDF5 file for the V-g / V-f tables");
  flutter->add_option("--speeds", flutter_speeds, "airspeeds FROM:TO:N in m/s (true airspeed)");
  flutter->add_option("--method", flutter_method, "state-space, pk or both")
      ->check(CLI::IsMember({"state-space", "pk", "both"}))
      ->capture_default_str();
  flutter->add_option("--amplitude", flutter_amplitude,
                      "also linearise nonlinear springs by their describing function at this "
                      "amplitude (degrees for pitch/flap springs, m for plunge)");

  Common gust_opts;
  std::string gust_out, gust_gradients;
  CLI::App* gust = app.add_subcommand(
      "gust", "discrete-gust gradient sweep of the case's one-minus-cosine gusts (peaks, critical H)");
  add_common(gust, gust_opts);
  gust->add_option("-o,--output", gust_out, "HDF5 file for the peaks against H");
  gust->add_option("--gradients", gust_gradients,
                   "gust gradients FROM:TO:N in m (default 12 over 9.144..106.68 m)");

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    return app.exit(e) == 0 ? 0 : 2;
  }

  try {
    if (*check) return run_check(check_opts);
    if (*sim) return run_simulate(sim_opts, output);
    if (*gust) return run_gust(gust_opts, gust_out, gust_gradients);
    if (*flutter)
      return run_flutter(flutter_opts, flutter_out, flutter_speeds, flutter_method, flutter_amplitude);
  } catch (const aerosect::InputError& e) {
    std::cerr << "aerosect: error in the case:\n" << e.what() << "\n";
    return 2;
  } catch (const aerosect::NumericalError& e) {
    std::cerr << "aerosect: " << e.what() << "\n";
    return 3;
  } catch (const aerosect::OutputError& e) {
    std::cerr << "aerosect: " << e.what() << "\n";
    return 4;
  } catch (const std::exception& e) {
    std::cerr << "aerosect: " << e.what() << "\n";
    return 1;
  }
  return 0;
}
