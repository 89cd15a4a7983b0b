// Engine micro-benchmark for tools/bench: right-hand-side evaluations per
// second and integration steps per second for a case (3-DOF demo by default).
// Prints one JSON object. Timing is wall-clock over repeated work; compare
// figures measured in one run only.

#include <chrono>
#include <cstdint>
#include <cstdio>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "aerosect/integrate/integrator.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/model/system.hpp"

int main(int argc, char** argv) {
  if (argc < 2) {
    std::fprintf(stderr, "usage: aerosect_bench CASE\n");
    return 2;
  }
  using clock = std::chrono::steady_clock;
  const aerosect::Case c = aerosect::load_case(argv[1]);
  const aerosect::AeroelasticModel model(c.model);
  const auto& set = c.simulation;
  std::vector<double> x = model.initial_state(set.initial_displacement, set.initial_velocity,
                                              set.steady_lag_states);
  std::vector<double> dx(x.size());
  const std::vector<int> regions = model.regions_of(x.data());

  // Right-hand side alone.
  const long n_rhs = 20'000'000;
  double sink = 0;
  auto t0 = clock::now();
  for (std::size_t i = 0; i < x.size(); ++i) x[i] += 1e-3 * static_cast<double>(i + 1);
  for (long i = 0; i < n_rhs; ++i) {
    x[0] += 1e-30;
    model.rhs(x.data(), dx.data(), regions);
    sink += dx[1];
  }
  const double rhs_s = std::chrono::duration<double>(clock::now() - t0).count();

  // Integration of the case's own run, repeated from its initial state,
  // without output (the observer is not called).
  aerosect::OutputSchedule no_output{false, set.duration * 100.0};
  std::int64_t steps = 0, rhs = 0;
  long repeats = 0;
  t0 = clock::now();
  while (std::chrono::duration<double>(clock::now() - t0).count() < 2.0) {
    aerosect::RunState run;
    run.x = model.initial_state(set.initial_displacement, set.initial_velocity,
                                set.steady_lag_states);
    aerosect::integrate(model, run, set.duration, set.integrator, no_output, {}, false);
    steps += run.steps;
    rhs += run.rhs_evaluations;
    ++repeats;
  }
  const double int_s = std::chrono::duration<double>(clock::now() - t0).count();

  nlohmann::json j;
  j["case"] = argv[1];
  j["dof"] = c.model.section.dof;
  j["states"] = model.state_size();
  j["rhs_evaluations_per_second"] = n_rhs / rhs_s;
  j["ns_per_rhs"] = rhs_s / n_rhs * 1e9;
  j["runs"] = repeats;
  j["run_duration_s"] = set.duration;
  j["steps_per_run"] = double(steps) / repeats;
  j["runs_per_second"] = repeats / int_s;
  j["steps_per_second"] = steps / int_s;
  j["rhs_per_step"] = double(rhs) / steps;
  j["integration_rhs_per_second"] = rhs / int_s;
  j["relative_tolerance"] = set.integrator.relative_tolerance;
  j["checksum"] = sink;
  std::printf("%s\n", j.dump(2).c_str());
  return 0;
}
