#pragma once
// Time response of a case to its initial conditions: integrates the model,
// hands every sample (time; displacements, velocities, lag states, loads) to
// a sink, and returns a summary of the run (true extremes and their times,
// integration counters; the sink's outcome carries them as numbers
// <channel>_max, _time_of_max, _min, _time_of_min). A numerical failure still finishes the sink (marked
// incomplete) before the error propagates, so what was computed is kept.

#include <atomic>
#include <cstdint>
#include <string>
#include <vector>

#include "aerosect/integrate/integrator.hpp"
#include "aerosect/integrate/sink.hpp"
#include "aerosect/io/case.hpp"

namespace aerosect {

// Largest and smallest value of a channel over the run: the true extrema
// of the trajectory, not of the output samples. The largest (smallest)
// sample is refined by Brent's method over the two sample intervals around
// it, each value from the trajectory restarted at the sample before it
// (at the case's integrator settings; every_step output: the samples are the
// steps, not refined). Times in s.
struct Extreme {
  std::string channel;  // e.g. "pitch"
  std::string units;
  double max = 0, time_of_max = 0;
  double min = 0, time_of_min = 0;
  double rms = 0;  // over the output samples
};

struct SimulationSummary {
  bool completed = false;
  std::string status;       // "completed", "cancelled", "stopped", "numerical-error"
  double end_time = 0;      // s
  double end_tau = 0;       // semichords travelled
  std::int64_t steps = 0, rhs_evaluations = 0, samples = 0;
  std::int64_t switches = 0;  // spring region changes
  std::vector<Extreme> extremes;  // displacements, velocities and loads
};

// Channels a simulation records (for a model), in row order.
std::vector<Channel> simulation_channels(const AeroelasticModel& model);

// Root attributes and parameter records for a case (both parameter forms,
// the case text as run, the program version).
RunMetadata case_metadata(const Case& c, const std::string& file_kind);

// `start`, when given, replaces the case's initial conditions: its state
// vector and spring regions are the state at t = 0 (e.g. the final state of
// a sweep point, to record a settled limit cycle).
SimulationSummary simulate(const Case& c, const AeroelasticModel& model, TimeHistorySink& sink,
                           const std::atomic<bool>* cancel = nullptr,
                           const RunState* start = nullptr);

}  // namespace aerosect
