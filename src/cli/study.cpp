// aerosect study CASE -o DIR: the whole clearance study into one directory,
// then the figures (the plotting tool, plot_tool.hpp) and the HTML report.
// Interrupted, the files finished so far are kept in DIR and summary.json
// says which stages were done; report.html is not written.

#include <chrono>
#include <cstdio>
#include <filesystem>
#include <memory>

#include <fmt/format.h>

#include "aerosect/analysis/study.hpp"
#include "aerosect/analysis/study_folder.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/io/output_claim.hpp"
#include "command.hpp"
#include "plot_tool.hpp"

namespace aerosect::cli {

namespace {

struct StudyCommandOptions : CaseOptions {
  std::string directory, speeds;
  std::optional<int> jobs;
  int points = 41;
  bool no_plots = false;
};

// The figures of every HDF5 file of the study; notes say what is missing.
// Returns false when interrupted.
bool make_figures(const StudyResult& r, const std::string& dir, bool no_plots,
                  const std::function<void(const std::string&)>& progress, std::vector<StudyFigure>& figures,
                  std::vector<std::string>& notes) {
  const std::string tool = plot_tool();
  if (no_plots) {
    notes.push_back("figures not made: --no-plots was given");
    return true;
  }
  if (!std::filesystem::exists(tool)) {
    notes.push_back("figures not made: the plotting tool " + tool + " was not found (set AEROSECT_PLOT to tools/plot)");
    return true;
  }
  progress("figures (" + tool + ")");
  for (const auto& h5 : r.hdf5_files) {
    if (cancel_requested(cancel_flag())) return false;
    const PlotRun p = run_plot_tool(tool, (std::filesystem::path(dir) / h5).string(), dir, cancel_flag());
    if (p.cancelled) return false;
    for (const auto& f : p.figures) figures.push_back({f, study_figure_caption(f)});
    if (!p.ok) notes.push_back("figures of " + h5 + " not made: the plotting tool said: " + p.last_line);
  }
  return true;
}

int run(const StudyCommandOptions& o) {
  // Every option is checked before the case is read and any work is done.
  check_output_name("-o", o.directory);
  const StudyOptions so = study_options(o.jobs, o.points, o.speeds);
  const Case c = load_case(o.case_path, o.overrides);
  const auto t0 = std::chrono::steady_clock::now();
  auto progress = [&](const std::string& stage) {
    const double el = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    std::fprintf(stderr, "aerosect study [%6.1f s]: %s\n", el, stage.c_str());
  };
  // One study per folder: the folder is this run's (a second study into it
  // is refused before anything moves), and an earlier study's files are set
  // aside before the first new file is written (study_folder.hpp).
  std::string earlier;
  {
    std::error_code ec;
    std::filesystem::create_directories(o.directory, ec);
    if (std::filesystem::is_directory(o.directory, ec)) {
      claim_output((std::filesystem::path(o.directory) / "summary.json").string());
      earlier = set_aside_earlier_study(o.directory);
      if (!earlier.empty())
        std::fprintf(stderr, "aerosect study: the earlier complete study is kept in %s until this one completes\n",
                     earlier.c_str());
    }
  }
  const std::string kept = "the files finished so far are kept in " + o.directory +
                           " (summary.json lists the stages done; no report.html was written)" +
                           (earlier.empty() ? "" : "; the earlier complete study is kept whole in " + earlier);
  const StudyResult r = run_study(c, o.directory, so, cancel_flag(), progress);
  if (!r.completed) return report_interrupted(kept);
  std::vector<StudyFigure> figures;
  std::vector<std::string> notes;
  if (!make_figures(r, o.directory, o.no_plots, progress, figures, notes)) return report_interrupted(kept);
  const std::string html = (std::filesystem::path(o.directory) / "report.html").string();
  write_study_report(c, r, figures, notes, html);
  remove_earlier_study(o.directory);
  print(o.json ? study_json(r, figures, notes, html).dump(2) + "\n" : study_text(c, r, notes, html));
  return 0;
}

}  // namespace

Command add_study_command(CLI::App& app) {
  auto o = std::make_shared<StudyCommandOptions>();
  CLI::App* cmd = app.add_subcommand(
      "study", "the whole clearance study of a case: flutter, freeplay band, LCO sweep, design gusts, "
               "HDF5 files, figures and an HTML report in one directory");
  add_case_options(cmd, *o);
  cmd->add_option("-o,--output", o->directory, "directory for the files and report.html")->required();
  cmd->add_option("--jobs", o->jobs, "threads of the LCO sweep (default: all cores)");
  cmd->add_option("--sweep-points", o->points, "airspeeds of the LCO sweep per direction")->capture_default_str();
  cmd->add_option("--sweep-speeds", o->speeds,
                  "LCO sweep airspeeds FROM:TO:N in m s-1 TAS (default: from the freeplay band and V_D)");
  cmd->add_flag("--no-plots", o->no_plots, "skip the figures (the report says so)");
  return {cmd, [o] { return run(*o); }};
}

}  // namespace aerosect::cli
