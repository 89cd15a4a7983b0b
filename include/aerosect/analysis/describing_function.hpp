#pragma once
// Describing-function prediction of limit-cycle oscillation (equivalent
// linearisation, Gelb & Vander Velde 1968) for a case with one nonlinear
// spring j.
//
// For an amplitude A of x_j = A sin(omega t) the spring is replaced by its
// equivalent stiffness N(A) (spring.hpp); an LCO of amplitude A can exist
// at every airspeed where the linear system with k_j = N(A) is on a
// flutter boundary (the largest real part of its oscillatory eigenvalues
// changes sign), at that flutter frequency: the lowest such speed is branch
// 0, the next branch 1 (where an instability band closes again), and so on.
// Sweeping A traces the curves, with every branch of a fold. A branch point
// is stable when a slightly larger amplitude makes the equivalent system
// stable and a slightly smaller one unstable (the largest real part of the
// state-matrix eigenvalues at U_LCO, with k_j = N(A(1 +- 1e-3))).
// The prediction assumes a near-harmonic oscillation about x = 0: for an
// offset or asymmetric gap the bias is ignored (say so when reporting).

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
  // Which neutral speed of the equivalent linear system this is, counted
  // from below (0: the lowest; an instability band [0, 1] closes again at 1).
  int branch = 0;
};

struct LcoPrediction {
  bool available = false;
  std::string reason;   // why not, when not available
  int spring = -1;      // DOF of the nonlinear spring
  std::vector<LcoPredictionPoint> points;  // by branch, then ascending amplitude
};

// `speeds` is the flutter sweep grid (m/s, ascending); `count` amplitudes
// are spaced geometrically over the range where N(A) changes. A set
// `cancel` stops it between amplitudes (throws Cancelled).
LcoPrediction describing_function_lco(const Case& c, const std::vector<double>& speeds,
                                      int count = 80, const std::atomic<bool>* cancel = nullptr);

}  // namespace aerosect
