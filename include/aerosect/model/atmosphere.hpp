#pragma once
// International Standard Atmosphere (ISO 2533 / ICAO Doc 7488), troposphere
// and lower stratosphere, geopotential altitude from -2000 m to 20000 m.
//   troposphere (h <= 11000 m): T = 288.15 - 0.0065 h,
//                               p = 101325 (T / 288.15)^(g0 / (R L));
//   stratosphere (11000..20000 m): T = 216.65,
//                               p = p11 exp(-g0 (h - 11000) / (R T));
//   rho = p / (R T),  R = 287.05287 J/(kg K), g0 = 9.80665 m/s^2.

namespace aerosect {

struct AtmosphereState {
  double temperature;  // K
  double pressure;     // Pa
  double density;      // kg/m^3
  double speed_of_sound;  // m/s
};

inline constexpr double kIsaMinAltitude = -2000.0;  // m
inline constexpr double kIsaMaxAltitude = 20000.0;  // m
inline constexpr double kSeaLevelDensity = 1.225;   // kg/m^3

// Precondition: kIsaMinAltitude <= altitude_m <= kIsaMaxAltitude (the case
// reader checks this and reports the key).
AtmosphereState isa(double altitude_m);

}  // namespace aerosect
