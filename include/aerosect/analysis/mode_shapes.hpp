#pragma once
// Mode-shape utilities shared by the stability analyses.
//   normalised_shape: (h, alpha[, beta]) -> (h/b, alpha[, beta]) scaled so
//                     that the largest |component| is exactly 1;
//   mac:              modal assurance criterion |a^H b|^2 / (|a|^2 |b|^2),
//                     1 for parallel shapes, 0 for orthogonal ones.

#include <Eigen/Core>

namespace aerosect {

Eigen::VectorXcd normalised_shape(Eigen::VectorXcd v, double semichord);
double mac(const Eigen::VectorXcd& a, const Eigen::VectorXcd& b);

}  // namespace aerosect
