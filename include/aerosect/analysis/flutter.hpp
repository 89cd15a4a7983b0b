#pragma once
// Linear stability of the assembled model: flutter and divergence.
//
// State-space method. The model's linear state matrix A(U) (structure +
// apparent mass + Wagner lag states, AeroelasticModel::state_matrix_at with
// a chosen stiffness per spring) is solved for its eigenvalues lambda at
// each airspeed. The structural modes are numbered like the in-vacuo modes
// (ascending frequency) and followed in speed by the continuation of
// root_tracking.hpp (nearest candidate, MAC tie-break, never sort order); a
// step is halved while a root would move by more than half its distance to
// the nearest other eigenvalue or two modes claim one eigenvalue (at most
// 14 times).
//   frequency = |Im lambda| (rad/s), damping ratio zeta = -Re lambda / |lambda|
//   (negative = unstable), reduced frequency k = omega b / U.
// Flutter: the first crossing of root_tracking.hpp (growth criterion there),
// located by TOMS 748 on Re(lambda(U)).
// Divergence: a real eigenvalue through zero; det A(U) changes sign there
// (complex pairs contribute |lambda|^2 > 0), located by TOMS 748 on det A.
// With every Wagner approximation phi(inf) = 1 the divergence speed is the
// quasi-static one of modes.hpp.
//
// The p-k method with the exact Theodorsen function (pk.hpp) runs on the same
// section; the difference between the two flutter speeds is the error of
// the Wagner approximation.

#include <atomic>
#include <complex>
#include <optional>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "aerosect/analysis/describing_function.hpp"
#include "aerosect/analysis/equilibrium.hpp"
#include "aerosect/analysis/root_tracking.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/model/system.hpp"
#include "aerosect/units.hpp"

namespace aerosect {

// Roots, sweeps and crossings: root_tracking.hpp (shared with p-k).

// The model the stability analyses linearise: the description with no DOF
// held and no gust input (the Küssner lag states are driven by the input
// alone and never change stability; a long turbulence record is not
// carried). Built once per analysis; state_matrix_at gives A(U).
AeroelasticModel stability_model(const ModelDescription& description);

// Sweep of the state-space eigenvalues. `model` gives everything but the
// airspeed (which each speed replaces) and `stiffness` the linear stiffness
// of every spring (N/m, N m/rad). Speeds must be >= 0 and ascending.
// `model` is a stability_model (held DOFs and gusts are ignored either way).
// A set `cancel` stops the sweep between speeds (throws Cancelled).
RootSweep state_space_sweep(const AeroelasticModel& model, const DofVector& stiffness,
                            const std::vector<double>& speeds,
                            const std::atomic<bool>* cancel = nullptr);
Crossing state_space_flutter(const AeroelasticModel& model, const DofVector& stiffness,
                             const RootSweep& sweep, double relative_tolerance = 1e-9);
Crossing state_space_divergence(const AeroelasticModel& model, const DofVector& stiffness,
                                const std::vector<double>& speeds,
                                double relative_tolerance = 1e-9);
// The same from a description (builds its stability_model once).
RootSweep state_space_sweep(const ModelDescription& model, const DofVector& stiffness,
                            const std::vector<double>& speeds,
                            const std::atomic<bool>* cancel = nullptr);

// ---------------------------------------------------------------------------
// The flutter command: both methods over the spring linearisations a case
// needs.

enum class Linearisation { kNominal, kGapClosed, kGapOpen, kDescribingFunction };
const char* to_string(Linearisation l);

struct FlutterOptions {
  std::vector<double> speeds;            // m/s; empty = default_speeds(case)
  bool state_space = true;
  bool pk = true;
  // Amplitude at which nonlinear springs are replaced by their
  // describing-function stiffness, in case-file units (degrees for pitch
  // and flap springs, m for plunge); adds that linearisation when given.
  std::optional<double> amplitude;
  double relative_tolerance = 1e-9;      // on the crossing speeds
  bool lco_prediction = true;            // describing-function LCO curve (one nonlinear spring)
  // When set, the analysis stops between speeds and throws Cancelled.
  const std::atomic<bool>* cancel = nullptr;
};

struct MethodResult {
  std::string method;  // "state-space" or "p-k"
  RootSweep sweep;
  Crossing flutter, divergence;
};

struct LinearisationResult {
  Linearisation linearisation = Linearisation::kNominal;
  DofVector stiffness;               // per DOF, SI
  std::vector<MethodResult> methods; // state-space first when both
  std::vector<std::string> mode_names;  // mode naming rule below, at this stiffness
};

struct FlutterReport {
  std::vector<LinearisationResult> results;  // nominal first
  // Mode naming rule: mode i (numbered as the in-vacuo modes of
  // (diag(k), M_s), ascending frequency) is named after the DOF holding the
  // largest share of its in-vacuo kinetic energy (mode_shapes.hpp,
  // dominant_dof), at the linearisation's own stiffness: a DOF without
  // stiffness gives a mode of zero in-vacuo frequency, numbered first and
  // named after that DOF. These are the nominal linearisation's names.
  std::vector<std::string> mode_names;       // "plunge", "pitch", "flap"
  double reference_speed = 0;                // b omega_alpha, m/s
  double reference_frequency = 0;            // omega_alpha, rad/s
  double density = 0;                        // kg/m^3
  bool has_gap = false;                      // some spring has a gap (gap bounds computed)
  std::optional<double> dive_speed_eas;      // V_D from the case, m/s EAS
  LcoPrediction lco;                         // describing-function LCO (one nonlinear spring)
  // Static equilibrium at the case's airspeed (equilibrium.hpp). With a
  // steady condition the nominal linearisation is about it: each spring's
  // tangent stiffness in the region the equilibrium lies in (a freeplay
  // spring against its stop: k; in its gap: 0; a cubic spring: its slope
  // there), held over the whole speed range (valid while the equilibrium
  // stays in that region); `nominal_basis` says which. The single-input
  // describing-function prediction assumes an oscillation centred in the
  // gap: with a steady condition it is omitted (lco.reason says why).
  EquilibriumResult equilibrium;
  std::string nominal_basis = "nominal stiffness of every spring (the gap closed)";
  // Where a nonlinear analysis actually found stable limit cycles, beside
  // the linear gap-open..gap-closed bound: true-airspeed ranges (m/s) and
  // their source. Empty from flutter_analysis; the study fills it from its
  // branch of converged orbits (or its sweep's periodic runs).
  struct ObservedLco {
    std::vector<std::pair<double, double>> ranges;  // [from, to], m/s TAS
    std::string source;
  } observed_lco;
};

// Names of the modes of (diag(stiffness), M_s) by the rule above.
std::vector<std::string> mode_names(const SectionProperties& section, const DofVector& stiffness);

// 400 speeds from U_max/400 to U_max = max(10 b omega_alpha, 1.5 U_case,
// 1.5 * 1.15 V_D in TAS).
std::vector<double> default_speeds(const Case& c);

FlutterReport flutter_analysis(const Case& c, const FlutterOptions& options);

}  // namespace aerosect
