#pragma once
// Derived quantities of a section that need no time integration:
//  - in-vacuo natural modes: K_s phi = omega^2 M_s phi (symmetric generalised
//    eigenproblem, springs at nominal stiffness);
//  - static divergence: the quasi-steady aerodynamic stiffness grows as U^2,
//    K_s - U^2 K_1 singular; with Theodorsen's circulatory lift at C(0) = 1
//    (every Wagner approximation tends to 1) and the flap's U^2 terms.
//    For 2-DOF the closed form is U_D = sqrt(K_alpha / (2 pi rho b^2 (a + 1/2))),
//    U_D/(b omega_alpha) = r_alpha sqrt(mu / (1 + 2a)).

#include <optional>
#include <vector>

#include <Eigen/Core>

#include "aerosect/model/section.hpp"

namespace aerosect {

struct NaturalMode {
  double frequency = 0;  // rad/s
  DofVector shape;       // (h/b, alpha[, beta]) scaled so the largest |component| is 1, positive
  int dominant_dof = 0;  // DOF with the largest kinetic-energy share (mode_shapes.hpp)
};

// Ascending frequency.
std::vector<NaturalMode> in_vacuo_modes(const SectionProperties& s);

struct Divergence {
  bool exists = false;
  double speed = 0;  // m/s (true airspeed at the case's density)
  DofVector shape;   // (h/b, alpha[, beta]) at divergence, largest |component| = 1
};
Divergence divergence(const SectionProperties& s, double density);

}  // namespace aerosect
