#pragma once
// Mode-shape utilities shared by the stability analyses.
//   normalised_shape: (h, alpha[, beta]) -> (h/b, alpha[, beta]) scaled so
//                     that the largest |component| is exactly 1;
//   mac:              modal assurance criterion |a^H b|^2 / (|a|^2 |b|^2),
//                     1 for parallel shapes, 0 for orthogonal ones;
//   dominant_dof:     the DOF holding the largest share of the mode's
//                     kinetic energy, |q_j|^2 M_jj (q_j physical: h = b (h/b)),
//                     which names a mode by what moves, not by radians vs
//                     semichords.

#include <Eigen/Core>

#include "aerosect/units.hpp"  // dof_name

namespace aerosect {

Eigen::VectorXcd normalised_shape(Eigen::VectorXcd v, double semichord);
double mac(const Eigen::VectorXcd& a, const Eigen::VectorXcd& b);
int dominant_dof(const Eigen::VectorXcd& normalised, const Eigen::MatrixXd& structural_mass,
                 double semichord);

}  // namespace aerosect
