// A user's program on aerosect as a subproject: the library's headers and
// its generated version header are found through the aerosect::lib target.
#include <cstdio>

#include "aerosect/units.hpp"
#include "aerosect/version.hpp"

int main() {
  std::printf("aerosect %s: 1 rad = %.6f deg\n", aerosect::kVersion, aerosect::kDegPerRad);
  return 0;
}
