// aerosect simulate CASE -o FILE: time response to the initial conditions.
// Interrupted, the partial time history is kept as NAME.incomplete.h5 and
// an existing NAME.h5 is never replaced.

#include <iostream>
#include <memory>

#include "aerosect/analysis/report.hpp"
#include "aerosect/analysis/simulate.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/io/hdf5_writer.hpp"
#include "command.hpp"

namespace aerosect::cli {

namespace {

struct SimulateOptions : CaseOptions {
  std::string output = "run.h5";
};

int run(const SimulateOptions& o) {
  check_output_name("-o", o.output);
  const Case c = load_case(o.case_path, o.overrides);
  const AeroelasticModel model(c.model);
  Hdf5TimeHistoryWriter writer(o.output);
  SimulationSummary s;
  try {
    s = simulate(c, model, writer, cancel_flag());
  } catch (const NumericalError& e) {
    std::cerr << "aerosect: " << e.what() << "\n";
    if (!writer.final_path().empty())
      std::cerr << "aerosect: the run up to the trouble is kept in " << writer.final_path() << "\n";
    return 3;
  }
  print(o.json ? simulation_json(c, s, writer.final_path()).dump(2) + "\n"
               : simulation_text(c, s, writer.final_path()));
  if (!s.completed) {
    std::cerr << "aerosect: run " << s.status << " at t = " << s.end_time
              << " s; partial result kept in " << writer.final_path() << "\n";
    return interrupted_signal() != 0 ? interrupted_status() : 3;
  }
  return 0;
}

}  // namespace

Command add_simulate_command(CLI::App& app) {
  auto o = std::make_shared<SimulateOptions>();
  CLI::App* cmd = app.add_subcommand("simulate", "time response to the initial conditions -> HDF5");
  add_case_options(cmd, *o);
  cmd->add_option("-o,--output", o->output, "HDF5 file to write")->capture_default_str();
  return {cmd, [o] { return run(*o); }};
}

}  // namespace aerosect::cli
