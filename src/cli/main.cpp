// aerosect command-line driver: lists the commands (one file each, see
// command.hpp), parses, runs the chosen one and turns the engine's typed
// errors into messages and exit codes:
//   0 success; 1 internal error; 2 bad input; 3 numerical trouble;
//   4 output could not be written; 5 out of memory; 128 + signal number
//   when stopped by a signal: 130 for SIGINT (Ctrl-C), 143 for SIGTERM.
// The first SIGINT or SIGTERM stops the run cleanly, keeping what README.md
// ("Exit status and interruption") says each command keeps; a second one
// ends the program at once, as the signal's default action does.

#include <cstdio>
#include <cstdlib>
#include <iostream>
#include <new>
#include <string>
#include <string_view>
#include <vector>

#include <CLI/CLI.hpp>

#include "aerosect/error.hpp"
#include "aerosect/io/hdf5_writer.hpp"
#include "aerosect/io/output_claim.hpp"
#include "aerosect/version.hpp"
#include "command.hpp"

namespace {

// The heading of a bad-input message: options are named as such; any
// other input is a file (a case, a recorded gust, a sweep journal, a shard),
// which the message's first line names.
std::string input_heading(const aerosect::InputError& e) {
  return e.where().file.rfind("-", 0) == 0 ? "aerosect: error in the command line:\n"
                                            : "aerosect: error in an input file:\n";
}

int run_command(const std::vector<aerosect::cli::Command>& commands) {
  try {
    for (const auto& c : commands)
      if (*c.app) return c.run();
  } catch (const aerosect::Cancelled&) {
    // A stage that does not say what it keeps: nothing after the signal was written.
    return aerosect::cli::report_interrupted("stopped before writing anything further");
  } catch (const aerosect::InputError& e) {
    std::cerr << input_heading(e) << aerosect::wrapped(e.what()) << "\n";
    return 2;
  } catch (const aerosect::NumericalError& e) {
    std::cerr << aerosect::wrapped(std::string("aerosect: ") + e.what()) << "\n";
    return 3;
  } catch (const aerosect::OutputError& e) {
    std::cerr << aerosect::wrapped(std::string("aerosect: ") + e.what()) << "\n";
    return 4;
  } catch (const std::bad_alloc&) {
    // Outputs are written under temporary names and renamed when complete:
    // what was being written is dropped, earlier complete files stay.
    std::cerr << aerosect::wrapped("aerosect: out of memory: the run needs more memory than this process may use "
                                   "(see `ulimit -v` and the machine's free memory); nothing half-written is kept")
              << "\n";
    return 5;
  } catch (const std::exception& e) {
    std::cerr << aerosect::wrapped(std::string("aerosect: ") + e.what()) << "\n";
    return 1;
  }
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  namespace cli = aerosect::cli;
  // `aerosect --version` alone needs none of the commands: answered, as
  // CLI11 would, before they are built (0.5 ms of start-up).
  const std::string version = std::string("aerosect ") + aerosect::kVersion;
  if (argc == 2 && std::string_view(argv[1]) == "--version") {
    std::printf("%s\n", version.c_str());
    return 0;
  }
  cli::install_signal_handlers();

  CLI::App app{"aerosect: time-domain nonlinear aeroelastic simulation of a typical section"};
  app.set_version_flag("--version", version);
  app.require_subcommand(1);
  // Option errors found by the parser, headed like those found later.
  app.failure_message([](const CLI::App*, const CLI::Error& e) {
    return "aerosect: error in the command line:\n" +
           aerosect::wrapped("  " + aerosect::printable(e.what()) + "\n  see aerosect --help or aerosect COMMAND --help") +
           "\n";
  });
  // One line per command, in the order `--help` lists them.
  const std::vector<cli::Command> commands = {
      cli::add_check_command(app), cli::add_simulate_command(app), cli::add_flutter_command(app),
      cli::add_gust_command(app),  cli::add_sweep_command(app),    cli::add_merge_command(app),
      cli::add_study_command(app), cli::add_orbits_command(app), cli::add_batch_command(app),
  };

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    return app.exit(e) == 0 ? 0 : 2;
  }
  const int status = run_command(commands);
  // After an HDF5 failure its shutdown at exit may crash (hdf5_writer.hpp).
  if (aerosect::hdf5_shutdown_unsafe()) {
    aerosect::release_output_claims();  // no static destructor runs after _Exit
    std::cout.flush();
    std::cerr.flush();
    std::fflush(nullptr);
    std::_Exit(status);
  }
  return status;
}
