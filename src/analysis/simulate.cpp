#include "aerosect/analysis/simulate.hpp"

#include "aerosect/analysis/equilibrium.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>

#include <boost/math/tools/minima.hpp>
#include <fmt/format.h>

#include "aerosect/error.hpp"
#include "aerosect/integrate/exact_flow.hpp"
#include "aerosect/model/atmosphere.hpp"
#include "aerosect/units.hpp"
#include "aerosect/version.hpp"

namespace aerosect {

namespace {
const char* kDofLong[3] = {"plunge displacement, positive down", "pitch angle, positive nose up",
                           "flap angle, positive trailing edge down"};
const char* kRateUnits[3] = {"m s-1", "rad s-1", "rad s-1"};

// The samples a run of these settings writes if it runs to its end: at
// t = k dt for k = 0 .. floor(T / dt) (one more allowed for rounding); 0
// when not known in advance (a sample at every step) or beyond counting.
std::int64_t expected_samples(const SimulationSettings& set) {
  if (set.output.every_step || !(set.output.interval > 0)) return 0;
  const double intervals = set.duration / set.output.interval;
  if (!(intervals >= 0 && intervals < 1e15)) return 0;
  return static_cast<std::int64_t>(intervals) + (set.output.include_start ? 2 : 1);
}
}  // namespace

std::vector<Channel> simulation_channels(const AeroelasticModel& model) {
  const StateLayout& L = model.layout();
  std::vector<Channel> ch;
  auto scalar = [&ch](std::string name, std::string units, std::string long_name) {
    Channel c;
    c.name = std::move(name);
    c.units = std::move(units);
    c.long_name = std::move(long_name);
    ch.push_back(std::move(c));
  };
  scalar("tau", "1", "nondimensional time U t / b (semichords travelled)");
  for (int j = 0; j < L.n_dof; ++j) scalar(kDofNames[j], kDofUnits[j], kDofLong[j]);
  for (int j = 0; j < L.n_dof; ++j)
    scalar(std::string(kDofNames[j]) + "_velocity", kRateUnits[j],
           std::string("rate of ") + kDofLong[j]);
  if (L.n_wagner > 0) {
    Channel c;
    c.name = "wagner_lag_states";
    c.units = "m s-1";
    c.long_name = "Wagner lag states y_i (lagged 3/4-chord downwash), y_i' = (U/b) eps_i (Q - y_i)";
    c.width = L.n_wagner;
    for (int i = 0; i < L.n_wagner; ++i) c.component_names.push_back(fmt::format("pole_{}", i + 1));
    c.component_axis = "wagner_pole";
    ch.push_back(c);
  }
  if (L.n_gust > 0) {
    Channel c;
    c.name = "gust_lag_states";
    c.units = "m s-1";
    c.long_name = "Kussner lag states g_i, g_i' = (U/b) d_i (w_g - g_i)";
    c.width = L.n_gust;
    for (int i = 0; i < L.n_gust; ++i) c.component_names.push_back(fmt::format("pole_{}", i + 1));
    c.component_axis = "kussner_pole";
    ch.push_back(c);
    scalar("gust_velocity", "m s-1", "vertical gust velocity at the leading edge, positive up");
    scalar("gust_effective_velocity", "m s-1",
           "Kussner-weighted gust velocity w_hat (circulatory gust lift 2 pi rho U b w_hat)");
  }
  scalar("lift", "N m-1", "aerodynamic lift per unit span, positive up");
  scalar("pitching_moment", "N m m-1",
         "aerodynamic pitching moment about the elastic axis per unit span, positive nose up");
  if (L.n_dof == 3)
    scalar("hinge_moment", "N m m-1",
           "aerodynamic hinge moment per unit span, positive trailing edge down");
  scalar("effective_downwash", "m s-1",
         "circulatory (lagged) 3/4-chord downwash w_c, C(k) Q in the frequency domain");
  return ch;
}

namespace {

// The steady flight condition and the static equilibrium at the case's
// airspeed (only for a case with a steady condition: files of other cases
// are unchanged). Group /parameters/steady: the condition's numbers;
// /parameters/equilibrium: the displacement of each DOF and the force of
// each nonlinear spring there; root attributes initial_conditions (what the
// [initial] values are), equilibrium_remark and equilibrium_region_<dof>.
void add_steady_metadata(const Case& c, RunMetadata& m) {
  const SteadyCondition& st = c.model.steady;
  if (!st.any()) return;
  const int n = c.model.section.dof;
  const auto add = [&m](const char* group, const std::string& name, double v, const char* units,
                        const std::string& ln) { m.parameters.push_back({group, name, v, units, ln}); };
  add("steady", "incidence", st.incidence, "rad", "steady incidence alpha_0 of the rigid section (aerodynamics only)");
  if (n == 3) {
    add("steady", "flap_trim", st.flap_trim, "rad", "flap trim deflection beta_0, TE down (aerodynamics only)");
    add("steady", "hinge_moment", st.hinge_moment, "N m m-1", "applied trim hinge moment, TE down positive");
  }
  add("steady", "gravity", st.gravity, "m s-2", "gravity along +plunge (down), through the section's and flap's CG");
  const AeroelasticModel model(c.model);
  const EquilibriumResult eq = static_equilibrium(model);
  const Equilibrium* e = principal_equilibrium(eq);
  m.text_attributes.push_back(
      {"initial_conditions",
       e ? "[initial] displacements and velocities are a perturbation about the static equilibrium "
           "(/parameters/equilibrium): the run starts at equilibrium + perturbation; displacements in "
           "the time histories are absolute"
         : "[initial] displacements and velocities are absolute: the case has no static equilibrium"});
  m.text_attributes.push_back({"equilibrium_remark", eq.remark.empty() ? "one static equilibrium" : eq.remark});
  if (!e) return;
  m.text_attributes.push_back({"equilibrium_static_stability", e->static_stability});
  for (int j = 0; j < n; ++j) {
    const std::string dof = kDofNames[j];
    const bool angle = is_angle_dof(j);
    add("equilibrium", dof, e->displacement(j), angle ? "rad" : "m",
        fmt::format("{} at the static equilibrium", dof));
    const SpringEquilibrium& sp = e->springs[static_cast<std::size_t>(j)];
    add("equilibrium", dof + "_spring_force", sp.force, angle ? "N m m-1" : "N m-1",
        fmt::format("{} spring's restoring force at the equilibrium ({}){}", dof, sp.law,
                    sp.in_contact ? ": the contact load against the stop" : ""));
    if (!sp.region_name.empty()) m.text_attributes.push_back({"equilibrium_region_" + dof, sp.region_name});
  }
  add("equilibrium", "lift", e->loads.lift, "N m-1", "steady lift at the equilibrium, up positive");
  add("equilibrium", "pitching_moment", e->loads.pitching_moment, "N m m-1",
      "steady aerodynamic moment about the elastic axis, nose up positive");
  if (n == 3)
    add("equilibrium", "hinge_moment", e->loads.hinge_moment, "N m m-1",
        "steady aerodynamic hinge moment, TE down positive");
}

}  // namespace

RunMetadata case_metadata(const Case& c, const std::string& file_kind) {
  RunMetadata m;
  m.file_kind = file_kind;
  m.title = c.title;
  m.text_attributes = {
      {"aerosect_version", kVersion},
      {"case_path", c.path},
      {"case_text", c.text_as_run()},
      {"input_form", c.input_form},
      {"aerodynamic_model", to_string(c.model.aero.model)},
      {"wagner_approximation", c.model.aero.model == AeroModel::kWagner ? c.model.aero.wagner_name
                                                                         : std::string("none")},
      {"kussner_approximation", c.model.gusts.empty() ? std::string("none") : c.model.kussner_name},
      {"gust_convention",
       "gust velocity positive up, given at the leading edge; chordwise penetration at the "
       "airspeed (typical-section idealisation)"},
      {"sign_conventions",
       "plunge h positive down; pitch alpha positive nose up; flap beta positive trailing edge "
       "down; lift positive up; pitching moment about the elastic axis positive nose up; hinge "
       "moment positive trailing edge down; chordwise positions in semichords from midchord, "
       "positive aft; per unit span"},
      {"caution",
       "Typical-section results are for preliminary design and trade studies only. Flutter and "
       "LCO clearance is safety-critical: airworthiness requires the applicable regulations, "
       "ground vibration tests, flight flutter testing and the judgement of qualified, licensed "
       "engineers."},
  };
  const SectionProperties& s = c.model.section;
  const FlowConditions& f = c.model.flow;
  const auto w = uncoupled_frequencies(s);
  // An adder of named scalars to one /parameters group.
  const auto in_group = [&m](const char* group) {
    return [&m, group](const char* name, double v, const char* units, const char* ln) {
      m.parameters.push_back({group, name, v, units, ln});
    };
  };
  const auto si = in_group("si");
  si("semichord", s.semichord, "m", "semichord b");
  si("mass", s.mass, "kg m-1", "section mass per unit span m");
  si("elastic_axis", s.elastic_axis, "1", "elastic axis a_h, semichords from midchord, aft +");
  si("static_unbalance", s.static_unbalance, "kg m m-1", "static unbalance S_alpha = m x_alpha b");
  si("pitch_inertia", s.pitch_inertia, "kg m2 m-1", "pitch inertia about the elastic axis I_alpha");
  si("plunge_stiffness", s.plunge_stiffness, "N m-1 m-1", "plunge spring stiffness K_h");
  si("pitch_stiffness", s.pitch_stiffness, "N m rad-1 m-1", "pitch spring stiffness K_alpha");
  si("plunge_damping_ratio", s.plunge_damping_ratio, "1", "plunge viscous damping ratio");
  si("pitch_damping_ratio", s.pitch_damping_ratio, "1", "pitch viscous damping ratio");
  si("plunge_frequency", w.plunge, "rad s-1", "uncoupled plunge frequency omega_h");
  si("pitch_frequency", w.pitch, "rad s-1", "uncoupled pitch frequency omega_alpha");
  if (s.dof == 3) {
    si("hinge", s.hinge, "1", "flap hinge c, semichords from midchord, aft +");
    si("flap_static_unbalance", s.flap_static_unbalance, "kg m m-1",
       "flap static unbalance about the hinge S_beta");
    si("flap_inertia", s.flap_inertia, "kg m2 m-1", "flap inertia about the hinge I_beta");
    si("flap_stiffness", s.flap_stiffness, "N m rad-1 m-1", "hinge spring stiffness K_beta");
    si("flap_damping_ratio", s.flap_damping_ratio, "1", "flap viscous damping ratio");
    si("flap_frequency", w.flap, "rad s-1", "uncoupled flap frequency omega_beta");
  }
  si("density", f.density, "kg m-3", "air density rho");
  si("airspeed", f.airspeed, "m s-1", "true airspeed U");
  if (c.altitude) si("altitude", *c.altitude, "m", "ISA geopotential altitude");

  const NondimensionalParameters& n = c.nondimensional;
  const auto nd = in_group("nondimensional");
  nd("mass_ratio", n.mass_ratio, "1", "mass ratio mu = m / (pi rho b^2)");
  nd("elastic_axis", n.elastic_axis, "1", "elastic axis a_h");
  nd("cg_offset", n.cg_offset, "1", "CG offset from the elastic axis x_alpha, semichords");
  nd("radius_of_gyration", n.radius_of_gyration, "1", "radius of gyration r_alpha, semichords");
  nd("frequency_ratio", n.frequency_ratio, "1", "frequency ratio omega_h / omega_alpha");
  nd("plunge_damping_ratio", n.plunge_damping_ratio, "1", "zeta_h");
  nd("pitch_damping_ratio", n.pitch_damping_ratio, "1", "zeta_alpha");
  nd("reduced_speed", n.reduced_speed, "1", "reduced speed U* = U / (b omega_alpha)");
  if (n.dof == 3) {
    nd("hinge", n.hinge, "1", "hinge c");
    nd("flap_cg_offset", n.flap_cg_offset, "1", "x_beta = S_beta / (m b)");
    nd("flap_radius_of_gyration", n.flap_radius_of_gyration, "1", "r_beta = sqrt(I_beta / (m b^2))");
    nd("flap_frequency_ratio", n.flap_frequency_ratio, "1", "omega_beta / omega_alpha");
    nd("flap_damping_ratio", n.flap_damping_ratio, "1", "zeta_beta");
  }
  nd("reference_semichord", n.reference.semichord, "m", "reference semichord b");
  nd("reference_pitch_frequency", n.reference.pitch_frequency, "rad s-1",
     "reference frequency omega_alpha");
  nd("reference_density", n.reference.density, "kg m-3", "reference density rho");

  // The nonlinear springs and the gusts as numbers too, not only inside
  // case_text: per spring its law (root attribute spring_law_<dof>), its
  // breakpoints and the stiffness of each region; per gust its shape (root
  // attribute gust_<k>_shape) and the numbers its shape uses, the amplitude
  // being the sized U_ds for a regulation gust.
  for (int j = 0; j < s.dof && j < kMaxDof; ++j) {
    const SpringLaw& law = c.model.springs[static_cast<std::size_t>(j)];
    if (law.kind() == "linear") continue;
    const std::string dof = kDofNames[j];
    const bool angle = is_angle_dof(j);
    m.text_attributes.push_back({"spring_law_" + dof, law.kind()});
    const auto bp = law.breakpoints();
    for (std::size_t k = 0; k < bp.size(); ++k)
      m.parameters.push_back({"springs", fmt::format("{}_breakpoint_{}", dof, k + 1), bp[k], angle ? "rad" : "m",
                              fmt::format("{} spring ({}): breakpoint {}, from below", dof, law.kind(), k + 1)});
    const auto sl = law.slopes();
    const auto ic = law.intercepts();
    for (std::size_t k = 0; k < sl.size(); ++k) {
      m.parameters.push_back({"springs", fmt::format("{}_stiffness_{}", dof, k + 1), sl[k],
                              angle ? "N m rad-1 m-1" : "N m-1 m-1",
                              fmt::format("{} spring ({}): stiffness of region {}, from below", dof, law.kind(), k + 1)});
      if (k < ic.size())
        m.parameters.push_back({"springs", fmt::format("{}_intercept_{}", dof, k + 1), ic[k], angle ? "N m m-1" : "N m-1",
                                fmt::format("{} spring ({}): force at zero displacement of region {}'s line "
                                            "f = stiffness x + intercept",
                                            dof, law.kind(), k + 1)});
    }
    // Polynomial laws: f = k x + sum_n c_n x^n, c_n of x^2, x^3, ...
    const auto poly = law.polynomial_terms();
    for (std::size_t k = 0; k < poly.size(); ++k) {
      const std::size_t power = k + 2;
      m.parameters.push_back({"springs", fmt::format("{}_force_x{}", dof, power), poly[k],
                              angle ? fmt::format("N m rad-{} m-1", power) : fmt::format("N m-{} m-1", power),
                              fmt::format("{} spring ({}): coefficient of x^{} in the force", dof, law.kind(), power)});
    }
  }
  const auto& gusts = c.model.gusts.profiles();
  for (std::size_t i = 0; i < gusts.size(); ++i) {
    const GustProfile& g = gusts[i];
    const std::string id = fmt::format("gust_{}", i + 1);
    m.text_attributes.push_back({id + "_shape", to_string(g.shape)});
    if (g.regulation_sized) m.text_attributes.push_back({id + "_design", to_string(g.rule)});
    auto gp = [&](const char* name, double v, const char* units, const std::string& ln) {
      m.parameters.push_back({"gusts", id + "_" + name, v, units, fmt::format("[[gust]] {}: {}", i + 1, ln)});
    };
    gp("start", g.start, "s", "time the gust front reaches the leading edge");
    if (g.shape != GustShape::kRecorded)
      gp("amplitude", g.amplitude, "m s-1",
         g.rule == GustRule::kCs25   ? "design gust velocity U_ds as sized (true airspeed)"
         : g.rule == GustRule::kCs23 ? "derived gust velocity U_de as sized (true airspeed)"
                                     : "step height, 1-cos peak or sine amplitude (true airspeed)");
    if (g.shape == GustShape::kOneMinusCosine) gp("gradient", g.gradient, "m", "gust gradient H");
    if (g.regulation_sized) gp("eas_to_tas", g.eas_to_tas, "1", "factor from EAS to TAS at the case's density");
    if (g.shape == GustShape::kSinusoidal) {
      gp("frequency", g.frequency, "rad s-1", "circular frequency");
      gp("cycles", g.cycles, "1", "duration in periods (0: to the end)");
    }
  }
  // The inputs of CS-25.341(a) sizing and what it derived from them.
  if (c.gust_regulation) {
    const RegulationGustInputs& in = *c.gust_regulation;
    const auto rp = in_group("gust_sizing");
    rp("altitude", in.altitude, "m", "altitude of the sizing (CS-25.341(a)(5))");
    rp("landing_weight_ratio", in.landing_weight_ratio, "1", "R1 = max landing weight / max take-off weight");
    rp("zero_fuel_weight_ratio", in.zero_fuel_weight_ratio, "1", "R2 = max zero-fuel weight / max take-off weight");
    rp("max_operating_altitude", in.max_operating_altitude, "m", "Z_mo, maximum operating altitude");
    rp("at_dive_speed", in.at_dive_speed ? 1.0 : 0.0, "1", "1: sized at V_D (U_ref halved), 0: at V_C");
    rp("reference_gust_velocity", cs25_reference_gust_velocity(in.altitude) * (in.at_dive_speed ? 0.5 : 1.0),
       "m s-1", "U_ref at the altitude (equivalent airspeed), halved at V_D");
    rp("flight_profile_alleviation", cs25_flight_profile_alleviation(in), "1", "F_g at the altitude");
  }
  // The inputs of the small-aircraft sizing (design = "cs-23") and what it
  // derived from them; the rule's values are recalled from memory (gust.hpp).
  if (c.small_aircraft_gust) {
    const SmallAircraftGustInputs& in = *c.small_aircraft_gust;
    const double eas_to_tas = eas_to_tas_factor(c.model.flow.density);
    const double ude = cs23_derived_gust_velocity(in.altitude, in.at_dive_speed);
    const auto rp = in_group("gust_sizing");
    rp("altitude", in.altitude, "m", "altitude of the small-aircraft gust sizing (design = cs-23)");
    rp("at_dive_speed", in.at_dive_speed ? 1.0 : 0.0, "1", "1: sized at V_D (U_de halved), 0: at V_C");
    rp("mean_chord", in.mean_chord, "m",
       in.mean_chord_given ? "mean geometric chord c-bar (gust.mean_chord)"
                           : "mean chord c-bar, taken as the section's chord 2b (no gust.mean_chord)");
    rp("gust_length_chords", 2 * kCs23GustGradientChords, "1",
       "gust length 2H in mean chords (recalled from memory: check against the rule's text)");
    rp("gradient", kCs23GustGradientChords * in.mean_chord, "m", "gust gradient H = 12.5 c-bar");
    rp("derived_gust_velocity_eas", ude, "m s-1",
       "U_de at the altitude, equivalent airspeed (recalled from memory: check against the rule's text)");
    rp("derived_gust_velocity", ude * eas_to_tas, "m s-1", "U_de at the altitude, true airspeed at the case's density");
    m.text_attributes.push_back(
        {"gust_sizing_note",
         "design = cs-23 (small-aircraft discrete gust): U_de = 50 ft/s EAS at V_C to 20 000 ft, linear to 25 ft/s "
         "at 50 000 ft, half at V_D, gust length 25 mean chords; these values were recalled from memory, check "
         "them against the applicable rule's text. The rule's gust alleviation factor is not applied: the gust "
         "is simulated in time with Kussner aerodynamics, which replace it."});
  }
  add_steady_metadata(c, m);
  return m;
}

SimulationSummary simulate(const Case& c, const AeroelasticModel& model, TimeHistorySink& sink,
                           const std::atomic<bool>* cancel, const RunState* start) {
  const StateLayout& L = model.layout();
  const SimulationSettings& set = c.simulation;
  const std::vector<Channel> channels = simulation_channels(model);
  int width = 0;
  for (const auto& ch : channels) width += ch.width;

  const Channel time_channel{"time", "s", "elapsed time since release", 1, {}, ""};
  RunMetadata meta = case_metadata(c, "simulation");
  meta.expected_rows = expected_samples(set);
  sink.begin(time_channel, channels, meta);

  // Extremes are tracked for displacements, velocities and loads (not tau,
  // lag states or downwash).
  SimulationSummary summary;
  struct Tracked {
    int column;
    std::size_t extreme;
  };
  std::vector<Tracked> tracked;
  {
    int col = 0;
    for (const auto& ch : channels) {
      if (ch.width == 1 && ch.name != "tau" && ch.name != "effective_downwash" &&
          ch.name != "gust_effective_velocity") {
        tracked.push_back({col, summary.extremes.size()});
        Extreme e;
        e.channel = ch.name;
        e.units = ch.units;
        e.max = -std::numeric_limits<double>::infinity();
        e.min = std::numeric_limits<double>::infinity();
        summary.extremes.push_back(e);
      }
      col += ch.width;
    }
  }

  const double U_over_b = c.model.flow.airspeed / c.model.section.semichord;
  std::vector<double> row(width), dxdt(L.size);
  RunState run;
  if (start) {
    AEROSECT_CHECK(static_cast<int>(start->x.size()) == L.size &&
                   static_cast<int>(start->regions.size()) == L.n_dof);
    run.x = start->x;
    run.regions = start->regions;
  } else {
    // With a steady condition [initial] is a perturbation about the static
    // equilibrium (equilibrium.hpp, run_start); without one it is absolute.
    RunStart rs = run_start(model, set.initial_displacement, set.initial_velocity, set.steady_lag_states);
    run.x = std::move(rs.x);
    run.regions = std::move(rs.regions);
  }

  // One output row from a state (the regions and input segment those of
  // the state and time).
  auto fill_row = [&](double t, const std::vector<double>& x, std::span<const int> regions, int segment) {
    model.rhs(x.data(), dxdt.data(), t, regions, segment);
    const Loads l = model.loads(x.data(), dxdt.data(), t, segment);
    int k = 0;
    row[k++] = U_over_b * t;
    for (int j = 0; j < L.n_dof; ++j) row[k++] = x[L.displacement + j];
    for (int j = 0; j < L.n_dof; ++j) row[k++] = x[L.velocity + j];
    for (int i = 0; i < L.n_wagner; ++i) row[k++] = x[L.wagner + i];
    if (L.n_gust > 0) {
      for (int i = 0; i < L.n_gust; ++i) row[k++] = x[L.gust + i];
      row[k++] = l.gust_velocity;
      row[k++] = l.gust_effective;
    }
    row[k++] = l.lift;
    row[k++] = l.pitching_moment;
    if (L.n_dof == 3) row[k++] = l.hinge_moment;
    row[k++] = l.effective_downwash;
  };
  // Extremes: the largest and smallest value of each tracked channel over
  // the samples, the start and the integrator's step ends (so sparse
  // samples do not hide them), and where the search for the true extremum
  // starts after the run: the step end before the best value (the start, a
  // step end or a sample inside a step) and ends at the step end after it
  // -- a bracket of at most two steps, whatever the sample rate.
  // A state to restart from: with its spring regions and input segment as
  // the run had them (on a breakpoint, regions_of(x) could pick the other
  // side and the restart would leave along another trajectory).
  struct SampleState {
    double t = 0;
    std::vector<double> x;
    std::vector<int> regions;
    int segment = 0;
  };
  struct Bracket {
    SampleState from;   // the state where the search starts
    double to = 0;      // s, where it ends
    bool open = false;  // `to` is the next step end, not yet reached
  };
  struct Best {
    double value = -std::numeric_limits<double>::infinity();  // sign * channel
    Bracket bracket;
  };
  // [i][0]: maximum of channel i, [i][1]: minimum (as the maximum of -channel).
  std::vector<std::array<Best, 2>> step_best(tracked.size()), sample_best(tracked.size());
  SampleState previous_step;  // the last step end (the start before the first step)
  // A new best value of the row at t: its bracket starts at the last step end
  // and stays open until the next one.
  auto note = [&](std::vector<std::array<Best, 2>>& best, double t, const std::vector<double>& x) {
    for (std::size_t i = 0; i < tracked.size(); ++i) {
      const double v = row[tracked[i].column];
      for (int k = 0; k < 2; ++k) {
        Best& b = best[i][static_cast<std::size_t>(k)];
        const double sv = k == 0 ? v : -v;
        if (sv > b.value) {
          b.value = sv;
          b.bracket.from = previous_step.x.empty() ? SampleState{t, x, run.regions, run.input_segment} : previous_step;
          b.bracket.to = t;
          b.bracket.open = true;
        }
      }
    }
  };
  // At a step end: the open brackets end here.
  auto close_brackets = [&](double t) {
    for (auto* best : {&step_best, &sample_best})
      for (auto& pair : *best)
        for (Best& b : pair)
          if (b.bracket.open && t > b.bracket.from.t) {
            b.bracket.to = t;
            b.bracket.open = false;
          }
  };
  // A value v of a channel at t widens its extremes.
  auto widen = [](Extreme& e, double v, double t) {
    if (v > e.max) {
      e.max = v;
      e.time_of_max = t;
    }
    if (v < e.min) {
      e.min = v;
      e.time_of_min = t;
    }
  };
  auto observer = [&](double t, const std::vector<double>& x) {
    fill_row(t, x, run.regions, run.input_segment);
    for (std::size_t i = 0; i < tracked.size(); ++i) {
      Extreme& e = summary.extremes[tracked[i].extreme];
      const double v = row[tracked[i].column];
      widen(e, v, t);
      e.rms += v * v;  // sum of squares until the end of the run
    }
    note(sample_best, t, x);
    sink.append(t, row);
    return ObserverAction::kContinue;
  };
  auto step_observer = [&](double t, const std::vector<double>& x) {
    close_brackets(t);
    fill_row(t, x, run.regions, run.input_segment);
    note(step_best, t, x);
    previous_step.t = t;
    previous_step.x = x;
    previous_step.regions = run.regions;
    previous_step.segment = run.input_segment;
    return ObserverAction::kContinue;
  };

  // A displacement's extremes are also taken at its true peaks (velocity
  // zeros located on the stepper's dense output, integrator.hpp): exact
  // whatever the step length. (A long-stepping integrator's step ends can
  // all miss the cycle with the largest peak, which the bracket search
  // below then never visits: Bulirsch-Stoer at rtol 1e-8, steps of a fifth
  // of a period, found a cubic section's pitch maximum 1.5 % low.)
  std::array<int, kMaxDof> displacement_extreme{-1, -1, -1};
  for (std::size_t i = 0; i < tracked.size(); ++i)
    for (int j = 0; j < L.n_dof; ++j)
      if (summary.extremes[tracked[i].extreme].channel == kDofNames[j])
        displacement_extreme[static_cast<std::size_t>(j)] = static_cast<int>(tracked[i].extreme);
  auto peak_observer = [&](int dof, double t, const std::vector<double>& x) {
    const int k = displacement_extreme[static_cast<std::size_t>(dof)];
    if (k < 0) return ObserverAction::kContinue;
    widen(summary.extremes[static_cast<std::size_t>(k)], x[static_cast<std::size_t>(L.displacement + dof)], t);
    return ObserverAction::kContinue;
  };

  // The true extremum of channel i in a bracket: the channel's value on the
  // trajectory restarted from the bracket's start (integrated at the case's
  // settings), maximised by Brent's method (Boost.Math) over the bracket.
  // Kept only when it exceeds the extreme found so far.
  ExactFlowCache restart_cache;  // the restarts' regions, built once
  auto refine = [&](std::size_t i, const Bracket& b, int k) {
    Extreme& e = summary.extremes[tracked[i].extreme];
    const double sign = k == 0 ? 1.0 : -1.0;
    double& best = k == 0 ? e.max : e.min;
    double& at = k == 0 ? e.time_of_max : e.time_of_min;
    const double lo = b.from.t, hi = b.open ? run.time : std::min(b.to, run.time);
    if (b.from.x.empty() || !(hi > lo)) return;
    auto value = [&](double t) {
      RunState r;
      r.exact_cache = &restart_cache;
      r.time = lo;
      r.x = b.from.x;
      r.regions = b.from.regions;
      r.input_segment = b.from.segment;
      integrate(model, r, t, set.integrator, OutputSchedule::none());
      fill_row(r.time, r.x, r.regions, r.input_segment);
      return -sign * row[tracked[i].column];
    };
    const auto [t_best, v_best] =
        boost::math::tools::brent_find_minima(value, lo, hi, std::numeric_limits<double>::digits / 2);
    const double candidate = -sign * v_best;  // the channel's value there
    if (sign * candidate > sign * best) {
      best = candidate;
      at = t_best;
    }
  };

  RunOutcome outcome;
  auto fill_outcome = [&]() {
    for (auto& e : summary.extremes)
      e.rms = run.samples > 0 ? std::sqrt(e.rms / static_cast<double>(run.samples)) : 0.0;
    for (const auto& e : summary.extremes)
      if (std::isfinite(e.max) && std::isfinite(e.min)) {
        outcome.numbers.push_back({e.channel + "_max", e.max, e.units});
        outcome.numbers.push_back({e.channel + "_time_of_max", e.time_of_max, "s"});
        outcome.numbers.push_back({e.channel + "_min", e.min, e.units});
        outcome.numbers.push_back({e.channel + "_time_of_min", e.time_of_min, "s"});
      }
    summary.end_time = run.time;
    summary.end_tau = U_over_b * run.time;
    summary.steps = run.steps;
    summary.rhs_evaluations = run.rhs_evaluations;
    summary.samples = run.samples;
    summary.switches = run.switches;
    outcome.completed = summary.completed;
    outcome.status = summary.status;
    outcome.samples = run.samples;
    outcome.numbers.insert(outcome.numbers.begin(), {"end_time", summary.end_time, "s"});
    outcome.counts = {{"steps", static_cast<std::int64_t>(run.steps)},
                      {"rhs_evaluations", static_cast<std::int64_t>(run.rhs_evaluations)},
                      {"switches", static_cast<std::int64_t>(run.switches)}};
  };
  // The start is a step end: the extremes' brackets begin there.
  run.input_segment = model.gusts().segment_of(run.time);
  fill_row(run.time, run.x, run.regions, run.input_segment);
  note(step_best, run.time, run.x);
  previous_step = {run.time, run.x, run.regions, run.input_segment};
  try {
    const IntegrationResult r = integrate(model, run, set.duration, set.integrator, set.output,
                                          {observer, peak_observer, cancel, step_observer});
    summary.completed = r.reason == StopReason::kEndTime;
    summary.status = r.reason == StopReason::kEndTime    ? "completed"
                     : r.reason == StopReason::kCancelled ? "cancelled"
                                                          : "stopped";
    if (r.reason != StopReason::kCancelled)
      for (std::size_t i = 0; i < tracked.size(); ++i)
        for (int k = 0; k < 2; ++k) {
          // A restart that fails numerically leaves the extreme found.
          const std::size_t kk = static_cast<std::size_t>(k);
          try {
            refine(i, step_best[i][kk].bracket, k);
            if (sample_best[i][kk].value > step_best[i][kk].value) refine(i, sample_best[i][kk].bracket, k);
          } catch (const NumericalError&) {
          }
        }
  } catch (const NumericalError& e) {
    summary.completed = false;
    summary.status = std::string("numerical-error: ") + e.what();
    fill_outcome();
    sink.finish(outcome);
    throw;
  }
  fill_outcome();
  sink.finish(outcome);
  return summary;
}

}  // namespace aerosect
