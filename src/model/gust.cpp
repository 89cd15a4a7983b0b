#include "aerosect/model/gust.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>

#include "aerosect/error.hpp"
#include "aerosect/units.hpp"

namespace aerosect {

using std::numbers::pi;

WagnerApproximation kussner_two_pole() { return {{0.5, 0.5}, {0.13, 1.0}}; }
WagnerApproximation kussner_three_pole() {
  return {{0.236, 0.513, 0.171}, {0.058, 0.364, 2.42}};
}

const char* to_string(GustShape s) {
  switch (s) {
    case GustShape::kSharpEdged: return "sharp-edged";
    case GustShape::kOneMinusCosine: return "one-minus-cosine";
    case GustShape::kSinusoidal: return "sinusoidal";
    case GustShape::kRecorded: return "recorded";
  }
  return "?";
}

const char* to_string(GustRule r) {
  switch (r) {
    case GustRule::kNone: return "none";
    case GustRule::kCs25: return "cs-25";
    case GustRule::kCs23: return "cs-23";
  }
  return "?";
}

namespace {
// End time of a profile (inf when unbounded).
double profile_end(const GustProfile& p, double U) {
  switch (p.shape) {
    case GustShape::kSharpEdged: return std::numeric_limits<double>::infinity();
    case GustShape::kOneMinusCosine: return p.start + 2.0 * p.gradient / U;
    case GustShape::kSinusoidal:
      return p.cycles > 0 ? p.start + p.cycles * 2.0 * pi / p.frequency
                          : std::numeric_limits<double>::infinity();
    case GustShape::kRecorded: return p.start + p.record_time.back();
  }
  return std::numeric_limits<double>::infinity();
}
}  // namespace

GustField::GustField(std::vector<GustProfile> profiles, double airspeed)
    : profiles_(std::move(profiles)), airspeed_(airspeed) {
  for (const auto& p : profiles_) {
    AEROSECT_CHECK(p.shape != GustShape::kOneMinusCosine || (p.gradient > 0 && airspeed > 0));
    AEROSECT_CHECK(p.shape != GustShape::kRecorded ||
                   (p.record_time.size() >= 2 && p.record_time.size() == p.record_velocity.size()));
    breakpoints_.push_back(p.start);
    // Every sample of a record is a kink of the interpolant: a switch time.
    if (p.shape == GustShape::kRecorded)
      for (double tk : p.record_time) breakpoints_.push_back(p.start + tk);
    const double e = profile_end(p, airspeed);
    if (std::isfinite(e)) breakpoints_.push_back(e);
  }
  std::sort(breakpoints_.begin(), breakpoints_.end());
  breakpoints_.erase(std::unique(breakpoints_.begin(), breakpoints_.end()), breakpoints_.end());
}

int GustField::segment_of(double t) const {
  return static_cast<int>(std::upper_bound(breakpoints_.begin(), breakpoints_.end(), t) -
                          breakpoints_.begin());
}

double GustField::end_time() const { return breakpoints_.empty() ? 0.0 : breakpoints_.back(); }

double GustField::profile_velocity(const GustProfile& p, double t, double probe) const {
  // `probe` is a time inside the segment: it decides which piece applies.
  if (probe < p.start) return 0.0;
  if (probe > profile_end(p, airspeed_)) return 0.0;
  switch (p.shape) {
    case GustShape::kSharpEdged: return p.amplitude;
    case GustShape::kOneMinusCosine:
      return 0.5 * p.amplitude * (1.0 - std::cos(pi * airspeed_ * (t - p.start) / p.gradient));
    case GustShape::kSinusoidal: return p.amplitude * std::sin(p.frequency * (t - p.start));
    case GustShape::kRecorded: {
      const auto& T = p.record_time;
      const double rp = probe - p.start;
      if (rp < T.front()) return 0.0;
      std::size_t i = static_cast<std::size_t>(std::upper_bound(T.begin(), T.end(), rp) - T.begin());
      i = std::min(std::max<std::size_t>(i, 1), T.size() - 1) - 1;
      const double f = (t - p.start - T[i]) / (T[i + 1] - T[i]);
      return p.record_velocity[i] + f * (p.record_velocity[i + 1] - p.record_velocity[i]);
    }
  }
  return 0.0;
}

double GustField::probe_of(int segment, double t) const {
  // A time strictly inside the segment.
  const int n = static_cast<int>(breakpoints_.size());
  if (n == 0) return t;
  if (segment <= 0) return breakpoints_[0] - 1.0;
  if (segment >= n) return breakpoints_[n - 1] + 1.0;
  return 0.5 * (breakpoints_[segment - 1] + breakpoints_[segment]);
}

std::optional<GustField::HarmonicInput> GustField::harmonic_input(int segment) const {
  HarmonicInput h;
  const double probe = probe_of(segment, 0.0);
  for (const auto& p : profiles_) {
    if (p.shape == GustShape::kRecorded) return std::nullopt;
    const bool active = probe >= p.start && probe <= profile_end(p, airspeed_);
    if (p.shape == GustShape::kSharpEdged) {
      if (active) h.constant += p.amplitude;
      continue;
    }
    const bool cosine = p.shape == GustShape::kOneMinusCosine;
    h.omega.push_back(cosine ? pi * airspeed_ / p.gradient : p.frequency);
    h.start.push_back(p.start);
    h.sin_coef.push_back(active && !cosine ? p.amplitude : 0.0);
    h.cos_coef.push_back(active && cosine ? -0.5 * p.amplitude : 0.0);
    if (active && cosine) h.constant += 0.5 * p.amplitude;
  }
  return h;
}

double GustField::velocity(double t, int segment) const {
  const double probe = probe_of(segment, t);
  double w = 0;
  for (const auto& p : profiles_) w += profile_velocity(p, t, probe);
  return w;
}

namespace {
}

double cs25_reference_gust_velocity(double h) {
  const double h15 = 15000 * kMetresPerFoot, h60 = 60000 * kMetresPerFoot;
  const double u0 = 56 * kMetresPerFoot, u15 = 44 * kMetresPerFoot, u60 = 20.86 * kMetresPerFoot;
  if (h <= h15) return u0 + (u15 - u0) * std::max(h, 0.0) / h15;
  return u15 + (u60 - u15) * (std::min(h, h60) - h15) / (h60 - h15);
}

double cs25_flight_profile_alleviation(const RegulationGustInputs& in) {
  const double zmo = in.max_operating_altitude;
  const double fgz = 1.0 - zmo / (250000 * kMetresPerFoot);
  const double fgm = std::sqrt(in.zero_fuel_weight_ratio * std::tan(pi * in.landing_weight_ratio / 4));
  const double fg0 = 0.5 * (fgz + fgm);
  if (zmo <= 0 || in.altitude >= zmo) return in.altitude >= zmo ? 1.0 : fg0;
  return fg0 + (1.0 - fg0) * std::max(in.altitude, 0.0) / zmo;
}

double cs25_design_gust_velocity(const RegulationGustInputs& in) {
  const double uref = cs25_reference_gust_velocity(in.altitude) * (in.at_dive_speed ? 0.5 : 1.0);
  return uref * cs25_flight_profile_alleviation(in) *
         std::pow(in.gradient / (350 * kMetresPerFoot), 1.0 / 6.0);
}

// Values recalled from memory (gust.hpp): check against the rule's text.
double cs23_derived_gust_velocity(double h, bool at_dive_speed) {
  const double h20 = 20000 * kMetresPerFoot, h50 = 50000 * kMetresPerFoot;
  const double u_low = 50 * kMetresPerFoot, u_high = 25 * kMetresPerFoot;  // V_C
  const double hc = std::clamp(h, 0.0, h50);
  const double ude = hc <= h20 ? u_low : u_low + (u_high - u_low) * (hc - h20) / (h50 - h20);
  return at_dive_speed ? 0.5 * ude : ude;
}

}  // namespace aerosect
