#pragma once
// Linear stability of the assembled model: flutter and divergence.
//
// State-space method. The model's linear state matrix A(U) (structure +
// apparent mass + Wagner lag states, built analytically by
// AeroelasticModel::state_matrix with a chosen stiffness per spring) is
// solved for its eigenvalues lambda at each airspeed. The structural modes
// are numbered like the in-vacuo modes (ascending frequency) and followed
// in speed by continuation: the candidate nearest the previous root, with
// the mode-shape correlation (MAC of the displacement part) deciding between
// near-equidistant candidates; a step is halved while a root would move by
// more than half its distance to the nearest other eigenvalue or two modes
// claim one eigenvalue. Never by sort order, so modes do not swap through a
// frequency coalescence.
//   frequency = |Im lambda| (rad/s), damping ratio zeta = -Re lambda / |lambda|
//   (negative = unstable), reduced frequency k = omega b / U.
// Flutter: the first speed at which an oscillatory mode's Re(lambda) turns
// from negative to non-negative, located by TOMS 748 on Re(lambda(U)).
// Divergence: a real eigenvalue through zero; det A(U) changes sign there
// (complex pairs contribute |lambda|^2 > 0), located by TOMS 748 on det A.
// With every Wagner approximation phi(inf) = 1 the divergence speed is the
// quasi-static one of modes.hpp.
//
// The p-k method with the exact Theodorsen function (pk.hpp) runs on the same
// section; the difference between the two flutter speeds is the error of
// the Wagner approximation.

#include <complex>
#include <optional>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "aerosect/analysis/describing_function.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/model/system.hpp"
#include "aerosect/units.hpp"

namespace aerosect {

struct StabilityRoot {
  std::complex<double> eigenvalue;  // 1/s
  double frequency = 0;             // rad/s
  double damping_ratio = 0;         // -Re / |lambda|
  double reduced_frequency = 0;     // omega b / U (inf at U = 0 for an oscillatory root)
  Eigen::VectorXcd shape;           // (h/b, alpha[, beta]), largest |component| = 1
};

struct StabilitySweep {
  std::vector<double> speeds;                     // m/s, ascending
  std::vector<std::vector<StabilityRoot>> roots;  // [speed][mode]
};

struct Crossing {
  bool found = false;
  double speed = 0;              // m/s (true airspeed)
  double frequency = 0;          // rad/s (0 for divergence)
  double reduced_frequency = 0;  // omega b / U
  int mode = -1;                 // tracked mode (-1 for divergence)
  Eigen::VectorXcd shape;        // (h/b, alpha[, beta]) at the crossing
};

// Sweep of the state-space eigenvalues. `model` gives everything but the
// airspeed (which each speed replaces) and `stiffness` the linear stiffness
// of every spring (N/m, N m/rad). Speeds must be >= 0 and ascending.
StabilitySweep state_space_sweep(const ModelDescription& model, const DofVector& stiffness,
                                 const std::vector<double>& speeds);
Crossing state_space_flutter(const ModelDescription& model, const DofVector& stiffness,
                             const StabilitySweep& sweep, double relative_tolerance = 1e-9);
Crossing state_space_divergence(const ModelDescription& model, const DofVector& stiffness,
                                const std::vector<double>& speeds,
                                double relative_tolerance = 1e-9);

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
};

struct MethodResult {
  std::string method;  // "state-space" or "p-k"
  StabilitySweep sweep;
  Crossing flutter, divergence;
};

struct LinearisationResult {
  Linearisation linearisation = Linearisation::kNominal;
  DofVector stiffness;               // per DOF, SI
  std::vector<MethodResult> methods; // state-space first when both
};

struct FlutterReport {
  std::vector<LinearisationResult> results;  // nominal first
  std::vector<std::string> mode_names;       // "plunge", "pitch", "flap" (dominant DOF in vacuo)
  double reference_speed = 0;                // b omega_alpha, m/s
  double reference_frequency = 0;            // omega_alpha, rad/s
  double density = 0;                        // kg/m^3
  bool has_gap = false;                      // some spring has a gap (gap bounds computed)
  std::optional<double> dive_speed_eas;      // V_D from the case, m/s EAS
  LcoPrediction lco;                         // describing-function LCO (one nonlinear spring)
};

// 400 speeds from U_max/400 to U_max = max(10 b omega_alpha, 1.5 U_case,
// 1.5 * 1.15 V_D in TAS).
std::vector<double> default_speeds(const Case& c);

FlutterReport flutter_analysis(const Case& c, const FlutterOptions& options);

}  // namespace aerosect
