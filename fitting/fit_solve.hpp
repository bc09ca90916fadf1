// One bounded nonlinear least-squares solve with fixed per-point weights.
//
// The residual of point k is the voltage misfit of the explicit model,
//   r_k = (V_k − I_k·Rs − n·Vt·ln(1 + Id_k/Is)) / σ_k,
//   Id_k = I_k − (V_k − I_k·Rs)/Rsh   (Id_k = I_k without a shunt),
// solved by Ceres (Levenberg–Marquardt, analytic derivatives) over
// x = (ln Is, n, Rs[, ln Rsh]) with bounds on every component. fit_forward
// solves a few times, refreshing σ_k between solves (one CurveSolver reused);
// the benchmark calls solve_weighted so SciPy can be given exactly the same
// problem.
#pragma once

#include "fitting/extract.hpp"

#include <array>
#include <memory>
#include <span>
#include <string>

namespace junco::fitting {

// Bounds of the solver's parameters (x order above).
inline constexpr double fit_ln_is_min = -80.0;  // Is ≥ 1.8e-35 A
inline constexpr double fit_ln_is_max = -2.0;   // Is ≤ 0.14 A
inline constexpr double fit_n_min = 0.5;
inline constexpr double fit_n_max = 4.0;
inline constexpr double fit_rs_max_ohm = 1e6;
inline constexpr double fit_ln_rsh_min = 0.0;   // Rsh ≥ 1 Ω
inline constexpr double fit_ln_rsh_max = 40.0;  // Rsh ≤ 2e17 Ω

// fast_then_ceres: interior optima by a lean normal-equation LM, anything that
// touches a bound or the model's domain by the bounded Ceres solve (same
// result, see fit_solve.cpp); ceres_only: always the Ceres solve (tests compare).
enum class SolveMethod { fast_then_ceres, ceres_only };

struct WeightedProblem {
  std::span<const IvPoint> points;
  std::span<const double> sigma_v;  // one per point, > 0
  double temp_k = 300.15;
  bool fit_shunt = false;
  RobustLoss loss = RobustLoss::none;
  double loss_scale = 3.0;
  int max_iterations = 200;
  SolveMethod method = SolveMethod::fast_then_ceres;
};

struct SolveOutcome {
  DiodeParams params;
  FitStatus status = FitStatus::failed;
  std::string message;
  double cost = 0.0;  // Ceres convention ½·Σρ(r²)
  int iterations = 0;
  bool covariance_ok = false;
  // Covariance of x = (ln Is, n, Rs, ln Rsh), unscaled (unit-variance residuals);
  // the ln Rsh row and column are zero when the shunt is not fitted.
  std::array<std::array<double, 4>, 4> covariance_x{};
};

// A solver bound to one curve: per-reading constants are computed once and one
// Ceres problem is kept, so repeated solves (weight refreshes) pay only for the
// iterations. `problem.sigma_v` is read at every solve; the points must stay
// alive and unchanged while the solver is used.
class CurveSolver {
 public:
  explicit CurveSolver(const WeightedProblem& problem);
  ~CurveSolver();
  CurveSolver(const CurveSolver&) = delete;
  CurveSolver& operator=(const CurveSolver&) = delete;

  SolveOutcome solve(const DiodeParams& start, bool want_covariance);

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

SolveOutcome solve_weighted(const WeightedProblem& problem, const DiodeParams& start, bool want_covariance);

// Whitened residuals r_k (no loss function applied) at parameters p.
void weighted_residuals(const WeightedProblem& problem, const DiodeParams& p, std::span<double> out);

// The solver's residuals r̃_k (robust loss folded in, as minimised) and their
// Jacobian with respect to x, row-major points × (3 or 4), at x. Returns false
// where the model is undefined (shunt: junction current at or below −Is).
// Exposed so a test can check the analytic derivatives against autodiff.
bool solver_residuals_and_jacobian(const WeightedProblem& problem, std::span<const double> x, std::span<double> residuals,
                                   std::span<double> jacobian);

}  // namespace junco::fitting
