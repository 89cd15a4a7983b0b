#pragma once
// Preload of a freeplay surface at the case's airspeed (issue #18 scope 4):
// whether the steady flight condition holds the surface against a stop, and
// the LCO map against the preload level.
//
// Hold (preload_hold). The static equilibrium of the case's condition
// (equilibrium.hpp) at its airspeed: where the nonlinear spring's DOF lies,
// in which region, the spring force there (against a stop: the contact
// load), and whether the linearisation about it (each spring's tangent
// stiffness in its region: against a stop the gap-closed slope) has no
// growing root at the case airspeed (the growth criterion of
// root_tracking.hpp). Held = against a stop and that linearisation stable:
// a small disturbance dies out on the stop and no freeplay LCO starts from
// it (a large one may still knock the surface off; the map below tries
// one).
//
// Map (preload_map). The preload key: `steady.hinge_moment` (N m/m) when
// the nonlinear spring is the flap's (a tab or actuator moment: it acts on
// the flap alone), else `steady.incidence_deg` (degrees: the steady
// aerodynamic moment and lift load pitch and plunge). The swept level
// replaces the case's own value of that key; every other part of the
// condition stays. Its sign is the one that pushes the surface from its
// level-0 equilibrium towards the stop it is nearer to (or already on);
// positive when it sits at the gap's centre. Levels, in that direction:
//   L_contact  the smallest |level| whose equilibrium lies against a stop
//              (doubling from 1e-3 of a scale -- k d for a hinge moment, k
//              the gap-closed stiffness and d the half-gap; 1 degree of
//              incidence -- then bisection to 1e-6 relative);
//   L_hold     the hold-off estimate (common practice, no source): the
//              smallest |level| at which the contact load reaches the
//              oscillating spring force of the level-0 LCO,
//              F_osc = (f(x_max) - f(x_min)) / 2 over its cycle; above it
//              the steady contact load exceeds what the cycle's dynamic
//              load can take off the stop;
//   top        2 max(L_hold, L_contact) (the scale when both are 0).
// The map is the sweep (sweep.hpp) of the key over `levels` evenly spaced
// levels from 0 to the top, up and down with continuation, from the base
// request's start (the caller's disturbance about each level's
// equilibrium). An LCO at a level: a periodic or non-periodic response in
// either direction. The answer: the highest |level| with an LCO and the
// next level swept above it bracket the preload above which freeplay LCO
// disappears; "LCO at every level swept" when the top level still has one
// (in the text: up to the top); "no LCO at any level swept" when none has.

#include <atomic>
#include <limits>
#include <string>
#include <vector>

#include "aerosect/analysis/sweep.hpp"
#include "aerosect/io/case.hpp"

namespace aerosect {

struct PreloadHold {
  bool applicable = false;     // one nonlinear spring with breakpoints
  std::string reason;          // why not, when not applicable
  bool steady_condition = false;  // the case gives a [steady] condition
  int spring = -1;             // DOF of the nonlinear spring
  bool equilibrium_found = false;
  double displacement = 0;     // of that DOF at the equilibrium, m or rad
  std::string region;          // its region there ("gap", "upper stop", ...)
  bool against_stop = false;   // a region other than the one holding the gap's centre
  double spring_force = 0;     // f there, N/m or N m/m: the contact load when against a stop
  bool linearisation_stable = false;  // about the equilibrium, at the case airspeed
  bool held = false;           // against_stop && linearisation_stable
};
PreloadHold preload_hold(const Case& c);

enum class PreloadOutcome {
  kBracketed,   // LCO up to `bracket_low`, none from `bracket_high` up
  kEveryLevel,  // LCO at the top level swept
  kNone,        // no LCO at any level swept
};

struct PreloadMap {
  bool available = false;
  std::string reason;          // why not, when not available
  std::string key;             // "steady.hinge_moment" or "steady.incidence_deg"
  std::string units;           // "N m m-1" or "degree"
  int spring = -1;
  double direction = 1;        // sign of the swept levels
  double contact_level = std::numeric_limits<double>::quiet_NaN();  // |L_contact|, key units
  double oscillating_force = std::numeric_limits<double>::quiet_NaN();  // F_osc of the level-0 LCO, N/m or N m/m
  double hold_off_level = std::numeric_limits<double>::quiet_NaN();     // |L_hold| (NaN without a level-0 LCO)
  SweepRequest request;        // the sweep run (its axis: the swept levels, ascending)
  std::vector<SweepPoint> points;
  std::vector<double> levels;  // signed, ascending in |level|
  std::vector<bool> lco;       // per level: an LCO in either direction
  std::vector<double> contact_load;   // per level: spring force at its equilibrium (NaN: none)
  std::vector<bool> against_stop;     // per level
  PreloadOutcome outcome = PreloadOutcome::kNone;
  double bracket_low = 0, bracket_high = 0;  // signed levels (kBracketed)
  std::string verdict;         // the answer in words
};

// `base` is the sweep request of the map without its axis (case text,
// overrides, run length, disturbance, jobs); `c` the case it was made
// from (parsed). Throws Cancelled when `cancel` is set.
PreloadMap preload_map(const Case& c, const SweepRequest& base, int levels = 11,
                       const std::atomic<bool>* cancel = nullptr);

// The preload key of a case: "steady.hinge_moment" for a nonlinear flap
// spring, else "steady.incidence_deg".
std::string preload_key(int spring);

}  // namespace aerosect
