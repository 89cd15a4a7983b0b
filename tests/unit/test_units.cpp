#include <catch2/catch.hpp>

#include <cstring>

#include "aerosect/model/section.hpp"
#include "aerosect/units.hpp"

using namespace aerosect;

TEST_CASE("Degree and radian constants", "[units]") {
  // 1 rad = 57.29577951308232 deg (Python math.degrees(1.0)); 1 deg =
  // 0.017453292519943295 rad (math.radians(1.0)). Tolerance: a few ulps.
  CHECK(kDegPerRad == Approx(57.29577951308232).epsilon(1e-15));
  CHECK(kRadPerDeg == Approx(0.017453292519943295).epsilon(1e-15));
  CHECK(kDegPerRad * kRadPerDeg == Approx(1.0).epsilon(1e-15));
  CHECK(90.0 * kRadPerDeg == Approx(std::numbers::pi / 2).epsilon(1e-15));
}

TEST_CASE("DOF names and units follow the state order", "[units]") {
  CHECK(std::strcmp(dof_name(kPlunge), "plunge") == 0);
  CHECK(std::strcmp(dof_name(kPitch), "pitch") == 0);
  CHECK(std::strcmp(dof_name(kFlap), "flap") == 0);
  CHECK(std::strcmp(dof_name(3), "?") == 0);
  CHECK(std::strcmp(kDofUnits[kPlunge], "m") == 0);
  CHECK(std::strcmp(kDofUnits[kPitch], "rad") == 0);
  CHECK(dof_index("flap") == kFlap);
  CHECK(dof_index("lift") == -1);
  CHECK(!is_angle_dof(kPlunge));
  CHECK(is_angle_dof(kPitch));
  CHECK(is_angle_dof(kFlap));
}

TEST_CASE("Equivalent and true airspeed", "[units]") {
  // Definition EAS = TAS sqrt(rho / rho0), rho0 = 1.225 kg/m^3 (ISA sea
  // level, ISO 2533); common practice, no source for the worked value.
  // At rho = 0.41351 kg/m^3 (ICAO table at 10 km, recalled from memory),
  // TAS 200 m/s is EAS 116.19968737883408 m/s (computed with Python's math).
  CHECK(kSeaLevelDensity == 1.225);
  CHECK(equivalent_airspeed(200.0, 0.41351) == Approx(116.19968737883408).epsilon(1e-14));
  CHECK(true_airspeed(116.19968737883408, 0.41351) == Approx(200.0).epsilon(1e-14));
  CHECK(eas_to_tas_factor(0.41351) * equivalent_airspeed(200.0, 0.41351) == Approx(200.0).epsilon(1e-14));
  CHECK(equivalent_airspeed(50.0, kSeaLevelDensity) == 50.0);
}
