#pragma once
// Discrete-gust gradient sweep: the case's one-minus-cosine gusts are run
// with each gust gradient H in turn (regulation-sized gusts re-sized by
// CS-25.341(a) for every H), and the peak loads and excursions are
// collected (the true extremes of each run, simulate.hpp); the critical H
// of each quantity is the one with the largest magnitude (of magnitudes
// equal to 1e-12, the shortest H). Runs are independent (one model and run
// state each).

#include <atomic>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "aerosect/analysis/simulate.hpp"
#include "aerosect/integrate/sink.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/io/table_layout.hpp"

namespace aerosect {

struct GustSweepPoint {
  double gradient = 0;         // H, m
  double design_velocity = 0;  // peak gust velocity of the first 1-cos profile, m/s TAS
  SimulationSummary summary;   // extremes of every channel
};

// Where each run of the sweep starts. From rest (the default) every peak
// is the gust's own; from the case's [initial] conditions the release
// transient adds to it, and its peaks may come before the gust arrives.
enum class GustStart { kRest, kCaseInitial };
const char* to_string(GustStart s);  // "rest", "case-initial"

struct GustSweep {
  GustStart start = GustStart::kRest;
  std::vector<GustSweepPoint> points;
  // Per channel: the gradient giving the largest |value| and that value (signed).
  struct Critical {
    std::string channel, units;
    double gradient = 0, value = 0, time = 0;
  };
  std::vector<Critical> critical;
  // The run at each distinct critical gradient, rerun with every channel
  // recorded at the case's sample rate (critical_for: the channels whose
  // critical gradient it is, in the order of `critical`).
  struct History {
    double gradient = 0, design_velocity = 0;
    std::vector<std::string> critical_for;
    MemorySink record;
  };
  std::vector<History> histories;
};

// Whether the case has a one-minus-cosine gust (what the sweep sizes over H).
bool has_one_minus_cosine(const Case& c);

// 12 gradients spanning 30..350 ft (9.144..106.68 m), the CS-25.341 range.
std::vector<double> default_gradients();

// Throws InputError (key "gust") when the case has no one-minus-cosine gust,
// Cancelled when `cancel` is set during the sweep (the run in flight stops).
GustSweep gust_gradient_sweep(const Case& c, const std::vector<double>& gradients,
                              const std::atomic<bool>* cancel = nullptr, GustStart start = GustStart::kRest);

nlohmann::json gust_sweep_json(const Case& c, const GustSweep& s, const std::string& output);
std::string gust_sweep_text(const Case& c, const GustSweep& s, const std::string& output);
// The layout of a gust-sweep point (io/table_layout.hpp), over the axis
// `gradient`: design_velocity and, per channel of `first` (every point of a
// sweep has the same channels), peaks/<channel>_max and peaks/<channel>_min.
// The histories go to groups critical_history_<k> (README), each with its
// own `time` axis.
Layout<GustSweepPoint> gust_sweep_layout(const GustSweepPoint& first);
// The file (layout in README.md, "Gust gradient sweeps") into a sink, and
// into an HDF5 file.
void write_gust_sweep_tables(TableSink& sink, const Case& c, const GustSweep& s);
void write_gust_sweep_file(const std::string& path, const Case& c, const GustSweep& s);

}  // namespace aerosect
