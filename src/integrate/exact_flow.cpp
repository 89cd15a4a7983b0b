#include "aerosect/integrate/exact_flow.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <map>
#include <unordered_map>
#include <memory>

#include <fmt/format.h>

#include "aerosect/error.hpp"
#include "aerosect/units.hpp"

namespace aerosect {

namespace {
// Oscillator pairs the gust input needs (one per 1-cos or sinusoidal profile).
int gust_oscillators(const GustField& g) {
  const auto h = g.harmonic_input(0);
  return h ? static_cast<int>(h->omega.size()) : 0;
}
}  // namespace

bool exact_propagation_eligible(const AeroelasticModel& model, std::string* why) {
  const int size = model.state_size() + 1 + 2 * gust_oscillators(model.gusts());
  if (size > 32) {  // kMaxAugmented below
    if (why) *why = fmt::format("the state with its gust oscillators ({} components) is longer than the exact "
                                "propagator's capacity (32)", size);
    return false;
  }
  return exact_propagation_eligible(model.description(), why);
}

bool exact_propagation_eligible(const ModelDescription& d, std::string* why) {
  const auto say = [why](std::string s) {
    if (why) *why = std::move(s);
    return false;
  };
  if (!d.gusts.empty() && !d.gusts.harmonic_input(0))
    return say("the case has a recorded gust or turbulence input (not a constant or harmonic input)");
  for (int j = 0; j < d.section.dof; ++j) {
    const SpringLaw& law = d.springs[static_cast<std::size_t>(j)];
    if (law.is_linear()) continue;
    if (!law.is_piecewise_linear())
      return say(fmt::format("the {} spring law ({}) is not piecewise linear", dof_name(j), law.kind()));
    for (int i = 0; i < static_cast<int>(law.breakpoints().size()); ++i)
      if (law.force_jump(i) != 0)
        return say(fmt::format("the {} spring's force jumps at its breakpoint {}", dof_name(j), i + 1));
  }
  return true;
}

// The regions of the cache's model (one region map, of the model's
// augmented length).
struct ExactFlowCache::Impl {
  const AeroelasticModel* model = nullptr;
  std::shared_ptr<void> regions;
  std::vector<double> weights;  // exact_weights of the model, once computed
};
ExactFlowCache::ExactFlowCache() : impl_(std::make_unique<Impl>()) {}
ExactFlowCache::~ExactFlowCache() = default;

// Named (not anonymous): the unity build compiles this file with
// integrator.cpp, whose own Witness is in its anonymous namespace.
namespace exact_detail {

// At most kMaxAugmented rows (the largest state, 3 DOFs with 8 Wagner and 8
// Kussner lag states, is 23 long): fixed-capacity storage, no heap traffic.
constexpr int kMaxAugmented = 32;
// The state's own (not augmented) vectors and matrices: the weights and the
// monodromy.
using StateVec = Eigen::Matrix<double, Eigen::Dynamic, 1, 0, kMaxAugmented, 1>;
using StateMat = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, 0, kMaxAugmented, kMaxAugmented>;

int augmented_size(const AeroelasticModel& model) {
  return model.state_size() + 1 + 2 * gust_oscillators(model.gusts());
}

// Diagonal scaling of the state for the exact flow, z = w x: the state
// weights of system.hpp (radian-like units), then balanced by Osborne's
// iteration with powers of two (Parlett and Reinsch, "Balancing a matrix for
// calculation of eigenvalues and eigenvectors", Numer. Math. 13, 1969; the
// scaling of LAPACK's xGEBAL) on the elementwise largest |Jacobian| over the
// regions of every spring (the others in the region of x = 0). The row sums
// of the scaled matrices, and with them ||M||, become about as small as a
// diagonal similarity makes them, so the step h = 1 / (2 ||M||) is longer:
// 1.5x to 2x fewer steps than the weights alone on the demo sections.
// Powers of two: the balancing itself adds no rounding.
StateVec exact_weights(const AeroelasticModel& model) {
  const int n = model.state_size();
  const Eigen::VectorXd w = state_weights(model);
  const std::vector<double> zero(static_cast<std::size_t>(n), 0.0);
  const std::vector<int> base = model.regions_of(zero.data());
  StateMat J(n, n), big = StateMat::Zero(n, n);
  auto take = [&](const std::vector<int>& regions) {
    model.jacobian(zero.data(), 0.0, regions, 0, J);
    big = big.cwiseMax(J.cwiseAbs());
  };
  take(base);
  for (int j : model.nonlinear_springs()) {
    const int count = static_cast<int>(model.description().springs[static_cast<std::size_t>(j)].breakpoints().size()) + 1;
    for (int r = 0; r < count; ++r) {
      std::vector<int> regions = base;
      regions[static_cast<std::size_t>(j)] = r;
      take(regions);
    }
  }
  StateMat M(n, n);
  for (int i = 0; i < n; ++i)
    for (int k = 0; k < n; ++k) M(i, k) = w(i) * big(i, k) / w(k);
  StateVec d = StateVec::Ones(n);
  for (int sweep = 0; sweep < 64; ++sweep) {
    bool changed = false;
    for (int i = 0; i < n; ++i) {
      const double row = M.row(i).sum() - M(i, i), col = M.col(i).sum() - M(i, i);
      if (!(row > 0) || !(col > 0)) continue;
      // s = 2^k nearest sqrt(col / row): row i scales by s, column i by 1/s.
      const double s = std::exp2(std::round(0.5 * std::log2(col / row)));
      if (!(s * row + col / s < 0.95 * (row + col))) continue;
      M.row(i) *= s;
      M.col(i) /= s;
      d(i) *= s;
      changed = true;
    }
    if (!changed) break;
  }
  StateVec out(n);
  for (int i = 0; i < n; ++i) out(i) = w(i) * d(i);
  return out;
}

struct CacheAccess {
  // The cache's contents, bound to `model` at its first use.
  static ExactFlowCache::Impl& of(ExactFlowCache& cache, const AeroelasticModel& model) {
    ExactFlowCache::Impl& c = *cache.impl_;
    if (!c.model) c.model = &model;
    AEROSECT_CHECK(c.model == &model);
    return c;
  }
  static std::shared_ptr<void>& regions_of(ExactFlowCache& cache, const AeroelasticModel& model) {
    return of(cache, model).regions;
  }
  // The cache's state scaling (exact_weights), computed once.
  static StateVec weights_of(ExactFlowCache& cache, const AeroelasticModel& model) {
    ExactFlowCache::Impl& c = of(cache, model);
    if (c.weights.empty()) {
      const StateVec w = exact_weights(model);
      c.weights.assign(w.data(), w.data() + w.size());
    }
    return Eigen::Map<const StateVec>(c.weights.data(), static_cast<Eigen::Index>(c.weights.size()));
  }
};


// Everything below is compiled for the common augmented lengths N as
// fixed-size Eigen types (unrolled, vectorised products: a step costs a few
// dozen instructions instead of a few hundred) and once for any length up
// to kMaxAugmented (N = Eigen::Dynamic); integrate_exact picks the one that
// fits. The arithmetic is the same in every instance.
template <int N>
struct Kernels {
static constexpr int kCap = N == Eigen::Dynamic ? kMaxAugmented : N;
using Vec = Eigen::Matrix<double, N, 1, 0, kCap, 1>;
using Mat = Eigen::Matrix<double, N, N, 0, kCap, kCap>;

// Taylor terms of a step's polynomial (StepPolynomial, Region::T).
static constexpr int kTerms = 16;

// One spring configuration: the scaled augmented matrix and its step.
// Aligned to 16 bytes: for an odd N the matrices alone need only 8, and
// where Eigen's product for the Taylor terms T splits a column into
// packets and single coefficients (summed in different orders) depends on
// the address, so without it the terms' last bits would depend on where a
// Region is built.
struct alignas(16) Region {
  // (User-provided: a Region made in the map, whose contents region()
  // writes at once, is not zero-filled first.)
  Region() {}
  Mat M;      // (n+1) square: [[W A W^-1, W c], [0, 0]]
  double h;   // step, s: ||h M||_inf <= 1/2 (infinite when M = 0)
  Mat E;      // exp(h M) (when h is finite)
  // T[k] = (M^k / k!)^T, k < kTerms: column i of T[k] dotted with a
  // step's start z is component i of the Taylor coefficient q_k, so one
  // witness's polynomial costs kTerms dot products instead of the whole
  // StepPolynomial's kTerms matrix-vector products.
  std::array<Mat, kTerms> T;
  double sample_dt = 0;  // exp(sample_dt M), once asked for (samples closer than h)
  Mat Es;
};

// out = A v, column by column: contiguous, vectorised axpys. (At these
// sizes, 5 to 32, a lazyProduct's row-by-row dot products run about 2x
// slower, and Eigen's blocked product costs more in set-up than the
// arithmetic.) The sums are kept in a local vector, which the compiler
// holds in registers for a fixed N (summing into out, which might alias
// A or v, stored every partial sum: 194 against 171 instructions for
// N = 9; the same operations in the same order otherwise).
static void matvec(Vec& out, const Mat& A, const Vec& v) {
  Vec sum = A.col(0) * v(0);
  for (Eigen::Index j = 1; j < A.cols(); ++j) sum += A.col(j) * v(j);
  out = sum;
}

// Without gust oscillators (affine_last) the augmented state's last
// component is the constant 1 and the last row of M is zero, so the last
// row of exp(tau M) is e^T (its Taylor terms M^k / k!, k >= 1, have a zero
// last row): (M v)(last) = 0 and (exp(tau M) v)(last) = v(last). top()
// forms the other N - 1 components of A v, summed as in matvec (for
// N = 9, four full packets and no scalar row: 171 -> about 130
// instructions); with kConstantFree (v(last) = 0: a Taylor coefficient
// q_k, k >= 1) the last column, whose products are zeros, is left out too.
// It returns them (held in registers) for the caller to store. (Only for
// a fixed N; results as matvec's, up to the sign of an exact zero.)
template <bool kConstantFree>
static auto top(const Mat& A, const Vec& v) {
  static_assert(N != Eigen::Dynamic);
  constexpr int kTop = N - 1;
  Eigen::Matrix<double, kTop, 1> sum = A.col(0).template head<kTop>() * v(0);
  for (int j = 1; j < (kConstantFree ? kTop : N); ++j) sum += A.col(j).template head<kTop>() * v(j);
  return sum;
}
// exp(tau M) v for a propagator E = exp(tau M) (out must not be v).
static void propagate(Vec& out, const Mat& E, const Vec& v, bool affine_last) {
  if constexpr (N != Eigen::Dynamic) {
    if (affine_last) {
      out.template head<N - 1>() = top<false>(E, v);
      out(N - 1) = v(N - 1);
      return;
    }
  }
  matvec(out, E, v);
}

// The Taylor polynomial of the flow from one state z over one step:
// z(tau) = sum_k q_k tau^k, q_k = M^k z / k!, k = 0..kTerms-1. With
// tau <= h and ||h M|| <= 1/2 the terms left out are below
// 0.5^16 / 16! e^(1/2) of ||z|| (1.2e-18, under a hundredth of the
// rounding unit): exact to round-off. Built once per step that needs
// states inside it (events, peaks); every evaluation is then a Horner sum
// instead of a new series of matrix products. (kTerms: above Region.)
struct StepPolynomial {
  std::array<Vec, kTerms> q;
  void build(const Mat& M, const Vec& z, bool affine_last) {
    q[0] = z;
    for (int k = 1; k < kTerms; ++k) {
      if constexpr (N != Eigen::Dynamic) {
        if (affine_last) {
          // (q_0's last component is the constant 1, later ones' are 0;
          // each term divided by k before it is stored.)
          if (k == 1) q[k].template head<N - 1>() = top<false>(M, q[k - 1]) / k;
          else q[k].template head<N - 1>() = top<true>(M, q[k - 1]) / k;
          q[k](N - 1) = 0;
          continue;
        }
      }
      matvec(q[k], M, q[k - 1]);
      q[k] /= k;
    }
  }
  Vec state(double tau) const {
    Vec v = q[kTerms - 1];
    for (int k = kTerms - 2; k >= 0; --k) v = v * tau + q[k];
    return v;
  }
};

// A witness in scaled coordinates: g(z) = coef z(index) + b (a spring DOF's
// distance past a breakpoint, or a velocity).
struct Witness {
  bool spring = true;  // else a velocity zero (peak)
  int dof = 0;
  int next = 0;        // region entered (spring)
  int index = 0;       // g(z) = coef z(index) + b: one component of the augmented z
  double coef = 0;
  double b = 0;
  double value(const Vec& z) const { return coef * z(index) + b; }
  Vec aM;              // coef M(index, :): the row of g' = aM . z
  // The present step's polynomial of g - b: c[k] = coef q_k(index), valid
  // when step == the run's step count (ExactRun::coefficients).
  mutable std::array<double, kTerms> c{};
  mutable long step = -1;
  // g' at the end of step d_step, the next step's start when that goes on
  // from it (ExactRun::start_slope): one dot product per step, not two.
  mutable double d_end = 0;
  mutable long d_step = -1;
  mutable Region* target = nullptr;  // the region entered at its zero (spring), once looked up
};

using RegionMap = std::map<std::vector<int>, Region>;

class ExactRun {
 public:
  ExactRun(const AeroelasticModel& model, RunState& run, double t_end, const OutputSchedule& schedule,
           const RunObservers& obs)
      : model_(model), L_(model.layout()), n_(model.state_size()),
        N_(model.state_size() + 1 + 2 * gust_oscillators(model.gusts())), run_(run), t_end_(t_end),
        schedule_(schedule), obs_(obs),
        W_(run.exact_cache ? CacheAccess::weights_of(*run.exact_cache, model) : exact_weights(model)), breaks_(model.gusts().breakpoints()),
        cache_(shared_regions(model, run)) {}

  IntegrationResult operator()() {
    const double t0 = run_.time;
    const bool fixed_rate = schedule_.interval > 0 && !schedule_.every_step;
    const double dt_s = schedule_.interval;
    // A step's start z and end zb; the end becomes the next step's start by
    // exchanging the two pointers (not the vectors' contents).
    std::array<Vec, 2> zs{Vec(N_), Vec(N_)};
    Vec* zp = &zs[0];
    Vec* zbp = &zs[1];
    Vec& z0 = *zp;
    for (int i = 0; i < n_; ++i) z0(i) = W_(i) * run_.x[static_cast<std::size_t>(i)];
    z0(n_) = 1.0;
    // The gust oscillators: sin and cos of omega_j (t - start_j).
    if (N_ > n_ + 1) {
      const auto h = model_.gusts().harmonic_input(0);
      for (std::size_t j = 0; j < h->omega.size(); ++j) {
        const double ph = h->omega[j] * (run_.time - h->start[j]);
        z0(n_ + 1 + 2 * static_cast<int>(j)) = std::sin(ph);
        z0(n_ + 2 + 2 * static_cast<int>(j)) = std::cos(ph);
      }
    }
    run_.input_segment = model_.gusts().segment_of(run_.time);
    if (run_.track_monodromy) {
      const Eigen::Map<const StateMat> p(run_.monodromy.data(), n_, n_);
      phis_[0] = W_.asDiagonal() * p * W_.cwiseInverse().asDiagonal();
    }
    bool stop = false;
    if (schedule_.any() && schedule_.include_start) stop |= sample(z0, run_.time);
    std::int64_t next_sample = 1;
    Region* R = &region();
    const std::vector<Witness>* ws = &witnesses_of(*R);
    int quick_switches = 0;
    while (run_.time < t_end_ && !stop) {
      Vec& z = *zp;
      Vec& zb = *zbp;
      if (obs_.cancel && obs_.cancel->load()) return finish(z, StopReason::kCancelled);
      // The step: the region's, ending on the next sample time when that
      // comes first (then, between samples, the precomputed propagator of
      // one sample interval).
      // An input switch time (a gust starting or ending) ends the step too.
      const double t_break = run_.input_segment < static_cast<int>(breaks_.size())
                                 ? breaks_[static_cast<std::size_t>(run_.input_segment)]
                                 : std::numeric_limits<double>::infinity();
      const bool at_break = t_break - run_.time <= std::min(R->h, t_end_ - run_.time);
      double h = std::min({R->h, t_end_ - run_.time, t_break - run_.time});
      const Mat* E = h == R->h ? &R->E : nullptr;
      const double ts = fixed_rate ? t0 + static_cast<double>(next_sample) * dt_s : 0.0;
      const bool lands = fixed_rate && ts <= t_end_ * (1 + 1e-15) && ts - run_.time <= h * (1 + 1e-12) &&
                         !(at_break && ts > t_break);
      if (lands) {
        h = std::max(0.0, ts - run_.time);
        E = std::abs(h - dt_s) <= 1e-9 * dt_s ? &sample_propagator(*R, dt_s) : nullptr;
      }
      poly_valid_ = false;  // the step's polynomial (from z) is built when first needed
      ++step_;              // and so are the witnesses' polynomials
      // (A step shorter than the region's: its end from the step's polynomial.)
      if (E) propagate(zb, *E, z, affine_last_); else zb = state_at(*R, z, h);
      // The first switch inside (0, h].
      double te = std::numeric_limits<double>::infinity();
      const Witness* event = nullptr;
      for (const Witness& w : *ws)
        if (w.spring)
          if (const double tz = first_zero(*R, w, z, zb, h); tz < te) {
            te = tz;
            event = &w;
          }
      // Peaks inside (0, the switch or the step's end], in time order.
      // (A switch's state, at te, is the step's end from here on.)
      if (event) zb = state_at(*R, z, te);
      if (obs_.peak && peak_possible(*ws, z, zb)) stop |= report_peaks(*R, *ws, z, zb, event ? te : h);
      // Advance: zb is the new state (the step's end, or the switch's).
      if (event) {
        if (run_.track_monodromy) monodromy_step(flow_matrix(*R, te));
        run_.time += te;
        run_.regions[static_cast<std::size_t>(event->dof)] = event->next;
        ++run_.switches;
        quick_switches = te < 1e-12 * std::max(1.0, std::abs(run_.time)) ? quick_switches + 1 : 0;
        if (quick_switches > 50)
          throw NumericalError(run_.time, fmt::format("{} switches of the {} spring without the time advancing "
                                                      "(a trajectory held on its breakpoint)",
                                                      quick_switches, dof_name(event->dof)));
        // (The region a witness's crossing leads to, found once.)
        if (!event->target) event->target = &region();
        R = event->target;
        ws = &witnesses_of(*R);
        continued_ = false;
      } else {
        if (run_.track_monodromy) {
          if (E) monodromy_step(*E);
          else monodromy_step(flow_matrix(*R, h));
        }
        continued_ = true;
        const bool breaks_here = at_break && !(lands && ts < t_break);
        run_.time = lands ? ts : breaks_here ? t_break : h == R->h ? run_.time + h : t_end_;
        if (lands) {
          stop |= sample(zb, ts);
          ++next_sample;
        }
        if (breaks_here && run_.time == t_break) {
          // The next input segment: same state, its own input terms.
          ++run_.input_segment;
          R = &region();
          ws = &witnesses_of(*R);
          continued_ = false;
        }
      }
      ++run_.steps;
      std::swap(zp, zbp);
      // (A finite sum has finite terms: the componentwise test, 36
      // instructions for N = 9 against about 10, only when the sum is not.)
      if (!std::isfinite(zb.sum()) && !zb.allFinite())
        throw NumericalError(run_.time, "the exact solution left the range of double precision (unbounded growth)");
      if (schedule_.every_step) stop |= sample(zb, run_.time);
      if (obs_.step) (void)obs_.step(run_.time, unscaled(zb));
    }
    return finish(*zp, stop ? StopReason::kObserver : StopReason::kEndTime);
  }

 private:
  // Region of the current spring regions, built from the model's Jacobian
  // and right-hand side at the present state (constant in the region).
  // exp(dt M) of the region (dt: the sample interval, at most its step).
  const Mat& sample_propagator(Region& r, double dt) {
    if (r.sample_dt != dt) {
      r.Es = flow_matrix(r, dt);
      r.sample_dt = dt;
    }
    return r.Es;
  }

  Region& region() {
    key_ = run_.regions;
    key_.push_back(gusts_ ? run_.input_segment : 0);
    auto it = cache_.find(key_);
    if (it != cache_.end()) return it->second;
    // The region's affine law, evaluated at x = 0 (the springs' region
    // formulas hold for any x): J = Df and c = f(0) exactly, with no
    // cancellation. (c = f(x) - J x at the present state lost
    // eps |J| |x| to round-off: on a diverging run at 1e23 that made the
    // affine column, the norm and so the step count enormous.)
    // rhs() of input segment 0 has no gust velocity (before every gust):
    // c is the springs' intercepts plus the steady condition's b0; the gust enters as B_gust w_g(t)
    // with w_g in harmonic form over the oscillator states.
    const std::vector<double> x(static_cast<std::size_t>(n_), 0.0);
    std::vector<double> f(static_cast<std::size_t>(n_));
    StateMat J(n_, n_);
    model_.jacobian(x.data(), run_.time, run_.regions, 0, J);
    model_.rhs(x.data(), f.data(), run_.time, run_.regions, 0);
    const Eigen::VectorXd& B = model_.gust_input();
    const auto hi = gusts_ ? model_.gusts().harmonic_input(run_.input_segment) : std::nullopt;
    // Built in its place in the map (a Region is kTerms + 3 matrices: moving
    // one in copied them all); nothing below throws.
    Region& r = cache_.try_emplace(key_).first->second;
    r.M = Mat::Zero(N_, N_);
    for (int i = 0; i < n_; ++i) {
      double c = f[static_cast<std::size_t>(i)];
      for (int k = 0; k < n_; ++k) r.M(i, k) = W_(i) * J(i, k) / W_(k);
      if (hi) {
        c += B(i) * hi->constant;
        for (std::size_t j = 0; j < hi->omega.size(); ++j) {
          r.M(i, n_ + 1 + 2 * static_cast<int>(j)) = W_(i) * B(i) * hi->sin_coef[j];
          r.M(i, n_ + 2 + 2 * static_cast<int>(j)) = W_(i) * B(i) * hi->cos_coef[j];
        }
      }
      r.M(i, n_) = W_(i) * c;
    }
    if (hi)
      for (std::size_t j = 0; j < hi->omega.size(); ++j) {
        const int s = n_ + 1 + 2 * static_cast<int>(j);
        r.M(s, s + 1) = hi->omega[j];   // (sin)' = omega cos
        r.M(s + 1, s) = -hi->omega[j];  // (cos)' = -omega sin
      }
    const double norm = r.M.cwiseAbs().rowwise().sum().maxCoeff();
    r.h = norm > 0 ? 0.5 / norm : std::numeric_limits<double>::infinity();
    r.T[0] = Mat::Identity(N_, N_);
    for (int k = 1; k < kTerms; ++k) {
      // (lazyProduct: at these sizes, 5 to 32, Eigen's blocked matrix
      // product costs more in packing and set-up than the arithmetic.)
      r.T[static_cast<std::size_t>(k)].noalias() = r.T[static_cast<std::size_t>(k - 1)].lazyProduct(r.M.transpose());
      r.T[static_cast<std::size_t>(k)] /= k;
    }
    if (std::isfinite(r.h)) r.E = flow_matrix(r, r.h);
    return r;
  }

  // exp(tau M) for 0 <= tau <= h: the region's Taylor terms summed by
  // Horner, sum_k tau^k M^k / k! (the truncation of StepPolynomial, under
  // round-off), kTerms matrix additions instead of as many products.
  static Mat flow_matrix(const Region& R, double tau) {
    Mat S = R.T[kTerms - 1];
    for (int k = kTerms - 2; k >= 0; --k) S = tau * S + R.T[static_cast<std::size_t>(k)];
    return S.transpose();
  }

  static void rows(const Region& R, Witness& w) {
    w.aM = w.coef * R.M.row(w.index).transpose();
  }

  // Spring boundaries of the present regions (g >= 0 past the breakpoint)
  // and, when peaks are watched, the velocity of every moving DOF.
  // The witnesses of region R, built at its first visit in this run (a
  // region's witnesses depend only on its spring regions).
  const std::vector<Witness>& witnesses_of(const Region& R) {
    auto it = witness_cache_.find(&R);
    if (it == witness_cache_.end()) it = witness_cache_.emplace(&R, witnesses(R)).first;
    return it->second;
  }

  std::vector<Witness> witnesses(const Region& R) const {
    std::vector<Witness> out;
    for (int j : model_.nonlinear_springs()) {
      const auto bp = model_.description().springs[static_cast<std::size_t>(j)].breakpoints();
      const int r = run_.regions[static_cast<std::size_t>(j)];
      const int q = L_.displacement + j;
      for (int side : {-1, 1}) {
        const int b = side < 0 ? r - 1 : r;
        if (b < 0 || b >= static_cast<int>(bp.size())) continue;
        Witness w;
        w.dof = j;
        w.next = side < 0 ? r - 1 : r + 1;
        w.index = q;
        w.coef = side / W_(q);  // side (x_q - breakpoint)
        w.b = -side * bp[static_cast<std::size_t>(b)];
        rows(R, w);
        out.push_back(std::move(w));
      }
    }
    if (obs_.peak)
      for (int j = 0; j < L_.n_dof; ++j) {
        if (model_.description().held[static_cast<std::size_t>(j)] || !(obs_.peak_dofs >> j & 1u)) continue;
        Witness w;
        w.spring = false;
        w.dof = j;
        w.index = L_.velocity + j;
        w.coef = 1.0 / W_(w.index);
        rows(R, w);
        out.push_back(std::move(w));
      }
    return out;
  }

  // The step's Taylor polynomial from z (built at the first need in a step).
  const StepPolynomial& poly(const Region& R, const Vec& z) const {
    if (!poly_valid_) {
      poly_.build(R.M, z, affine_last_);
      poly_valid_ = true;
    }
    return poly_;
  }
  Vec state_at(const Region& R, const Vec& z, double tau) const { return poly(R, z).state(tau); }

  // The witness's polynomial over the present step from its start z: its
  // own row of each Taylor coefficient (Region::T), or the step's
  // StepPolynomial when that is built already.
  const std::array<double, kTerms>& coefficients(const Region& R, const Witness& w, const Vec& z) const {
    if (w.step != step_) {
      for (std::size_t k = 0; k < kTerms; ++k)
        w.c[k] = w.coef * (poly_valid_ ? poly_.q[k](w.index) : R.T[k].col(w.index).dot(z));
      w.step = step_;
    }
    return w.c;
  }

  // The witness g = coef z(tau)(index) + b and its first two derivatives: the
  // polynomial sum_k coef q_k(index) tau^k and its derivatives, by Horner.
  struct Value {
    double g, dg, d2g;
  };
  Value at(const Region& R, const Witness& w, const Vec& z, double tau) const {
    const std::array<double, kTerms>& cw = coefficients(R, w, z);
    double g = 0, dg = 0, d2g = 0;
    for (int k = kTerms - 1; k >= 0; --k) {
      const double c = cw[static_cast<std::size_t>(k)];
      d2g = d2g * tau + dg * 2;  // running derivatives of the Horner sum
      dg = dg * tau + g;
      g = g * tau + c;
    }
    return {g + w.b, dg, d2g};
  }

  // A zero in [lo, hi] of a function whose values at the ends differ in
  // sign: Newton's method with the exact derivative from the secant point,
  // kept inside the bracket (bisection when a step leaves it).
  template <class FD>
  double root(FD&& fd, double lo, double hi, double flo, double fhi) const {
    const double tol = 1e-13 * std::max(1.0, std::abs(run_.time));
    double t = flo != fhi ? lo - flo * (hi - lo) / (fhi - flo) : 0.5 * (lo + hi);
    if (!(t > lo && t < hi)) t = 0.5 * (lo + hi);
    for (int it = 0; it < 100 && hi - lo > tol; ++it) {
      const auto [ft, d] = fd(t);
      if (ft == 0) return t;
      if ((ft < 0) == (flo < 0)) lo = t; else hi = t;
      double next = d != 0 ? t - ft / d : 0.5 * (lo + hi);
      if (!(next > lo && next < hi)) next = 0.5 * (lo + hi);
      if (std::abs(next - t) < 0.25 * tol) return next;
      t = next;
    }
    return 0.5 * (lo + hi);
  }
  double zero_of_g(const Region& R, const Witness& w, const Vec& z, double lo, double hi, double glo,
                   double ghi) const {
    return root([&](double t) { const Value v = at(R, w, z, t); return std::pair{v.g, v.dg}; }, lo, hi, glo, ghi);
  }
  double zero_of_dg(const Region& R, const Witness& w, const Vec& z, double lo, double hi, double dlo,
                    double dhi) const {
    return root([&](double t) { const Value v = at(R, w, z, t); return std::pair{v.dg, v.d2g}; }, lo, hi, dlo, dhi);
  }

  // True when the witness g has no zero in [0, span] (ga, gb its values and
  // da, db its slopes at the ends), decided without its polynomial: the
  // cubic Hermite interpolant H of those four numbers lies inside the hull
  // of its Bernstein control points (ga, ga + span da / 3, gb - span db / 3,
  // gb), and |g - H| <= span^4 max|g''''| / 384 (the Hermite remainder,
  // Burden & Faires, Numerical Analysis, ch. 3), where g'''' =
  // coef (M^4 z(tau))_index, so |g''''| <= |coef| ||M||^4 e^(span ||M||) ||z||
  // in the infinity norm (||M|| = 1 / (2 h)). A round-off allowance of
  // 1e-14 of g's terms is added. About half the steps where g' changes
  // sign (a velocity at its largest, a spring DOF turning well inside its
  // region) are decided here.
  bool zero_free(const Region& R, const Witness& w, const Vec& z, double span, double ga, double gb, double da,
                 double db) const {
    const double hm = std::isfinite(R.h) ? span * 0.5 / R.h : 0.0;  // span ||M||
    const double zn = std::abs(w.coef) * z.template lpNorm<Eigen::Infinity>();
    const double bound = zn * (hm * hm * hm * hm * std::exp(hm) / 384 + 1e-14) + 1e-14 * std::abs(w.b);
    const double p1 = ga + span * da / 3, p2 = gb - span * db / 3;
    return std::min({ga, p1, p2, gb}) > bound || std::max({ga, p1, p2, gb}) < -bound;
  }

  // The witness's slope g' = aM . z at the step's start z, or at its end
  // zb (kept for the next step, which starts there when continued_).
  double start_slope(const Witness& w, const Vec& z) const {
    return continued_ && w.d_step == step_ - 1 ? w.d_end : w.aM.dot(z);
  }
  double end_slope(const Witness& w, const Vec& zb) const {
    w.d_step = step_;
    return w.d_end = w.aM.dot(zb);
  }

  // The first time in (0, h] where the spring witness reaches zero from
  // below (infinite when it does not): a sign change over the step, or an
  // interior maximum of g at or above zero. (||h M|| <= 1/2: g' changes
  // sign at most once inside a step.)
  double first_zero(const Region& R, const Witness& w, const Vec& z, const Vec& zb, double h) const {
    constexpr double kNone = std::numeric_limits<double>::infinity();
    const double ga = w.value(z), gb = w.value(zb);
    const double da = start_slope(w, z), db = end_slope(w, zb);
    if (ga < 0 && gb < 0 && !(da > 0 && db < 0)) return kNone;  // the usual step
    if (!(ga < 0)) {
      // On the breakpoint to round-off: the region was just entered through
      // it (g falling). It comes back to it inside the step only past a
      // minimum of g (a trajectory that turns back at once: grazing).
      if (!(da < 0 && db > 0 && gb >= 0)) return kNone;
      const double tm = zero_of_dg(R, w, z, 0.0, h, da, db);
      const double gm = at(R, w, z, tm).g;
      return gm < 0 ? zero_of_g(R, w, z, tm, h, gm, gb) : kNone;
    }
    if (gb >= 0) return zero_of_g(R, w, z, 0.0, h, ga, gb);
    // The maximum inside (da > 0 > db): past zero, the first crossing is before it.
    if (zero_free(R, w, z, h, ga, gb, da, db)) return kNone;
    const double tm = zero_of_dg(R, w, z, 0.0, h, da, db);
    const double gm = at(R, w, z, tm).g;
    return gm >= 0 ? zero_of_g(R, w, z, 0.0, tm, ga, gm) : kNone;
  }

  // False when report_peaks would find nothing: no watched velocity
  // changes sign between the ends or has an extremum inside (its tests
  // below, done inline for the usual step without a peak).
  bool peak_possible(const std::vector<Witness>& ws, const Vec& z, const Vec& zb) const {
    for (const Witness& w : ws) {
      if (w.spring) continue;
      const double va = w.value(z), vb = w.value(zb);
      if (va * vb < 0 || (vb == 0 && va != 0)) return true;
      if (start_slope(w, z) * end_slope(w, zb) < 0) return true;
    }
    return false;
  }

  // Velocity zeros in (0, span], reported in time order.
  bool report_peaks(const Region& R, const std::vector<Witness>& ws, const Vec& z, const Vec& zb, double span) {
    found_.clear();
    for (const Witness& w : ws) {
      if (w.spring) continue;
      const double va = w.value(z), vb = w.value(zb);  // b = 0 for a velocity
      if (va * vb < 0 || (vb == 0 && va != 0)) {  // one zero (g' turns at most once in a step)
        found_.emplace_back(vb == 0 ? span : zero_of_g(R, w, z, 0.0, span, va, vb), w.dof);
        continue;
      }
      const double da = start_slope(w, z), db = end_slope(w, zb);
      if (!(da * db < 0)) continue;  // monotone, same sign: none
      if (zero_free(R, w, z, span, va, vb, da, db)) continue;
      // An extremum of the velocity inside: two zeros when it crosses.
      const double tm = zero_of_dg(R, w, z, 0.0, span, da, db);
      const double vm = at(R, w, z, tm).g;
      if (va * vm < 0 || (vm == 0 && va != 0)) {
        found_.emplace_back(vm == 0 ? tm : zero_of_g(R, w, z, 0.0, tm, va, vm), w.dof);
        if (vm != 0) found_.emplace_back(zero_of_g(R, w, z, tm, span, vm, vb), w.dof);
      }
    }
    std::sort(found_.begin(), found_.end());
    bool stop = false;
    for (const auto& [t, dof] : found_)
      if (obs_.peak(dof, run_.time + t, unscaled(state_at(R, z, t))) == ObserverAction::kStop) stop = true;
    return stop;
  }

  bool sample(const Vec& z, double t) {
    ++run_.samples;
    if (!obs_.sample) return false;
    return obs_.sample(t, unscaled(z)) == ObserverAction::kStop;
  }

  // The model's state of a scaled augmented vector (in x_).
  const std::vector<double>& unscaled(const Vec& z) {
    x_.resize(static_cast<std::size_t>(n_));
    for (int i = 0; i < n_; ++i) x_[static_cast<std::size_t>(i)] = z(i) / W_(i);
    return x_;
  }

  // The monodromy through a step or part of one whose propagator is F.
  void monodromy_step(const Mat& F) {
    phis_[1 - phi_].noalias() = F.topLeftCorner(n_, n_).lazyProduct(phis_[phi_]);
    phi_ = 1 - phi_;
  }

  IntegrationResult finish(const Vec& z, StopReason reason) {
    const StateMat& phi = phis_[phi_];
    for (int i = 0; i < n_; ++i) run_.x[static_cast<std::size_t>(i)] = z(i) / W_(i);
    if (run_.track_monodromy) {
      const StateMat p = W_.cwiseInverse().asDiagonal() * phi * W_.asDiagonal();
      std::copy(p.data(), p.data() + p.size(), run_.monodromy.begin());
    }
    return {reason, run_.time};
  }

  const AeroelasticModel& model_;
  const StateLayout& L_;
  const int n_;
  const int N_;  // augmented length: n_ + 1 + 2 x (gust oscillators)
  const bool gusts_ = !model_.gusts().empty();
  const bool affine_last_ = N_ == n_ + 1;  // no gust oscillators: z's last component is the constant 1
  RunState& run_;
  const double t_end_;
  const OutputSchedule& schedule_;
  const RunObservers& obs_;
  const StateVec W_;
  const std::span<const double> breaks_;  // input switch times
  std::vector<int> key_;  // the spring regions and input segment of a Region
  RegionMap own_cache_;   // when the run has no ExactFlowCache
  RegionMap& cache_;

  RegionMap& shared_regions(const AeroelasticModel& model, RunState& run) {
    if (!run.exact_cache) return own_cache_;
    std::shared_ptr<void>& slot = CacheAccess::regions_of(*run.exact_cache, model);
    if (!slot) slot = std::make_shared<RegionMap>();
    return *std::static_pointer_cast<RegionMap>(slot);
  }
  std::vector<double> x_;  // a sample's state, unscaled
  std::vector<std::pair<double, int>> found_;  // a step's peaks (time, DOF)
  mutable StepPolynomial poly_;  // the present step's Taylor polynomial, when poly_valid_
  mutable bool poly_valid_ = false;
  long step_ = 0;  // steps begun (Witness::step)
  // The scaled monodromy W Phi W^-1, phis_[phi_], and room for its next
  // value (exchanged by index: a StateMat holds kMaxAugmented^2 doubles,
  // all copied by a swap).
  std::array<StateMat, 2> phis_;
  int phi_ = 0;
  // The present step starts at the previous step's end zb, in the same
  // region (no switch, no new input segment): Witness::d_end holds.
  bool continued_ = false;
  std::unordered_map<const Region*, std::vector<Witness>> witness_cache_;  // witnesses_of
};
};  // struct Kernels

}  // namespace exact_detail

IntegrationResult integrate_exact(const AeroelasticModel& model, RunState& run, double t_end,
                                  const OutputSchedule& schedule, const RunObservers& observers) {
  AEROSECT_CHECK(exact_propagation_eligible(model));
  AEROSECT_CHECK(static_cast<int>(run.x.size()) == model.state_size());
  AEROSECT_CHECK(!run.track_monodromy || run.monodromy.size() == run.x.size() * run.x.size());
  if (run.regions.empty()) run.regions = model.regions_of(run.x.data());
  using exact_detail::Kernels;
  switch (exact_detail::augmented_size(model)) {
    case 5: return Kernels<5>::ExactRun(model, run, t_end, schedule, observers)();
    case 7: return Kernels<7>::ExactRun(model, run, t_end, schedule, observers)();
    case 9: return Kernels<9>::ExactRun(model, run, t_end, schedule, observers)();
    case 11: return Kernels<11>::ExactRun(model, run, t_end, schedule, observers)();
    case 13: return Kernels<13>::ExactRun(model, run, t_end, schedule, observers)();
    default: return Kernels<Eigen::Dynamic>::ExactRun(model, run, t_end, schedule, observers)();
  }
}

}  // namespace aerosect
