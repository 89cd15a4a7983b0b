// The HTML page of a study: one self-contained file (styles inline, figures
// as base64 data URIs) that opens from disk in any browser.

#include <algorithm>
#include <filesystem>
#include <string>

#include <boost/archive/iterators/base64_from_binary.hpp>
#include <boost/archive/iterators/transform_width.hpp>
#include <fmt/format.h>

#include "aerosect/analysis/report.hpp"
#include "aerosect/analysis/study.hpp"
#include "aerosect/io/text_file.hpp"
#include "aerosect/units.hpp"
#include "aerosect/version.hpp"

namespace aerosect {

namespace {

std::string escape(const std::string& s) {
  std::string out;
  out.reserve(s.size());
  for (char ch : s) {
    switch (ch) {
      case '&': out += "&amp;"; break;
      case '<': out += "&lt;"; break;
      case '>': out += "&gt;"; break;
      case '"': out += "&quot;"; break;
      default: out += ch;
    }
  }
  return out;
}

std::string base64(const std::string& bytes) {
  using namespace boost::archive::iterators;
  using It = base64_from_binary<transform_width<std::string::const_iterator, 6, 8>>;
  std::string out(It(bytes.begin()), It(bytes.end()));
  out.append((3 - bytes.size() % 3) % 3, '=');
  return out;
}

const char* const kStyle = R"(
body { font-family: sans-serif; max-width: 1000px; margin: 1.5em auto; padding: 0 1em; color: #111; line-height: 1.4; }
h1 { font-size: 1.6em; margin-bottom: 0.2em; }
h2 { font-size: 1.25em; border-bottom: 1px solid #aaa; margin-top: 1.6em; }
.caution { border: 2px solid #b00; background: #fff3f3; padding: 0.6em 1em; }
.caution strong { color: #b00; }
table { border-collapse: collapse; width: 100%; font-size: 0.92em; table-layout: fixed; }
#summary col.q { width: 32%; } #summary col.v { width: 13%; } #summary col.u { width: 9%; }
#summary col.r { width: 22%; } #summary col.s { width: 24%; }
td.src { overflow-wrap: anywhere; }
th, td { border: 1px solid #bbb; padding: 0.3em 0.5em; text-align: left; vertical-align: top; }
th { background: #eee; }
td.num { text-align: right; white-space: nowrap; font-variant-numeric: tabular-nums; }
td.src { font-family: monospace; font-size: 0.85em; color: #444; }
.skipped { color: #7a5a00; }
figure { margin: 1.2em 0; }
figure img { width: 100%; max-width: 900px; border: 1px solid #ddd; }
figcaption { font-size: 0.9em; color: #333; }
pre { background: #f6f6f6; border: 1px solid #ddd; padding: 0.6em; overflow-x: auto; font-size: 0.85em; }
.meta { color: #555; font-size: 0.9em; }
)";

}  // namespace

std::string study_figure_caption(const std::string& png_name) {
  const std::string stem = std::filesystem::path(png_name).stem().string();
  struct Known {
    const char* stem;
    const char* caption;
  };
  static const Known known[] = {
      {"flutter_vg", "V-g and V-f diagrams of the linear model (nominal springs): damping ratio and "
                     "frequency of each mode against true airspeed, state-space solid and p-k dashed, "
                     "flutter crossings labelled, the V_D .. 1.15 V_D band shaded."},
      {"flutter_vg_gaps", "Freeplay bounds: state-space damping with the gap open and with it closed; "
                          "the band between their flutter speeds is where a freeplay LCO can be expected "
                          "(the describing-function curve shows it can start lower)."},
      {"sweep_bifurcation", "Bifurcation diagram: LCO amplitude against airspeed, sweeping up and "
                            "down (continuation), with the describing-function prediction and the "
                            "linear flutter speeds; where the two directions differ is hysteresis."},
      {"branch_branch", "Limit cycles solved as periodic orbits and continued in airspeed: stable "
                        "orbits solid, unstable cycles dashed (the disturbance that starts the LCO), "
                        "folds and other bifurcations marked, V_D and 1.15 V_D marked, and the LCO "
                        "sweep's periodic runs drawn over the branch (decayed runs are not LCOs and "
                        "are not drawn)."},
      {"preload_bifurcation", "LCO map against the preload level at the case airspeed: LCO amplitude against the "
                              "swept hinge moment (or incidence), sweeping up and down (continuation); the level "
                              "where the runs turn decayed is where the preload holds the surface on its stop."},
      {"gust_gust_peaks", "Design gust gradient sweep: peak responses against the gust gradient distance H "
                    "(one-minus-cosine gusts sized per CS-25.341(a) when the case asks for it; a gust given U_de by the "
                    "small-aircraft rule, design = \"cs-23\", keeps it at every H)."},
      {"response_time", "Response to the case as given: time histories with the gust velocity on top."},
      {"response_phase", "Phase portraits of the response to the case as given."},
      {"lco_time", "Time history of the largest stable LCO inside the envelope, started on its "
                   "converged orbit."},
      {"lco_phase", "Phase portraits of the largest LCO inside the envelope."},
  };
  for (const auto& k : known)
    if (stem == k.stem) return k.caption;
  if (stem.rfind("gust", 0) == 0) return "Design gust gradient sweep (" + stem + ").";
  if (stem.rfind("sweep", 0) == 0) return "LCO sweep (" + stem + ").";
  return stem;
}

void write_study_report(const Case& c, const StudyResult& r, const std::vector<StudyFigure>& figures,
                        const std::vector<std::string>& notes, const std::string& html_path) {
  std::string h;
  h += "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n";
  h += fmt::format("<title>aerosect study: {}</title>\n", escape(c.title.empty() ? c.path : c.title));
  h += fmt::format("<style>{}</style>\n</head>\n<body>\n", kStyle);
  h += fmt::format("<h1>Clearance study: {}</h1>\n", escape(c.title.empty() ? c.path : c.title));
  h += fmt::format("<p class=\"meta\">Case file <code>{}</code> &middot; aerosect {} &middot; run started {} "
                   "&middot; {} degrees of freedom &middot; {} aerodynamics</p>\n",
                   escape(c.path), kVersion, escape(r.started_utc), c.model.section.dof,
                   escape(report_header(c, "study").value("aerodynamic_model", std::string("?"))));

  // Cautions first, in plain words.
  h += "<div class=\"caution\" id=\"caution\"><p><strong>Read this first.</strong> Flutter and "
       "limit-cycle clearance is safety-critical: a wrong answer can hurt people.</p><ul>"
       "<li>This is a typical-section model. Its results are for preliminary design and trade "
       "studies only.</li>"
       "<li>Airworthiness needs the applicable regulations, ground vibration tests, flight flutter "
       "testing and the judgement of qualified, licensed engineers working under the local "
       "authority's rules.</li>"
       "<li>Freeplay limits for real hardware come from the applicable specification, not from this "
       "tool.</li>"
       "<li>The margin below is the linear model's; a freeplay limit cycle can occur well below it "
       "(see the LCO rows).</li></ul></div>\n";

  // Summary table.
  h += "<h2>Summary</h2>\n<table id=\"summary\">\n<colgroup><col class=\"q\"><col class=\"v\"><col "
       "class=\"u\"><col class=\"r\"><col class=\"s\"></colgroup>\n<thead><tr><th>Quantity</th><th>Value</th>"
       "<th>Units</th><th>Remark</th><th>Source</th></tr></thead>\n<tbody>\n";
  for (const auto& row : r.rows)
    h += fmt::format("<tr id=\"row-{}\" data-id=\"{}\"{}><td>{}</td><td class=\"{}\">{}</td><td>{}</td><td>{}</td>"
                     "<td class=\"src\">{}</td></tr>\n",
                     escape(row.id), escape(row.id),
                     row.number ? fmt::format(" data-number=\"{:.17g}\"", *row.number) : std::string(),
                     escape(row.quantity), row.number ? "num" : "txt", escape(row.value), escape(row.units),
                     escape(row.note),
                     escape(row.source));
  h += "</tbody>\n</table>\n";
  h += fmt::format(
      "<p class=\"meta\">Airspeeds are true airspeed (TAS) unless marked EAS; EAS = TAS "
      "&radic;(&rho;/{} kg m<sup>-3</sup>). Values are shown to 4 significant digits; the files hold "
      "them in full.</p>\n",
      kSeaLevelDensity);

  // Parts.
  h += "<h2>What was run</h2>\n<ul id=\"parts\">\n";
  for (const auto& p : r.parts) {
    std::string files;
    for (const auto& f : p.files) files += (files.empty() ? "" : ", ") + fmt::format("<code>{}</code>", escape(f));
    h += fmt::format("<li{}><strong>{}</strong>: {}{}</li>\n", p.done ? "" : " class=\"skipped\"",
                     escape(p.name), escape(p.detail), files.empty() ? "" : " &rarr; " + files);
  }
  for (const auto& n : notes) h += fmt::format("<li class=\"skipped\">{}</li>\n", escape(n));
  h += "</ul>\n";

  // Figures.
  h += "<h2>Figures</h2>\n";
  if (figures.empty()) h += "<p class=\"skipped\">No figures were made (see above).</p>\n";
  for (const auto& f : figures) {
    const std::string bytes = read_file_bytes(f.path);
    const std::string name = std::filesystem::path(f.path).filename().string();
    h += fmt::format("<figure id=\"fig-{}\"><img alt=\"{}\" src=\"data:image/png;base64,{}\">"
                     "<figcaption><code>{}</code>: {}</figcaption></figure>\n",
                     escape(std::filesystem::path(f.path).stem().string()), escape(f.caption),
                     base64(bytes), escape(name), escape(f.caption));
  }

  // Conventions.
  h += "<h2>Conventions</h2>\n<ul>\n"
       "<li>Plunge h positive down; pitch &alpha; positive nose up; flap (control surface) &beta; "
       "positive trailing edge down. Lift positive up; pitching moment about the elastic axis "
       "positive nose up; hinge moment positive trailing edge down.</li>\n"
       "<li>Chordwise positions in semichords b from midchord, positive aft: elastic axis a, hinge "
       "c; the CG offset x<sub>&alpha;</sub> from the elastic axis, positive aft.</li>\n"
       "<li>Loads and stiffnesses per unit span. SI units in the files (m, rad, s, N); the summary "
       "shows angles in degrees.</li>\n"
       "<li>Gust velocity positive up, given at the leading edge, penetrating chordwise.</li>\n"
       "<li>LCO amplitude: half the peak-to-peak excursion of the settled cycle. Sweeping up starts "
       "each speed from the previous speed's final state, as does sweeping down, so hysteresis "
       "shows.</li>\n"
       "<li>Flutter margin: lowest flutter or divergence speed of the linear model against 1.15 "
       "V_D in equivalent airspeed (CS-25.629 / 14 CFR 25.629 practice).</li>\n</ul>\n";

  // Case as run.
  h += "<h2>Case as run</h2>\n<pre id=\"case\">" + escape(c.text_as_run()) + "</pre>\n";
  h += fmt::format("<h2>Program and inputs</h2>\n<p class=\"meta\" id=\"version\">aerosect {}, run started {}; "
                   "every HDF5 file in this directory carries the same version, the case as run and the "
                   "conventions as attributes.</p>\n",
                   kVersion, escape(r.started_utc));
  h += "<table id=\"inputs\">\n<thead><tr><th>Input</th><th>File</th><th>SHA-256 (as <code>sha256sum</code> "
       "prints it)</th></tr></thead>\n<tbody>\n";
  for (const auto& in : r.inputs)
    h += fmt::format("<tr><td>{}</td><td><code>{}</code></td><td><code>{}</code></td></tr>\n", escape(in.role),
                     escape(in.path), in.sha256.empty() ? "(could not be read again)" : escape(in.sha256));
  h += "</tbody>\n</table>\n";
  if (!c.overrides.empty())
    h += "<p class=\"meta\">The digest is of the case file as read; the overrides given on the command line "
         "are listed at the end of the case as run above.</p>\n";
  h += "</body>\n</html>\n";
  write_file_atomically(html_path, h);
}

}  // namespace aerosect
