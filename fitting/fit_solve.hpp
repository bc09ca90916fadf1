// One bounded nonlinear least-squares solve with fixed per-point weights.
//
// The residual of point k is the voltage misfit of the explicit model,
//   r_k = (V_k − I_k·Rs − n·Vt·ln(1 + Id_k/Is)) / σ_k,
//   Id_k = I_k − (V_k − I_k·Rs)/Rsh   (Id_k = I_k without a shunt),
// solved by Ceres (Levenberg–Marquardt, automatic derivatives) over
// x = (ln Is, n, Rs[, ln Rsh]) with bounds on every component. fit_forward
// calls this a few times, refreshing σ_k between solves; the benchmark calls
// it directly so SciPy can be given exactly the same problem.
#pragma once

#include "fitting/extract.hpp"

#include <array>
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

struct WeightedProblem {
  std::span<const IvPoint> points;
  std::span<const double> sigma_v;  // one per point, > 0
  double temp_k = 300.15;
  bool fit_shunt = false;
  RobustLoss loss = RobustLoss::none;
  double loss_scale = 3.0;
  int max_iterations = 200;
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

SolveOutcome solve_weighted(const WeightedProblem& problem, const DiodeParams& start, bool want_covariance);

// Whitened residuals r_k (no loss function applied) at parameters p.
void weighted_residuals(const WeightedProblem& problem, const DiodeParams& p, std::span<double> out);

}  // namespace junco::fitting
