// aerosect._core: the Python module's binding to the library (pybind11).
// A thin driver like src/cli/: it loads cases, runs the library's analyses
// and has the library's own writers write each result file (the same HDF5
// document the command line writes, into a path the Python side chooses
// and reads back into memory); the Python package (python/aerosect/) turns
// the files into xarray Datasets and the summaries (the command line's
// --json text) into dicts.
//
// Every analysis runs on a worker thread with the GIL released; the calling
// thread polls PyErr_CheckSignals every 50 ms, so Ctrl-C (KeyboardInterrupt
// or any exception a signal handler raises) sets the cancel flag the engine
// is handed, the engine stops at its next check, and the exception is
// raised once the worker has ended. Other Python threads run meanwhile.
// (Python runs signal handlers in its main thread only: a run started from
// another thread is not stopped by Ctrl-C.)
//
// The engine's typed errors become aerosect.InputError (a ValueError),
// aerosect.NumericalError (a RuntimeError) and aerosect.OutputError (an
// OSError), with the message the command line prints and the error's
// fields as attributes.

#include <atomic>
#include <chrono>
#include <exception>
#include <filesystem>
#include <future>
#include <optional>
#include <string>
#include <thread>
#include <utility>
#include <vector>

#include <pybind11/pybind11.h>
#include <pybind11/stl.h>

#include "aerosect/analysis/branch_report.hpp"
#include "aerosect/analysis/continuation.hpp"
#include "aerosect/analysis/flutter.hpp"
#include "aerosect/analysis/flutter_report.hpp"
#include "aerosect/analysis/gust_sweep.hpp"
#include "aerosect/analysis/options.hpp"
#include "aerosect/analysis/report.hpp"
#include "aerosect/analysis/simulate.hpp"
#include "aerosect/analysis/study.hpp"
#include "aerosect/analysis/study_folder.hpp"
#include "aerosect/analysis/sweep.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/io/hdf5_writer.hpp"
#include "aerosect/io/output_claim.hpp"
#include "aerosect/version.hpp"

namespace py = pybind11;

namespace aerosect {

namespace {

// Runs `work(cancel)` on a worker thread with the GIL released (above).
// `work` returns a value; a signal's exception wins over the worker's result
// or error (a Cancelled the flag caused, or a run cut short).
template <class Work>
auto run_interruptible(Work work) -> decltype(work(static_cast<const std::atomic<bool>*>(nullptr))) {
  using Result = decltype(work(static_cast<const std::atomic<bool>*>(nullptr)));
  std::atomic<bool> cancel{false};
  bool interrupted = false;
  std::optional<Result> result;
  std::exception_ptr failure;
  {
    py::gil_scoped_release nogil;
    std::promise<void> finished;
    std::future<void> done = finished.get_future();
    std::thread worker([&] {
      try {
        result.emplace(work(&cancel));
      } catch (...) {
        failure = std::current_exception();
      }
      finished.set_value();
    });
    while (done.wait_for(std::chrono::milliseconds(50)) != std::future_status::ready) {
      if (interrupted) continue;
      py::gil_scoped_acquire gil;
      if (PyErr_CheckSignals() != 0) {  // the handler's exception stays set
        interrupted = true;
        cancel.store(true);
      }
    }
    worker.join();
  }
  if (interrupted) throw py::error_already_set();
  if (failure) std::rethrow_exception(failure);
  return std::move(*result);
}

// Releases the claims the library's writers took on these paths
// (output_claim.hpp) when the call ends, however it ends: a Python session
// writes many files in one process.
struct ReleaseClaims {
  std::vector<std::string> paths;
  ~ReleaseClaims() {
    for (const auto& p : paths) release_output_claim(p);
  }
};

// --- Analyses: each writes `path` and returns the --json summary text -------

// simulate: (summary, the file written, completed). An incomplete run keeps
// NAME.incomplete.h5 (its path is returned).
py::tuple simulate_case(const Case& c, const std::string& path) {
  struct Outcome {
    SimulationSummary summary;
    std::string written;
  };
  const ReleaseClaims claims{{path, Hdf5TimeHistoryWriter::incomplete_path(path)}};
  const Outcome o = run_interruptible([&](const std::atomic<bool>* cancel) {
    const AeroelasticModel model(c.model);
    Hdf5TimeHistoryWriter writer(path);
    Outcome out;
    out.summary = simulate(c, model, writer, cancel);
    out.written = writer.final_path();
    return out;
  });
  return py::make_tuple(simulation_json(c, o.summary, o.written).dump(), o.written, o.summary.completed);
}

std::string flutter_case(const Case& c, const std::string& path, const std::string& speeds,
                         const std::string& method, const std::optional<double>& amplitude) {
  FlutterOptions fo = flutter_options(speeds, method, amplitude);
  const ReleaseClaims claims{{path}};
  const std::string summary = run_interruptible([&](const std::atomic<bool>* cancel) {
    fo.cancel = cancel;
    const FlutterReport r = flutter_analysis(c, fo);
    write_flutter_file(path, c, r);
    return flutter_json(c, r, path).dump();
  });
  return summary;
}

std::string gust_case(const Case& c, const std::string& path, const std::string& gradients, bool keep_initial) {
  const std::vector<double> g = gust_gradients(gradients);
  const ReleaseClaims claims{{path}};
  const std::string summary = run_interruptible([&](const std::atomic<bool>* cancel) {
    const GustSweep s = gust_gradient_sweep(c, g, cancel, keep_initial ? GustStart::kCaseInitial : GustStart::kRest);
    write_gust_sweep_file(path, c, s);
    return gust_sweep_json(c, s, path).dump();
  });
  return summary;
}

// The LCO map, as `aerosect sweep` runs it but without a journal (a Python
// run is not resumed; an interrupted one keeps nothing).
std::string sweep_case(const Case& c, const std::string& path, SweepSettings settings) {
  settings.overrides = c.overrides;
  SweepRequest req = sweep_request(settings);
  req.case_text = c.text;
  req.case_path = c.path;
  check_swept_values(req);
  const ReleaseClaims claims{{path}};
  const std::string summary = run_interruptible([&](const std::atomic<bool>* cancel) {
    std::optional<FlutterReport> overlay;
    std::exception_ptr overlay_failure;
    const std::vector<SweepPoint> pts = run_sweep(req, {}, [](const SweepPoint&) {}, cancel, [&] {
      try {
        overlay = sweep_overlay(c, req, cancel);
      } catch (...) {
        overlay_failure = std::current_exception();
      }
    });
    stop_if_cancelled(cancel);
    if (overlay_failure) std::rethrow_exception(overlay_failure);
    write_sweep_file(path, c, req, pts, overlay ? &*overlay : nullptr);
    nlohmann::json j = sweep_json(c, req, pts, path);
    j["points_resumed"] = 0;
    return j.dump();
  });
  return summary;
}

std::string orbits_case(const Case& c, const std::string& path, const BranchSettings& settings) {
  check_branch_settings(settings);
  const BranchOptions bo = branch_options(c, settings);
  const ReleaseClaims claims{{path}};
  const std::string summary = run_interruptible([&](const std::atomic<bool>* cancel) {
    const Branch b = continue_branch(c, bo, cancel);
    stop_if_cancelled(cancel);
    write_branch_file(path, c, b);
    return branch_json(c, b, path).dump();
  });
  return summary;
}

// The study's stages into `directory` (as `aerosect study` runs them; the
// figures and the report are made by the Python side, then
// finish_study below). Interrupted, KeyboardInterrupt is raised; the files
// finished so far stay in the folder and summary.json lists the stages done.
StudyResult study_case(const Case& c, const std::string& directory, const std::optional<int>& jobs, int points,
                       const std::string& speeds) {
  const StudyOptions so = study_options(jobs, points, speeds);
  ReleaseClaims claims;
  return run_interruptible([&](const std::atomic<bool>* cancel) {
    StudyResult r = run_study(c, directory, so, cancel);
    for (const auto& f : r.hdf5_files) claims.paths.push_back((std::filesystem::path(directory) / f).string());
    stop_if_cancelled(cancel);
    return r;
  });
}

// --- Errors --------------------------------------------------------------------

py::object g_input_error, g_numerical_error, g_output_error;

// Raises `type(message)` with the error's fields as attributes.
void raise_with(const py::object& type, const std::string& message, const py::dict& fields) {
  py::object e = type(message);
  for (const auto& [k, v] : fields) py::setattr(e, k, v);
  PyErr_SetObject(type.ptr(), e.ptr());
}

void translate(std::exception_ptr p) {
  try {
    if (p) std::rethrow_exception(p);
  } catch (const InputError& e) {
    py::dict f;
    f["file"] = e.where().file;
    f["line"] = e.where().line;
    f["column"] = e.where().column;
    f["key"] = e.key();
    f["value"] = e.value();
    f["problem"] = e.problem();
    f["allowed"] = e.allowed();
    raise_with(g_input_error, e.what(), f);
  } catch (const NumericalError& e) {
    py::dict f;
    f["time"] = e.time();
    raise_with(g_numerical_error, e.what(), f);
  } catch (const OutputError& e) {
    py::dict f;
    f["path"] = e.path();
    raise_with(g_output_error, e.what(), f);
  } catch (const Cancelled&) {
    PyErr_SetString(PyExc_KeyboardInterrupt, "aerosect: run stopped");
  }
}

}  // namespace

}  // namespace aerosect

PYBIND11_MODULE(_core, m) {
  using namespace aerosect;
  m.doc() = "aerosect's C++ library (use the aerosect package, not this module)";
  m.attr("version") = std::string(kVersion);

  // The exception classes (made with the aerosect package's docstrings in
  // python/aerosect/__init__.py) are handed in once at import.
  m.def("set_exception_types", [](py::object input, py::object numerical, py::object output) {
    g_input_error = std::move(input);
    g_numerical_error = std::move(numerical);
    g_output_error = std::move(output);
  });
  py::register_exception_translator(&translate);
  // Kept until the interpreter ends without touching Python at exit.
  py::module_::import("atexit").attr("register")(py::cpp_function([] {
    g_input_error.release();
    g_numerical_error.release();
    g_output_error.release();
  }));

  py::class_<Case>(m, "Case")
      .def_readonly("path", &Case::path)
      .def_readonly("text", &Case::text)
      .def_readonly("overrides", &Case::overrides)
      .def_readonly("title", &Case::title)
      .def_readonly("input_form", &Case::input_form)
      .def("text_as_run", &Case::text_as_run);

  m.def("load_case", &load_case, py::arg("path"), py::arg("overrides"));
  m.def("parse_case", &parse_case, py::arg("text"), py::arg("name"), py::arg("overrides"));
  m.def("check", [](const Case& c) { return check_json(c, check_case(c)).dump(); });

  m.def("simulate", &simulate_case, py::arg("case"), py::arg("path"));
  m.def("flutter", &flutter_case, py::arg("case"), py::arg("path"), py::arg("speeds"), py::arg("method"),
        py::arg("amplitude"));
  m.def("gust", &gust_case, py::arg("case"), py::arg("path"), py::arg("gradients"), py::arg("keep_initial"));
  m.def(
      "sweep",
      [](const Case& c, const std::string& path, const std::vector<std::string>& vary, const std::string& direction,
         const std::string& restart, const std::optional<int>& jobs, bool traces, bool with_gusts) {
        return sweep_case(c, path,
                          {.overrides = {}, .vary = vary, .direction = direction, .restart = restart, .jobs = jobs, .shard = "",
                           .traces = traces, .with_gusts = with_gusts});
      },
      py::arg("case"), py::arg("path"), py::arg("vary"), py::arg("direction"), py::arg("restart"), py::arg("jobs"),
      py::arg("traces"), py::arg("with_gusts"));
  m.def(
      "orbits",
      [](const Case& c, const std::string& path, const std::string& key, const std::optional<double>& from,
         const std::optional<double>& to, const std::string& start, const std::optional<double>& start_amplitude,
         int points, const std::string& watch) {
        return orbits_case(c, path,
                           {.key = key, .from = from, .to = to, .start = start, .start_amplitude = start_amplitude,
                            .points = points, .watch = watch});
      },
      py::arg("case"), py::arg("path"), py::arg("key"), py::arg("from_"), py::arg("to"), py::arg("start"),
      py::arg("start_amplitude"), py::arg("points"), py::arg("watch"));

  // The study in three steps, as `aerosect study` takes them (src/cli/study.cpp).
  py::class_<StudyResult>(m, "StudyResult")
      .def_readonly("directory", &StudyResult::directory)
      .def_readonly("hdf5_files", &StudyResult::hdf5_files)
      .def_readonly("completed", &StudyResult::completed);
  m.def(
      "begin_study",
      [](const std::string& directory) {
        std::error_code ec;
        std::filesystem::create_directories(directory, ec);
        const std::string summary = (std::filesystem::path(directory) / "summary.json").string();
        claim_output(summary);
        return set_aside_earlier_study(directory);
      },
      py::arg("directory"));
  m.def("run_study", &study_case, py::arg("case"), py::arg("directory"), py::arg("jobs"), py::arg("points"),
        py::arg("speeds"));
  m.def("study_figure_caption", &study_figure_caption);
  m.def(
      "finish_study",
      [](const Case& c, const StudyResult& r, const std::vector<std::string>& figures,
         const std::vector<std::string>& notes) {
        std::vector<StudyFigure> f;
        for (const auto& path : figures) f.push_back({path, study_figure_caption(path)});
        const std::string html = (std::filesystem::path(r.directory) / "report.html").string();
        const ReleaseClaims claims{{html, (std::filesystem::path(r.directory) / "summary.json").string()}};
        write_study_report(c, r, f, notes, html);
        remove_earlier_study(r.directory);
        return study_json(r, f, notes, html).dump();
      },
      py::arg("case"), py::arg("result"), py::arg("figures"), py::arg("notes"));
}
