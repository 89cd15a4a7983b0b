#pragma once
// Limit-cycle extraction during a run (an observer of the integrator's true
// peaks, not a pass over a stored record).
//
// The watched DOF (the nonlinear spring's, or pitch) defines the cycles:
// its extrema alternate between maxima and minima; a cycle runs from one
// maximum to the next. Per cycle: amplitude A = (max - min)/2 with the
// cycle's maximum and the minimum before it, period T between maxima. Runs
// are classed:
//   periodic      A and T repeat to `tolerance` (relative) over
//                 `settle_cycles` successive cycles, after `min_cycles`: the
//                 run stops there (stationary LCO). A cycle whose period holds
//                 p maxima of different heights (p <= 4) is found as the same
//                 repetition with lag p;
//   decayed       only for one of two verified reasons, both with rest
//                 (every gap open; with a steady condition the static
//                 equilibrium, linearised in the region each spring lies
//                 in there: against a stop, the gap-closed slope) a stable
//                 equilibrium of the linearised model, so that a small
//                 motion dies out: "to rest", A
//                 below `decay_floor`; "into the gap", the watched DOF's
//                 extrema inside its spring's gap (where the model is that
//                 stable linear one) over the last 2 x `settle_cycles`
//                 half-cycles with A shrinking over the last
//                 `settle_cycles` cycles;
//   divergent     |pitch| or |flap| beyond `divergence_angle`, or |plunge|
//                 beyond `divergence_plunge` semichords: the run stops;
//   non-periodic  none of these, but the motion is stationary (quasi-
//                 periodic or chaotic): at least 2 W cycles (W =
//                 `stationary_window`), and the mean cycle amplitude of the
//                 last W cycles differs from that of the W before by no more
//                 than three standard errors of the difference,
//                 3 sqrt((s1^2 + s2^2)/W) with s1, s2 the windows' sample
//                 standard deviations, or `stationary_tolerance` of the mean
//                 (a growing, dying or converging motion drifts by more than
//                 its scatter within a window): the spread of A over the
//                 last cycles is given;
//   unsettled     none of these by the end of the run: the motion is still
//                 growing or dying out, or the run is too short to tell.
//                 A caller extends such a run (the sweep does, up to its
//                 cap) rather than report it as an answer.
// Per DOF, over the last settled cycles: half peak-to-peak amplitude, the
// largest and smallest value (asymmetric cycles), in m or rad.
//
// Cycle content (periodic runs; the tracker sees only peaks, so the cycle is
// sampled afterwards by sample_settled_cycle): one more period T = 1/f is
// integrated from where the tracker stopped and each DOF is sampled from the
// dense output at N equally spaced instants x_n = x(t0 + n T/N), n = 0..N-1
// (N = samples per cycle, 128 by default). Over exactly one period
// (harmonic_content):
//   mean            x_bar = (1/N) sum x_n                          (m or rad)
//   rms             sqrt((1/N) sum x_n^2), about ZERO              (m or rad)
//   rms_about_mean  sqrt((1/N) sum (x_n - x_bar)^2)                (m or rad)
//   harmonics       a_k = (2/N) |X_k|, X_k = sum x_n exp(-2 pi i k n / N),
//                   k = 1..K (K = 5 by default): the amplitude of the k-th
//                   harmonic, x(t) ~ x_bar + sum a_k cos(2 pi k t/T + phi_k)
//                   (m or rad); needs K < N/2
//   thd             total harmonic distortion relative to the fundamental,
//                   sqrt(sum_{k>=2} a_k^2) / a_1 over every harmonic the
//                   sampling resolves (2 .. N/2), from Parseval's relation
//                   2 rms_about_mean^2 = sum_k a_k^2 (the Nyquist bin,
//                   k = N/2, counted with weight sqrt(2) (X_{N/2}/N)); 1
// With uniform samples over one whole period, these sums are the exact
// Fourier coefficients of the cycle up to aliasing by harmonics N-k, N+k,
// ... (the rectangle rule is exact for trigonometric polynomials of degree
// below N), so they are as accurate as the cycle's spectrum decays.

#include <array>
#include <span>
#include <string>
#include <vector>

#include "aerosect/integrate/integrator.hpp"
#include "aerosect/model/system.hpp"

namespace aerosect {

// Codes as in the sweep map's response_class (4 there is a failed point).
enum class ResponseClass { kDecayed = 0, kPeriodic = 1, kNonPeriodic = 2, kDivergent = 3, kUnsettled = 5 };
// Why a run was classed decayed (see above).
enum class DecayReason { kNone = 0, kToRest = 1, kIntoGap = 2 };
const char* to_string(DecayReason r);
const char* to_string(ResponseClass c);

struct LcoSettings {
  int min_cycles = 8;
  int settle_cycles = 6;
  double tolerance = 1e-4;
  double decay_floor = 1e-9;        // rad or m of the watched DOF
  double divergence_angle = 1.0;    // rad (57 deg): beyond the theory's small angles
  double divergence_plunge = 10.0;  // semichords
  int watch_dof = -1;               // -1: the first nonlinear spring's DOF, else pitch
  int stationary_window = 20;       // W, cycles (non-periodic)
  double stationary_tolerance = 1e-3;
};

struct DofCycle {
  double amplitude = 0;  // half peak-to-peak
  double max = 0, min = 0;
};

struct LcoResult {
  ResponseClass response = ResponseClass::kUnsettled;
  DecayReason decay_reason = DecayReason::kNone;  // when decayed
  int watched_dof = kPitch;
  int cycles = 0;           // complete cycles of the watched DOF
  double frequency = 0;     // Hz (periodic and non-periodic)
  double spread = 0;        // relative spread of A over the last cycles
  int peaks_per_period = 1; // maxima of the watched DOF per LCO period (1 to 4)
  bool stopped_early = false;
  std::array<DofCycle, 3> dof{};
};

// Mean, RMS and harmonic content of one period of a signal given by N
// equally spaced samples (see above). harmonics: K, 1 <= K < N/2.
struct DofHarmonics {
  double mean = 0, rms = 0, rms_about_mean = 0;  // m or rad
  std::vector<double> harmonics;                 // a_1 .. a_K, m or rad
  double thd = 0;                                // 1 (0 when a_1 = 0)
};
DofHarmonics harmonic_content(std::span<const double> one_period, int harmonics);

struct CycleSettings {
  int samples = 128;   // N, samples per cycle
  int harmonics = 5;   // K
};

// One settled cycle: per DOF, the N samples (rotated so that sample 0 is the
// watched DOF's largest sample: the phase origin lies at its maximum to
// within T/N) and their harmonic content.
struct SettledCycle {
  double period = 0;  // s, the T sampled
  int samples = 0;    // N
  std::array<std::vector<double>, 3> trace;  // per DOF, m or rad (empty for absent DOFs)
  std::array<DofHarmonics, 3> dof;
};

// Integrates one period T more from `run` (which moves on by T) with the
// sample observer at T/N and returns the sampled cycle. Throws
// NumericalError like integrate().
SettledCycle sample_settled_cycle(const AeroelasticModel& model, RunState& run, double period,
                                  const IntegratorSettings& settings, const CycleSettings& cycle,
                                  int watched_dof);

// The DOF whose peaks decide the response class: settings.watch_dof when
// given, else the first DOF with a nonlinear spring, else pitch.
int lco_watched_dof(const AeroelasticModel& model, const LcoSettings& settings);

class LcoTracker {
 public:
  LcoTracker(const AeroelasticModel& model, LcoSettings settings);
  ObserverAction on_peak(int dof, double t, const std::vector<double>& x);
  // Class and cycle figures once the run has ended (after end-of-run or a stop).
  LcoResult result() const;
  // The class is decided (periodic, decayed, divergent: the run stopped
  // there), or the motion is stationary (non-periodic): no longer run helps.
  bool decided() const { return decided_flag_; }
  bool stationary() const;
  // The state at the maximum of the watched DOF where a periodic cycle was
  // recognised (empty otherwise): a point on the cycle, the seed of its
  // refinement to the periodic orbit.
  const std::vector<double>& periodic_state() const { return periodic_state_; }

 private:
  struct Extremum {
    double t, x;
  };
  const AeroelasticModel& model_;
  LcoSettings s_;
  int watch_ = kPitch;
  double gap_lo_ = 0, gap_hi_ = 0;  // watched spring's innermost region around its offset
  bool has_gap_ = false;
  bool rest_unstable_ = false;  // rest is unstable (linearised about it: gaps open, or the static equilibrium's regions)
  std::array<std::vector<Extremum>, 3> extrema_;
  std::vector<double> amplitude_, period_, cycle_end_;  // per complete cycle
  static constexpr int kMaxLag = 4;
  int lag_ = 1;  // maxima per period of a settled cycle
  ResponseClass decided_ = ResponseClass::kUnsettled;
  DecayReason decay_reason_ = DecayReason::kNone;
  bool decided_flag_ = false;
  std::vector<double> periodic_state_;
};

}  // namespace aerosect
