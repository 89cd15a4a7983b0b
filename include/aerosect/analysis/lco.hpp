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
//   decayed       A below `decay_floor` (to rest), or the watched DOF stays
//                 inside its spring's gap with A shrinking (into the gap);
//   divergent     |pitch| or |flap| beyond `divergence_angle`, or |plunge|
//                 beyond `divergence_plunge` semichords: the run stops;
//   non-periodic  none of these by the end of the run (quasi-periodic or
//                 chaotic): the spread of A over the last cycles is given.
// Per DOF, over the last settled cycles: half peak-to-peak amplitude, the
// largest and smallest value (asymmetric cycles), in m or rad.

#include <array>
#include <string>
#include <vector>

#include "aerosect/integrate/integrator.hpp"
#include "aerosect/model/system.hpp"

namespace aerosect {

enum class ResponseClass { kDecayed = 0, kPeriodic = 1, kNonPeriodic = 2, kDivergent = 3 };
const char* to_string(ResponseClass c);

struct LcoSettings {
  int min_cycles = 8;
  int settle_cycles = 6;
  double tolerance = 1e-4;
  double decay_floor = 1e-9;        // rad or m of the watched DOF
  double divergence_angle = 1.0;    // rad (57 deg): beyond the theory's small angles
  double divergence_plunge = 10.0;  // semichords
  int watch_dof = -1;               // -1: the first nonlinear spring's DOF, else pitch
};

struct DofCycle {
  double amplitude = 0;  // half peak-to-peak
  double max = 0, min = 0;
};

struct LcoResult {
  ResponseClass response = ResponseClass::kNonPeriodic;
  int watched_dof = kPitch;
  int cycles = 0;           // complete cycles of the watched DOF
  double frequency = 0;     // Hz (periodic and non-periodic)
  double spread = 0;        // relative spread of A over the last cycles
  int peaks_per_period = 1; // maxima of the watched DOF per LCO period (1 to 4)
  bool stopped_early = false;
  std::array<DofCycle, 3> dof{};
};

class LcoTracker {
 public:
  LcoTracker(const AeroelasticModel& model, LcoSettings settings);
  ObserverAction on_peak(int dof, double t, const std::vector<double>& x);
  // Class and cycle figures once the run has ended (after end-of-run or a stop).
  LcoResult result() const;

 private:
  struct Extremum {
    double t, x;
  };
  const AeroelasticModel& model_;
  LcoSettings s_;
  int watch_ = kPitch;
  double gap_lo_ = 0, gap_hi_ = 0;  // watched spring's innermost region around its offset
  bool has_gap_ = false;
  bool rest_unstable_ = false;  // rest is unstable (linearised about it, gaps open)
  std::array<std::vector<Extremum>, 3> extrema_;
  std::vector<double> amplitude_, period_, cycle_end_;  // per complete cycle
  static constexpr int kMaxLag = 4;
  int lag_ = 1;  // maxima per period of a settled cycle
  ResponseClass decided_ = ResponseClass::kNonPeriodic;
  bool decided_flag_ = false;
};

}  // namespace aerosect
