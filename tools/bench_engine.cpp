// Engine micro-benchmark for tools/bench: right-hand-side evaluations per
// second and integration steps per second for a case (3-DOF demo by default);
// with --run, one in-process run of a case timed like the scipy peer's.
// Prints one JSON object. Timing is wall-clock over repeated work; compare
// figures measured in one run only.

#include <algorithm>
#include <chrono>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <utility>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "aerosect/analysis/continuation.hpp"
#include "aerosect/analysis/orbit.hpp"
#include "aerosect/integrate/integrator.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/model/system.hpp"
#include "aerosect/model/section.hpp"

namespace {

// One run of a case as the scipy peer does it (tools/peer_solve_ivp.py): the
// case's own duration, stepper and tolerances, exact switching, true peaks
// of the watched DOF (the first nonlinear spring's, else pitch) collected,
// no sample output. Wall time of integrate() only (model built beforehand),
// minimum over `repeats` runs. Prints one JSON object.
int run_like_peer(const char* path, int repeats) {
  using clock = std::chrono::steady_clock;
  const aerosect::Case c = aerosect::load_case(path);
  const aerosect::AeroelasticModel model(c.model);
  const auto& set = c.simulation;
  const int watch = model.nonlinear_springs().empty() ? aerosect::kPitch
                                                      : model.nonlinear_springs().front();
  double best = 1e300;
  aerosect::RunState last;
  std::size_t peaks = 0;
  for (int rep = 0; rep < repeats; ++rep) {
    aerosect::RunState run;
    run.x = model.initial_state(set.initial_displacement, set.initial_velocity,
                                set.steady_lag_states);
    std::vector<std::pair<double, double>> found;
    found.reserve(100000);
    const auto t0 = clock::now();
    aerosect::integrate(model, run, set.duration, set.integrator, aerosect::OutputSchedule::none(),
                        {{}, [&](int dof, double t, const std::vector<double>& x) {
                           if (dof == watch) found.emplace_back(t, x[static_cast<std::size_t>(dof)]);
                           return aerosect::ObserverAction::kContinue;
                         },
                         nullptr, {}, 1u << watch});  // the watched DOF's peaks only, like the peer
    best = std::min(best, std::chrono::duration<double>(clock::now() - t0).count());
    last = run;
    peaks = found.size();
  }
  nlohmann::json j;
  j["case"] = path;
  j["stepper"] = aerosect::to_string(set.integrator.stepper);
  j["duration_s"] = set.duration;
  j["relative_tolerance"] = set.integrator.relative_tolerance;
  j["absolute_tolerance"] = set.integrator.absolute_tolerance;
  j["repeats"] = repeats;
  j["min_seconds"] = best;
  j["steps"] = last.steps;
  j["rhs_evaluations"] = last.rhs_evaluations;
  j["switches"] = last.switches;
  j["peaks"] = peaks;
  j["final_state"] = last.x;
  std::printf("%s\n", j.dump(2).c_str());
  return 0;
}

// Orbits (issue: limit cycles solved): the branch of a case from a
// time-marched start (--orbits CASE POINTS), timed in-process with its
// CPU-independent wall clock, and one orbit solved again from a nearby seed
// (the branch's middle orbit, state and period perturbed by 1e-4 relative):
// minimum over 10 solves. Prints one JSON object.
int orbits_bench(const char* path, int points) {
  using clock = std::chrono::steady_clock;
  const aerosect::Case c = aerosect::load_case(path, {"flow.airspeed=25"});
  aerosect::BranchOptions o;
  o.from = 10;
  o.to = 90;
  o.start = aerosect::BranchStart::kMarch;
  o.max_points = points;
  const auto t0 = clock::now();
  const aerosect::Branch b = aerosect::continue_branch(c, o);
  const double branch_s = std::chrono::duration<double>(clock::now() - t0).count();
  nlohmann::json j;
  j["branch_seconds"] = branch_s;
  j["branch_orbits"] = b.points.size();
  j["stop_reason"] = b.stop_reason;
  // The same branch traced with short steps, to at most `points` orbits (the
  // goal's 100-point branch, stable and unstable parts): its time, and the
  // time-marched start alone (a branch of one orbit) to take out of it.
  {
    aerosect::BranchOptions d = o;
    d.max_step = 0.004;
    d.initial_step = 0.004;
    const auto t1 = clock::now();
    const aerosect::Branch bd = aerosect::continue_branch(c, d);
    j["dense_branch_seconds"] = std::chrono::duration<double>(clock::now() - t1).count();
    j["dense_branch_orbits"] = bd.points.size();
    std::size_t unstable = 0;
    for (const auto& p : bd.points) unstable += p.orbit.stable ? 0 : 1;
    j["dense_branch_unstable_orbits"] = unstable;
    aerosect::BranchOptions one = o;
    one.max_points = 1;
    const auto t2 = clock::now();
    (void)aerosect::continue_branch(c, one);
    j["start_seconds"] = std::chrono::duration<double>(clock::now() - t2).count();
  }
  if (!b.points.empty()) {
    const aerosect::BranchPoint& p = b.points[b.points.size() / 2];
    const aerosect::ParameterFamily fam = aerosect::parameter_family(c, "");
    const aerosect::AeroelasticModel model(fam.model_at(p.parameter));
    aerosect::OrbitSeed seed{p.orbit.x0, p.orbit.period * (1 + 1e-4)};
    for (double& v : seed.x0) v *= 1 + 1e-4;
    double best = 1e300;
    int iterations = 0;
    bool converged = false;
    for (int r = 0; r < 10; ++r) {
      const auto t1 = clock::now();
      const aerosect::Orbit orb = aerosect::solve_orbit(model, seed);
      best = std::min(best, std::chrono::duration<double>(clock::now() - t1).count());
      iterations = orb.iterations;
      converged = orb.converged;
    }
    j["one_orbit_seconds"] = best;
    j["one_orbit_newton_iterations"] = iterations;
    j["one_orbit_converged"] = converged;
  }
  std::printf("%s\n", j.dump().c_str());
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc >= 3 && std::string(argv[1]) == "--orbits") {
    return orbits_bench(argv[2], argc >= 4 ? std::atoi(argv[3]) : 100);
  }
  if (argc >= 3 && std::string(argv[1]) == "--run") {
    return run_like_peer(argv[2], argc >= 4 ? std::atoi(argv[3]) : 5);
  }
  if (argc < 2) {
    std::fprintf(stderr, "usage: aerosect_bench CASE | aerosect_bench --run CASE [REPEATS]\n");
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
    model.rhs(x.data(), dx.data(), 0.0, regions);
    sink += dx[1];
  }
  const double rhs_s = std::chrono::duration<double>(clock::now() - t0).count();

  // Integration of the case's own run, repeated from its initial state,
  // without output (the observer is not called).
  const aerosect::OutputSchedule no_output = aerosect::OutputSchedule::none();
  std::int64_t steps = 0, rhs = 0;
  long repeats = 0;
  t0 = clock::now();
  while (std::chrono::duration<double>(clock::now() - t0).count() < 2.0) {
    aerosect::RunState run;
    run.x = model.initial_state(set.initial_displacement, set.initial_velocity,
                                set.steady_lag_states);
    aerosect::integrate(model, run, set.duration, set.integrator, no_output);
    steps += run.steps;
    rhs += run.rhs_evaluations;
    ++repeats;
  }
  const double int_s = std::chrono::duration<double>(clock::now() - t0).count();

  // Exact switching: freeplay LCO amplitude against tolerance, and the cost
  // against the smooth linear run at the same tolerance. Benchmark section
  // (mu 100, a -0.5, x_alpha 0.25, r_alpha 0.5, omega_bar 0.2) at U* = 3
  // with a pitch freeplay of half-gap 0.5 deg (LCO of ~2.4 half-gaps), pure
  // relative tolerance; amplitude = mean |pitch| at the true peaks of the
  // last fifth. The smooth linear reference is the same section without
  // freeplay at its linear flutter speed (U* = 6.2851, neutral: it
  // oscillates for the whole run like the LCO; a decaying run would get
  // cheap steps once it has died out), over the same time (1667 / omega_alpha).
  nlohmann::json sw = nlohmann::json::array();
  nlohmann::json sw_equal;
  {
    const std::string base =
        "[nondimensional]\nmass_ratio = 100.0\nelastic_axis = -0.5\ncg_offset = 0.25\n"
        "radius_of_gyration = 0.5\nfrequency_ratio = 0.2\nreduced_speed = 3.0\n"
        "[initial]\npitch_deg = 1.2\n[simulation]\nduration_semichords = 5000\n";
    const aerosect::Case fp = aerosect::parse_case(
        base + "[springs.pitch]\nlaw = \"freeplay\"\nhalf_gap_deg = 0.5\n", "bench-freeplay");
    std::string lin = base;
    lin.replace(lin.find("reduced_speed = 3.0"), 19, "reduced_speed = 6.2851");
    lin.replace(lin.find("duration_semichords = 5000"), 26, "duration_semichords = 10475");
    const aerosect::Case li = aerosect::parse_case(lin, "bench-linear");
    const aerosect::AeroelasticModel mf(fp.model), ml(li.model);
    // Dormand-Prince at each tolerance (the adaptive path's cost of
    // switching); rtol 0: exact propagation (exact_flow.hpp).
    auto run = [&](const aerosect::AeroelasticModel& m, const aerosect::Case& c, double rtol,
                   double& amplitude, double& seconds) {
      aerosect::IntegratorSettings s = c.simulation.integrator;
      s.stepper = rtol > 0 ? aerosect::StepperKind::kDopri5 : aerosect::StepperKind::kExact;
      s.relative_tolerance = rtol > 0 ? rtol : 1e-8;
      s.absolute_tolerance = 1e-18;
      aerosect::RunState r;
      r.x = m.initial_state(c.simulation.initial_displacement, c.simulation.initial_velocity, false);
      double sum = 0;
      long count = 0;
      const double t_from = c.simulation.duration * 0.8;
      const auto t0c = clock::now();
      aerosect::integrate(m, r, c.simulation.duration, s, aerosect::OutputSchedule::none(),
                          {{}, [&](int dof, double t, const std::vector<double>& x) {
                             if (dof == aerosect::kPitch && t >= t_from) {
                               sum += std::abs(x[aerosect::kPitch]);
                               ++count;
                             }
                             return aerosect::ObserverAction::kContinue;
                           }});
      seconds = std::chrono::duration<double>(clock::now() - t0c).count();
      amplitude = count ? sum / count : 0.0;
      return r;
    };
    // Errors against the exact flow (the true solution to round-off: the
    // unit tests check it against a closed form), and the cost at equal
    // accuracy: the loosest Dormand-Prince tolerance whose amplitude is
    // within 1e-10 of the exact one, against the exact flow's time.
    double a_exact = 0, t_exact = 1e300;
    for (int rep = 0; rep < 5; ++rep) {
      double t = 0;
      run(mf, fp, 0.0, a_exact, t);
      t_exact = std::min(t_exact, t);
    }
    nlohmann::json equal = nlohmann::json();
    for (double rtol : {1e-6, 1e-8, 1e-10, 1e-12, 1e-13, 1e-14, 0.0}) {
      double af = 0, tf = 0, al = 0, tl = 0;
      // Repeat for a stable timing.
      aerosect::RunState rf, rl;
      double best_f = 1e300, best_l = 1e300;
      for (int rep = 0; rep < (rtol >= 1e-12 || rtol == 0 ? 5 : 2); ++rep) {
        rf = run(mf, fp, rtol, af, tf);
        rl = run(ml, li, rtol, al, tl);
        best_f = std::min(best_f, tf);
        best_l = std::min(best_l, tl);
      }
      const double err = std::abs(af - a_exact) / a_exact;
      if (rtol > 0 && err <= 1e-10 && equal.is_null())
        equal = {{"dopri5_relative_tolerance", rtol}, {"dopri5_error", err}, {"dopri5_seconds", best_f},
                 {"exact_seconds", t_exact}, {"speed_ratio", best_f / t_exact}};
      sw.push_back({{"relative_tolerance", rtol > 0 ? nlohmann::json(rtol) : nlohmann::json("exact")},
                    {"lco_amplitude_rad", af},
                    {"relative_error_vs_exact", err},
                    {"switches", rf.switches},
                    {"freeplay_rhs", rf.rhs_evaluations},
                    {"linear_rhs", rl.rhs_evaluations},
                    {"rhs_ratio", rl.rhs_evaluations > 0 ? nlohmann::json(double(rf.rhs_evaluations) /
                                                                           double(rl.rhs_evaluations))
                                                          : nlohmann::json()},
                    {"freeplay_seconds", best_f},
                    {"linear_seconds", best_l},
                    {"time_ratio", best_f / best_l},
                    {"time_vs_exact", best_f / t_exact}});
    }
    if (equal.is_null()) equal = "no Dormand-Prince tolerance down to 1e-14 reached 1e-10 of the exact amplitude";
    sw_equal = equal;
  }

  nlohmann::json j;
  j["switching"] = sw;
  j["switching_equal_accuracy_1e-10"] = sw_equal;
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
