#include "aerosect/model/atmosphere.hpp"

#include <cmath>

#include "aerosect/error.hpp"

namespace aerosect {

AtmosphereState isa(double h) {
  AEROSECT_CHECK(h >= kIsaMinAltitude && h <= kIsaMaxAltitude);
  constexpr double R = 287.05287, g0 = 9.80665, gamma = 1.4;
  constexpr double T0 = 288.15, p0 = 101325.0, L = 0.0065, h11 = 11000.0;
  const double T11 = T0 - L * h11;
  const double p11 = p0 * std::pow(T11 / T0, g0 / (R * L));
  AtmosphereState s{};
  if (h <= h11) {
    s.temperature = T0 - L * h;
    s.pressure = p0 * std::pow(s.temperature / T0, g0 / (R * L));
  } else {
    s.temperature = T11;
    s.pressure = p11 * std::exp(-g0 * (h - h11) / (R * T11));
  }
  s.density = s.pressure / (R * s.temperature);
  s.speed_of_sound = std::sqrt(gamma * R * s.temperature);
  return s;
}

}  // namespace aerosect
