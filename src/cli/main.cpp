// aerosect command-line driver: parses arguments, dispatches to the engine,
// prints its reports and turns its typed errors into messages and exit codes.
//   0 success; 1 internal error; 2 bad input; 3 numerical trouble;
//   4 output could not be written; 128 + signal number when stopped by a
//   signal: 130 for SIGINT (Ctrl-C), 143 for SIGTERM.
// The first SIGINT or SIGTERM stops the run cleanly (simulate keeps the
// partial time history as NAME.incomplete.h5; sweep keeps every finished
// point in its journal and resumes from it when run again); a second one
// ends the program at once, as the signal's default action does.

#include <atomic>
#include <cerrno>
#include <csignal>
#include <chrono>
#include <cmath>
#include <numbers>
#include <cstdlib>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <mutex>
#include <thread>
#include <unistd.h>
#include <iostream>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>
#include <fmt/format.h>

#include "aerosect/analysis/branch_report.hpp"
#include "aerosect/analysis/continuation.hpp"
#include "aerosect/analysis/flutter.hpp"
#include "aerosect/analysis/flutter_report.hpp"
#include "aerosect/analysis/gust_sweep.hpp"
#include "aerosect/analysis/study.hpp"
#include "aerosect/analysis/sweep.hpp"
#include "aerosect/analysis/report.hpp"
#include "aerosect/analysis/simulate.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/io/hdf5_writer.hpp"
#include "aerosect/units.hpp"
#include "aerosect/version.hpp"

namespace {

// Set by the first SIGINT/SIGTERM (and by a sweep whose journal cannot be
// written): the engine stops at the next step.
std::atomic<bool> g_cancel{false};
volatile std::sig_atomic_t g_signal = 0;  // the first signal received
extern "C" void on_signal(int s) {
  if (g_signal != 0) {  // the second: stop now
    std::signal(s, SIG_DFL);
    std::raise(s);
    return;
  }
  g_signal = s;
  g_cancel.store(true);
}
int signal_status() { return 128 + static_cast<int>(g_signal); }

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
  aerosect::SimulationSummary s;
  try {
    s = aerosect::simulate(c, model, writer, &g_cancel);
  } catch (const aerosect::NumericalError& e) {
    std::cerr << "aerosect: " << e.what() << "\n";
    if (!writer.final_path().empty())
      std::cerr << "aerosect: the run up to the trouble is kept in " << writer.final_path() << "\n";
    return 3;
  }
  print(o.json ? aerosect::simulation_json(c, s, writer.final_path()).dump(2) + "\n"
               : aerosect::simulation_text(c, s, writer.final_path()));
  if (!s.completed) {
    std::cerr << "aerosect: run " << s.status << " at t = " << s.end_time
              << " s; partial result kept in " << writer.final_path() << "\n";
    return g_signal != 0 ? signal_status() : 3;
  }
  return 0;
}

// "FROM:TO:N": the three numbers, or nullopt when the text is not of that form.
struct Range {
  double from, to;
  long n;
  // N evenly spaced values from FROM to TO (FROM alone when N = 1).
  std::vector<double> values() const {
    std::vector<double> v;
    for (long i = 0; i < n; ++i) v.push_back(n == 1 ? from : from + (to - from) * i / (n - 1));
    return v;
  }
};
std::optional<Range> parse_range(const std::string& text) {
  Range r{0, 0, 0};
  char c1 = 0, c2 = 0;
  std::istringstream in(text);
  in >> r.from >> c1 >> r.to >> c2 >> r.n;
  if (!in || c1 != ':' || c2 != ':' || !(in >> std::ws).eof() || !std::isfinite(r.from) ||
      !std::isfinite(r.to))
    return std::nullopt;
  return r;
}

// "FROM:TO:N" -> N speeds from FROM to TO (m/s), ascending.
std::vector<double> parse_speeds(const std::string& text) {
  const auto r = parse_range(text);
  if (!r || !(r->from >= 0) || !(r->to > r->from) || r->n < 2 || r->n > 100000)
    throw aerosect::InputError({"--speeds " + text, 0, 0}, "--speeds", text,
                               "is not a valid speed range",
                               "FROM:TO:N with 0 <= FROM < TO (m/s, true airspeed) and 2 <= N "
                               "<= 100000, e.g. --speeds 10:120:221");
  std::vector<double> s = r->values();
  if (s.front() == 0.0) s.front() = 1e-6 * r->to;  // U = 0 has no reduced frequency
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
  const auto r = parse_range(text);
  if (!r || !(r->from > 0) || !(r->to >= r->from) || r->n < 1 || r->n > 10000)
    throw aerosect::InputError({"--gradients " + text, 0, 0}, "--gradients", text,
                               "is not a valid gradient range",
                               "FROM:TO:N with 0 < FROM <= TO (m) and 1 <= N <= 10000, e.g. "
                               "--gradients 9.144:106.68:12");
  return r->values();
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

// "KEY=FROM:TO:N" for --vary.
aerosect::SweepAxis parse_vary(const std::string& text) {
  const auto eq = text.find('=');
  const auto r = eq != std::string::npos && eq > 0 ? parse_range(text.substr(eq + 1)) : std::nullopt;
  if (!r || !(r->to > r->from) || r->n < 2 || r->n > 1000000)
    throw aerosect::InputError({"--vary " + text, 0, 0}, "--vary", text, "is not a valid sweep",
                               "KEY=FROM:TO:N with a numeric case key, FROM < TO and N >= 2, e.g. "
                               "--vary nondimensional.reduced_speed=1:7:61");
  return {text.substr(0, eq), r->values()};
}

int run_sweep_command(const Common& o, const std::string& output, const std::vector<std::string>& vary,
                      const std::string& direction, const std::string& restart, int jobs,
                      const std::string& shard, bool traces) {
  const aerosect::Case c = aerosect::load_case(o.case_path, o.overrides);
  aerosect::SweepRequest req;
  req.case_text = c.text;
  req.case_path = c.path;
  req.overrides = o.overrides;
  if (vary.empty() || vary.size() > 2)
    throw aerosect::InputError({"--vary", 0, 0}, "--vary", "", "give one or two --vary options",
                               "--vary KEY=FROM:TO:N [--vary KEY2=FROM:TO:N]");
  for (const auto& v : vary) req.options.axes.push_back(parse_vary(v));
  req.options.up = direction != "down";
  req.options.down = direction != "up";
  req.options.continuation = restart == "continue";
  req.options.traces = traces;
  req.options.jobs = jobs > 0 ? jobs : static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
  if (!shard.empty()) {
    int k = 0, n = 0;
    char slash = 0;
    std::istringstream in(shard);
    in >> k >> slash >> n;
    if (!in || slash != '/' || n < 1 || k < 1 || k > n || !(in >> std::ws).eof())
      throw aerosect::InputError({"--shard " + shard, 0, 0}, "--shard", shard, "is not a shard",
                                 "K/N with 1 <= K <= N, e.g. --shard 2/8");
    req.options.shard_index = k;
    req.options.shard_count = n;
  }
  // The journal holds every finished point; its first line identifies the sweep.
  const nlohmann::json id = aerosect::request_json(req);
  const std::string journal = output + ".journal";
  // A line counts when it ends in a newline and parses: a run killed while
  // writing (kill -9, power loss) leaves at most one cut line at the end,
  // which is cut off before new points are appended.
  std::vector<aerosect::SweepPoint> done;
  if (std::filesystem::exists(journal)) {
    std::ifstream in(journal, std::ios::binary);
    std::string line;
    std::streamoff good_end = 0;  // bytes of the complete lines read
    auto complete_line = [&] { return std::getline(in, line) && !in.eof(); };
    if (complete_line()) {
      nlohmann::json head = nlohmann::json::parse(line, nullptr, false);
      if (head.is_discarded() || head != id)
        throw aerosect::InputError({journal, 1, 0}, "", "",
                                   "this journal belongs to a different sweep",
                                   "the same command as the interrupted run, or remove the journal / "
                                   "choose another -o");
      good_end = in.tellg();
      while (complete_line()) {
        nlohmann::json pj = nlohmann::json::parse(line, nullptr, false);
        if (pj.is_discarded()) break;
        done.push_back(aerosect::point_from_json(pj));
        good_end = in.tellg();
      }
    }
    in.close();
    std::error_code ec;
    const auto size = std::filesystem::file_size(journal, ec);
    if (!done.empty() && !ec && size > static_cast<std::uintmax_t>(good_end)) {
      std::filesystem::resize_file(journal, static_cast<std::uintmax_t>(good_end), ec);
      if (ec) throw aerosect::OutputError(journal, "cannot cut off its incomplete last line: " + ec.message());
      std::cerr << "aerosect: " << journal << ": dropped " << size - static_cast<std::uintmax_t>(good_end)
                << " bytes after the last complete point (cut by the interruption)\n";
    }
    if (!done.empty())
      std::cerr << "aerosect: resuming: " << done.size() << " finished points read from " << journal << "\n";
  }
  std::ofstream jout;
  {
    const bool fresh = done.empty();
    jout.open(journal, fresh ? std::ios::trunc : std::ios::app);
    if (!jout)
      throw aerosect::OutputError(journal, std::string("cannot open the sweep journal for writing: ") +
                                               std::strerror(errno));
    if (fresh) jout << id.dump() << "\n" << std::flush;
    if (!jout)
      throw aerosect::OutputError(journal, std::string("cannot write the sweep journal: ") + std::strerror(errno));
  }
  std::size_t total = 0;
  {
    const std::size_t n2 = req.options.axes.size() > 1 ? req.options.axes[1].values.size() : 1;
    const std::size_t chains = (req.options.up ? 1 : 0) + (req.options.down ? 1 : 0);
    total = chains * n2 * req.options.axes[0].values.size() / static_cast<std::size_t>(req.options.shard_count);
  }
  std::mutex mu;
  std::string journal_failure;  // why a point could not be journaled; the sweep stops then
  std::size_t finished = done.size();
  const bool tty = isatty(2);
  const auto t0 = std::chrono::steady_clock::now();
  auto on_point = [&](const aerosect::SweepPoint& p) {
    std::lock_guard<std::mutex> lock(mu);
    if (!journal_failure.empty()) return;
    errno = 0;
    jout << aerosect::point_json(p).dump() << "\n" << std::flush;
    if (!jout) {
      journal_failure = errno != 0 ? std::strerror(errno) : "write failed";
      g_cancel.store(true);
      return;
    }
    ++finished;
    if (tty) {
      const double el = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
      const double eta = finished > done.size() ? el / static_cast<double>(finished - done.size()) *
                                                      static_cast<double>(total > finished ? total - finished : 0)
                                                : 0.0;
      std::fprintf(stderr, "\r  %zu/%zu points, %.1f s elapsed, ETA %.1f s   ", finished, total, el, eta);
    }
  };
  const std::vector<aerosect::SweepPoint> pts = aerosect::run_sweep(req, done, on_point, &g_cancel);
  if (tty) std::fprintf(stderr, "\n");
  if (!journal_failure.empty())
    throw aerosect::OutputError(journal, fmt::format("writing a finished point failed ({}); the {} points "
                                                     "before it are kept there: make room and run the "
                                                     "same command again to continue",
                                                     journal_failure, finished));
  if (g_signal != 0) {
    std::cerr << "aerosect: interrupted by signal " << static_cast<int>(g_signal) << "; " << finished
              << " finished points kept in " << journal << " (run the same command again to continue)\n";
    return signal_status();
  }
  aerosect::write_sweep_file(output, c, req, pts);
  jout.close();
  std::filesystem::remove(journal);
  if (o.json) {
    nlohmann::json j = aerosect::sweep_json(c, req, pts, output);
    j["points_resumed"] = done.size();  // read from the journal, not recomputed
    print(j.dump(2) + "\n");
  } else {
    print(aerosect::sweep_text(c, req, pts, output));
  }
  return 0;
}

struct OrbitsOptions {
  std::string output, key, start = "auto", watch;
  std::optional<double> from, to, start_amplitude;
  int points = 200;
};

// The orbit branch: progress on a terminal; the first signal stops it and
// the points so far are written (root attribute complete = 0).
int run_orbits(const Common& o, const OrbitsOptions& oo) {
  const aerosect::Case c = aerosect::load_case(o.case_path, o.overrides);
  aerosect::BranchOptions bo;
  bo.key = oo.key;
  bo.from = oo.from;
  bo.to = oo.to;
  bo.max_points = oo.points;
  if (oo.points < 2 || oo.points > 100000)
    throw aerosect::InputError({"--points", 0, 0}, "--points", std::to_string(oo.points),
                               "is out of range", "2 to 100000 points");
  bo.start = oo.start == "hopf"        ? aerosect::BranchStart::kHopf
             : oo.start == "march"      ? aerosect::BranchStart::kMarch
             : oo.start == "describing" ? aerosect::BranchStart::kDescribing
                                        : aerosect::BranchStart::kAuto;
  if (oo.start_amplitude) {
    if (!(*oo.start_amplitude > 0) || !std::isfinite(*oo.start_amplitude))
      throw aerosect::InputError({"--start-amplitude", 0, 0}, "--start-amplitude",
                                 fmt::format("{}", *oo.start_amplitude), "is not a positive amplitude",
                                 "a positive number, degrees for pitch/flap, m for plunge");
    bo.start_amplitude = *oo.start_amplitude;
  }
  if (!oo.watch.empty()) {
    const int j = aerosect::dof_index(oo.watch);
    if (j < 0 || j >= c.model.section.dof)
      throw aerosect::InputError({"--watch", 0, 0}, "--watch", oo.watch, "is not a DOF of this case",
                                 c.model.section.dof == 3 ? "plunge, pitch or flap" : "plunge or pitch");
    bo.orbit.watched_dof = j;
  }
  if (oo.start_amplitude) {
    const int w = bo.orbit.watched_dof >= 0 ? bo.orbit.watched_dof
                  : aerosect::orbit_watched_dof(aerosect::AeroelasticModel(c.model), -1);
    if (w != 0) bo.start_amplitude *= aerosect::kRadPerDeg;
  }
  const bool tty = isatty(2);
  const auto t0 = std::chrono::steady_clock::now();
  auto progress = [&](const aerosect::BranchPoint& p, int n) {
    if (!tty) return;
    const double el = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    std::fprintf(stderr, "\r  %d orbits, parameter %.6g, %s, %.1f s elapsed   ", n, p.parameter, p.orbit.stable ? "stable  " : "unstable", el);
  };
  const aerosect::Branch b = aerosect::continue_branch(c, bo, &g_cancel, progress);
  if (tty) std::fprintf(stderr, "\n");
  aerosect::write_branch_file(oo.output, c, b);
  if (g_signal != 0) {
    std::cerr << "aerosect: interrupted by signal " << static_cast<int>(g_signal) << "; the " << b.points.size()
              << " orbits found so far are kept in " << oo.output << " (complete = 0)\n";
    return signal_status();
  }
  print(o.json ? aerosect::branch_json(c, b, oo.output).dump(2) + "\n" : aerosect::branch_text(c, b, oo.output));
  return 0;
}

// The plotting tool: $AEROSECT_PLOT, else tools/plot of the source tree
// this binary was built from.
std::string plot_tool() {
  if (const char* env = std::getenv("AEROSECT_PLOT"); env && *env) return env;
  return AEROSECT_PLOT_TOOL;
}

std::string shell_quote(const std::string& s) {
  std::string q = "'";
  for (char ch : s) q += ch == '\'' ? std::string("'\\''") : std::string(1, ch);
  return q + "'";
}

int run_study_command(const Common& o, const std::string& dir, int jobs, int points,
                      const std::string& speeds, bool no_plots) {
  const aerosect::Case c = aerosect::load_case(o.case_path, o.overrides);
  aerosect::StudyOptions so;
  so.jobs = jobs > 0 ? jobs : static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
  so.sweep_points = points;
  if (!speeds.empty()) {
    const auto r = parse_range(speeds);
    if (!r || !(r->from > 0) || !(r->to > r->from) || r->n < 2 || r->n > 100000)
      throw aerosect::InputError({"--sweep-speeds " + speeds, 0, 0}, "--sweep-speeds", speeds,
                                 "is not a valid speed range",
                                 "FROM:TO:N with 0 < FROM < TO (m/s, true airspeed) and 2 <= N <= 100000, "
                                 "e.g. --sweep-speeds 10:90:41");
    so.sweep_speeds = std::make_pair(r->from, r->to);
    so.sweep_points = static_cast<int>(r->n);
  }
  const auto t0 = std::chrono::steady_clock::now();
  auto progress = [&](const std::string& stage) {
    const double el = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    std::fprintf(stderr, "aerosect study [%6.1f s]: %s\n", el, stage.c_str());
  };
  const aerosect::StudyResult r = aerosect::run_study(c, dir, so, &g_cancel, progress);
  if (g_signal != 0) {
    std::cerr << "aerosect: interrupted; the files finished so far are kept in " << dir << "\n";
    return signal_status();
  }
  std::vector<aerosect::StudyFigure> figures;
  std::vector<std::string> notes;
  const std::string tool = plot_tool();
  if (no_plots) {
    notes.push_back("figures not made: --no-plots was given");
  } else if (!std::filesystem::exists(tool)) {
    notes.push_back("figures not made: the plotting tool " + tool +
                    " was not found (set AEROSECT_PLOT to tools/plot)");
  } else {
    progress("figures (" + tool + ")");
    for (const auto& h5 : r.hdf5_files) {
      const std::string file = (std::filesystem::path(dir) / h5).string();
      const std::string cmd = shell_quote(tool) + " " + shell_quote(file) + " -o " + shell_quote(dir) + " 2>&1";
      FILE* pipe = ::popen(cmd.c_str(), "r");
      if (!pipe) {
        notes.push_back("figures of " + h5 + " not made: cannot run " + tool);
        continue;
      }
      std::string out;
      char buf[4096];
      while (std::size_t n = std::fread(buf, 1, sizeof buf, pipe)) out.append(buf, n);
      const int status = ::pclose(pipe);
      std::istringstream lines(out);
      std::string line, last;
      while (std::getline(lines, line)) {
        if (line.empty()) continue;
        last = line;
        if (line.size() > 4 && line.compare(line.size() - 4, 4, ".png") == 0 && std::filesystem::exists(line))
          figures.push_back({line, aerosect::study_figure_caption(line)});
      }
      if (status != 0) notes.push_back("figures of " + h5 + " not made: the plotting tool said: " + last);
    }
  }
  const std::string html = (std::filesystem::path(dir) / "report.html").string();
  aerosect::write_study_report(c, r, figures, notes, html);
  if (o.json) {
    nlohmann::json j = r.summary;
    j["report"] = html;
    j["figures"] = nlohmann::json::array();
    for (const auto& f : figures) j["figures"].push_back(f.path);
    j["notes"] = notes;
    print(j.dump(2) + "\n");
  } else {
    std::string t = fmt::format("aerosect study of {}\n\n", c.path);
    for (const auto& row : r.rows)
      t += fmt::format("  {:<70} {:>14} {:<8} {}\n", row.quantity, row.value, row.units, row.note);
    t += "\n";
    for (const auto& p : r.parts) t += fmt::format("  {:<12} {}\n", p.name, p.done ? "done" : p.detail);
    for (const auto& n : notes) t += "  " + n + "\n";
    t += fmt::format("\n{}\n\nreport: {}\n", aerosect::kSafetyCaution, html);
    print(t);
  }
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

  Common sweep_opts;
  std::string sweep_out, sweep_direction = "both", sweep_restart = "continue", sweep_shard;
  std::vector<std::string> sweep_vary;
  int sweep_jobs = 0;
  bool sweep_traces = false;
  CLI::App* sweep = app.add_subcommand(
      "sweep", "LCO map: response class, amplitude and frequency against one or two case keys");
  add_common(sweep, sweep_opts);
  sweep->add_option("-o,--output", sweep_out, "HDF5 file for the map")->required();
  sweep->add_option("--vary", sweep_vary, "KEY=FROM:TO:N (once or twice)")->required();
  sweep->add_option("--direction", sweep_direction, "up, down or both")
      ->check(CLI::IsMember({"up", "down", "both"}))
      ->capture_default_str();
  sweep->add_option("--restart", sweep_restart,
                    "continue (each point from the previous point's final state) or fresh")
      ->check(CLI::IsMember({"continue", "fresh"}))
      ->capture_default_str();
  sweep->add_option("--jobs", sweep_jobs, "threads (default: all cores)");
  sweep->add_option("--shard", sweep_shard, "K/N: run the K-th of N deterministic parts");
  sweep->add_flag("--traces", sweep_traces,
                  "keep one settled cycle of every DOF per periodic point in the map");

  std::vector<std::string> merge_inputs;
  std::string merge_out;
  bool merge_json = false;
  CLI::App* merge = app.add_subcommand("merge", "join the shard files of one sweep into one map");
  merge->add_option("FILES", merge_inputs, "shard files (from sweep --shard K/N)")->required();
  merge->add_option("-o,--output", merge_out, "merged HDF5 map")->required();
  merge->add_flag("--json", merge_json, "print a machine-readable summary");

  Common study_opts;
  std::string study_dir, study_speeds;
  int study_jobs = 0, study_points = 41;
  bool study_no_plots = false;
  CLI::App* study = app.add_subcommand(
      "study", "the whole clearance study of a case: flutter, freeplay band, LCO sweep, design gusts, "
               "HDF5 files, figures and an HTML report in one directory");
  add_common(study, study_opts);
  study->add_option("-o,--output", study_dir, "directory for the files and report.html")->required();
  study->add_option("--jobs", study_jobs, "threads of the LCO sweep (default: all cores)");
  study->add_option("--sweep-points", study_points, "airspeeds of the LCO sweep per direction")
      ->capture_default_str();
  study->add_option("--sweep-speeds", study_speeds,
                    "LCO sweep airspeeds FROM:TO:N in m/s TAS (default: from the freeplay band and V_D)");
  study->add_flag("--no-plots", study_no_plots, "skip the figures (the report says so)");

  Common orbits_opts;
  OrbitsOptions orbits_o;
  CLI::App* orbits = app.add_subcommand(
      "orbits", "limit cycles solved by shooting and continued in a case key: stable and unstable "
                "branches, Floquet multipliers, folds -> HDF5 branch file");
  add_common(orbits, orbits_opts);
  orbits->add_option("-o,--output", orbits_o.output, "HDF5 branch file")->required();
  orbits->add_option("--key", orbits_o.key,
                     "numeric case key to continue in (default flow.airspeed, or "
                     "nondimensional.reduced_speed for a nondimensional case)");
  orbits->add_option("--from", orbits_o.from, "parameter window start (default: a tenth of the case's value)");
  orbits->add_option("--to", orbits_o.to, "parameter window end (default: four times the case's value)");
  orbits->add_option("--start", orbits_o.start, "auto, hopf, march or describing")
      ->check(CLI::IsMember({"auto", "hopf", "march", "describing"}))
      ->capture_default_str();
  orbits->add_option("--start-amplitude", orbits_o.start_amplitude,
                     "hopf start: amplitude of the first orbit (degrees for pitch/flap, m for plunge)");
  orbits->add_option("--points", orbits_o.points, "most orbits on the branch")->capture_default_str();
  orbits->add_option("--watch", orbits_o.watch, "DOF whose maxima define the section (plunge, pitch, flap)");

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    return app.exit(e) == 0 ? 0 : 2;
  }

  const int status = [&]() -> int {
    try {
      if (*check) return run_check(check_opts);
      if (*orbits) return run_orbits(orbits_opts, orbits_o);
      if (*study)
        return run_study_command(study_opts, study_dir, study_jobs, study_points, study_speeds, study_no_plots);
      if (*sim) return run_simulate(sim_opts, output);
      if (*gust) return run_gust(gust_opts, gust_out, gust_gradients);
      if (*merge) {
        aerosect::merge_sweep_files(merge_inputs, merge_out);
        print(merge_json ? nlohmann::json{{"command", "merge"}, {"inputs", merge_inputs}, {"output", merge_out}}.dump(2) + "\n"
                         : "merged " + std::to_string(merge_inputs.size()) + " shard files into " + merge_out + "\n");
        return 0;
      }
      if (*sweep)
        return run_sweep_command(sweep_opts, sweep_out, sweep_vary, sweep_direction, sweep_restart,
                                 sweep_jobs, sweep_shard, sweep_traces);
      if (*flutter)
        return run_flutter(flutter_opts, flutter_out, flutter_speeds, flutter_method, flutter_amplitude);
    } catch (const aerosect::InputError& e) {
      std::cerr << "aerosect: error in the case:\n" << aerosect::wrapped(e.what()) << "\n";
      return 2;
    } catch (const aerosect::NumericalError& e) {
      std::cerr << aerosect::wrapped(std::string("aerosect: ") + e.what()) << "\n";
      return 3;
    } catch (const aerosect::OutputError& e) {
      std::cerr << aerosect::wrapped(std::string("aerosect: ") + e.what()) << "\n";
      return 4;
    } catch (const std::exception& e) {
      std::cerr << aerosect::wrapped(std::string("aerosect: ") + e.what()) << "\n";
      return 1;
    }
    return 0;
  }();
  // After an HDF5 failure its shutdown at exit may crash (hdf5_writer.hpp).
  if (aerosect::hdf5_shutdown_unsafe()) {
    std::cout.flush();
    std::cerr.flush();
    std::fflush(nullptr);
    std::_Exit(status);
  }
  return status;
}
