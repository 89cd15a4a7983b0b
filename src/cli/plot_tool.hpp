#pragma once
// Running the plotting tool (tools/plot) on a result file, for `study`.
// The engine starts no processes; the driver does it here, in one place.
//
// The tool writes into a private staging directory beside the target
// directory; the figures it lists are moved into the target only when it
// finishes, so an interruption never leaves a half-written figure there.
// While it runs the cancel flag is polled: when it turns true the tool is
// sent SIGTERM (SIGKILL after 5 s), its staging directory removed, and
// `cancelled` reported.

#include <atomic>
#include <string>
#include <vector>

namespace aerosect::cli {

// $AEROSECT_PLOT, else tools/plot of the source tree this binary was built from.
std::string plot_tool();

struct PlotRun {
  bool cancelled = false;
  bool ok = false;                   // the tool ran and exited 0
  std::vector<std::string> figures;  // PNG files now in the target directory
  std::string last_line;             // the tool's last line of output (its error, when !ok)
};

// Runs `tool FILE -o DIR`.
PlotRun run_plot_tool(const std::string& tool, const std::string& file, const std::string& directory,
                      const std::atomic<bool>* cancel);

}  // namespace aerosect::cli
