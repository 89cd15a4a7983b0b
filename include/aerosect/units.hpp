#pragma once
// Names, units and conversions used across the program, in one place.
//
//   Degrees of freedom, in state order (model/section.hpp's Dof):
//     0 plunge h, m, positive down; 1 pitch alpha, rad, positive nose up;
//     2 flap beta, rad, positive trailing edge down.
//   Internally every angle is in radians; case files and reports use degrees
//   where a key or a label says "_deg": x_deg = x_rad * kDegPerRad.
//   Equivalent airspeed (EAS) and true airspeed (TAS) at density rho:
//     EAS = TAS sqrt(rho / rho0),  TAS = EAS sqrt(rho0 / rho),
//   rho0 = kSeaLevelDensity (ISA sea level, 1.225 kg/m^3).

#include <cmath>
#include <numbers>
#include <string_view>

#include "aerosect/model/atmosphere.hpp"

namespace aerosect {

inline constexpr double kRadPerDeg = std::numbers::pi / 180.0;  // rad per degree
inline constexpr double kDegPerRad = 180.0 / std::numbers::pi;  // degrees per rad
inline constexpr double kMetresPerFoot = 0.3048;                // international foot (exact)

inline constexpr int kMaxDof = 3;
// Dataset, key and table names of each DOF ("plunge", "pitch", "flap").
inline constexpr const char* kDofNames[kMaxDof] = {"plunge", "pitch", "flap"};
// SI units of each DOF's displacement as the engine and the files hold it.
inline constexpr const char* kDofUnits[kMaxDof] = {"m", "rad", "rad"};

// Name of DOF index `dof` (0..2), "?" for anything else.
constexpr const char* dof_name(int dof) { return dof >= 0 && dof < kMaxDof ? kDofNames[dof] : "?"; }
// Index of the DOF named `name`, -1 if it names none.
constexpr int dof_index(std::string_view name) {
  for (int j = 0; j < kMaxDof; ++j)
    if (name == kDofNames[j]) return j;
  return -1;
}
// True for the rotational DOFs (pitch, flap), whose displacement is an angle.
constexpr bool is_angle_dof(int dof) { return dof == 1 || dof == 2; }

// Equivalent airspeed of a true airspeed at density rho: U sqrt(rho / rho0), m/s.
inline double equivalent_airspeed(double true_airspeed, double density) {
  return true_airspeed * std::sqrt(density / kSeaLevelDensity);
}
// True airspeed of an equivalent airspeed at density rho: U_EAS sqrt(rho0 / rho), m/s.
inline double true_airspeed(double equivalent_airspeed, double density) {
  return equivalent_airspeed * std::sqrt(kSeaLevelDensity / density);
}
// Factor from EAS to TAS at density rho: sqrt(rho0 / rho).
inline double eas_to_tas_factor(double density) { return std::sqrt(kSeaLevelDensity / density); }

}  // namespace aerosect
