#include <catch2/catch.hpp>

#include "aerosect/model/atmosphere.hpp"

using aerosect::isa;

namespace {
// Geopotential altitude of a geometric one (ISO 2533, r0 = 6356766 m).
double geopotential(double z) { return 6356766.0 * z / (6356766.0 + z); }
}  // namespace

TEST_CASE("ISA density against the standard atmosphere table", "[atmosphere]") {
  // ICAO Standard Atmosphere (Doc 7488) table values by geometric altitude,
  // recalled from memory; aerosect's altitude is geopotential (pressure
  // altitude), so the table altitudes are converted first. Tolerance 1e-3
  // relative covers the table's rounding.
  CHECK(isa(0.0).density == Approx(1.2250).epsilon(1e-4));
  CHECK(isa(0.0).temperature == Approx(288.15).epsilon(1e-12));
  CHECK(isa(0.0).pressure == Approx(101325.0).epsilon(1e-12));
  CHECK(isa(0.0).speed_of_sound == Approx(340.29).epsilon(1e-4));
  CHECK(isa(geopotential(1000.0)).density == Approx(1.1117).epsilon(1e-3));
  CHECK(isa(geopotential(3000.0)).density == Approx(0.90925).epsilon(1e-3));
  CHECK(isa(geopotential(5000.0)).density == Approx(0.73643).epsilon(1e-3));
  CHECK(isa(geopotential(10000.0)).density == Approx(0.41351).epsilon(1e-3));
  CHECK(isa(11000.0).temperature == Approx(216.65).epsilon(1e-12));
  CHECK(isa(11000.0).pressure == Approx(22632.0).epsilon(1e-4));
  CHECK(isa(geopotential(20000.0)).density == Approx(0.08891).epsilon(1e-3));
}

TEST_CASE("ISA is continuous at the tropopause", "[atmosphere]") {
  // Common practice, no source: the two layers meet at 11 km.
  CHECK(isa(11000.0 - 1e-6).density == Approx(isa(11000.0 + 1e-6).density).epsilon(1e-9));
}
