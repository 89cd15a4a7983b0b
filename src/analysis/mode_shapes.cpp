#include "aerosect/analysis/mode_shapes.hpp"

#include <complex>

#include "aerosect/model/section.hpp"

namespace aerosect {

Eigen::VectorXcd normalised_shape(Eigen::VectorXcd v, double semichord) {
  v(kPlunge) /= semichord;
  Eigen::Index i = 0;
  v.cwiseAbs().maxCoeff(&i);
  if (std::abs(v(i)) > 0) v /= v(i);
  return v;
}

double mac(const Eigen::VectorXcd& a, const Eigen::VectorXcd& b) {
  const double na = a.squaredNorm(), nb = b.squaredNorm();
  if (na <= 0 || nb <= 0) return 0;
  return std::norm(a.dot(b)) / (na * nb);
}

int dominant_dof(const Eigen::VectorXcd& v, const Eigen::MatrixXd& M, double semichord) {
  int best = 0;
  double e_best = -1;
  for (Eigen::Index j = 0; j < v.size(); ++j) {
    const double q = std::abs(v(j)) * (j == kPlunge ? semichord : 1.0);
    const double e = q * q * M(j, j);
    if (e > e_best) {
      e_best = e;
      best = static_cast<int>(j);
    }
  }
  return best;
}

}  // namespace aerosect
