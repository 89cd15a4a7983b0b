#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <complex>
#include <numbers>

#include <Eigen/Eigenvalues>

#include "aerosect/analysis/modes.hpp"
#include "aerosect/model/system.hpp"
#include "helpers.hpp"

using namespace aerosect;

TEST_CASE("State matrix in vacuum has the in-vacuo natural frequencies", "[system]") {
  // Common practice, no source: with rho = 0 and no damping the eigenvalues
  // of the first-order system are +-i omega of K phi = omega^2 M phi.
  const Case c = test::case_from(R"(
[section]
semichord = 0.5
mass = 10.0
elastic_axis = -0.2
cg_offset = 0.2
radius_of_gyration = 0.5
plunge_frequency_hz = 2.0
pitch_frequency_hz = 5.0
[flow]
density = 0.0
airspeed = 0.0
[simulation]
duration = 1.0
)");
  const AeroelasticModel model(c.model);
  CHECK(model.state_size() == 4);
  Eigen::EigenSolver<Eigen::MatrixXd> es(model.nominal_state_matrix());
  std::vector<double> w;
  for (int i = 0; i < 4; ++i) {
    CHECK(std::abs(es.eigenvalues()(i).real()) < 1e-9);
    if (es.eigenvalues()(i).imag() > 0) w.push_back(es.eigenvalues()(i).imag());
  }
  std::sort(w.begin(), w.end());
  const auto modes = in_vacuo_modes(c.model.section);
  REQUIRE(w.size() == 2);
  CHECK(w[0] == Approx(modes[0].frequency).epsilon(1e-10));
  CHECK(w[1] == Approx(modes[1].frequency).epsilon(1e-10));
}

TEST_CASE("Right-hand side equals the state matrix for linear springs", "[system]") {
  // Internal consistency (common practice): x' = A x when every spring is linear.
  const Case c = test::case_from(test::benchmark_2dof("[aerodynamics]\nmodel = \"wagner\"\n"
                                                      "[simulation]\nduration = 1.0\n"));
  const AeroelasticModel model(c.model);
  REQUIRE(model.state_size() == 6);
  std::vector<double> x = {0.01, -0.02, 0.3, 0.1, 0.05, -0.04}, dx(6);
  model.rhs(x.data(), dx.data(), 0.0, model.regions_of(x.data()));
  const Eigen::VectorXd ref = model.nominal_state_matrix() * Eigen::Map<Eigen::VectorXd>(x.data(), 6);
  for (int i = 0; i < 6; ++i) CHECK(dx[i] == Approx(ref(i)).margin(1e-14));
}

TEST_CASE("Steady lift of a held section at incidence", "[system]") {
  // Thin-aerofoil theory (common practice): in steady flow the lift is
  // 2 pi rho U^2 b alpha, acting at the quarter chord, so the moment about
  // the elastic axis is (1/2 + a) b L.
  const Case c = test::case_from(R"(
[section]
semichord = 0.5
mass = 10.0
elastic_axis = -0.2
cg_offset = 0.1
radius_of_gyration = 0.5
plunge_frequency_hz = 2.0
pitch_frequency_hz = 5.0
[flow]
density = 1.2
airspeed = 30.0
[initial]
pitch_deg = 2.0
lag_states = "steady"
[simulation]
duration = 1.0
hold = ["plunge", "pitch"]
)");
  const AeroelasticModel model(c.model);
  const auto& s = c.simulation;
  std::vector<double> x = model.initial_state(s.initial_displacement, s.initial_velocity, true);
  std::vector<double> dx(x.size());
  model.rhs(x.data(), dx.data(), 0.0, model.regions_of(x.data()));
  for (double v : dx) CHECK(v == Approx(0.0).margin(1e-12));  // held, steady: nothing moves
  const Loads l = model.loads(x.data(), dx.data());
  const double alpha = 2.0 * std::numbers::pi / 180.0;
  const double L = 2 * std::numbers::pi * 1.2 * 30.0 * 30.0 * 0.5 * alpha;
  CHECK(l.lift == Approx(L).epsilon(1e-12));
  CHECK(l.pitching_moment == Approx((0.5 - 0.2) * 0.5 * L).epsilon(1e-12));
}

TEST_CASE("State matrix at another airspeed equals the matrix of a model built there",
          "[system]") {
  // state_matrix_at scales stored per-unit-speed blocks (Theodorsen's terms
  // are proportional to U or U^2, NACA Report 496; common practice, no
  // source) instead of rebuilding the model: the two must agree to
  // round-off. Tolerance: 1e-14 relative to the largest entry of the same
  // row (a few ulps of the products and sums involved).
  auto check = [](const ModelDescription& d, const DofVector& k) {
    const AeroelasticModel model(d);
    for (double U : {0.0, 0.37 * d.flow.airspeed, d.flow.airspeed, 2.9 * d.flow.airspeed}) {
      ModelDescription there = d;
      there.flow.airspeed = U;
      const Eigen::MatrixXd ref = AeroelasticModel(there).state_matrix(k);
      const Eigen::MatrixXd A = model.state_matrix_at(U, k);
      REQUIRE(A.rows() == ref.rows());
      REQUIRE(A.cols() == ref.cols());
      for (Eigen::Index i = 0; i < A.rows(); ++i) {
        const double scale = ref.row(i).cwiseAbs().maxCoeff();
        for (Eigen::Index j = 0; j < A.cols(); ++j) {
          INFO("U = " << U << " m/s, entry (" << i << ", " << j << ")");
          CHECK(std::abs(A(i, j) - ref(i, j)) <= 1e-14 * scale);
        }
      }
    }
    // At the model's own airspeed the two forms are the same matrix.
    CHECK((model.state_matrix_at(d.flow.airspeed, k) - model.state_matrix(k)).cwiseAbs().maxCoeff() <=
          1e-14 * model.state_matrix(k).cwiseAbs().maxCoeff());
  };
  // The shipped 3-DOF demo case (with its gust lag states), at nominal and
  // gap-open (zero flap stiffness) springs.
  const Case demo = load_case(std::string(AEROSECT_SOURCE_DIR) + "/cases/demo_aileron.toml");
  DofVector k(3);
  for (int j = 0; j < 3; ++j) k(j) = demo.model.springs[j].nominal_stiffness();
  check(demo.model, k);
  k(2) = 0.0;
  check(demo.model, k);
  // A 2-DOF section (Lee, Price & Wong benchmark data, theory sheet section 4).
  const Case two = test::case_from(test::benchmark_2dof("[simulation]\nduration = 1.0\n"));
  DofVector k2(2);
  for (int j = 0; j < 2; ++j) k2(j) = two.model.springs[j].nominal_stiffness();
  check(two.model, k2);
}
