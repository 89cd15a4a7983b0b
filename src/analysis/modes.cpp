#include "aerosect/analysis/modes.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

#include <Eigen/Eigenvalues>

#include "aerosect/analysis/mode_shapes.hpp"
#include "aerosect/model/aerodynamics.hpp"

namespace aerosect {

namespace {
// Scale so the largest component is +1 (plunge made nondimensional by b first).
DofVector normalised(DofVector v, double semichord, int* dominant) {
  v(kPlunge) /= semichord;
  Eigen::Index k = 0;
  v.cwiseAbs().maxCoeff(&k);
  if (v(k) != 0.0) v /= v(k);
  if (dominant) *dominant = static_cast<int>(k);
  return v;
}
}  // namespace

std::vector<NaturalMode> in_vacuo_modes(const SectionProperties& s) {
  const Eigen::MatrixXd M = structural_mass(s), K = structural_stiffness(s);
  Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> es(K, M);
  std::vector<NaturalMode> modes;
  for (Eigen::Index i = 0; i < es.eigenvalues().size(); ++i) {
    NaturalMode m;
    m.frequency = std::sqrt(std::max(0.0, es.eigenvalues()(i)));
    m.shape = normalised(es.eigenvectors().col(i), s.semichord, nullptr);
    m.dominant_dof = dominant_dof(m.shape.cast<std::complex<double>>(), M, s.semichord);
    modes.push_back(m);
  }
  return modes;
}

Divergence divergence(const SectionProperties& s, double density) {
  Divergence d;
  const int n = s.dof;
  d.shape = DofVector::Zero(n);
  if (density <= 0) return d;
  // Aerodynamic static stiffness at U = 1 m/s with C = 1: K_a - f_c d_q^T.
  const AeroMatrices a = theodorsen_matrices(s, {density, 1.0}, AeroModel::kSteady);
  const DofMatrix K1 = -(a.stiffness - a.circulation_force * a.downwash_displacement.transpose());
  const DofMatrix Ks = structural_stiffness(s);
  // Only pitch and flap carry aerodynamic stiffness (lift does not depend on h).
  const int m = n - 1;
  const Eigen::MatrixXd A = K1.block(1, 1, m, m), B = Ks.block(1, 1, m, m);
  // K1 v = nu Ks v; U_D^2 = 1 / nu for the largest real positive nu.
  Eigen::GeneralizedEigenSolver<Eigen::MatrixXd> ges(A, B);
  double best_nu = 0;
  Eigen::VectorXd best_v;
  for (Eigen::Index i = 0; i < m; ++i) {
    const std::complex<double> alpha = ges.alphas()(i);
    const double beta = ges.betas()(i);
    if (std::abs(alpha.imag()) > 1e-12 * std::abs(alpha)) continue;
    double nu;
    if (std::abs(beta) < 1e-300) {
      nu = alpha.real() > 0 ? std::numeric_limits<double>::infinity() : 0.0;
    } else {
      nu = alpha.real() / beta;
    }
    if (nu > best_nu) {
      best_nu = nu;
      best_v = ges.eigenvectors().col(i).real();
    }
  }
  if (best_nu <= 0) return d;
  d.exists = true;
  d.speed = std::isinf(best_nu) ? 0.0 : 1.0 / std::sqrt(best_nu);
  // Plunge at divergence from the lift balance: K_h h = -(K_s - U^2 K1)_h row . v
  DofVector full = DofVector::Zero(n);
  full.tail(m) = best_v;
  if (s.plunge_stiffness > 0) {
    const double U2 = d.speed * d.speed;
    full(kPlunge) = U2 * K1.row(0).dot(full) / s.plunge_stiffness;
  }
  d.shape = normalised(full, s.semichord, nullptr);
  return d;
}

}  // namespace aerosect
