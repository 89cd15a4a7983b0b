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
#include <type_traits>
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
// or error (a Cancelled the flag caused, or a run cut short). When the run
// was interrupted and the worker still returned (the part it finished),
// `on_interrupt(result)` is called with the GIL held before the exception is
// raised: the caller keeps that part (the Python side attaches it to the
// exception as `partial`).
template <class Work, class OnInterrupt = std::nullptr_t>
auto run_interruptible(Work work, OnInterrupt on_interrupt = nullptr)
    -> decltype(work(static_cast<const std::atomic<bool>*>(nullptr))) {
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
  if (interrupted) {
    // Fetch the pending exception so the callback may run Python code.
    py::error_already_set pending;
    if constexpr (!std::is_same_v<OnInterrupt, std::nullptr_t>) {
      if (result) on_interrupt(*result);
    }
    throw pending;
  }
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
// NAME.incomplete.h5 (its path is returned). Interrupted, the summary of the
// part run goes to partial["summary"] (the file stays); a NumericalError
// leaves NAME.incomplete.h5 too (the history up to the trouble).
py::tuple simulate_case(const Case& c, const std::string& path, py::dict partial) {
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
  }, [&](const Outcome& part) {
    partial["summary"] = simulation_json(c, part.summary, part.written).dump();
    partial["path"] = part.written;
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
// run is not resumed). Interrupted, or when the overlay fails numerically,
// the points finished so far are written as the map NAME.incomplete.h5
// (cells not run hold the fill value; no overlay) and its summary goes to
// partial["summary"] and partial["path"], as the command line's journal
// keeps them.
std::string sweep_case(const Case& c, const std::string& path, SweepSettings settings, py::dict partial) {
  settings.overrides = c.overrides;
  SweepRequest req = sweep_request(settings);
  req.case_text = c.text;
  req.case_path = c.path;
  check_swept_values(req);
  const std::string incomplete = Hdf5TimeHistoryWriter::incomplete_path(path);
  const ReleaseClaims claims{{path, incomplete}};
  std::string kept;  // the partial map's summary, when one was written
  auto keep = [&](const std::vector<SweepPoint>& pts) {
    write_sweep_file(incomplete, c, req, pts, nullptr);
    nlohmann::json j = sweep_json(c, req, pts, incomplete);
    j["points_resumed"] = 0;
    j["completed"] = false;
    kept = j.dump();
    return kept;
  };
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
    if (cancel_requested(cancel)) return keep(pts);
    if (overlay_failure) {
      try {
        std::rethrow_exception(overlay_failure);
      } catch (const NumericalError&) {
        keep(pts);
        throw;
      }
    }
    write_sweep_file(path, c, req, pts, overlay ? &*overlay : nullptr);
    nlohmann::json j = sweep_json(c, req, pts, path);
    j["points_resumed"] = 0;
    return j.dump();
  }, [&](const std::string& finished) {
    // The signal came after the last point: the whole map is the part.
    partial["summary"] = kept.empty() ? finished : kept;
    partial["path"] = kept.empty() ? path : incomplete;
  });
  if (!kept.empty()) {  // a NumericalError after the map was kept
    partial["summary"] = kept;
    partial["path"] = incomplete;
  }
  return summary;
}

// Interrupted, the orbits found so far are written (root attribute
// complete = 0, as the command line writes them) and their summary goes to
// partial["summary"].
std::string orbits_case(const Case& c, const std::string& path, const BranchSettings& settings, py::dict partial) {
  check_branch_settings(settings);
  const BranchOptions bo = branch_options(c, settings);
  const ReleaseClaims claims{{path}};
  const std::string summary = run_interruptible([&](const std::atomic<bool>* cancel) {
    const Branch b = continue_branch(c, bo, cancel);
    write_branch_file(path, c, b, {}, orbits_request_json(c, settings).dump());
    return branch_json(c, b, path).dump();
  }, [&](const std::string& part) {
    partial["summary"] = part;
    partial["path"] = path;
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

  m.def("simulate", &simulate_case, py::arg("case"), py::arg("path"), py::arg("partial"));
  m.def("flutter", &flutter_case, py::arg("case"), py::arg("path"), py::arg("speeds"), py::arg("method"),
        py::arg("amplitude"));
  m.def("gust", &gust_case, py::arg("case"), py::arg("path"), py::arg("gradients"), py::arg("keep_initial"));
  m.def(
      "sweep",
      [](const Case& c, const std::string& path, const std::vector<std::string>& vary, const std::string& direction,
         const std::string& restart, const std::optional<int>& jobs, bool traces, bool with_gusts, py::dict partial) {
        return sweep_case(c, path,
                          {.overrides = {}, .vary = vary, .direction = direction, .restart = restart, .jobs = jobs, .shard = "",
                           .traces = traces, .with_gusts = with_gusts},
                          std::move(partial));
      },
      py::arg("case"), py::arg("path"), py::arg("vary"), py::arg("direction"), py::arg("restart"), py::arg("jobs"),
      py::arg("traces"), py::arg("with_gusts"), py::arg("partial"));
  m.def(
      "orbits",
      [](const Case& c, const std::string& path, const std::string& key, const std::optional<double>& from,
         const std::optional<double>& to, const std::string& start, const std::optional<double>& start_amplitude,
         int points, const std::string& watch, py::dict partial) {
        return orbits_case(c, path,
                           {.key = key, .from = from, .to = to, .start = start, .start_amplitude = start_amplitude,
                            .points = points, .watch = watch, .shard = ""},
                           std::move(partial));
      },
      py::arg("case"), py::arg("path"), py::arg("key"), py::arg("from_"), py::arg("to"), py::arg("start"),
      py::arg("start_amplitude"), py::arg("points"), py::arg("watch"), py::arg("partial"));

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
