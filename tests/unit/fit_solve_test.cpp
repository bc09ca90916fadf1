// The solver's analytic Jacobian against automatic differentiation of an
// independently written residual (ceres::Jet, dual numbers: exact to
// rounding), and the lean interior LM against the bounded Ceres solve.
#include "fitting/fit_estimate.hpp"
#include "fitting/fit_solve.hpp"
#include "tests/bench/fit_curves.hpp"

#include <catch2/catch.hpp>
#include <ceres/jet.h>

#include <cmath>
#include <vector>

using namespace junco;
using fitting::RobustLoss;

namespace {

using Jet4 = ceres::Jet<double, 4>;

// The residual as docs/fitting.md writes it, straight from the formula (no
// rearrangement): r = (V − I·Rs − n·Vt·ln(1 + Id/Is))/σ, Id = I − (V − I·Rs)/Rsh,
// then r̃ = r·sqrt(ρ(r²)/r²) with Huber ρ = 2a|r| − a² above a², Cauchy ρ = a²·ln(1 + r²/a²).
Jet4 reference_residual(const fitting::IvPoint& p, double sigma, double vt, bool shunt, RobustLoss loss, double a,
                        const Jet4* x) {
  const Jet4 is = exp(x[0]);
  const Jet4 vj = Jet4(p.v) - Jet4(p.i_a) * x[2];
  const Jet4 id = shunt ? Jet4(p.i_a) - vj * exp(-x[3]) : Jet4(p.i_a);
  const Jet4 r = (vj - x[1] * vt * log(Jet4(1.0) + id / is)) / sigma;
  if (loss == RobustLoss::none) return r;
  const Jet4 s = r * r;
  if (loss == RobustLoss::huber) return s.a <= a * a ? r : r * sqrt((2.0 * a * sqrt(s) - a * a) / s);
  return r * sqrt(a * a * log(Jet4(1.0) + s / (a * a)) / s);
}

struct Case {
  bool shunt;
  RobustLoss loss;
};

}  // namespace

TEST_CASE("analytic Jacobian equals automatic differentiation of the residual", "[fit][jacobian]") {
  const double temp_k = 300.15;
  const double vt = fitting::thermal_voltage_v(temp_k);
  fitting::AccuracyModel acc;
  std::mt19937_64 rng(77);
  const fitting::DiodeParams truth{2e-9, 1.8, 0.6, 2e6};
  auto pts = fitbench::add_noise(fitbench::clean_curve(truth, temp_k, 60, 1e-6, 0.1), acc, rng);
  pts[20].v += 0.03;  // one glitch so Huber and Cauchy leave their quadratic core
  std::vector<double> sigma(pts.size());
  for (std::size_t k = 0; k < pts.size(); ++k) sigma[k] = fitting::residual_sigma_v(truth, pts[k], acc, temp_k);

  for (const Case c : {Case{false, RobustLoss::none}, Case{false, RobustLoss::huber}, Case{false, RobustLoss::cauchy},
                       Case{true, RobustLoss::none}, Case{true, RobustLoss::huber}, Case{true, RobustLoss::cauchy}}) {
    // Away from the optimum too, so every residual and slope is exercised.
    const double x[4] = {std::log(truth.is_a) + 0.3, truth.n * 1.02, truth.rs_ohm * 0.8, std::log(truth.rsh_ohm) - 0.5};
    const fitting::WeightedProblem wp{pts, sigma, temp_k, c.shunt, c.loss, 2.0, 200};
    const std::size_t dim = c.shunt ? 4 : 3;
    std::vector<double> r(pts.size()), jac(pts.size() * dim);
    REQUIRE(fitting::solver_residuals_and_jacobian(wp, std::span<const double>(x, 4), r, jac));
    std::size_t beyond_core = 0;
    Jet4 xj[4];
    for (int k = 0; k < 4; ++k) xj[k] = Jet4(x[k], k);
    for (std::size_t k = 0; k < pts.size(); ++k) {
      const Jet4 ref = reference_residual(pts[k], sigma[k], vt, c.shunt, c.loss, 2.0, xj);
      if (std::abs(ref.a) > 2.0) ++beyond_core;
      CHECK(r[k] == Approx(ref.a).epsilon(1e-10).margin(1e-12));
      for (std::size_t j = 0; j < dim; ++j) {
        INFO("shunt " << c.shunt << " loss " << static_cast<int>(c.loss) << " point " << k << " column " << j);
        CHECK(jac[k * dim + j] == Approx(ref.v[static_cast<int>(j)]).epsilon(1e-9).margin(1e-9 * std::abs(ref.v.norm())));
      }
    }
    CHECK(beyond_core > 0);  // the robust branches were reached
  }
}

TEST_CASE("lean interior solve and the bounded Ceres solve reach the same optimum", "[fit]") {
  const double temp_k = 300.15;
  fitting::AccuracyModel acc;
  std::mt19937_64 rng(31337);
  const fitting::DiodeParams truths[] = {{2.52e-9, 1.752, 0.568}, {5e-11, 2.2, 3.5}, {1e-9, 1.8, 0.5}};
  for (const auto& truth : truths) {
    for (std::size_t count : {40u, 400u}) {
      const auto pts = fitbench::add_noise(fitbench::clean_curve(truth, temp_k, count, 1e-6, 0.05), acc, rng);
      std::vector<double> sigma(pts.size());
      for (std::size_t k = 0; k < pts.size(); ++k) sigma[k] = fitting::standard_uncertainty_v(acc, pts[k].v);
      const auto start = fitting::initial_estimate(pts, sigma, temp_k, false);
      for (std::size_t k = 0; k < pts.size(); ++k) sigma[k] = fitting::residual_sigma_v(start, pts[k], acc, temp_k);
      fitting::WeightedProblem wp{pts, sigma, temp_k, false, RobustLoss::none, 3.0, 200};
      const auto fast = fitting::solve_weighted(wp, start, true);
      wp.method = fitting::SolveMethod::ceres_only;
      const auto ref = fitting::solve_weighted(wp, start, true);
      REQUIRE(fast.status == fitting::FitStatus::converged);
      CHECK(fast.message.find("interior") != std::string::npos);  // the lean path did the work
      REQUIRE(ref.status == fitting::FitStatus::converged);
      CHECK(fast.cost <= ref.cost * (1.0 + 1e-10));
      CHECK(fast.params.n == Approx(ref.params.n).epsilon(1e-7));
      CHECK(fast.params.rs_ohm == Approx(ref.params.rs_ohm).epsilon(1e-6));
      CHECK(std::log(fast.params.is_a) == Approx(std::log(ref.params.is_a)).epsilon(1e-7));
      REQUIRE(fast.covariance_ok);
      for (int a = 0; a < 3; ++a)
        for (int b = 0; b < 3; ++b)
          CHECK(fast.covariance_x[a][b] == Approx(ref.covariance_x[a][b]).epsilon(1e-5).margin(1e-12));
    }
  }
}

TEST_CASE("an optimum on a bound goes to the bounded solve", "[fit]") {
  // Readings from an ideal exponential pulled slightly below it at the top: the
  // unconstrained optimum has Rs < 0, so the answer must sit on Rs = 0.
  const double temp_k = 300.15;
  const fitting::DiodeParams truth{1e-9, 1.8, 0.0};
  auto pts = fitbench::clean_curve(truth, temp_k, 30, 1e-6, 0.05);
  for (auto& p : pts) p.v -= 0.02 * p.i_a;  // like Rs = −0.02 Ω
  std::vector<double> sigma(pts.size(), 1e-4);
  const fitting::WeightedProblem wp{pts, sigma, temp_k, false, RobustLoss::none, 3.0, 200};
  const auto s = fitting::solve_weighted(wp, {1e-9, 1.8, 0.01}, false);
  REQUIRE(s.status == fitting::FitStatus::converged);
  CHECK(s.message.find("interior") == std::string::npos);  // Ceres's message, not the lean path's
  CHECK(s.params.rs_ohm == 0.0);
  CHECK(s.params.n == Approx(1.8).epsilon(1e-3));
}
