#include "aerosect/model/section.hpp"

#include <cmath>
#include <limits>
#include <numbers>

namespace aerosect {

using std::numbers::pi;

UncoupledFrequencies uncoupled_frequencies(const SectionProperties& s) {
  UncoupledFrequencies w;
  w.plunge = std::sqrt(s.plunge_stiffness / s.mass);
  w.pitch = std::sqrt(s.pitch_stiffness / s.pitch_inertia);
  if (s.dof == 3 && s.flap_inertia > 0) w.flap = std::sqrt(s.flap_stiffness / s.flap_inertia);
  return w;
}

NondimensionalParameters to_nondimensional(const SectionProperties& s, const FlowConditions& f) {
  const double b = s.semichord, m = s.mass;
  const UncoupledFrequencies w = uncoupled_frequencies(s);
  NondimensionalParameters n;
  n.dof = s.dof;
  n.mass_ratio = f.density > 0 ? m / (pi * f.density * b * b)
                               : std::numeric_limits<double>::infinity();
  n.elastic_axis = s.elastic_axis;
  n.cg_offset = s.static_unbalance / (m * b);
  n.radius_of_gyration = std::sqrt(s.pitch_inertia / (m * b * b));
  n.frequency_ratio = w.plunge / w.pitch;
  n.plunge_damping_ratio = s.plunge_damping_ratio;
  n.pitch_damping_ratio = s.pitch_damping_ratio;
  n.reduced_speed = f.airspeed / (b * w.pitch);
  if (s.dof == 3) {
    n.hinge = s.hinge;
    n.flap_cg_offset = s.flap_static_unbalance / (m * b);
    n.flap_radius_of_gyration = std::sqrt(s.flap_inertia / (m * b * b));
    n.flap_frequency_ratio = w.flap / w.pitch;
    n.flap_damping_ratio = s.flap_damping_ratio;
  }
  n.reference = {b, w.pitch, f.density};
  return n;
}

void from_nondimensional(const NondimensionalParameters& n, SectionProperties& s,
                         FlowConditions& f) {
  const double b = n.reference.semichord, wa = n.reference.pitch_frequency;
  const double rho = n.reference.density;
  s = SectionProperties{};
  s.dof = n.dof;
  s.semichord = b;
  s.mass = n.mass_ratio * pi * rho * b * b;
  s.elastic_axis = n.elastic_axis;
  s.static_unbalance = s.mass * n.cg_offset * b;
  s.pitch_inertia = s.mass * n.radius_of_gyration * n.radius_of_gyration * b * b;
  s.pitch_stiffness = s.pitch_inertia * wa * wa;
  const double wh = n.frequency_ratio * wa;
  s.plunge_stiffness = s.mass * wh * wh;
  s.plunge_damping_ratio = n.plunge_damping_ratio;
  s.pitch_damping_ratio = n.pitch_damping_ratio;
  if (n.dof == 3) {
    s.hinge = n.hinge;
    s.flap_static_unbalance = s.mass * n.flap_cg_offset * b;
    s.flap_inertia = s.mass * n.flap_radius_of_gyration * n.flap_radius_of_gyration * b * b;
    const double wb = n.flap_frequency_ratio * wa;
    s.flap_stiffness = s.flap_inertia * wb * wb;
    s.flap_damping_ratio = n.flap_damping_ratio;
  }
  f.density = rho;
  f.airspeed = n.reduced_speed * b * wa;
}

DofMatrix structural_mass(const SectionProperties& s) {
  const int n = s.dof;
  DofMatrix M = DofMatrix::Zero(n, n);
  M(0, 0) = s.mass;
  M(0, 1) = M(1, 0) = s.static_unbalance;
  M(1, 1) = s.pitch_inertia;
  if (n == 3) {
    const double coupling = s.flap_inertia + s.semichord * (s.hinge - s.elastic_axis) *
                                                 s.flap_static_unbalance;
    M(0, 2) = M(2, 0) = s.flap_static_unbalance;
    M(1, 2) = M(2, 1) = coupling;
    M(2, 2) = s.flap_inertia;
  }
  return M;
}

DofMatrix structural_stiffness(const SectionProperties& s) {
  DofMatrix K = DofMatrix::Zero(s.dof, s.dof);
  K(0, 0) = s.plunge_stiffness;
  K(1, 1) = s.pitch_stiffness;
  if (s.dof == 3) K(2, 2) = s.flap_stiffness;
  return K;
}

DofMatrix structural_damping(const SectionProperties& s) {
  DofMatrix C = DofMatrix::Zero(s.dof, s.dof);
  C(0, 0) = 2.0 * s.plunge_damping_ratio * std::sqrt(s.plunge_stiffness * s.mass);
  C(1, 1) = 2.0 * s.pitch_damping_ratio * std::sqrt(s.pitch_stiffness * s.pitch_inertia);
  if (s.dof == 3)
    C(2, 2) = 2.0 * s.flap_damping_ratio * std::sqrt(s.flap_stiffness * s.flap_inertia);
  return C;
}

}  // namespace aerosect
