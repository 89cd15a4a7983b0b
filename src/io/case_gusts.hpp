#pragma once
// Internal: the gust part of the case reader (io/case.cpp): the Küssner keys
// of [aerodynamics] and the [[gust]] tables, their keys and their reader.
// Not installed, not part of the public interface; only the case reader
// includes it.

#include <string>
#include <vector>

#include <toml++/toml.h>

#include "aerosect/io/case.hpp"
#include "aerosect/io/toml_reader.hpp"

namespace aerosect {

// The case keys this part reads, as dotted paths ("gust.shape").
const std::vector<std::string>& gust_case_keys();

// Reads [aerodynamics] kussner, kussner_coefficients, kussner_exponents and
// every [[gust]] table of `root` into c.model.kussner and c.model.gusts. The
// section, flow, altitude and simulation of `c` must be read first (gusts
// are sized and timed with them).
void read_gusts(const toml::table& root, const toml_input::Context& ctx, const toml_input::Table& aero,
                Case& c);

}  // namespace aerosect
