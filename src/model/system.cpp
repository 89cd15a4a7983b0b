#include "aerosect/model/system.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>

#include <Eigen/LU>

#include "aerosect/error.hpp"
#include "aerosect/units.hpp"

namespace aerosect {

std::string state_component_name(const StateLayout& L, int i) {
  if (i >= L.displacement && i < L.displacement + L.n_dof) return kDofNames[i - L.displacement];
  if (i >= L.velocity && i < L.velocity + L.n_dof) return std::string(kDofNames[i - L.velocity]) + "_velocity";
  if (i >= L.wagner && i < L.wagner + L.n_wagner) return "wagner_lag_state_" + std::to_string(i - L.wagner + 1);
  if (i >= L.gust && i < L.gust + L.n_gust) return "gust_lag_state_" + std::to_string(i - L.gust + 1);
  return "x[" + std::to_string(i) + "]";
}

AeroelasticModel::AeroelasticModel(ModelDescription description) : d_(std::move(description)) {
  const SectionProperties& s = d_.section;
  const int n = s.dof;
  AEROSECT_CHECK(n == 2 || n == 3);
  const bool wagner = d_.aero.model == AeroModel::kWagner && d_.flow.density > 0.0;
  layout_.n_dof = n;
  layout_.displacement = 0;
  layout_.velocity = n;
  layout_.wagner = 2 * n;
  layout_.n_wagner = wagner ? static_cast<int>(d_.aero.wagner.size()) : 0;
  layout_.gust = layout_.wagner + layout_.n_wagner;
  const bool gusty = !d_.gusts.empty() && d_.flow.density > 0.0;
  layout_.n_gust = gusty ? static_cast<int>(d_.kussner.size()) : 0;
  layout_.size = layout_.gust + layout_.n_gust;
  psi0_ = d_.kussner.initial_value();
  phi0_ = wagner ? d_.aero.wagner.initial_value() : 1.0;

  aero_ = theodorsen_matrices(s, d_.flow, d_.aero.model);
  total_mass_ = structural_mass(s) + aero_.apparent_mass;

  // Invert the mass matrix of the active (not held) DOFs once.
  std::vector<int> active;
  for (int j = 0; j < n; ++j)
    if (!d_.held[j]) active.push_back(j);
  mass_inverse_ = DofMatrix::Zero(n, n);
  if (!active.empty()) {
    const int na = static_cast<int>(active.size());
    Eigen::MatrixXd Ma(na, na);
    for (int i = 0; i < na; ++i)
      for (int j = 0; j < na; ++j) Ma(i, j) = total_mass_(active[i], active[j]);
    const Eigen::MatrixXd Mi = Ma.fullPivLu().inverse();
    for (int i = 0; i < na; ++i)
      for (int j = 0; j < na; ++j) mass_inverse_(active[i], active[j]) = Mi(i, j);
  }

  // Speed-independent blocks of state_matrix_at: Theodorsen's terms at
  // U = 1 m/s are the coefficients of U and U^2.
  {
    FlowConditions unit = d_.flow;
    unit.airspeed = 1.0;
    const AeroMatrices a1 = theodorsen_matrices(s, unit, d_.aero.model);
    unit_stiffness_ = a1.stiffness - phi0_ * a1.circulation_force * a1.downwash_displacement.transpose();
    unit_damping_ = a1.damping - phi0_ * a1.circulation_force * a1.downwash_rate.transpose();
    structural_damping_ = structural_damping(s);
    unit_circulation_ = a1.circulation_force;
    unit_downwash_displacement_ = a1.downwash_displacement;
    downwash_rate_ = a1.downwash_rate;
  }

  G_ = Eigen::MatrixXd::Zero(layout_.size, n);
  G_.block(layout_.velocity, 0, n, n) = mass_inverse_;

  DofVector k(n);
  for (int j = 0; j < n; ++j) {
    if (d_.springs[j].is_linear()) {
      k(j) = d_.springs[j].nominal_stiffness();
    } else {
      k(j) = 0.0;
      nonlinear_.push_back(j);
    }
  }
  A_ = state_matrix(k);
  // The velocity rows of G_, packed for the right-hand side's loop.
  for (int j : nonlinear_)
    for (int i = 0; i < n; ++i) g_velocity_rows_.push_back(G_(layout_.velocity + i, j));

  // Steady condition: b0 = A x_a0 + G (K_lin q_a0) + G (f_gravity + f_trim)
  // (system.hpp). K_lin q_a0 = k .* q_a0 over the linear springs (k is zero
  // for the nonlinear ones, which A does not hold).
  const SteadyCondition& st = d_.steady;
  steady_ = st.any();
  b0_ = Eigen::VectorXd::Zero(layout_.size);
  x_a0_ = Eigen::VectorXd::Zero(layout_.size);
  f_steady_ = DofVector::Zero(n);
  if (steady_) {
    x_a0_(layout_.displacement + kPitch) = st.incidence;
    if (n == 3) x_a0_(layout_.displacement + kFlap) = st.flap_trim;
    f_steady_ = st.gravity * structural_mass(s).col(kPlunge);  // g (m, S_alpha[, S_beta])
    if (n == 3) f_steady_(kFlap) += st.hinge_moment;
    const DofVector q_a0 = x_a0_.segment(layout_.displacement, n);
    const DofVector spring_share = k.cwiseProduct(q_a0);
    b0_ = A_ * x_a0_ + G_ * (spring_share + f_steady_);
  }

  // Gust input: instantaneous part psi(0) w_g on the forces, and the drive
  // of the Küssner lag states.
  B_gust_ = Eigen::VectorXd::Zero(layout_.size);
  if (layout_.n_gust > 0) {
    B_gust_.segment(layout_.velocity, n) = mass_inverse_ * aero_.circulation_force * psi0_;
    const double U_over_b = d_.flow.airspeed / s.semichord;
    for (int i = 0; i < layout_.n_gust; ++i)
      B_gust_(layout_.gust + i) = U_over_b * d_.kussner.exponents[i];
  }
}

double AeroelasticModel::shortest_period() const {
  const auto w = uncoupled_frequencies(d_.section);
  double wmax = std::max({w.plunge, w.pitch, w.flap});
  if (layout_.n_wagner > 0 && d_.flow.airspeed > 0) {
    for (double e : d_.aero.wagner.exponents)
      wmax = std::max(wmax, e * d_.flow.airspeed / d_.section.semichord);
  }
  if (!(wmax > 0) || !std::isfinite(wmax)) return 0.2;
  return 2.0 * std::numbers::pi / wmax;
}

Eigen::MatrixXd AeroelasticModel::state_matrix(const DofVector& spring_stiffness) const {
  const auto& am = aero_;
  // Effective stiffness and damping including the instantaneous part of the
  // circulatory force (phi(0) Q).
  DofMatrix K = spring_stiffness.asDiagonal();
  K += am.stiffness - phi0_ * am.circulation_force * am.downwash_displacement.transpose();
  DofMatrix C = structural_damping(d_.section) + am.damping -
                phi0_ * am.circulation_force * am.downwash_rate.transpose();
  return assemble(d_.flow.airspeed, K, C, am.circulation_force, am.downwash_displacement,
                  am.downwash_rate);
}

Eigen::MatrixXd AeroelasticModel::state_matrix_at(double U, const DofVector& spring_stiffness) const {
  AEROSECT_CHECK(U >= 0 && std::isfinite(U));
  DofMatrix K = spring_stiffness.asDiagonal();
  K += (U * U) * unit_stiffness_;
  const DofMatrix C = structural_damping_ + U * unit_damping_;
  return assemble(U, K, C, U * unit_circulation_, U * unit_downwash_displacement_, downwash_rate_);
}

Eigen::MatrixXd AeroelasticModel::assemble(double U, const DofMatrix& K, const DofMatrix& C,
                                           const DofVector& fc, const DofVector& dq,
                                           const DofVector& dv) const {
  const int n = layout_.n_dof, nw = layout_.n_wagner, w0 = layout_.wagner;
  const double U_over_b = U / d_.section.semichord;
  Eigen::MatrixXd A = Eigen::MatrixXd::Zero(layout_.size, layout_.size);
  for (int j = 0; j < n; ++j)
    if (!d_.held[j]) A(layout_.displacement + j, layout_.velocity + j) = 1.0;
  A.block(layout_.velocity, layout_.displacement, n, n) = -mass_inverse_ * K;
  A.block(layout_.velocity, layout_.velocity, n, n) = -mass_inverse_ * C;
  if (nw > 0) {
    const auto& wg = d_.aero.wagner;
    for (int i = 0; i < nw; ++i) {
      const DofVector col = mass_inverse_ * fc * wg.coefficients[i];
      A.block(layout_.velocity, w0 + i, n, 1) = col;
      const double rate = U_over_b * wg.exponents[i];
      A.block(w0 + i, layout_.displacement, 1, n) = rate * dq.transpose();
      A.block(w0 + i, layout_.velocity, 1, n) = rate * dv.transpose();
      A(w0 + i, w0 + i) = -rate;
    }
  }
  // Küssner lag states: they feed the forces and relax towards w_g (the
  // drive itself is the input vector, not part of A).
  for (int i = 0; i < layout_.n_gust; ++i) {
    const int g = layout_.gust + i;
    A.block(layout_.velocity, g, n, 1) = mass_inverse_ * fc * d_.kussner.coefficients[i];
    A(g, g) = -U_over_b * d_.kussner.exponents[i];
  }
  return A;
}

Eigen::MatrixXd AeroelasticModel::nominal_state_matrix() const {
  DofVector k(layout_.n_dof);
  for (int j = 0; j < layout_.n_dof; ++j) k(j) = d_.springs[j].nominal_stiffness();
  return state_matrix(k);
}

void AeroelasticModel::rhs(const double* x, double* dxdt, double t, std::span<const int> regions,
                           int input_segment) const {
  // x' = A x (+ B_gust w_g) - sum_j G_j f_j. The state has ~6..16 entries:
  // a plain column-by-column loop (independent rows: it vectorises) beats a
  // general dynamic-size matrix-vector product here; each row's sum runs in
  // the order j = 0..N-1.
  const std::size_t N = static_cast<std::size_t>(layout_.size);
  const double* a = A_.data();  // column-major
  for (std::size_t i = 0; i < N; ++i) dxdt[i] = a[i] * x[0];
  for (std::size_t j = 1; j < N; ++j) {
    const double xj = x[j];
    const double* col = a + j * N;
    for (std::size_t i = 0; i < N; ++i) dxdt[i] += col[i] * xj;
  }
  if (layout_.n_gust > 0) {
    const double w = d_.gusts.velocity(t, input_segment);
    for (std::size_t i = 0; i < N; ++i) dxdt[i] += B_gust_(static_cast<Eigen::Index>(i)) * w;
  }
  // The steady condition's constant (never added without one: adding 0.0
  // would turn -0.0 into +0.0 and change bit-for-bit results).
  if (steady_)
    for (std::size_t i = 0; i < N; ++i) dxdt[i] += b0_(static_cast<Eigen::Index>(i));
  // G_j is zero outside the velocity rows.
  const std::size_t n = static_cast<std::size_t>(layout_.n_dof), v0 = static_cast<std::size_t>(layout_.velocity);
  const double* g = g_velocity_rows_.data();
  for (int j : nonlinear_) {
    const double f = d_.springs[j].force(x[layout_.displacement + j], regions[j]);
    for (std::size_t i = 0; i < n; ++i) dxdt[v0 + i] -= g[i] * f;
    g += n;
  }
}

void AeroelasticModel::jacobian(const double* x, double /*t*/, std::span<const int> regions,
                                int /*input_segment*/, Eigen::Ref<Eigen::MatrixXd> J) const {
  AEROSECT_CHECK(J.rows() == layout_.size && J.cols() == layout_.size);
  J = A_;
  // Only the velocity rows of G_j are nonzero, and f_j depends on q_j alone.
  const int n = layout_.n_dof;
  const double* g = g_velocity_rows_.data();
  for (int j : nonlinear_) {
    const int c = layout_.displacement + j;
    const double k = d_.springs[j].tangent_stiffness(x[c], regions[j]);
    for (int i = 0; i < n; ++i) J(layout_.velocity + i, c) -= g[i] * k;
    g += n;
  }
}

Loads AeroelasticModel::loads(const double* x, const double* dxdt, double t,
                              int input_segment) const {
  const int n = layout_.n_dof;
  Eigen::Map<const Eigen::VectorXd> q(x + layout_.displacement, n);
  Eigen::Map<const Eigen::VectorXd> qd(x + layout_.velocity, n);
  Eigen::Map<const Eigen::VectorXd> qdd(dxdt + layout_.velocity, n);
  const auto& am = aero_;
  // The aerodynamics sees q + q_a0 (the steady incidence and flap trim).
  DofVector qa = q;
  if (steady_) qa += x_a0_.segment(layout_.displacement, n);
  double wc = phi0_ * (am.downwash_displacement.dot(qa) + am.downwash_rate.dot(qd));
  for (int i = 0; i < layout_.n_wagner; ++i)
    wc += d_.aero.wagner.coefficients[i] * x[layout_.wagner + i];
  Loads l;
  if (layout_.n_gust > 0) {
    l.gust_velocity = d_.gusts.velocity(t, input_segment);
    l.gust_effective = psi0_ * l.gust_velocity;
    for (int i = 0; i < layout_.n_gust; ++i)
      l.gust_effective += d_.kussner.coefficients[i] * x[layout_.gust + i];
  }
  const DofVector F = -am.apparent_mass * qdd - am.damping * qd - am.stiffness * qa +
                      am.circulation_force * (wc + l.gust_effective);
  l.lift = -F(0);
  l.pitching_moment = F(1);
  l.hinge_moment = n == 3 ? F(2) : 0.0;
  l.effective_downwash = wc;
  return l;
}

std::vector<double> AeroelasticModel::initial_state(const DofVector& q0, const DofVector& v0,
                                                    bool steady_lag_states) const {
  const int n = layout_.n_dof;
  std::vector<double> x(layout_.size, 0.0);
  for (int j = 0; j < n; ++j) {
    x[layout_.displacement + j] = q0(j);
    x[layout_.velocity + j] = d_.held[j] ? 0.0 : v0(j);
  }
  if (steady_lag_states) {
    Eigen::Map<const Eigen::VectorXd> q(x.data() + layout_.displacement, n);
    Eigen::Map<const Eigen::VectorXd> qd(x.data() + layout_.velocity, n);
    double Q = aero_.downwash_displacement.dot(q) + aero_.downwash_rate.dot(qd);
    if (steady_) Q += aero_.downwash_displacement.dot(x_a0_.segment(layout_.displacement, n));
    for (int i = 0; i < layout_.n_wagner; ++i) x[layout_.wagner + i] = Q;
  }
  return x;
}

std::vector<int> AeroelasticModel::regions_of(const double* x) const {
  std::vector<int> r(layout_.n_dof, 0);
  for (int j = 0; j < layout_.n_dof; ++j)
    r[j] = d_.springs[j].region_of(x[layout_.displacement + j]);
  return r;
}

Eigen::VectorXd state_weights(const AeroelasticModel& model) {
  const StateLayout& L = model.layout();
  const auto& d = model.description();
  const double b = d.section.semichord;
  double w_ref = uncoupled_frequencies(d.section).pitch;
  if (!(w_ref > 0) || !std::isfinite(w_ref)) w_ref = 1.0;
  Eigen::VectorXd w = Eigen::VectorXd::Ones(L.size);
  for (int j = 0; j < L.n_dof; ++j) {
    const double dj = j == kPlunge ? 1.0 / b : 1.0;
    w(L.displacement + j) = dj;
    w(L.velocity + j) = dj / w_ref;
  }
  const double lag_scale = std::max(d.flow.airspeed, b * w_ref);
  for (int i = 0; i < L.n_wagner; ++i) w(L.wagner + i) = 1.0 / lag_scale;
  for (int i = 0; i < L.n_gust; ++i) w(L.gust + i) = 1.0 / lag_scale;
  return w;
}

}  // namespace aerosect
