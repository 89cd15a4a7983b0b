#pragma once
// Small helpers shared by the unit tests: inline cases and comparisons.
#include <string>
#include <vector>

#include "aerosect/io/case.hpp"

namespace aerosect::test {

// A 2-DOF nondimensional section (numbers of the nonlinear-aerofoil
// benchmark of Lee, Price & Wong 1999) with the given extra TOML appended.
inline std::string benchmark_2dof(const std::string& extra = "", double reduced_speed = 4.0) {
  return "[nondimensional]\n"
         "mass_ratio = 100.0\nelastic_axis = -0.5\ncg_offset = 0.25\n"
         "radius_of_gyration = 0.5\nfrequency_ratio = 0.2\n"
         "reduced_speed = " + std::to_string(reduced_speed) + "\n" + extra;
}

// n points evenly spaced from `from` to `to` (both included).
inline std::vector<double> grid(double from, double to, int n) {
  std::vector<double> s(static_cast<std::size_t>(n));
  for (int i = 0; i < n; ++i) s[static_cast<std::size_t>(i)] = from + (to - from) * i / (n - 1);
  return s;
}

inline Case case_from(const std::string& text, const std::vector<std::string>& overrides = {}) {
  return parse_case(text, "inline.toml", overrides);
}

}  // namespace aerosect::test
