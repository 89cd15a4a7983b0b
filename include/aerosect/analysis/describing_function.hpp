#pragma once
// Describing-function prediction of limit-cycle oscillation (equivalent
// linearisation, Gelb & Vander Velde 1968) for a case with one nonlinear
// spring j.
//
// For an amplitude A of x_j = A sin(omega t) the spring is replaced by its
// equivalent stiffness N(A) (spring.hpp). An LCO of amplitude A can exist
// at every airspeed U where the linear system with k_j = N(A) has a neutral
// oscillatory eigenvalue pair: a complex pair whose real part passes
// continuously through zero (a Hopf crossing) at a frequency clearly above
// zero (at least 1e-3 x the largest uncoupled in-vacuo frequency). A sign
// change of the growth rate that is not such a crossing -- a pair that turns
// real on the right of the imaginary axis, a real root through zero -- is a
// static divergence of the equivalent system, not an LCO: it is counted in
// `equivalent_divergence`, never reported as a point.
//
// Branches. The neutral points form curves in the (A, U) plane; a branch is
// one connected curve, followed through a fold in amplitude (an instability
// band that closes: its two neutral speeds meet) and numbered from 0 in
// ascending speed at its smallest amplitude. Each branch end says why it
// ends (BranchEnd).
//
// Amplitude grid. `count` amplitudes spaced geometrically over the range
// where N(A) changes (just past a gap: A = d (1 + s), s from 1e-4 to 100,
// d the largest breakpoint distance; a polynomial law: A from 1e-3 to 1 x
// thirty times the amplitude where N has changed by 0.1 %), then extended with the
// same spacing while any branch still has a neutral point at the largest
// amplitude, up to the physical amplitude limit (1 rad for pitch and flap,
// 10 semichords for plunge: beyond these the small-angle, thin-aerofoil
// model itself no longer holds; a design choice, common practice, no
// source). Between neighbouring amplitudes the grid is halved (down to
// 1/1024 of the base spacing) where the number of neutral points changes,
// where a neutral speed moves by more than 1 % of the speed range, or
// where the stability of a point changes, so that a curve is continuous to
// plotting accuracy and no segment falls between two grid amplitudes.
//
// Stability (the amplitude-perturbation criterion of the describing-
// function method, Gelb & Vander Velde 1968, ch. on limit-cycle stability;
// recalled from memory): at fixed U, a point is stable when a larger
// amplitude damps the critical pair and a smaller one drives it, i.e.
// d(Re lambda)/dA < 0 for the neutral pair, evaluated by central
// difference at A (1 +- 1e-3), AND no other root of the equivalent system
// (real roots included) grows at (A, U). Along a branch this is the sign of
// dU_neutral/dA times the sign of d(Re lambda)/dU: a crossing that
// destabilises with speed is stable where its neutral speed rises with
// amplitude.
//
// How the scan computes. Its results are those of the direct scan (Eigen's
// QR eigenvalues of the state matrix at every grid speed, sign changes of
// the ranked growth margins refined by TOMS 748 on those eigenvalues) to
// round-off: on the shipped and regression cases and variants of every
// law, the same branches, points, stability and divergence entries, speeds
// and frequencies within 1e-10 relative, at about a tenth of the cost
// without a steady condition (the mean equation dominates with one). The
// stiffness of spring j enters the state matrix as a rank-one term,
//   A(U, N) = A0(U) + N b e_d^T,  A0 quadratic in U,
// so det(sI - A) = p0(s) + N dq(s) at each grid speed (two QR eigenvalue
// sets per speed, N = 0 and a reference N). At every amplitude the grid
// spectra are the roots of that polynomial, polished by Newton from the
// neighbouring amplitude's (or speed's) roots and validated (n distinct
// roots, their sum the trace; else Aberth's iteration, else the QR
// eigenvalues). A sign change of a ranked value is classified from the two
// spectra at its interval's ends: one pair crossing the imaginary axis
// (its neutral point by Newton on det(i omega I - A(U, N)) = 0 in (U,
// omega)), one pair turning real (the double real root, by Newton, is the
// speed of the equivalent divergence) or pairs swapping their frequency
// order (a jump of the frequency ranking, no point); anything else is
// refined by TOMS 748 on the QR eigenvalues. The stability criterion's
// perturbed eigenvalues are the critical pair followed by Newton at
// A (1 +- 1e-3); the other roots come from the QR eigenvalues at (A, U).
// With a steady condition N changes with U (through the mean equation):
// the grid spectra are computed the same way, the sign changes refined by
// TOMS 748 on the QR eigenvalues.
//
// Without a steady condition the prediction assumes a near-harmonic
// oscillation about x = 0: for an offset or asymmetric gap the bias is
// ignored (say so when reporting).
//
// With a steady condition ([steady]: incidence, flap trim, hinge moment,
// gravity) the oscillation of spring j is x_j = B + A sin(omega t) about a
// bias B, and the dual-input describing function (Gelb & Vander Velde 1968,
// bias plus sinusoid; SpringLaw::dual_input_describing_function) replaces
// the spring by its mean force F0(B, A) in the mean equation and by its
// first-harmonic gain N_A(B, A) in the oscillatory one. At each (A, U):
//   mean equation: the static balance of equilibrium.hpp at airspeed U with
//     f_j replaced by F0(B, A):
//       (K_lin + U^2 K_st1) q_m + e_j F0(q_m,j, A) = -U^2 K_st1 q_a0 + f_gravity + f_trim,
//     K_st1 the steady aerodynamic stiffness per U^2 (C(0) = 1); the other
//     DOFs are condensed out (their block must be regular), leaving one
//     equation s(U) B + F0(B, A) = r(U) for B = q_m,j. Of its roots the
//     ones with a positive mean stiffness s + dF0/dB are kept (a root with a
//     negative one is a statically unstable mean), the one nearest the
//     centre of the spring's breakpoints when there are several;
//   harmonic condition: the linear system with k_j = N_A(B, A) has a
//     neutral oscillatory pair at U (as above).
// Held DOFs are not held (as in the flutter analysis's stability model).
// A neutral point whose oscillation stays inside one region of a
// piecewise-linear law (no breakpoint between B - A and B + A: a linear
// oscillation, not a limit cycle) or whose mean equation has no kept root
// is no LCO and is dropped. The stability criterion is the one above, with
// B solved again at A (1 +- 1e-3) and the same U. The amplitude grid is
// A = w 10^t, t from -3 to 2, w the half-width of the breakpoints' span
// (for a polynomial law as without a steady condition); a branch end at the
// smallest grid amplitude is the small-amplitude (linear) limit, one where
// the oscillation leaves the stops is a gap edge. Each point reports B.

#include <atomic>
#include <string>
#include <vector>

#include "aerosect/io/case.hpp"

namespace aerosect {

struct LcoPredictionPoint {
  double amplitude = 0;             // A of the nonlinear DOF, m or rad
  double equivalent_stiffness = 0;  // N(A), N/m or N m/rad per m span
  double speed = 0;                 // m/s (true airspeed)
  double frequency = 0;             // rad/s
  bool stable = false;
  int branch = 0;                   // connected curve, numbered as LcoPrediction::branches
  double bias = 0;                  // B: mean of the nonlinear DOF, m or rad (0 without a steady condition)
  double mean_force = 0;            // F0(B, A): mean spring force, N/m or N m/m (0 without one)
};

// Why a branch ends, at either end.
enum class BranchEnd {
  kGapEdge,         // smallest amplitude of a gap law: A -> the breakpoint (N -> gap-open value)
  kLinearLimit,     // smallest amplitude of a polynomial law: N -> the linear stiffness
  kBranchEnds,      // no neutral point beyond: the pair turns real, or N leaves the positive range
  kSpeedRange,      // the neutral speed leaves the swept speed range
  kAmplitudeLimit,  // the physical amplitude limit (1 rad; plunge 10 semichords)
};
const char* to_string(BranchEnd e);

struct LcoBranch {
  std::size_t first = 0, count = 0;  // its points: points[first, first + count), along the curve
  BranchEnd start = BranchEnd::kBranchEnds;  // end at points[first] (the smaller-amplitude end)
  BranchEnd end = BranchEnd::kBranchEnds;    // end at points[first + count - 1]
  bool closed = false;                       // a closed loop (no ends)
};

// A growth-rate sign change of the equivalent system that is no neutral
// oscillatory pair (a static divergence of the equivalent system).
struct EquivalentDivergence {
  double amplitude = 0;  // m or rad
  double speed = 0;      // m/s, where the growth rate jumps
};

struct LcoPrediction {
  bool available = false;
  std::string reason;   // why not, when not available
  int spring = -1;      // DOF of the nonlinear spring
  bool biased = false;  // the dual-input prediction of a steady condition (points carry B)
  double amplitude_limit = 0;  // physical amplitude limit used, m or rad
  std::vector<LcoPredictionPoint> points;  // by branch, then along the branch
  std::vector<LcoBranch> branches;
  std::vector<EquivalentDivergence> equivalent_divergence;
};

// `speeds` is the flutter sweep grid (m/s, ascending; with fewer than two
// the prediction is not available); `count`
// the base number of amplitudes (see above). A set `cancel` stops it
// between amplitudes (throws Cancelled).
LcoPrediction describing_function_lco(const Case& c, const std::vector<double>& speeds,
                                      int count = 80, const std::atomic<bool>* cancel = nullptr);

// Stable speed ranges of one branch: each run of consecutive stable points
// as (lowest speed, highest speed), m/s, in the order along the branch.
std::vector<std::pair<double, double>> stable_speed_ranges(const LcoPrediction& p, const LcoBranch& b);

// The predicted limit cycles at one airspeed (e.g. the case's): wherever two
// consecutive points of a branch bracket `speed` (m/s TAS, ends included),
// amplitude and frequency interpolated linearly in speed between them;
// stable when both points are (a segment across a stability change, a fold
// of the curve, is `stable` false). In the order of the branches and along
// each. The curve is sampled (describing_function_lco's amplitude steps), so
// the interpolation carries the sampling error of the curve.
struct LcoAtSpeed {
  double amplitude = 0;  // m or rad, of the nonlinear DOF
  double frequency = 0;  // rad/s
  bool stable = false;
  int branch = 0;
};
std::vector<LcoAtSpeed> lco_at_speed(const LcoPrediction& p, double speed);

}  // namespace aerosect
