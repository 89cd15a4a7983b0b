#pragma once
// Vertical gusts on the typical section.
//
// Gust velocity w_g positive UP (m/s, true airspeed), uniform along the span,
// given at the leading edge: the front of a gust reaches the leading edge at
// the profile's start time and the section penetrates it chordwise at the
// airspeed U (the typical-section idealisation of gust penetration).
//
// Aerodynamics (Küssner): the lift build-up on entering a sharp-edged gust
// is psi(s) = 1 - sum_i c_i exp(-d_i s), s = U t / b in semichords (a copy of
// the coefficients twice as large measures s in chords). In the time domain,
// with the same lag-state form as the Wagner states,
//   y_i' = (U/b) d_i (w_g - y_i),   w_hat = psi(0) w_g + sum_i c_i y_i   (m/s),
// and the gust adds f_c w_hat to the generalised aerodynamic force (f_c of
// aerodynamics.hpp): lift 2 pi rho U b w_hat at the quarter chord, moment
// (1/2 + a) b times that about the elastic axis, and Theodorsen's T12
// circulatory hinge moment -rho U b^2 T12 w_hat. An upward gust lifts the
// section (plunge goes negative).
//
// Profiles (several per case; the velocities add):
//   sharp-edged   w_g = W for t >= t0
//   1-cos         w_g = (U_ds/2) (1 - cos(pi x / H)), x = U (t - t0), 0 <= x <= 2H
//   sinusoidal    w_g = W sin(omega (t - t0)) for t >= t0 (for `cycles` periods,
//                 0 = until the end)
//   recorded      w_g linearly interpolated in a series (t0 + t_k, w_k); 0 outside
//                 it (a distance base x_k is turned into t_k = x_k / U by the reader)
// Each profile is piecewise smooth in time; the union of the profiles' switch
// times splits the run into input segments, and the right-hand side evaluates
// the stored segment's formulas (like the spring regions) while the
// integrator steps exactly onto every switch time.

#include <optional>
#include <span>
#include <string>
#include <vector>

#include "aerosect/model/aerodynamics.hpp"
#include "aerosect/model/turbulence.hpp"

namespace aerosect {

// Küssner approximations (the exponential form of WagnerApproximation).
WagnerApproximation kussner_two_pole();    // c = (0.5, 0.5), d = (0.13, 1.0)
WagnerApproximation kussner_three_pole();  // c = (0.236, 0.513, 0.171), d = (0.058, 0.364, 2.42)

enum class GustShape { kSharpEdged, kOneMinusCosine, kSinusoidal, kRecorded };
const char* to_string(GustShape s);

// The rule that sized a one-minus-cosine gust's velocity (kNone: the case
// gave the amplitude). Case key `design`: "cs-25" or "cs-23".
enum class GustRule { kNone, kCs25, kCs23 };
const char* to_string(GustRule r);  // "none", "cs-25", "cs-23"

struct GustProfile {
  GustShape shape = GustShape::kSharpEdged;
  double start = 0;       // s, gust front at the leading edge
  double amplitude = 0;   // m/s TAS: W, or U_ds (the 1-cos peak), or the sine amplitude
  double gradient = 0;    // H, m (1-cos: half the gust length)
  double frequency = 0;   // rad/s (sinusoidal)
  double cycles = 0;      // sinusoidal duration in periods, 0 = unbounded
  std::vector<double> record_time;      // recorded: s from `start`, strictly increasing
  std::vector<double> record_velocity;  // recorded: m/s TAS, up positive
  bool regulation_sized = false;        // 1-cos sized by a rule (see `rule`)
  GustRule rule = GustRule::kNone;      // which rule sized it
  double eas_to_tas = 1;                // sqrt(rho0 / rho), for re-sizing
  std::string label;      // for reports, e.g. "1-cos H = 30 m"
  // Set for continuous turbulence: the specification the record (shape
  // kRecorded, record_time/record_velocity) was generated from.
  std::optional<TurbulenceSpec> turbulence;
};

class GustField {
 public:
  GustField() = default;
  GustField(std::vector<GustProfile> profiles, double airspeed);

  bool empty() const { return profiles_.empty(); }
  const std::vector<GustProfile>& profiles() const { return profiles_; }
  // Sorted switch times of all profiles; segment k spans
  // [breakpoints[k-1], breakpoints[k]] (segment 0 before the first).
  std::span<const double> breakpoints() const { return breakpoints_; }
  int segment_of(double t) const;
  // Gust velocity at t using the formulas of input segment `segment`.
  double velocity(double t, int segment) const;
  double end_time() const;  // last switch time (0 when none)

  // The input of segment `segment` in harmonic form, for exact propagation
  // (integrate/exact_flow.hpp): for t inside the segment
  //   w_g(t) = constant + sum_j [sin_coef_j sin(omega_j (t - start_j))
  //                              + cos_coef_j cos(omega_j (t - start_j))],
  // one term j per oscillating profile (one-minus-cosine: omega = pi U / H,
  // sinusoidal: its frequency), in profile order, zero coefficients where
  // the profile is not active. nullopt when a profile is recorded.
  struct HarmonicInput {
    double constant = 0;  // m/s
    std::vector<double> omega, start, sin_coef, cos_coef;  // rad/s, s, m/s, m/s
  };
  std::optional<HarmonicInput> harmonic_input(int segment) const;

 private:
  double profile_velocity(const GustProfile& p, double t, double probe) const;
  double probe_of(int segment, double t) const;  // a time inside the segment (t when no breakpoints)
  std::vector<GustProfile> profiles_;
  std::vector<double> breakpoints_;
  double airspeed_ = 0;
};

// Design gust velocity U_ds of CS-25.341(a) / 14 CFR 25.341(a), m/s EAS:
//   U_ds = U_ref F_g (H / 350 ft)^(1/6),  30 ft <= H <= 350 ft (9.144..106.68 m);
//   U_ref = 56 ft/s EAS at sea level, linear to 44 ft/s at 15 000 ft, linear to
//   20.86 ft/s at 60 000 ft (halved at V_D);
//   F_g = 0.5 (F_gz + F_gm) at sea level, F_gz = 1 - Z_mo / 250 000 ft,
//   F_gm = sqrt(R2 tan(pi R1 / 4)), rising linearly to 1 at Z_mo.
// altitude and Z_mo in m; R1 = MLW/MTOW, R2 = MZFW/MTOW.
struct RegulationGustInputs {
  double altitude = 0;                 // m
  double gradient = 0;                 // H, m
  double landing_weight_ratio = 1;     // R1
  double zero_fuel_weight_ratio = 1;   // R2
  double max_operating_altitude = 0;   // Z_mo, m
  bool at_dive_speed = false;          // V_D: U_ref halved
};
double cs25_reference_gust_velocity(double altitude_m);  // U_ref, m/s EAS (at V_C)
double cs25_flight_profile_alleviation(const RegulationGustInputs& in);  // F_g
double cs25_design_gust_velocity(const RegulationGustInputs& in);        // U_ds, m/s EAS

// Small-aircraft discrete gust: the one-minus-cosine gust of the
// prescriptive light-aircraft rule (CS-23 / 14 CFR 23, case key
// design = "cs-23").
//   THE NUMBERS BELOW ARE RECALLED FROM MEMORY by the author of issue #18;
//   no copy of the rule was at hand: check them against the rule's text.
//   Gust length 2H = 25 mean geometric chords (H = 12.5 c-bar);
//   derived gust velocity U_de (EAS) at V_C: 50 ft/s (15.24 m/s) from sea
//   level to 20 000 ft (6096 m), linear to 25 ft/s (7.62 m/s) at 50 000 ft
//   (15 240 m); at V_D half of each (25 ft/s, linear to 12.5 ft/s).
//   The gust is w = (U_de/2) (1 - cos(pi x / H)), 0 <= x <= 2H, peak U_de.
// The rule's load-factor formula multiplies U_de by a gust alleviation
// factor K_g that stands for the unsteady build-up of lift and the
// aircraft's plunge. It is NOT applied here: the gust is simulated in time
// and Küssner's function (with the section's own motion) replaces it, so
// the time-domain gust is the 1-cos of peak U_de over 25 chords.
// c-bar is the case's gust.mean_chord, else the section's chord 2b.
struct SmallAircraftGustInputs {
  double altitude = 0;          // m
  double mean_chord = 0;        // c-bar, m
  bool mean_chord_given = false;  // false: c-bar = 2b of the section
  bool at_dive_speed = false;   // V_D: U_de halved
};
inline constexpr double kCs23GustGradientChords = 12.5;  // H / c-bar (2H = 25 c-bar)
inline constexpr double kCs23MaxAltitude = 15240;         // m (50 000 ft): the end of the rule's table
// U_de, m/s EAS, for 0 <= altitude <= kCs23MaxAltitude (clamped outside).
double cs23_derived_gust_velocity(double altitude_m, bool at_dive_speed);

}  // namespace aerosect
