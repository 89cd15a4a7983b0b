#include "aerosect/model/turbulence.hpp"

#include <array>
#include <cmath>
#include <complex>
#include <numbers>
#include <random>

#include <Eigen/Dense>
#include <unsupported/Eigen/MatrixFunctions>

#include "aerosect/error.hpp"
#include "aerosect/units.hpp"

namespace aerosect {

using std::numbers::pi;

const char* to_string(TurbulenceModel m) {
  switch (m) {
    case TurbulenceModel::kDryden: return "dryden";
    case TurbulenceModel::kVonKarman: return "von-karman";
  }
  return "?";
}

const char* to_string(TurbulenceSeverity s) {
  switch (s) {
    case TurbulenceSeverity::kLight: return "light";
    case TurbulenceSeverity::kModerate: return "moderate";
    case TurbulenceSeverity::kSevere: return "severe";
  }
  return "?";
}

namespace {

constexpr double kKnot = 1852.0 / 3600.0;  // m/s per kt (exact)
constexpr double kNoiseIntensity = pi;     // q: E[n(t) n(t+tau)] = q delta(tau)

// ---------------------------------------------------------------------------
// Deterministic normal deviates (see the header: reproducibility).

// Natural logarithm of x > 0 (finite, normal) from IEEE-754 basic operations:
// x = m 2^e with m in [sqrt(1/2), sqrt(2)), log m = 2 atanh(f), f = (m-1)/(m+1),
// |f| <= 0.1716, atanh(f)/f = sum_k f^(2k)/(2k+1) to k = 11 (truncation below
// 1e-18); e ln 2 with Cody-Waite split constants (ln2_hi has 32 significant
// bits, so e ln2_hi is exact). Accurate to about 1 ulp; what matters here is
// that every operation is correctly rounded, hence platform-independent.
double deterministic_log(double x) {
  int e = 0;
  double m = std::frexp(x, &e);  // exact: m in [0.5, 1)
  if (m < std::numbers::sqrt2 / 2) {
    m *= 2.0;  // exact
    --e;
  }
  const double f = (m - 1.0) / (m + 1.0);  // m - 1 exact (Sterbenz)
  const double f2 = f * f;
  double p = 1.0 / 23.0;
  for (int k = 10; k >= 0; --k) p = std::fma(p, f2, 1.0 / (2 * k + 1));
  const double log_m = 2.0 * (f * p);
  constexpr double ln2_hi = 6.93147180369123816490e-01;  // 0x3fe62e42fee00000
  constexpr double ln2_lo = 1.90821492927058770002e-10;  // ln 2 - ln2_hi
  const double de = static_cast<double>(e);
  return std::fma(de, ln2_hi, std::fma(de, ln2_lo, log_m));
}

// Standard normal deviates from std::mt19937_64 by Marsaglia's polar method:
// (u, v) uniform in the square (-1, 1)^2, kept when 0 < s = u^2 + v^2 < 1;
// then u sqrt(-2 ln s / s) and v sqrt(-2 ln s / s) are independent N(0, 1).
class NormalStream {
 public:
  explicit NormalStream(std::uint64_t seed) : engine_(seed) {}

  double next() {
    if (has_spare_) {
      has_spare_ = false;
      return spare_;
    }
    for (;;) {
      const double u = uniform_pm1();
      const double v = uniform_pm1();
      const double s = std::fma(u, u, v * v);
      if (s >= 1.0 || s == 0.0) continue;
      const double factor = std::sqrt(-2.0 * deterministic_log(s) / s);
      spare_ = v * factor;
      has_spare_ = true;
      return u * factor;
    }
  }

 private:
  // Uniform on the grid k 2^-52, -2^52 <= k < 2^52, from the top 53 bits of
  // one engine output: integer arithmetic and a power-of-two scaling, exact.
  double uniform_pm1() {
    const auto k = static_cast<std::int64_t>(engine_() >> 11) - (std::int64_t{1} << 52);
    return static_cast<double>(k) * 0x1p-52;
  }

  std::mt19937_64 engine_;
  double spare_ = 0;
  bool has_spare_ = false;
};

// ---------------------------------------------------------------------------
// Shaping filters as cascades of first-order sections.

// Section (1 + T s / zero) / (1 + T s / pole); zero <= 0 means no zero,
// 1 / (1 + T s / pole). Poles and zeros in units of 1/T.
struct Section {
  double pole;
  double zero;
};

struct FilterShape {
  double gain;  // K: H = sigma sqrt(L/(pi V)) K prod(sections)
  std::vector<Section> sections;
};

// See the header for where these numbers come from. The strictly proper
// section comes first, so the noise enters the first state only.
FilterShape filter_shape(TurbulenceModel m) {
  switch (m) {
    case TurbulenceModel::kDryden:
      // (1 + sqrt(3) T s) / (1 + T s)^2.
      return {1.0, {{1.0, 0.0}, {1.0, 1.0 / std::numbers::sqrt3}}};
    case TurbulenceModel::kVonKarman:
      return {std::sqrt(1.01541792729788),
              {{1.48644, 0.0}, {0.215735, 0.194967}, {22.1464, 14.2280}, {321.539, 203.911}}};
  }
  AEROSECT_CHECK(false);
  return {};
}

struct StateSpace {
  Eigen::MatrixXd A;
  Eigen::VectorXd B;
  Eigen::RowVectorXd C;
};

// Cascade realisation: section i has the state xi_i' = -a_i xi_i + u_i,
// a_i = pole_i / T, and output y_i = c_i xi_i + d_i u_i with
//   with a zero:  d_i = pole/zero, c_i = (1 - pole/zero) a_i,
//   without:      d_i = 0,         c_i = a_i;
// u_0 = gain n, u_{i+1} = y_i, w = y_last. Each u_i is kept as a row of
// coefficients on the state plus a coefficient on the noise.
StateSpace realise(const TurbulenceSpec& s) {
  AEROSECT_CHECK(std::isfinite(s.intensity) && s.intensity >= 0);
  AEROSECT_CHECK(std::isfinite(s.scale_length) && s.scale_length > 0);
  AEROSECT_CHECK(std::isfinite(s.airspeed) && s.airspeed > 0);
  const FilterShape shape = filter_shape(s.model);
  const double T = s.scale_length / s.airspeed;
  const auto n = static_cast<Eigen::Index>(shape.sections.size());
  StateSpace ss{Eigen::MatrixXd::Zero(n, n), Eigen::VectorXd::Zero(n), Eigen::RowVectorXd()};
  Eigen::RowVectorXd u_state = Eigen::RowVectorXd::Zero(n);
  double u_noise = s.intensity * std::sqrt(s.scale_length / (pi * s.airspeed)) * shape.gain;
  for (Eigen::Index i = 0; i < n; ++i) {
    const Section& sec = shape.sections[static_cast<std::size_t>(i)];
    const double a = sec.pole / T;
    ss.A.row(i) = u_state;
    ss.A(i, i) -= a;
    ss.B(i) = u_noise;
    const double d = sec.zero > 0 ? sec.pole / sec.zero : 0.0;
    const double c = sec.zero > 0 ? (1.0 - d) * a : a;
    u_state *= d;
    u_state(i) += c;
    u_noise *= d;
  }
  AEROSECT_CHECK(u_noise == 0.0);  // strictly proper: no direct noise term
  ss.C = u_state;
  return ss;
}

// F with F F^T = S for a symmetric positive semi-definite S (LDLT with
// pivoting; rounding-level negative pivots are set to zero).
Eigen::MatrixXd psd_factor(const Eigen::MatrixXd& S) {
  const Eigen::LDLT<Eigen::MatrixXd> ldlt(S);
  AEROSECT_CHECK(ldlt.info() == Eigen::Success);
  const Eigen::VectorXd d = ldlt.vectorD().cwiseMax(0.0).cwiseSqrt();
  const Eigen::MatrixXd L = ldlt.matrixL();
  Eigen::MatrixXd F = L * d.asDiagonal();
  return ldlt.transpositionsP().transpose() * F;
}

// Solves X = M X M^T + S (discrete) by vectorisation: (I - M (x) M) vec X = vec S.
Eigen::MatrixXd discrete_lyapunov(const Eigen::MatrixXd& M, const Eigen::MatrixXd& S) {
  const Eigen::Index n = M.rows();
  Eigen::MatrixXd K = Eigen::MatrixXd::Identity(n * n, n * n);
  for (Eigen::Index i = 0; i < n; ++i)
    for (Eigen::Index j = 0; j < n; ++j) K.block(i * n, j * n, n, n) -= M(i, j) * M;
  const Eigen::VectorXd x =
      K.fullPivLu().solve(Eigen::Map<const Eigen::VectorXd>(S.data(), n * n));
  Eigen::MatrixXd X = Eigen::Map<const Eigen::MatrixXd>(x.data(), n, n);
  return 0.5 * (X + X.transpose());
}

// Solves A X + X A^T + S = 0 (continuous) likewise: (I (x) A + A (x) I) vec X = -vec S.
Eigen::MatrixXd continuous_lyapunov(const Eigen::MatrixXd& A, const Eigen::MatrixXd& S) {
  const Eigen::Index n = A.rows();
  const Eigen::MatrixXd I = Eigen::MatrixXd::Identity(n, n);
  Eigen::MatrixXd K = Eigen::MatrixXd::Zero(n * n, n * n);
  for (Eigen::Index i = 0; i < n; ++i)
    for (Eigen::Index j = 0; j < n; ++j)
      K.block(i * n, j * n, n, n) = A(i, j) * I + (i == j ? A : Eigen::MatrixXd::Zero(n, n));
  const Eigen::VectorXd x =
      K.fullPivLu().solve(-Eigen::Map<const Eigen::VectorXd>(S.data(), n * n));
  Eigen::MatrixXd X = Eigen::Map<const Eigen::MatrixXd>(x.data(), n, n);
  return 0.5 * (X + X.transpose());
}

// Row-major copy, for the scalar recursion.
std::vector<double> row_major(const Eigen::MatrixXd& M) {
  std::vector<double> out(static_cast<std::size_t>(M.size()));
  for (Eigen::Index i = 0; i < M.rows(); ++i)
    for (Eigen::Index j = 0; j < M.cols(); ++j)
      out[static_cast<std::size_t>(i * M.cols() + j)] = M(i, j);
  return out;
}

}  // namespace

std::vector<double> standard_normal_sequence(std::uint64_t seed, std::size_t n) {
  NormalStream noise(seed);
  std::vector<double> out(n);
  for (double& z : out) z = noise.next();
  return out;
}

std::vector<double> turbulence_record(const TurbulenceSpec& s, double dt, std::size_t n) {
  AEROSECT_CHECK(std::isfinite(dt) && dt > 0);
  const StateSpace ss = realise(s);
  const Eigen::Index m = ss.A.rows();
  const Eigen::MatrixXd Qc = kNoiseIntensity * ss.B * ss.B.transpose();

  // Exact discretisation: A_d = exp(A dt) and the covariance Q_d of the
  // noise integrated over one step. Van Loan's block exponential
  //   exp([-A, Qc; 0, A^T] dt) = [F11, F12; 0, F22],  A_d = F22^T, Q_d = F22^T F12,
  // is accurate while |A| dt is of order one; for larger steps the block
  // exp(-A dt) grows, and Q_d = P - A_d P A_d^T (P the continuous stationary
  // covariance) is used instead.
  const double fastest = ss.A.diagonal().cwiseAbs().maxCoeff();  // triangular A
  Eigen::MatrixXd Ad, Qd;
  if (fastest * dt <= 1.0) {
    Eigen::MatrixXd M = Eigen::MatrixXd::Zero(2 * m, 2 * m);
    M.topLeftCorner(m, m) = -ss.A * dt;
    M.topRightCorner(m, m) = Qc * dt;
    M.bottomRightCorner(m, m) = ss.A.transpose() * dt;
    const Eigen::MatrixXd F = M.exp();
    Ad = F.bottomRightCorner(m, m).transpose();
    Qd = Ad * F.topRightCorner(m, m);
  } else {
    Ad = (ss.A * dt).exp();
    const Eigen::MatrixXd P = continuous_lyapunov(ss.A, Qc);
    Qd = P - Ad * P * Ad.transpose();
  }
  Qd = 0.5 * (Qd + Qd.transpose());

  // Stationary start: x_0 ~ N(0, P_d), P_d = A_d P_d A_d^T + Q_d.
  const Eigen::MatrixXd Pd = discrete_lyapunov(Ad, Qd);

  // The recursion x_{k+1} = A_d x_k + G z_k, w_k = C x_k (G G^T = Q_d, z_k
  // standard normal), in plain loops with explicit fused multiply-adds in a
  // fixed order (see the header: reproducibility).
  const auto um = static_cast<std::size_t>(m);
  const std::vector<double> ad = row_major(Ad), g = row_major(psd_factor(Qd)),
                            g0 = row_major(psd_factor(Pd));
  std::vector<double> c(um);
  for (std::size_t j = 0; j < um; ++j) c[j] = ss.C(static_cast<Eigen::Index>(j));

  NormalStream noise(s.seed);
  std::vector<double> x(um, 0.0), x_next(um), z(um);
  for (double& zi : z) zi = noise.next();
  for (std::size_t i = 0; i < um; ++i) {
    double acc = 0.0;
    for (std::size_t j = 0; j < um; ++j) acc = std::fma(g0[i * um + j], z[j], acc);
    x[i] = acc;
  }
  std::vector<double> w(n);
  for (std::size_t k = 0; k < n; ++k) {
    double out = 0.0;
    for (std::size_t j = 0; j < um; ++j) out = std::fma(c[j], x[j], out);
    w[k] = out;
    if (k + 1 == n) break;
    for (double& zi : z) zi = noise.next();
    for (std::size_t i = 0; i < um; ++i) {
      double acc = 0.0;
      for (std::size_t j = 0; j < um; ++j) acc = std::fma(ad[i * um + j], x[j], acc);
      for (std::size_t j = 0; j < um; ++j) acc = std::fma(g[i * um + j], z[j], acc);
      x_next[i] = acc;
    }
    x.swap(x_next);
  }
  return w;
}

double turbulence_psd_spatial(TurbulenceModel m, double sigma, double L, double Omega) {
  AEROSECT_CHECK(std::isfinite(sigma) && sigma >= 0);
  AEROSECT_CHECK(std::isfinite(L) && L > 0);
  AEROSECT_CHECK(std::isfinite(Omega) && Omega >= 0);
  const double scale = sigma * sigma * L / pi;
  switch (m) {
    case TurbulenceModel::kDryden: {
      const double x2 = (L * Omega) * (L * Omega);
      return scale * (1.0 + 3.0 * x2) / ((1.0 + x2) * (1.0 + x2));
    }
    case TurbulenceModel::kVonKarman: {
      const double y2 = (1.339 * L * Omega) * (1.339 * L * Omega);
      return scale * (1.0 + (8.0 / 3.0) * y2) / std::pow(1.0 + y2, 11.0 / 6.0);
    }
  }
  AEROSECT_CHECK(false);
  return 0;
}

double turbulence_psd_temporal(TurbulenceModel m, double sigma, double L, double V,
                               double omega) {
  AEROSECT_CHECK(std::isfinite(V) && V > 0);
  return turbulence_psd_spatial(m, sigma, L, omega / V) / V;
}

double turbulence_filter_psd(const TurbulenceSpec& s, double omega) {
  AEROSECT_CHECK(std::isfinite(omega) && omega >= 0);
  const StateSpace ss = realise(s);
  // H(i omega) = C (i omega I - A)^-1 B; A is lower triangular.
  Eigen::MatrixXcd Z = -ss.A.cast<std::complex<double>>();
  Z.diagonal().array() += std::complex<double>(0.0, omega);
  const Eigen::VectorXcd x =
      Z.triangularView<Eigen::Lower>().solve(ss.B.cast<std::complex<double>>());
  const std::complex<double> H = (ss.C.cast<std::complex<double>>() * x)(0);
  return kNoiseIntensity / pi * std::norm(H);
}

// ---------------------------------------------------------------------------
// MIL-F-8785C defaults.

double mil8785c_scale_length(TurbulenceModel m, double altitude_m) {
  AEROSECT_CHECK(std::isfinite(altitude_m) && altitude_m > 0);
  const double h_ft = altitude_m / kMetresPerFoot;
  const double high_ft = m == TurbulenceModel::kDryden ? 1750.0 : 2500.0;
  if (h_ft <= 1000.0) return altitude_m;  // low altitude: L_w = h
  if (h_ft >= 2000.0) return high_ft * kMetresPerFoot;
  return (1000.0 + (high_ft - 1000.0) * (h_ft - 1000.0) / 1000.0) * kMetresPerFoot;
}

namespace {
// sigma_w (ft/s) against altitude (ft) for the probabilities of exceedance
// 10^-2 (light), 10^-3 (moderate), 10^-5 (severe), medium/high altitudes.
// RECALLED FROM MEMORY: the tabulation commonly given for MIL-F-8785C's
// chart of turbulence intensity against altitude (its 500 ft column belongs
// to the low-altitude region and is not used). Check against the standard
// before relying on it.
constexpr std::array<double, 11> kChartAltitudeFt = {
    1750, 3750, 7500, 15000, 25000, 35000, 45000, 55000, 65000, 75000, 80000};
constexpr std::array<double, 11> kChartLight = {3.6, 3.3, 1.6, 0, 0, 0, 0, 0, 0, 0, 0};
constexpr std::array<double, 11> kChartModerate = {6.9, 7.4, 6.7, 4.6, 2.7, 0.4,
                                                   0,   0,   0,   0,   0};
constexpr std::array<double, 11> kChartSevere = {13.0, 16.0, 15.1, 11.6, 9.7, 8.1,
                                                 8.2,  7.9,  4.9,  3.2,  2.1};

double chart_intensity(TurbulenceSeverity s, double h_ft) {
  const auto& row = s == TurbulenceSeverity::kLight      ? kChartLight
                    : s == TurbulenceSeverity::kModerate ? kChartModerate
                                                         : kChartSevere;
  std::size_t i = 1;
  while (i + 1 < kChartAltitudeFt.size() && h_ft > kChartAltitudeFt[i]) ++i;
  const double h0 = kChartAltitudeFt[i - 1], h1 = kChartAltitudeFt[i];
  return (row[i - 1] + (row[i] - row[i - 1]) * (h_ft - h0) / (h1 - h0)) * kMetresPerFoot;
}

double wind_at_20ft(TurbulenceSeverity s) {  // W20, m/s
  switch (s) {
    case TurbulenceSeverity::kLight: return 15.0 * kKnot;
    case TurbulenceSeverity::kModerate: return 30.0 * kKnot;
    case TurbulenceSeverity::kSevere: return 45.0 * kKnot;
  }
  AEROSECT_CHECK(false);
  return 0;
}
}  // namespace

double mil8785c_intensity(TurbulenceSeverity s, double altitude_m) {
  AEROSECT_CHECK(std::isfinite(altitude_m) && altitude_m > 0);
  const double h_ft = altitude_m / kMetresPerFoot;
  AEROSECT_CHECK(h_ft <= kChartAltitudeFt.back());
  const double low = 0.1 * wind_at_20ft(s);  // sigma_w = 0.1 W20
  if (h_ft <= 1000.0) return low;
  if (h_ft >= 2000.0) return chart_intensity(s, h_ft);
  return low + (chart_intensity(s, 2000.0) - low) * (h_ft - 1000.0) / 1000.0;
}

}  // namespace aerosect
