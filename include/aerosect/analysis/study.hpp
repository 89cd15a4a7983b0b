#pragma once
// A clearance study of one case in one call: check, linear flutter and
// divergence (state-space and p-k, every spring linearisation the case
// needs), the freeplay band, the LCO sweep up and down in airspeed with the
// describing-function overlay, the design-gust gradient sweep, the response
// to the case as given (initial conditions and gusts) and the time history
// of the largest LCO inside the envelope; for a case with one gap law, the
// preload (preload.hpp): whether the case's steady condition holds the
// surface against a stop at its airspeed, and the LCO map against the
// preload level there (preload.h5). Every result is written into one
// directory as HDF5 (plus summary.json and the case as run); the summary
// table of the report is built from the same in-memory results that were
// written, and each row names the file and object it came from.
//
// Parts that do not apply are skipped with the reason (no nonlinear spring:
// no LCO sweep; no one-minus-cosine gust: no gradient sweep). Figures and
// the HTML page are made afterwards (the driver runs the plotting tool and
// then write_study_report), so the engine neither prints nor starts
// processes.
//
// Units: airspeeds in m/s, true airspeed (TAS) unless a row says EAS;
// frequencies in Hz; angles in the summary in degrees, in the files in rad.

#include <atomic>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "aerosect/io/case.hpp"

namespace aerosect {

struct StudyOptions {
  int jobs = 1;                 // threads of the LCO sweep
  int sweep_points = 41;        // airspeeds of the LCO sweep (each direction)
  // LCO sweep airspeeds (m/s TAS); empty: chosen from the freeplay band,
  // the describing-function curve and 1.15 V_D (see study.cpp).
  std::optional<std::pair<double, double>> sweep_speeds;
  // Length of each sweep run, s; 0: 400 periods of the lowest natural
  // frequency (runs stop early once the cycle has settled).
  double sweep_duration = 0;
};

// One row of the summary table.
struct StudyRow {
  std::string id;        // stable key, e.g. "flutter_state_space"
  std::string quantity;  // what it is, in words
  std::string value;     // formatted for the page (4 significant digits)
  std::optional<double> number;  // the value as computed (SI units of `units`)
  std::string units;
  std::string source;    // "file.h5: /group@attribute" or "file.h5: dataset ..."
  std::string note;      // e.g. "margin met" / "margin NOT met", or why absent
};

struct StudyPart {
  std::string name;      // "check", "flutter", "lco-sweep", "gust-sweep", "response", "lco-history"
  bool done = false;
  std::string detail;    // what was run, or why it was skipped
  std::vector<std::string> files;  // written, relative to the study directory
};

struct StudyResult {
  std::string directory;
  std::vector<StudyRow> rows;
  std::vector<StudyPart> parts;
  std::vector<std::string> hdf5_files;  // relative, in the order written
  nlohmann::json summary;               // what summary.json holds
  bool completed = false;               // false: stopped by the cancel flag
  std::string started_utc;              // ISO 8601, e.g. "2026-12-03T04:20:00Z"
  // What the study was computed from: the case file and every input file it
  // read, with their SHA-256 (`sha256sum FILE` prints the same digest);
  // a digest is empty when the file could not be read again.
  struct Input {
    std::string role;  // "case", "recorded gust"
    std::string path;
    std::string sha256;
  };
  std::vector<Input> inputs;
};

// Runs the study into `directory` (created when missing), one stage after
// the other (check, flutter, LCO sweep and history, design gust, response).
// `progress` gets a short line per stage. When `cancel` turns true the stage
// running stops, nothing more is written but summary.json, which lists the
// stages done and says "completed": false (the result's `completed` too).
// Throws InputError for a bad case, NumericalError when a mandatory stage
// fails, OutputError when a file cannot be written.
StudyResult run_study(const Case& c, const std::string& directory, const StudyOptions& options,
                      const std::atomic<bool>* cancel = nullptr,
                      const std::function<void(const std::string&)>& progress = {});

struct StudyFigure {
  std::string path;     // PNG file
  std::string caption;
};

// Writes the self-contained HTML report (figures embedded as data URIs):
// the cautions first, the summary table (id "summary"), the parts run and
// skipped, the figures, the case as run, the conventions and the program
// version. `notes` are extra lines shown under the parts (e.g. why figures
// are missing). Throws OutputError.
void write_study_report(const Case& c, const StudyResult& r, const std::vector<StudyFigure>& figures,
                        const std::vector<std::string>& notes, const std::string& html_path);

// The driver's summaries of a finished study (the figures made and notes
// such as why figures are missing): JSON (summary.json plus report, figures
// and notes) and text (the rows, the parts, the caution).
nlohmann::json study_json(const StudyResult& r, const std::vector<StudyFigure>& figures,
                          const std::vector<std::string>& notes, const std::string& html_path);
std::string study_text(const Case& c, const StudyResult& r, const std::vector<std::string>& notes,
                       const std::string& html_path);

// A caption for a figure file written by tools/plot for a study file.
std::string study_figure_caption(const std::string& png_name);

}  // namespace aerosect
