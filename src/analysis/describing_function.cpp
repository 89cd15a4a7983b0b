#include "aerosect/analysis/describing_function.hpp"

#include <algorithm>
#include <cmath>
#include <complex>
#include <limits>
#include <optional>
#include <tuple>

#include <Eigen/Eigenvalues>
#include <Eigen/LU>
#include <boost/math/tools/roots.hpp>

#include "aerosect/analysis/flutter.hpp"
#include "aerosect/analysis/root_tracking.hpp"
#include "aerosect/error.hpp"

namespace aerosect {

const char* to_string(BranchEnd e) {
  switch (e) {
    case BranchEnd::kGapEdge: return "gap edge";
    case BranchEnd::kLinearLimit: return "small-amplitude (linear) limit";
    case BranchEnd::kBranchEnds: return "branch ends";
    case BranchEnd::kSpeedRange: return "speed range ends";
    case BranchEnd::kAmplitudeLimit: return "physical amplitude limit";
  }
  return "?";
}

std::vector<std::pair<double, double>> stable_speed_ranges(const LcoPrediction& p, const LcoBranch& b) {
  std::vector<std::pair<double, double>> out;
  bool open = false;
  for (std::size_t i = b.first; i < b.first + b.count; ++i) {
    const LcoPredictionPoint& q = p.points[i];
    if (!q.stable) {
      open = false;
      continue;
    }
    if (!open) out.emplace_back(q.speed, q.speed);
    open = true;
    out.back().first = std::min(out.back().first, q.speed);
    out.back().second = std::max(out.back().second, q.speed);
  }
  return out;
}

std::vector<LcoAtSpeed> lco_at_speed(const LcoPrediction& p, double speed) {
  std::vector<LcoAtSpeed> out;
  for (const LcoBranch& b : p.branches) {
    const std::size_t n = b.closed ? b.count + 1 : b.count;  // a loop also joins its last point to its first
    for (std::size_t k = 1; k < n && b.count > 1; ++k) {
      const LcoPredictionPoint& a = p.points[b.first + k - 1];
      const LcoPredictionPoint& z = p.points[b.first + k % b.count];
      const double lo = std::min(a.speed, z.speed), hi = std::max(a.speed, z.speed);
      if (speed < lo || speed > hi) continue;
      // A point exactly at `speed` ends one segment and starts the next:
      // counted once, with the segment that ends there.
      if (k > 1 && speed == a.speed) continue;
      if (b.closed && k == b.count && speed == z.speed) continue;  // the loop's first point, counted at k = 1
      const double t = hi > lo ? (speed - a.speed) / (z.speed - a.speed) : 0.0;
      out.push_back({a.amplitude + t * (z.amplitude - a.amplitude), a.frequency + t * (z.frequency - a.frequency),
                     a.stable && z.stable, a.branch});
    }
  }
  return out;
}

namespace {

using cd = std::complex<double>;

// One neutral point of the equivalent system at one amplitude.
struct Neutral {
  double speed = 0;      // m/s
  cd eigenvalue;         // the neutral pair's eigenvalue (Im > 0), 1/s
  int direction = 0;     // +1: the pair turns growing as U rises; -1: decaying
  bool stable = false;   // amplitude-perturbation criterion (header)
  double N = 0;          // equivalent stiffness there
  double bias = 0, mean_force = 0;  // B and F0(B, A) (steady case), else 0
};

// The spring's equivalent stiffness at one (A, U): N(A) without a steady
// condition; with one N_A(B, A) at the bias B of the mean equation.
struct Equivalent {
  double N = 0;
  double bias = 0, mean_force = 0;
  bool lco = true;  // a limit cycle can be there (header: mean root kept, a breakpoint crossed)
};

// The mean equation of a steady case (header), condensed to spring j's DOF:
//   s(U) B + F0(B, A) = r(U),
//   K(U) = diag(k_i, i != j; 0 for j) + U^2 K_st1,  F(U) = -U^2 K_st1 q_a0 + f_steady,
//   s = K_jj - K_jo K_oo^-1 K_oj,  r = F_j - K_jo K_oo^-1 F_o.
class MeanBalance {
 public:
  MeanBalance(const ModelDescription& d, int j) : law_(d.springs[static_cast<std::size_t>(j)]), j_(j) {
    // The steady aerodynamic stiffness per U^2: the model at 1 m/s
    // (K_a is proportional to U^2, f_c and d_q to U), as equilibrium.cpp.
    ModelDescription unit;
    unit.section = d.section;
    unit.flow = d.flow;
    unit.flow.airspeed = 1.0;
    unit.aero = d.aero;
    unit.springs = d.springs;
    unit.steady = d.steady;
    const AeroelasticModel m(std::move(unit));
    const AeroMatrices& am = m.aero();
    const int n = m.n_dof();
    K1_ = am.stiffness - am.circulation_force * am.downwash_displacement.transpose();
    q_a0_ = m.aerodynamic_offset().segment(m.layout().displacement, n);
    f_ = m.steady_force();
    k_ = DofVector::Zero(n);
    for (int i = 0; i < n; ++i)
      if (i != j) k_(i) = d.springs[static_cast<std::size_t>(i)].nominal_stiffness();
    const auto bp = law_.breakpoints();
    if (!bp.empty()) centre_ = 0.5 * (bp.front() + bp.back());
  }

  Equivalent at(double A, double U) const {
    Equivalent e;
    e.lco = false;
    e.N = law_.nominal_stiffness();
    const std::optional<double> B = bias(A, U);
    if (!B) return e;
    const SpringLaw::DualInput h = law_.dual_input_describing_function(*B, A);
    e.N = h.gain;
    e.bias = *B;
    e.mean_force = h.mean;
    bool crosses = !law_.is_piecewise_linear();
    for (double xb : law_.breakpoints()) crosses |= xb > *B - A && xb < *B + A;
    e.lco = crosses && std::isfinite(h.gain);
    return e;
  }

 private:
  // The kept root B of the mean equation at (A, U), if any.
  std::optional<double> bias(double A, double U) const {
    const int n = static_cast<int>(k_.size());
    DofMatrix K = U * U * K1_;
    K.diagonal() += k_;
    const DofVector F = -U * U * (K1_ * q_a0_) + f_;
    double s = K(j_, j_), r = F(j_);
    if (n > 1) {
      // Fixed capacity (at most 2 other DOFs): this runs once per (A, U)
      // of the steady scan, and heap matrices were a third of its own cost.
      AEROSECT_CHECK(n <= 3);
      Eigen::Vector2i o = Eigen::Vector2i::Zero();
      int no = 0;
      for (int i = 0; i < n; ++i)
        if (i != j_) o(no++) = i;
      using Small = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, 0, 2, 2>;
      using SmallVector = Eigen::Matrix<double, Eigen::Dynamic, 1, 0, 2, 1>;
      Small Koo(no, no);
      SmallVector Koj(no), Kjo(no), Fo(no);
      for (int a = 0; a < no; ++a) {
        for (int b = 0; b < no; ++b) Koo(a, b) = K(o(a), o(b));
        Koj(a) = K(o(a), j_);
        Kjo(a) = K(j_, o(a));
        Fo(a) = F(o(a));
      }
      const Eigen::FullPivLU<Small> lu(Koo);
      if (!lu.isInvertible()) return std::nullopt;
      s -= Kjo.dot(lu.solve(Koj));
      r -= Kjo.dot(lu.solve(Fo));
    }
    auto g = [&](double B) { return s * B + law_.dual_input_describing_function(B, A).mean - r; };
    // Sample points: the kinks of F0 (B = x_b -+ A) with three points
    // between neighbours, then outward until g is negative below and
    // positive above (a positive mean stiffness far out).
    std::vector<double> kinks;
    for (double xb : law_.breakpoints()) {
      kinks.push_back(xb - A);
      kinks.push_back(xb + A);
    }
    if (kinks.empty()) kinks = {centre_ - A, centre_ + A};
    std::sort(kinks.begin(), kinks.end());
    std::vector<double> pts;
    for (std::size_t i = 0; i < kinks.size(); ++i) {
      pts.push_back(kinks[i]);
      if (i + 1 < kinks.size())
        for (int q = 1; q < 4; ++q) pts.push_back(kinks[i] + (kinks[i + 1] - kinks[i]) * q / 4.0);
    }
    const double step = std::max(A, kinks.back() - kinks.front());
    double lo = kinks.front(), hi = kinks.back();
    for (int i = 0; i < 60 && g(lo) >= 0; ++i) pts.push_back(lo -= step * std::ldexp(1.0, i));
    for (int i = 0; i < 60 && g(hi) <= 0; ++i) pts.push_back(hi += step * std::ldexp(1.0, i));
    std::sort(pts.begin(), pts.end());
    // Roots where g rises (a positive mean stiffness), refined by TOMS 748.
    std::optional<double> best;
    double ga = g(pts.front());
    for (std::size_t i = 1; i < pts.size(); ++i) {
      const double gb = g(pts[i]);
      double root = std::numeric_limits<double>::quiet_NaN();
      if (ga < 0 && gb >= 0) {
        if (gb == 0) {
          root = pts[i];
        } else {
          boost::uintmax_t iterations = 100;
          const auto br = boost::math::tools::toms748_solve(g, pts[i - 1], pts[i], ga, gb,
                                                            boost::math::tools::eps_tolerance<double>(50),
                                                            iterations);
          root = 0.5 * (br.first + br.second);
        }
      }
      if (std::isfinite(root) && (!best || std::abs(root - centre_) < std::abs(*best - centre_))) best = root;
      ga = gb;
    }
    return best;
  }

  const SpringLaw& law_;
  int j_;
  DofMatrix K1_;
  DofVector q_a0_, f_, k_;
  double centre_ = 0;
};


// The equivalent system as a rank-one update of the system without spring j:
//   A(U, N) = A0(U) + N b e_d^T,  A0(U) = P0 + U P1 + U^2 P2,
// d the displacement row of DOF j (its spring enters only column d of the
// velocity rows, AeroelasticModel::assemble) and A0 the state matrix with
// k_j = 0, quadratic in U. Then det(sI - A) = det(sI - A0) (1 - N G(s; U)),
// G = e_d^T (sI - A0)^-1 b, and a neutral point (U, omega) of the
// equivalent system at stiffness N solves 1 - N G(i omega; U) = 0.
class RankOne {
 public:
  RankOne(const AeroelasticModel& model, DofVector k, int j, double u) {
    k(j) = 0;
    const Eigen::MatrixXd Z = model.state_matrix_at(0, k), M1 = model.state_matrix_at(u, k),
                          M2 = model.state_matrix_at(2 * u, k);
    P0_ = Z;
    P2_ = (M2 - 2 * M1 + Z) / (2 * u * u);
    P1_ = (M1 - Z) / u - u * P2_;
    d_ = model.layout().displacement + j;
    k(j) = 1;
    Eigen::MatrixXd D = model.state_matrix_at(0, k) - Z;
    b_ = D.col(d_);
    D.col(d_).setZero();
    // The structure is checked, not assumed: the stiffness in column d only
    // and A0 quadratic in U (else the scan keeps the direct eigenvalues).
    k(j) = 0;
    ok_ = D.isZero(0.0) && b_.allFinite() && u > 0;
    for (const double f : {0.37, 1.61}) {
      const Eigen::MatrixXd E = model.state_matrix_at(f * u, k);
      ok_ = ok_ && (a0(f * u) - E).cwiseAbs().maxCoeff() <= 1e-12 * std::max(E.cwiseAbs().maxCoeff(), 1e-300);
    }
  }
  bool ok() const { return ok_; }
  Eigen::MatrixXd a0(double U) const { return P0_ + U * P1_ + (U * U) * P2_; }

  // Newton on the characteristic function f = det(sI - A(U, N)) itself
  // (a polynomial in s: no poles), with its logarithmic derivatives from
  // M^-1, M = sI - A: d ln f/ds = tr M^-1, d ln f/dU = -tr(M^-1 A0'(U)).

  // The eigenvalue of A(U, N) reached by Newton from s0, if it converges.
  std::optional<cd> root_near(double U, double N, cd s0) const {
    const Eigen::MatrixXcd A = a(U, N).cast<cd>();
    cd s = s0;
    double prev = std::numeric_limits<double>::infinity();
    for (int it = 0; it < 40; ++it) {
      Eigen::MatrixXcd M = -A;
      M.diagonal().array() += s;
      const cd Ls = M.partialPivLu().inverse().trace();
      if (!std::isfinite(std::abs(Ls)) || Ls == 0.0) return std::nullopt;
      const cd step = 1.0 / Ls;
      s -= step;
      const double st = std::abs(step);
      if (converged(st, prev, std::abs(s))) return s;
      prev = st;
    }
    return std::nullopt;
  }

  // The neutral point (U, omega) of the equivalent system at stiffness N:
  // f(U, i omega) = 0, by Newton from (U0, w0); only if it converges inside
  // [Ua, Ub].
  std::optional<std::pair<double, double>> crossing(double N, double Ua, double Ub, double U0, double w0) const {
    const auto sol = newton2(Ua, Ub, U0, w0, [&](double U, double w) -> std::optional<std::pair<double, double>> {
      if (!(w > 0)) return std::nullopt;
      Eigen::MatrixXcd M = -a(U, N).cast<cd>();
      M.diagonal().array() += cd(0, w);
      const Eigen::MatrixXcd inv = M.partialPivLu().inverse();
      // 1 + L_U dU + L_w dw = 0: L_w = i tr M^-1, L_U = -tr(M^-1 A0').
      const cd Lw = cd(0, 1) * inv.trace();
      const cd LU = -(inv * da0(U).cast<cd>()).trace();
      const double det = LU.real() * Lw.imag() - Lw.real() * LU.imag();
      if (!(std::abs(det) > 0) || !std::isfinite(det)) return std::nullopt;
      return std::make_pair(-Lw.imag() / det, LU.imag() / det);
    });
    if (sol && !(sol->second > 0)) return std::nullopt;
    return sol;
  }

  // A double real root sigma of f (where a pair turns real): f = 0 and
  // df/ds = 0, by Newton from (U0, s0); only inside [Ua, Ub]. Divided by f,
  // with T1 = tr M^-1, T2 = tr M^-2, TU = tr(M^-1 A0'), TUs = tr(M^-1 A0' M^-1):
  //   [ T1           -TU            ] [ds]   [ -1 ]
  //   [ T1^2 - T2    TUs - TU T1    ] [dU] = [ -T1 ].
  std::optional<std::pair<double, double>> double_root(double N, double Ua, double Ub, double U0, double s0) const {
    return newton2(Ua, Ub, U0, s0, [&](double U, double s) -> std::optional<std::pair<double, double>> {
      Eigen::MatrixXd M = -a(U, N);
      M.diagonal().array() += s;
      const Eigen::MatrixXd inv = M.partialPivLu().inverse(), inv2 = inv * inv, D = da0(U);
      const double T1 = inv.trace(), T2 = inv2.trace(), TU = (inv * D).trace(), TUs = (D * inv2).trace();
      const double a11 = T1, a12 = -TU, a21 = T1 * T1 - T2, a22 = TUs - TU * T1;
      const double det = a11 * a22 - a12 * a21;
      if (!(std::abs(det) > 0) || !std::isfinite(det)) return std::nullopt;
      return std::make_pair((-a11 * T1 + a21) / det, (-a22 + a12 * T1) / det);
    });
  }

 private:
  // Newton in (U, x) from (U0, x0): `step(U, x)` gives the correction
  // (dU, dx), or nothing where it cannot; it fails where U leaves [Ua, Ub]
  // by half its width, and only a solution inside [Ua, Ub] counts.
  template <class Step>
  static std::optional<std::pair<double, double>> newton2(double Ua, double Ub, double U0, double x0, Step step) {
    double U = U0, x = x0, prev = std::numeric_limits<double>::infinity();
    const double h = Ub - Ua;
    for (int it = 0; it < 40; ++it) {
      const auto d = step(U, x);
      if (!d) return std::nullopt;
      U += d->first;
      x += d->second;
      if (!(U > Ua - 0.5 * h && U < Ub + 0.5 * h) || !std::isfinite(x)) return std::nullopt;
      const double st = std::max(std::abs(d->first) / U, std::abs(d->second) / std::max(std::abs(x), 1e-300));
      if (converged(st, prev, 1.0)) {
        if (U < Ua || U > Ub) return std::nullopt;
        return std::make_pair(U, x);
      }
      prev = st;
    }
    return std::nullopt;
  }
  Eigen::MatrixXd da0(double U) const { return P1_ + (2 * U) * P2_; }
  Eigen::MatrixXd a(double U, double N) const {
    Eigen::MatrixXd A = a0(U);
    A.col(d_) += N * b_;
    return A;
  }
  // A Newton step `step` (relative) ends the iteration below 1e-12 (the
  // error left is of the order of its square), or where it no longer
  // shrinks quadratically (the round-off level of an ill-conditioned root).
  static bool converged(double step, double prev, double scale) {
    return step <= 1e-12 * scale || (step <= 1e-9 * scale && step > 0.25 * prev);
  }
  Eigen::MatrixXd P0_, P1_, P2_;
  Eigen::VectorXd b_;
  int d_ = 0;
  bool ok_ = false;
};

// The characteristic polynomial of A(U, N) at one grid speed:
//   det(sI - A) = p0(s) + N dq(s), coefficients ascending, p0 monic of
// degree n (from the eigenvalues of A0 and of A at a reference stiffness
// N1: the coefficients of a polynomial from its roots are well conditioned
// even where roots nearly coincide).
struct SpeedPoly {
  std::vector<double> p0, dq;
  Eigen::VectorXcd e0, e1;  // eigenvalues at N = 0 and N = N1 (starting values)
  double N1 = 1;
};

std::vector<double> poly_from_roots(const Eigen::VectorXcd& r) {
  std::vector<cd> c(static_cast<std::size_t>(r.size()) + 1, cd(0));
  c[0] = 1;
  for (Eigen::Index i = 0; i < r.size(); ++i) {
    // multiply by (s - r_i): c holds the coefficients from the top.
    for (Eigen::Index k = i + 1; k > 0; --k) c[static_cast<std::size_t>(k)] -= r(i) * c[static_cast<std::size_t>(k - 1)];
  }
  // c[k] is the coefficient of s^(n-k); ascending order.
  std::vector<double> a(c.size());
  for (std::size_t k = 0; k < c.size(); ++k) a[c.size() - 1 - k] = c[k].real();
  return a;
}

// The n roots of the real monic polynomial c (ascending, c[n] = 1) by
// Newton from `start` (n values closed under conjugation: one Newton
// iteration per real root and per complex pair); false when a start does
// not converge, the roots found are not n distinct ones or their sum is not
// -c[n-1] (then the caller uses the QR eigenvalues).
bool polish_roots(const std::vector<double>& c, const cd* start, cd* out) {
  const int n = static_cast<int>(c.size()) - 1;
  double rho2 = 0;  // squared magnitudes throughout
  for (int i = 0; i < n; ++i) rho2 = std::max(rho2, std::norm(start[i]));
  const double floor2 = 1e-20 * std::max(rho2, 1e-300);
  int m = 0;
  for (int i = 0; i < n; ++i) {
    const double re0 = start[i].real(), im0 = start[i].imag();
    if (im0 < 0) continue;
    if (im0 == 0) {
      double x = re0, prev = std::numeric_limits<double>::infinity();
      bool done = false;
      for (int it = 0; it < 16 && !done; ++it) {
        double p = 1, dp = 0;
        for (int k = n - 1; k >= 0; --k) {
          dp = dp * x + p;
          p = p * x + c[static_cast<std::size_t>(k)];
        }
        if (dp == 0 || !std::isfinite(p)) return false;
        const double step = p / dp;
        x -= step;
        const double a = step * step, sc = std::max(x * x, floor2);
        done = a <= 1.6e-29 * sc || (a <= 1e-20 * sc && a > 0.0625 * prev);
        prev = a;
      }
      if (!done || m >= n) return false;
      out[m++] = cd(x, 0);
    } else {
      double xr = re0, xi = im0, prev = std::numeric_limits<double>::infinity();
      bool done = false;
      for (int it = 0; it < 16 && !done; ++it) {
        double pr = 1, pi = 0, dr = 0, di = 0;
        for (int k = n - 1; k >= 0; --k) {
          const double tr = dr * xr - di * xi + pr, ti = dr * xi + di * xr + pi;
          dr = tr;
          di = ti;
          const double ur = pr * xr - pi * xi + c[static_cast<std::size_t>(k)], ui = pr * xi + pi * xr;
          pr = ur;
          pi = ui;
        }
        const double dd = dr * dr + di * di;
        if (!(dd > 0) || !std::isfinite(pr) || !std::isfinite(pi)) return false;
        const double sr = (pr * dr + pi * di) / dd, si = (pi * dr - pr * di) / dd;
        xr -= sr;
        xi -= si;
        const double a = sr * sr + si * si, sc = std::max(xr * xr + xi * xi, floor2);
        done = a <= 1.6e-29 * sc || (a <= 1e-20 * sc && a > 0.0625 * prev);
        prev = a;
      }
      if (!done || m + 1 >= n) return false;
      out[m++] = cd(xr, std::abs(xi));
      out[m++] = cd(xr, -std::abs(xi));
    }
  }
  if (m != n) return false;
  double sum = 0, mag = std::abs(c[static_cast<std::size_t>(n - 1)]);
  for (int i = 0; i < n; ++i) {
    sum += out[i].real();
    mag += std::abs(out[i].real()) + std::abs(out[i].imag());
    const double ni = std::norm(out[i]);
    for (int k = 0; k < i; ++k)
      if (std::norm(out[i] - out[k]) <= 1e-14 * std::max({ni, std::norm(out[k]), floor2})) return false;
  }
  return std::abs(sum + c[static_cast<std::size_t>(n - 1)]) <= 1e-10 * mag;
}

// The same from any starting values: the Aberth-Ehrlich iteration on all n
// roots at once (complex, from the starts turned slightly off the real
// axis), its roots then sorted into real ones and pairs and polished by
// polish_roots (which validates them).
bool aberth_roots(const std::vector<double>& c, const cd* start, cd* out) {
  const int n = static_cast<int>(c.size()) - 1;
  std::vector<cd> z(static_cast<std::size_t>(n));
  double rho = 0;
  for (int i = 0; i < n; ++i) rho = std::max(rho, std::abs(start[i]));
  if (!(rho > 0) || !std::isfinite(rho)) return false;
  const cd turn = std::polar(1.0, 0.1);
  for (int i = 0; i < n; ++i) z[static_cast<std::size_t>(i)] = start[i] * turn + cd(0, 1e-3 * rho * (i + 1) / n);
  bool done = false;
  for (int it = 0; it < 60 && !done; ++it) {
    done = true;
    for (int i = 0; i < n; ++i) {
      cd& x = z[static_cast<std::size_t>(i)];
      cd p = 1, dp = 0;
      for (int k = n - 1; k >= 0; --k) {
        dp = dp * x + p;
        p = p * x + c[static_cast<std::size_t>(k)];
      }
      if (dp == 0.0) return false;
      const cd ratio = p / dp;
      cd sum = 0;
      for (int k = 0; k < n; ++k)
        if (k != i) sum += 1.0 / (x - z[static_cast<std::size_t>(k)]);
      const cd w = ratio / (1.0 - ratio * sum);
      if (!std::isfinite(std::abs(w))) return false;
      x -= w;
      done = done && std::abs(w) <= 1e-10 * std::max(std::abs(x), 1e-10 * rho);
    }
  }
  if (!done) return false;
  std::vector<cd> s;
  for (const cd x : z) {
    const double tol = 1e-7 * std::abs(x);
    if (x.imag() > tol) {
      s.push_back(x);
      s.push_back(std::conj(x));
    } else if (std::abs(x.imag()) <= tol) {
      s.push_back(cd(x.real(), 0));
    }
  }
  return static_cast<int>(s.size()) == n && polish_roots(c, s.data(), out);
}

// What happens to the oscillatory pairs between two neighbouring grid
// speeds, when it can be told from the two spectra alone: every eigenvalue
// is matched to one at the other speed (mutually nearest, and moved by less
// than half its distance to its neighbours), each pair's growth margin and
// real part have the same sign, and exactly one event happens:
//   kCrossing: one pair's real part changes sign (a neutral point);
//   kTurnsReal: one pair at one end and two real roots of its sign at the
//     other, all else matched without a sign change;
//   kReorder: no sign change, but pairs swap their frequency order (only
//     the frequency ranking sees it: a jump of a ranked value).
// (For the last two no pair is within 1e-5 |lambda| of the imaginary axis
// at either end: refine()'s continuity test could not tell a jump between
// such values from a zero.)
// Anything else is kUnknown: its candidates are refined by the direct
// eigenvalues (Scanner::refine).
struct Interval {
  enum Kind { kUnknown, kCrossing, kTurnsReal, kReorder } kind = kUnknown;
  int margin_rank = -1;  // the margin ranking's candidate rank (-1: none)
  int freq_rank = -1;    // the pair's rank by frequency (kTurnsReal: at the end where it is a pair)
  bool solved = false;   // the Newton solution below converged
  double U = 0, omega = 0;  // kCrossing: the neutral point; kTurnsReal: U where the pair turns real
};

// The neutral points at one amplitude A = amplitude(t).
struct Level {
  double t = 0, A = 0, N = 0;
  bool valid = false;            // N(A) > 0
  std::vector<Neutral> neutral;  // ascending speed
  std::vector<cd> spectra;       // the eigenvalues at each grid speed (n per speed; starting values for the next level)
};

class Scanner {
 public:
  Scanner(const AeroelasticModel& model, const SpringLaw& law, int j, DofVector k,
          const std::vector<double>& speeds, double min_frequency,
          std::vector<EquivalentDivergence>& divergence, const MeanBalance* mean)
      : model_(model), law_(law), j_(j), k_(std::move(k)), speeds_(speeds),
        min_frequency_(min_frequency), divergence_(divergence), mean_(mean),
        rank_one_(model_, k_, j_, speeds_.back()) {}

  // The grid speeds' characteristic polynomials (rank-one form), with N1
  // the reference stiffness (the scale of the N met; any N1 > 0 is exact in
  // arithmetic).
  void prepare(double N1) {
    if (!rank_one_.ok() || !(N1 > 0) || !std::isfinite(N1)) return;
    polys_.resize(speeds_.size());
    DofVector k = k_;
    for (std::size_t q = 0; q < speeds_.size(); ++q) {
      SpeedPoly& sp = polys_[q];
      k(j_) = 0;
      sp.e0 = Eigen::EigenSolver<Eigen::MatrixXd>(model_.state_matrix_at(speeds_[q], k), false).eigenvalues();
      k(j_) = N1;
      sp.e1 = Eigen::EigenSolver<Eigen::MatrixXd>(model_.state_matrix_at(speeds_[q], k), false).eigenvalues();
      sp.p0 = poly_from_roots(sp.e0);
      const std::vector<double> p1 = poly_from_roots(sp.e1);
      sp.dq.resize(p1.size());
      for (std::size_t i = 0; i < p1.size(); ++i) sp.dq[i] = (p1[i] - sp.p0[i]) / N1;
      sp.N1 = N1;
    }
  }

  // The equivalent stiffness at (A, U) (header).
  Equivalent equivalent(double A, double U) const {
    if (mean_) return mean_->at(A, U);
    Equivalent e;
    e.N = law_.describing_function(A);
    return e;
  }

  // `near`: a neighbouring level (its spectra start the root polishing), or nullptr.
  Level scan(double t, double A, const Level* near = nullptr) const {
    Level L;
    L.t = t;
    L.A = A;
    // With a steady condition N depends on U too (through the bias): the
    // level is valid and each point carries its own N.
    L.N = mean_ ? std::numeric_limits<double>::quiet_NaN() : law_.describing_function(A);
    L.valid = mean_ || (L.N > 0 && std::isfinite(L.N));
    if (!L.valid) return L;
    // Two rankings of the oscillatory pairs at each grid speed: by growth
    // margin (the r-th largest: order statistics of continuous functions
    // are continuous while no pair turns real) and by frequency (the r-th
    // lowest pair's margin: continuous while frequencies stay apart, and it
    // sees one pair turning growing and another decaying within one speed
    // interval, which the margin ranking misses). A sign change of any
    // ranked value brackets a candidate neutral point; a point found twice
    // is kept once. Only the margin ranking's rejected candidates count as
    // divergence of the equivalent system (a rank shift of the frequency
    // ranking is no physical event).
    const std::size_t S = speeds_.size();
    const int n = model_.state_size();
    std::vector<Eigen::VectorXcd> ev(S);
    std::vector<double> Ns(S);
    const bool near_ok = near && near->spectra.size() == S * static_cast<std::size_t>(n);
    L.spectra.resize(S * static_cast<std::size_t>(n));
    for (std::size_t q = 0; q < S; ++q) {
      Ns[q] = mean_ ? equivalent(A, speeds_[q]).N : L.N;
      ev[q] = spectrum(q, Ns[q], near_ok ? &near->spectra[q * static_cast<std::size_t>(n)] : nullptr,
                       q > 0 ? ev[q - 1].data() : nullptr);
      std::copy(ev[q].data(), ev[q].data() + n, L.spectra.begin() + static_cast<std::ptrdiff_t>(q * static_cast<std::size_t>(n)));
    }
    std::vector<Interval> intervals(S);
    std::vector<bool> classified(S, false);
    // The margin ranking; the frequency ranking is the same pairs sorted by
    // frequency (what ranked(ev, true, false) gives).
    std::vector<std::vector<Ranked>> by_margin(S);
    for (std::size_t q = 0; q < S; ++q) by_margin[q] = ranked(ev[q], false, false);
    for (const bool by_frequency : {false, true}) {
      std::vector<std::vector<Ranked>> ranks(S);
      std::size_t pairs = 0;
      for (std::size_t q = 0; q < S; ++q) {
        if (by_frequency) {
          ranks[q] = std::move(by_margin[q]);
          std::sort(ranks[q].begin(), ranks[q].end() - 1,
                    [](const Ranked& a, const Ranked& b) { return a.eigenvalue.imag() < b.eigenvalue.imag(); });
        } else {
          ranks[q] = by_margin[q];
        }
        pairs = std::max(pairs, ranks[q].size());
      }
      for (std::size_t q = 1; q < speeds_.size(); ++q) {
        for (std::size_t r = 0; r < pairs; ++r) {
          const double g0 = at(ranks[q - 1], r).value, g1 = at(ranks[q], r).value;
          if ((g0 < 0) == (g1 < 0)) continue;
          const int direction = g1 > g0 ? 1 : -1;
          std::optional<Neutral> n;
          if (!polys_.empty() && !mean_) {
            if (!classified[q]) {
              intervals[q] = classify(ev[q - 1], ev[q], speeds_[q - 1], speeds_[q], L.N);
              classified[q] = true;
            }
            n = resolve(intervals[q], speeds_[q - 1], speeds_[q], r, by_frequency, direction, A, L.N);
          } else {
            n = refine(speeds_[q - 1], speeds_[q], r, by_frequency, direction, A);
          }
          if (!n) continue;
          const bool known = std::any_of(L.neutral.begin(), L.neutral.end(), [&](const Neutral& m) {
            return std::abs(m.speed - n->speed) <= 1e-7 * n->speed &&
                   std::abs(m.eigenvalue - n->eigenvalue) <= 1e-5 * std::abs(n->eigenvalue);
          });
          if (known) continue;
          n->stable = polys_.empty() ? stable(*n, A) : stable_rank_one(*n, A);
          L.neutral.push_back(*n);
        }
      }
    }
    std::sort(L.neutral.begin(), L.neutral.end(),
              [](const Neutral& a, const Neutral& b) { return a.speed < b.speed; });
    return L;
  }

 private:
  struct Ranked {
    double value = 0;  // growth margin or Re lambda, 1/s
    cd eigenvalue;
    double margin = 0;  // growth margin (the sort key of the margin ranking)
  };

  // The eigenvalues of A(U_q, N): the roots of p0 + N dq polished from
  // `start` (a neighbouring level's, else those at N = 0 or N1) or from
  // `previous` (this level's at the previous grid speed); the QR
  // eigenvalues (Eigen) when the polishing fails or without the rank-one form.
  Eigen::VectorXcd spectrum(std::size_t q, double N, const cd* start, const cd* previous) const {
    if (!polys_.empty() && std::isfinite(N)) {
      const SpeedPoly& sp = polys_[q];
      std::vector<double> c(sp.p0.size());
      for (std::size_t i = 0; i < c.size(); ++i) c[i] = sp.p0[i] + N * sp.dq[i];
      c.back() = 1;
      if (!start) start = std::abs(N) < 0.5 * sp.N1 ? sp.e0.data() : sp.e1.data();
      Eigen::VectorXcd out(static_cast<Eigen::Index>(c.size()) - 1);
      if (polish_roots(c, start, out.data())) return out;
      // A pair turned real or two real roots met since the starting values:
      // the previous speed's roots at this level, else all roots at once
      // (Aberth), then polished as above.
      if (previous && polish_roots(c, previous, out.data())) return out;
      if (aberth_roots(c, start, out.data())) return out;
    }
    DofVector k = k_;
    k(j_) = N;
    return Eigen::EigenSolver<Eigen::MatrixXd>(model_.state_matrix_at(speeds_[q], k), false).eigenvalues();
  }

  bool oscillatory(cd l) const { return l.imag() > 1e-8 * std::max(1.0, std::abs(l)); }

  // Interval classification (struct Interval), then the Newton solution of
  // its event at stiffness N.
  Interval classify(const Eigen::VectorXcd& a, const Eigen::VectorXcd& b, double Ua, double Ub, double N) const {
    Interval iv;
    const Eigen::Index n = a.size();
    if (b.size() != n) return iv;
    auto nearest = [](const Eigen::VectorXcd& v, cd to, Eigen::Index skip) {
      Eigen::Index best = -1;
      double bd = std::numeric_limits<double>::infinity();
      for (Eigen::Index i = 0; i < v.size(); ++i) {
        if (i == skip) continue;
        const double d = std::norm(v(i) - to);
        if (d < bd) bd = d, best = i;
      }
      return std::make_pair(best, std::sqrt(bd));
    };
    // match[i]: the partner in b of a(i), -1 if none; back[i] likewise.
    std::vector<Eigen::Index> match(static_cast<std::size_t>(n), -1), back(static_cast<std::size_t>(n), -1);
    for (Eigen::Index i = 0; i < n; ++i) {
      const auto [y, dy] = nearest(b, a(i), -1);
      if (y < 0 || nearest(a, b(y), -1).first != i) continue;
      if (!(dy < 0.5 * std::min(nearest(a, a(i), i).second, nearest(b, b(y), y).second))) continue;
      if (oscillatory(a(i)) != oscillatory(b(y)) || oscillatory(-a(i)) != oscillatory(-b(y))) continue;
      match[static_cast<std::size_t>(i)] = y;
      back[static_cast<std::size_t>(y)] = i;
    }
    const double rho_a = a.cwiseAbs().maxCoeff(), rho_b = b.cwiseAbs().maxCoeff();
    // The pairs (Im > 0) at each end; none near the imaginary axis.
    std::vector<Eigen::Index> pa, pb, ua, ub;
    for (Eigen::Index i = 0; i < n; ++i) {
      if (oscillatory(a(i))) pa.push_back(i);
      if (oscillatory(b(i))) pb.push_back(i);
      if (match[static_cast<std::size_t>(i)] < 0) ua.push_back(i);
      if (back[static_cast<std::size_t>(i)] < 0) ub.push_back(i);
    }
    bool near_axis = false;
    for (const Eigen::Index i : pa) near_axis |= std::abs(a(i).real()) <= 1e-5 * std::abs(a(i));
    for (const Eigen::Index i : pb) near_axis |= std::abs(b(i).real()) <= 1e-5 * std::abs(b(i));
    auto by_freq = [](const Eigen::VectorXcd& v, std::vector<Eigen::Index> idx) {
      std::sort(idx.begin(), idx.end(), [&](Eigen::Index x, Eigen::Index y) { return v(x).imag() < v(y).imag(); });
      return idx;
    };
    auto count_growing = [&](const Eigen::VectorXcd& v, const std::vector<Eigen::Index>& idx, double rho) {
      int c = 0;
      for (const Eigen::Index i : idx) c += growth_margin(v(i), rho) >= 0;
      return c;
    };
    const int Pa = count_growing(a, pa, rho_a), Pb = count_growing(b, pb, rho_b);
    const std::vector<Eigen::Index> fa = by_freq(a, pa), fb = by_freq(b, pb);
    if (ua.empty() && ub.empty()) {
      // Everything matched: one pair changes sign (the frequency order
      // kept), or none does and the frequency order changes.
      if (fa.size() != fb.size()) return iv;
      int changed = -1;
      bool reordered = false;
      for (std::size_t r = 0; r < fa.size(); ++r) {
        const Eigen::Index y_of_x = match[static_cast<std::size_t>(fa[r])];
        reordered |= y_of_x != fb[r];
        const cd x = a(fa[r]), y = b(y_of_x);
        const bool sa = growth_margin(x, rho_a) < 0, sb = growth_margin(y, rho_b) < 0;
        if ((x.real() < 0) != sa || (y.real() < 0) != sb) return iv;
        if (sa == sb) continue;
        if (changed >= 0) return iv;
        changed = static_cast<int>(r);
      }
      if (reordered) {
        if (changed < 0 && !near_axis) iv.kind = Interval::kReorder;
        return iv;
      }
      if (changed < 0) return iv;
      iv.kind = Interval::kCrossing;
      iv.freq_rank = changed;
      iv.margin_rank = std::min(Pa, Pb);
      const cd x = a(fa[static_cast<std::size_t>(changed)]), y = b(fb[static_cast<std::size_t>(changed)]);
      const double t = x.real() / (x.real() - y.real());
      const auto sol = rank_one_.crossing(N, Ua, Ub, Ua + t * (Ub - Ua), x.imag() + t * (y.imag() - x.imag()));
      if (sol) {
        iv.solved = true;
        iv.U = sol->first;
        iv.omega = sol->second;
      }
      return iv;
    }
    // One pair X at one end, two real roots at the other.
    const bool pair_at_a = ua.size() == 2 && ub.size() == 2 && pa.size() == pb.size() + 1;
    const bool pair_at_b = ua.size() == 2 && ub.size() == 2 && pb.size() == pa.size() + 1;
    if ((!pair_at_a && !pair_at_b) || near_axis) return iv;
    const Eigen::VectorXcd &vx = pair_at_a ? a : b, &vr = pair_at_a ? b : a;
    const std::vector<Eigen::Index> &unx = pair_at_a ? ua : ub, &unr = pair_at_a ? ub : ua;
    const std::vector<Eigen::Index> &fx = pair_at_a ? fa : fb, &fr = pair_at_a ? fb : fa;
    const std::vector<Eigen::Index>& mx = pair_at_a ? match : back;
    const cd X0 = vx(unx[0]), X1 = vx(unx[1]);
    if (!(X0 == std::conj(X1)) || X0.imag() == 0) return iv;
    const cd X = X0.imag() > 0 ? X0 : X1;
    const cd r1 = vr(unr[0]), r2 = vr(unr[1]);
    if (r1.imag() != 0 || r2.imag() != 0) return iv;
    if ((r1.real() < 0) != (X.real() < 0) || (r2.real() < 0) != (X.real() < 0)) return iv;
    if (std::abs(r1.real()) <= 1e-5 * std::abs(X) || std::abs(r2.real()) <= 1e-5 * std::abs(X)) return iv;
    // The other pairs: matched in frequency order, no sign change.
    const double rho_x = pair_at_a ? rho_a : rho_b, rho_r = pair_at_a ? rho_b : rho_a;
    std::size_t rr = 0;
    for (std::size_t r = 0; r < fx.size(); ++r) {
      const cd x = vx(fx[r]);
      if (x == X) {
        iv.freq_rank = static_cast<int>(r);
        continue;
      }
      if (rr >= fr.size() || mx[static_cast<std::size_t>(fx[r])] != fr[rr]) return iv;
      const cd y = vr(fr[rr++]);
      const bool sx = growth_margin(x, rho_x) < 0, sy = growth_margin(y, rho_r) < 0;
      if (sx != sy || (x.real() < 0) != sx || (y.real() < 0) != sy) return iv;
    }
    if (iv.freq_rank < 0 || rr != fr.size()) return iv;
    if ((X.real() < 0) != (growth_margin(X, rho_x) < 0)) return iv;
    iv.kind = Interval::kTurnsReal;
    iv.margin_rank = growth_margin(X, rho_x) >= 0 ? std::min(Pa, Pb) : -1;
    // The double root: start where the discriminant, interpolated
    // linearly between -Im(X)^2 and ((r1 - r2)/2)^2, vanishes.
    const double Dx = X.imag() * X.imag(), Dr = 0.25 * (r1.real() - r2.real()) * (r1.real() - r2.real());
    const double t = Dx / (Dx + Dr);
    const double Ux = pair_at_a ? Ua : Ub, Ur = pair_at_a ? Ub : Ua;
    const double s0 = X.real() + t * (0.5 * (r1.real() + r2.real()) - X.real());
    const auto sol = rank_one_.double_root(N, Ua, Ub, Ux + t * (Ur - Ux), s0);
    if (sol && (sol->second < 0) == (X.real() < 0)) {
      iv.solved = true;
      iv.U = sol->first;
    }
    return iv;
  }

  // The outcome of a candidate as refine() would give it, from the
  // interval's classification; refine() itself when the classification does
  // not account for the candidate.
  std::optional<Neutral> resolve(const Interval& iv, double Ua, double Ub, std::size_t r, bool by_frequency,
                                 int direction, double A, double N) const {
    const int rank = static_cast<int>(r);
    if (iv.kind == Interval::kCrossing && iv.solved &&
        rank == (by_frequency ? iv.freq_rank : iv.margin_rank)) {
      if (!(iv.omega >= min_frequency_)) {
        if (!by_frequency) divergence_.push_back({A, iv.U});
        return std::nullopt;
      }
      Neutral n;
      n.speed = iv.U;
      n.eigenvalue = cd(0, iv.omega);
      n.direction = direction;
      n.N = N;
      return n;
    }
    if (iv.kind == Interval::kTurnsReal) {
      if (!by_frequency && rank == iv.margin_rank && iv.solved) {
        divergence_.push_back({A, iv.U});
        return std::nullopt;
      }
      if (by_frequency && rank >= iv.freq_rank) return std::nullopt;  // a rank shift: rejected as a jump
    }
    if (iv.kind == Interval::kReorder && by_frequency) return std::nullopt;  // likewise
    return refine(Ua, Ub, r, by_frequency, direction, A);
  }

  // The stability criterion (header) with the critical pair followed by
  // Newton on 1 - N G(s) = 0 at A (1 +- 1e-3); stable() when it fails.
  bool stable_rank_one(const Neutral& n, double A) const {
    const auto up = rank_one_.root_near(n.speed, equivalent(A * (1 + 1e-3), n.speed).N, n.eigenvalue);
    const auto down = rank_one_.root_near(n.speed, equivalent(A * (1 - 1e-3), n.speed).N, n.eigenvalue);
    if (!up || !down || std::abs(*up - n.eigenvalue) > 0.1 * std::abs(n.eigenvalue) ||
        std::abs(*down - n.eigenvalue) > 0.1 * std::abs(n.eigenvalue))
      return stable(n, A);
    if (!(up->real() - down->real() < 0)) return false;
    return others_decay(n, A);
  }

  // No root of the equivalent system at (A, U) other than the critical pair grows.
  bool others_decay(const Neutral& n, double A) const {
    const Eigen::VectorXcd ev = eigenvalues(A, n.speed);
    const Eigen::Index a = nearest_index(ev, n.eigenvalue), b = nearest_index(ev, std::conj(n.eigenvalue));
    const double rho = ev.cwiseAbs().maxCoeff();
    for (Eigen::Index i = 0; i < ev.size(); ++i)
      if (i != a && i != b && growing(ev(i), rho)) return false;
    return true;
  }

  static Eigen::Index nearest_index(const Eigen::VectorXcd& ev, cd to) {
    Eigen::Index best = 0;
    for (Eigen::Index i = 1; i < ev.size(); ++i)
      if (std::abs(ev(i) - to) < std::abs(ev(best) - to)) best = i;
    return best;
  }

  Eigen::VectorXcd eigenvalues(double A, double U) const {
    DofVector k = k_;
    k(j_) = equivalent(A, U).N;
    return Eigen::EigenSolver<Eigen::MatrixXd>(model_.state_matrix_at(U, k), false).eigenvalues();
  }

  // The oscillatory pairs (Im > 0, above the round-off level of a real
  // root), ranked by growth margin (descending) or by frequency
  // (ascending); the value is the growth margin, or Re lambda with
  // `by_real`. A rank beyond the last reads as -spectral radius (at()).
  std::vector<Ranked> ranked(const Eigen::VectorXcd& ev, bool by_frequency, bool by_real) const {
    // |lambda| and the growth margin once per eigenvalue (the values of
    // growth_margin(); the sort compares the stored ones).
    const Eigen::VectorXd magnitude = ev.cwiseAbs();
    const double rho = ev.size() ? magnitude.maxCoeff() : 0.0;
    std::vector<Ranked> v;
    v.reserve(static_cast<std::size_t>(ev.size()) / 2 + 1);
    for (Eigen::Index i = 0; i < ev.size(); ++i) {
      const cd l = ev(i);
      if (l.imag() > 1e-8 * std::max(1.0, magnitude(i))) {
        const double margin = l.real() - 1e-9 * magnitude(i) - 1e-12 * rho;
        v.push_back({by_real ? l.real() : margin, l, margin});
      }
    }
    std::sort(v.begin(), v.end(), [&](const Ranked& a, const Ranked& b) {
      if (by_frequency) return a.eigenvalue.imag() < b.eigenvalue.imag();
      return a.margin > b.margin;
    });
    v.push_back({-std::max(rho, 1.0), cd(0, 0), 0.0});  // sentinel: "no such pair"
    return v;
  }
  static const Ranked& at(const std::vector<Ranked>& v, std::size_t r) { return r < v.size() ? v[r] : v.back(); }

  // Refine a sign change of the r-th ranked pair in [Ua, Ub] to its zero
  // (TOMS 748): on Re lambda itself when it changes sign there (the neutral
  // point, where the flutter methods meet), else on the growth margin.
  // Accepted only when the function is continuous there (|value| at both
  // ends of the final bracket below 1e-6 |lambda|: a jump is a pair turning
  // real, i.e. static divergence of the equivalent system) and the pair's
  // frequency is clearly above zero.
  // With a steady condition a point that is no LCO (header) is dropped
  // first (not counted as divergence).
  std::optional<Neutral> refine(double Ua, double Ub, std::size_t r, bool by_frequency, int direction,
                                double A) const {
    auto value = [&](double U, bool by_real) { return at(ranked(eigenvalues(A, U), by_frequency, by_real), r); };
    const double ra = value(Ua, true).value, rb = value(Ub, true).value;
    const bool by_real = (ra < 0) != (rb < 0);
    const double fa = by_real ? ra : value(Ua, false).value, fb = by_real ? rb : value(Ub, false).value;
    boost::uintmax_t iterations = 100;
    const auto root = boost::math::tools::toms748_solve([&](double U) { return value(U, by_real).value; },
                                                        Ua, Ub, fa, fb,
                                                        boost::math::tools::eps_tolerance<double>(40),
                                                        iterations);
    const double U = 0.5 * (root.first + root.second);
    const Equivalent e = equivalent(A, U);
    if (!e.lco) return std::nullopt;
    const cd l = value(U, by_real).eigenvalue;
    const double scale = std::max(std::abs(l), 1e-300);
    const bool continuous = std::abs(value(root.first, by_real).value) <= 1e-6 * scale &&
                            std::abs(value(root.second, by_real).value) <= 1e-6 * scale;
    if (!continuous || !(l.imag() >= min_frequency_)) {
      if (!by_frequency) divergence_.push_back({A, U});
      return std::nullopt;
    }
    Neutral n;
    n.speed = U;
    n.eigenvalue = l;
    n.direction = direction;
    n.N = e.N;
    n.bias = e.bias;
    n.mean_force = e.mean_force;
    return n;
  }

  // Amplitude-perturbation stability (header), on the QR eigenvalues.
  bool stable(const Neutral& n, double A) const {
    const Eigen::VectorXcd up = eigenvalues(A * (1 + 1e-3), n.speed);
    const Eigen::VectorXcd down = eigenvalues(A * (1 - 1e-3), n.speed);
    const double dsigma = up(nearest_index(up, n.eigenvalue)).real() - down(nearest_index(down, n.eigenvalue)).real();
    if (!(dsigma < 0)) return false;
    return others_decay(n, A);
  }

  const AeroelasticModel& model_;
  const SpringLaw& law_;
  int j_;
  DofVector k_;
  const std::vector<double>& speeds_;
  double min_frequency_;
  std::vector<EquivalentDivergence>& divergence_;
  const MeanBalance* mean_;  // steady case: the mean equation; else nullptr
  RankOne rank_one_;
  std::vector<SpeedPoly> polys_;  // per grid speed; empty: the direct eigenvalues throughout
};

bool same_frequency(const Neutral& a, const Neutral& b, double tolerance) {
  const double x = a.eigenvalue.imag(), y = b.eigenvalue.imag();
  return std::abs(x - y) <= tolerance * std::max(x, y);
}

// A node of the branch graph: neutral point q of level i.
struct Node {
  std::size_t level = 0, index = 0;
};

}  // namespace

LcoPrediction describing_function_lco(const Case& c, const std::vector<double>& speeds,
                                      int count, const std::atomic<bool>* cancel) {
  LcoPrediction p;
  const SectionProperties& s = c.model.section;
  const int n = s.dof;
  std::vector<int> nonlinear;
  for (int j = 0; j < n; ++j)
    if (!c.model.springs[j].is_linear()) nonlinear.push_back(j);
  if (nonlinear.size() != 1) {
    p.reason = nonlinear.empty() ? "no nonlinear spring"
                                 : "more than one nonlinear spring (the describing-function "
                                   "prediction here is for a single nonlinearity)";
    return p;
  }
  AEROSECT_CHECK(count >= 2);
  if (speeds.size() < 2) {
    p.reason = "fewer than two speeds to search for neutral points";
    return p;
  }
  const int j = nonlinear.front();
  const SpringLaw& law = c.model.springs[j];
  p.spring = j;
  p.amplitude_limit = j == kPlunge ? 10 * s.semichord : 1.0;

  // A steady condition: the dual-input prediction about the mean of the
  // mean equation (header).
  const bool biased = c.model.steady.any();
  std::optional<MeanBalance> mean;
  if (biased) mean.emplace(c.model, j);
  p.biased = biased;

  // Amplitude scale: the largest breakpoint distance, or where the
  // polynomial terms match the linear one. With a steady condition the
  // half-width of the breakpoints' span (the oscillation may reach a stop
  // from any amplitude).
  double scale = 0;
  for (double b : law.breakpoints()) scale = std::max(scale, std::abs(b));
  const bool gap = scale > 0;
  if (biased && !law.breakpoints().empty()) {
    const double half = 0.5 * (law.breakpoints().back() - law.breakpoints().front());
    if (half > 0) scale = half;
  }
  const bool biased_gap = biased && !law.breakpoints().empty();
  if (!gap) {
    const double k = law.nominal_stiffness();
    // |N(A) - k| = 1e-3 k near A = a: found by doubling.
    double a = 1e-6;
    while (a < 1e3 && std::abs(law.describing_function(a) - k) < 1e-3 * std::abs(k)) a *= 2;
    scale = a * 30;  // cover well past it
  }
  // The amplitude as a function of the grid parameter t: with a gap,
  // A = d (1 + 10^t), t from -4 (N changes fastest just past the
  // breakpoint); otherwise A = scale 10^t, t from -3 (shifted down when
  // the scale exceeds the physical limit). t_max: the physical limit.
  const double A_max = p.amplitude_limit;
  double t_lo, t_hi, t_max;
  if (biased_gap) {
    if (scale * 1e-3 >= A_max) {
      p.reason = "the gap is wider than 1000 times the physical amplitude limit";
      return p;
    }
    t_lo = -3, t_hi = 2, t_max = std::log10(A_max / scale);
  } else if (gap) {
    if (scale * (1 + 1e-4) >= A_max) {
      p.reason = "the gap is wider than the physical amplitude limit";
      return p;
    }
    t_lo = -4, t_hi = 2, t_max = std::log10(A_max / scale - 1);
  } else {
    t_hi = std::min(0.0, std::log10(A_max / scale));
    t_lo = t_hi - 3, t_max = std::log10(A_max / scale);
  }
  auto amplitude = [&](double t) {
    if (t >= t_max) return A_max;
    return gap && !biased_gap ? scale * (1 + std::pow(10.0, t)) : scale * std::pow(10.0, t);
  };
  const double dt = (t_hi - t_lo) / (count - 1);

  const AeroelasticModel model = stability_model(c.model);
  DofVector k(n);
  for (int i = 0; i < n; ++i) k(i) = c.model.springs[i].nominal_stiffness();
  // "Clearly oscillatory": 1e-3 x the largest uncoupled frequency
  // (frequency_floor is 1e-6 x that).
  Scanner scanner(model, law, j, k, speeds, 1e3 * frequency_floor(s), p.equivalent_divergence,
                  mean ? &*mean : nullptr);
  // The reference stiffness of the grid speeds' polynomials: the scale of
  // the N met over the amplitude range.
  double N1 = std::abs(law.nominal_stiffness());
  for (const double t : {t_lo, t_hi, t_max}) {
    const double Nt = std::abs(law.describing_function(amplitude(t)));
    if (std::isfinite(Nt)) N1 = std::max(N1, Nt);
  }
  scanner.prepare(N1);
  auto scan = [&](double t, const Level* near) {
    stop_if_cancelled(cancel);
    return scanner.scan(std::min(t, t_max), amplitude(t), near);
  };

  // Base grid, then extended with the same spacing while anything is still
  // neutral at the largest amplitude, up to the physical limit.
  std::vector<Level> levels;
  for (int i = 0; i < count; ++i) {
    const double t = t_lo + i * dt;
    if (t >= t_max) break;
    levels.push_back(scan(t, levels.empty() ? nullptr : &levels.back()));
  }
  while (levels.back().valid && !levels.back().neutral.empty() && levels.back().t < t_max) {
    const double t = levels.back().t + dt;
    levels.push_back(scan(t > t_max - 1e-9 * dt ? t_max : t, &levels.back()));
  }

  // Refinement: halve an interval where the curves are not resolved (the
  // number of neutral points changes, a neutral speed moves by more than 1 %
  // of the speed range, a point's stability changes), down to dt / 1024.
  const double span = speeds.back() - speeds.front();
  auto resolved = [&](const Level& a, const Level& b) {
    if (a.valid != b.valid || a.neutral.size() != b.neutral.size()) return false;
    for (std::size_t q = 0; q < a.neutral.size(); ++q) {
      const Neutral &x = a.neutral[q], &y = b.neutral[q];
      if (std::abs(x.speed - y.speed) > 0.01 * span || x.stable != y.stable || x.direction != y.direction)
        return false;
    }
    return true;
  };
  const std::size_t cap = 12 * static_cast<std::size_t>(count) + levels.size();
  for (int pass = 0; pass < 10 && levels.size() < cap; ++pass) {
    std::vector<Level> next;
    bool inserted = false;
    for (std::size_t i = 0; i < levels.size(); ++i) {
      // (next.back() is level i - 1, already moved.)
      if (i > 0 && !resolved(next.back(), levels[i]) && levels[i].t - next.back().t > dt / 1500 &&
          levels.size() + next.size() - i < cap) {
        next.push_back(scan(0.5 * (next.back().t + levels[i].t), &next.back()));
        inserted = true;
      }
      next.push_back(std::move(levels[i]));
    }
    levels = std::move(next);
    if (!inserted) break;
  }

  // Link neutral points of neighbouring amplitudes into curves: the same
  // direction (a crossing cannot change direction except through a fold,
  // where it meets its partner), a frequency within 20 % and the nearest
  // speed, within 10 % of the speed range. Ends left open on the same side
  // of one amplitude, next to each other in speed (within 5 % of the range),
  // of opposite direction and the same frequency (within 5 %: the same
  // pair) are a fold: joined.
  const std::size_t L = levels.size();
  std::vector<std::vector<int>> up(L), down(L), fold(L), fold_side(L);
  for (std::size_t i = 0; i < L; ++i) {
    up[i].assign(levels[i].neutral.size(), -1);
    down[i].assign(levels[i].neutral.size(), -1);
    fold[i].assign(levels[i].neutral.size(), -1);
    fold_side[i].assign(levels[i].neutral.size(), 0);
  }
  for (std::size_t i = 0; i + 1 < L; ++i) {
    const auto &a = levels[i].neutral, &b = levels[i + 1].neutral;
    std::vector<std::tuple<double, std::size_t, std::size_t>> cand;
    for (std::size_t x = 0; x < a.size(); ++x)
      for (std::size_t y = 0; y < b.size(); ++y)
        if (a[x].direction == b[y].direction && std::abs(a[x].speed - b[y].speed) <= 0.1 * span &&
            same_frequency(a[x], b[y], 0.2))
          cand.emplace_back(std::abs(a[x].speed - b[y].speed), x, y);
    std::sort(cand.begin(), cand.end());
    for (const auto& [d, x, y] : cand)
      if (up[i][x] < 0 && down[i + 1][y] < 0) {
        up[i][x] = static_cast<int>(y);
        down[i + 1][y] = static_cast<int>(x);
      }
  }
  for (std::size_t i = 0; i < L; ++i) {
    const auto& a = levels[i].neutral;
    for (const int side : {1, -1}) {  // a fold closing upward, then downward
      // The grid's own ends are no folds: the smallest amplitude's lower
      // side and the largest one's upper side are always open.
      if ((side < 0 && i == 0) || (side > 0 && i + 1 == L)) continue;
      const std::vector<int>& open = side > 0 ? up[i] : down[i];
      for (std::size_t x = 0; x + 1 < a.size(); ++x) {
        const std::size_t y = x + 1;
        if (open[x] < 0 && open[y] < 0 && fold[i][x] < 0 && fold[i][y] < 0 &&
            a[x].direction != a[y].direction && a[y].speed - a[x].speed <= 0.05 * span &&
            same_frequency(a[x], a[y], 0.05)) {
          fold[i][x] = static_cast<int>(y);
          fold[i][y] = static_cast<int>(x);
          fold_side[i][x] = fold_side[i][y] = side;
        }
      }
    }
  }

  // Walk the curves. Each node has at most two links (up, down, fold; a
  // fold uses the side left open). An end's reason comes from where it is.
  auto end_reason = [&](const Node& nd, bool upward) {
    const Level& lv = levels[nd.level];
    const double U = lv.neutral[nd.index].speed;
    if (!upward && nd.level == 0) return gap && !biased_gap ? BranchEnd::kGapEdge : BranchEnd::kLinearLimit;
    if (upward && nd.level + 1 == L && lv.t >= t_max) return BranchEnd::kAmplitudeLimit;
    if (U <= speeds[1] || U >= speeds[speeds.size() - 2]) return BranchEnd::kSpeedRange;
    // Biased: the oscillation one grid amplitude beyond no longer reaches a stop.
    if (biased_gap) {
      const std::size_t next = upward ? nd.level + 1 : nd.level - 1;
      if (next < L && !scanner.equivalent(levels[next].A, U).lco) return BranchEnd::kGapEdge;
    }
    return BranchEnd::kBranchEnds;
  };
  auto links = [&](const Node& nd) {
    std::vector<Node> out;
    if (up[nd.level][nd.index] >= 0) out.push_back({nd.level + 1, static_cast<std::size_t>(up[nd.level][nd.index])});
    if (down[nd.level][nd.index] >= 0)
      out.push_back({nd.level - 1, static_cast<std::size_t>(down[nd.level][nd.index])});
    if (fold[nd.level][nd.index] >= 0) out.push_back({nd.level, static_cast<std::size_t>(fold[nd.level][nd.index])});
    return out;
  };
  std::vector<std::vector<bool>> seen(L);
  for (std::size_t i = 0; i < L; ++i) seen[i].assign(levels[i].neutral.size(), false);
  struct Chain {
    std::vector<Node> nodes;
    BranchEnd start = BranchEnd::kBranchEnds, end = BranchEnd::kBranchEnds;
    bool closed = false;
  };
  std::vector<Chain> chains;
  auto walk = [&](Node from) {
    Chain ch;
    Node cur = from;
    std::optional<Node> prev;
    for (;;) {
      seen[cur.level][cur.index] = true;
      ch.nodes.push_back(cur);
      std::optional<Node> step;
      for (const Node& m : links(cur))
        if (!(prev && m.level == prev->level && m.index == prev->index) && !seen[m.level][m.index]) step = m;
      if (!step) break;
      prev = cur;
      cur = *step;
    }
    return ch;
  };
  // The open side of an end node (one link): away from its link; a fold
  // made of two open upper ends leaves their lower sides open, and so on.
  auto reason_of_end = [&](const Node& nd) {
    if (up[nd.level][nd.index] >= 0) return end_reason(nd, false);
    if (down[nd.level][nd.index] >= 0) return end_reason(nd, true);
    return end_reason(nd, fold_side[nd.level][nd.index] < 0);
  };
  // Open chains from their ends; a lone point has both ends open.
  for (std::size_t i = 0; i < L; ++i)
    for (std::size_t q = 0; q < levels[i].neutral.size(); ++q) {
      const Node nd{i, q};
      if (seen[i][q] || links(nd).size() >= 2) continue;
      Chain ch = walk(nd);
      if (ch.nodes.size() == 1) {
        ch.start = end_reason(nd, false);
        ch.end = end_reason(nd, true);
      } else {
        ch.start = reason_of_end(ch.nodes.front());
        ch.end = reason_of_end(ch.nodes.back());
      }
      chains.push_back(std::move(ch));
    }
  // Whatever is left lies on closed loops.
  for (std::size_t i = 0; i < L; ++i)
    for (std::size_t q = 0; q < levels[i].neutral.size(); ++q)
      if (!seen[i][q]) {
        Chain ch = walk({i, q});
        ch.closed = true;
        chains.push_back(std::move(ch));
      }
  // Orient each chain from its smaller-amplitude end; number the branches in
  // ascending speed at that end.
  auto point_of = [&](const Node& nd) { return levels[nd.level].neutral[nd.index]; };
  for (Chain& ch : chains) {
    const Node &f = ch.nodes.front(), &b = ch.nodes.back();
    const double af = levels[f.level].A, ab = levels[b.level].A;
    if (ab < af || (ab == af && point_of(b).speed < point_of(f).speed)) {
      std::reverse(ch.nodes.begin(), ch.nodes.end());
      std::swap(ch.start, ch.end);
    }
  }
  std::stable_sort(chains.begin(), chains.end(), [&](const Chain& x, const Chain& y) {
    return point_of(x.nodes.front()).speed < point_of(y.nodes.front()).speed;
  });
  for (const Chain& ch : chains) {
    LcoBranch br;
    br.first = p.points.size();
    br.count = ch.nodes.size();
    br.start = ch.start;
    br.end = ch.end;
    br.closed = ch.closed;
    for (const Node& nd : ch.nodes) {
      const Level& lv = levels[nd.level];
      const Neutral& nu = lv.neutral[nd.index];
      LcoPredictionPoint pt;
      pt.amplitude = lv.A;
      pt.equivalent_stiffness = nu.N;
      pt.bias = nu.bias;
      pt.mean_force = nu.mean_force;
      pt.speed = nu.speed;
      pt.frequency = nu.eigenvalue.imag();
      pt.stable = nu.stable;
      pt.branch = static_cast<int>(p.branches.size());
      p.points.push_back(pt);
    }
    p.branches.push_back(br);
  }
  p.available = !p.points.empty();
  if (!p.available)
    p.reason = "no neutral oscillatory pair of the equivalent linear system for any amplitude in the swept "
               "speeds";
  return p;
}

}  // namespace aerosect
