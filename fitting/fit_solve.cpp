#include "fitting/fit_solve.hpp"

#include <ceres/ceres.h>

#include <cmath>
#include <algorithm>
#include <memory>
#include <vector>

namespace junco::fitting {

namespace {

// Robust loss folded into the residual: r̃ = r·sqrt(ρ(r²)/r²), so Σr̃² = Σρ(r²)
// and automatic differentiation gives the exact Jacobian of r̃. (Ceres's own
// LossFunction acts on a whole residual block; all points share one block
// here, which is what makes a fit cheap, so the loss is applied per point.)
template <typename T>
T robust_residual(const T& r, RobustLoss loss, double scale) {
  if (loss == RobustLoss::none) return r;
  const T s = r * r;
  const double a2 = scale * scale;
  if (loss == RobustLoss::huber) {
    if (s <= T(a2)) return r;
    return r * sqrt((T(2.0 * scale) * sqrt(s) - T(a2)) / s);
  }
  // Cauchy: ρ(s) = a²·ln(1 + s/a²); ρ(s)/s → 1 − s/(2a²) as s → 0.
  if (s < T(1e-12 * a2)) return r * (T(1.0) - s / T(4.0 * a2));
  return r * sqrt(T(a2) * log1p(s / T(a2)) / s);
}

// Per-reading constants, computed once per solve.
struct Reading {
  double v, i_a, log_i, inv_i, inv_sigma;
};

// ln(1 + ε) for 0 ≤ ε: a five-term series below 1e-3, where its truncation
// error ε⁶/6 < 2e-19 is far below a double's rounding of the sum it joins.
template <typename T>
T log1p_small(const T& e) {
  if (e < T(1e-3)) return e * (T(1.0) - e * (T(0.5) - e * (T(1.0 / 3.0) - e * (T(0.25) - e * T(0.2)))));
  return log1p(e);
}

// All readings' whitened voltage residuals in one block, templated so Ceres
// differentiates it. Without a shunt, ln(1 + I/Is) = ln I − ln Is + ln(1 + Is/I):
// ln I and 1/I are constants and exp(ln Is) is taken once per evaluation, so
// a reading costs a few multiply-adds (the same function, rearranged).
template <bool Shunt>
struct CurveResidual {
  std::span<const Reading> readings;
  double vt;
  RobustLoss loss;
  double loss_scale;

  template <typename T>
  bool operator()(const T* x, T* residual) const {
    const T& ln_is = x[0];
    const T nvt = x[1] * vt;
    const T& rs = x[2];
    if constexpr (Shunt) {
      const T inv_is = exp(-ln_is);
      const T g_sh = exp(-x[3]);
      for (std::size_t k = 0; k < readings.size(); ++k) {
        const Reading& p = readings[k];
        const T vj_meas = p.v - p.i_a * rs;
        const T u = (p.i_a - vj_meas * g_sh) * inv_is;
        if (!(u > T(-1.0))) return false;  // junction current at or below −Is: no real log
        residual[k] = robust_residual((vj_meas - nvt * log1p(u)) * p.inv_sigma, loss, loss_scale);
      }
    } else {
      const T is = exp(ln_is);
      for (std::size_t k = 0; k < readings.size(); ++k) {
        const Reading& p = readings[k];
        const T log1p_u = (p.log_i - ln_is) + log1p_small(is * p.inv_i);
        residual[k] = robust_residual((p.v - p.i_a * rs - nvt * log1p_u) * p.inv_sigma, loss, loss_scale);
      }
    }
    return true;
  }
};

std::vector<Reading> readings_of(const WeightedProblem& wp) {
  std::vector<Reading> out(wp.points.size());
  for (std::size_t k = 0; k < out.size(); ++k) {
    const IvPoint& p = wp.points[k];
    out[k] = {p.v, p.i_a, std::log(p.i_a), 1.0 / p.i_a, 1.0 / wp.sigma_v[k]};
  }
  return out;
}

std::array<double, 4> to_x(const DiodeParams& p) {
  const double ln_rsh = std::isfinite(p.rsh_ohm) ? std::log(p.rsh_ohm) : fit_ln_rsh_max;
  return {std::log(p.is_a), p.n, p.rs_ohm, ln_rsh};
}

DiodeParams from_x(const std::array<double, 4>& x, bool shunt) {
  return {std::exp(x[0]), x[1], x[2], shunt ? std::exp(x[3]) : std::numeric_limits<double>::infinity()};
}

double clamp(double v, double lo, double hi) { return v < lo ? lo : (v > hi ? hi : v); }

template <bool Shunt>
void add_curve(ceres::Problem& problem, const WeightedProblem& wp, std::span<const Reading> readings, double* x) {
  constexpr int dim = Shunt ? 4 : 3;
  auto* functor = new CurveResidual<Shunt>{readings, thermal_voltage_v(wp.temp_k), wp.loss, wp.loss_scale};
  auto* cost = new ceres::AutoDiffCostFunction<CurveResidual<Shunt>, ceres::DYNAMIC, dim>(
      functor, static_cast<int>(wp.points.size()));
  problem.AddResidualBlock(cost, nullptr, x);
}

FitStatus status_of(const ceres::Solver::Summary& summary) {
  switch (summary.termination_type) {
    case ceres::CONVERGENCE: return FitStatus::converged;
    case ceres::NO_CONVERGENCE: return summary.IsSolutionUsable() ? FitStatus::no_convergence : FitStatus::failed;
    default: return FitStatus::failed;
  }
}

}  // namespace

SolveOutcome solve_weighted(const WeightedProblem& wp, const DiodeParams& start, bool want_covariance) {
  const bool shunt = wp.fit_shunt;
  const int dim = shunt ? 4 : 3;
  std::array<double, 4> x = to_x(start);
  x[0] = clamp(x[0], fit_ln_is_min, fit_ln_is_max);
  x[1] = clamp(x[1], fit_n_min, fit_n_max);
  x[2] = clamp(x[2], 0.0, fit_rs_max_ohm);
  x[3] = clamp(x[3], fit_ln_rsh_min, fit_ln_rsh_max);

  // Ceres stops (and logs) if the start cannot be evaluated; say so plainly instead.
  {
    std::vector<double> r0(wp.points.size());
    weighted_residuals(wp, from_x(x, shunt), r0);
    for (double r : r0) {
      if (std::isfinite(r)) continue;
      SolveOutcome bad;
      bad.params = from_x(x, shunt);
      bad.message = "the starting point is outside the model's domain (junction current at or below -Is)";
      return bad;
    }
  }
  const std::vector<Reading> readings = readings_of(wp);
  ceres::Problem problem;
  if (shunt) {
    add_curve<true>(problem, wp, readings, x.data());
  } else {
    add_curve<false>(problem, wp, readings, x.data());
  }
  problem.SetParameterLowerBound(x.data(), 0, fit_ln_is_min);
  problem.SetParameterUpperBound(x.data(), 0, fit_ln_is_max);
  problem.SetParameterLowerBound(x.data(), 1, fit_n_min);
  problem.SetParameterUpperBound(x.data(), 1, fit_n_max);
  problem.SetParameterLowerBound(x.data(), 2, 0.0);
  problem.SetParameterUpperBound(x.data(), 2, fit_rs_max_ohm);
  if (shunt) {
    problem.SetParameterLowerBound(x.data(), 3, fit_ln_rsh_min);
    problem.SetParameterUpperBound(x.data(), 3, fit_ln_rsh_max);
  }

  ceres::Solver::Options options;
  options.linear_solver_type = ceres::DENSE_NORMAL_CHOLESKY;  // 3 or 4 columns: J'J is tiny and well scaled (Jacobi scaling)
  options.max_num_line_search_step_size_iterations = 0;
  options.trust_region_strategy_type = ceres::LEVENBERG_MARQUARDT;
  options.max_num_iterations = wp.max_iterations;
  options.function_tolerance = 1e-12;
  options.parameter_tolerance = 1e-12;
  options.gradient_tolerance = 1e-14;
  options.num_threads = 1;
  options.logging_type = ceres::SILENT;
  ceres::Solver::Summary summary;
  ceres::Solve(options, &problem, &summary);

  SolveOutcome out;
  out.status = status_of(summary);
  out.message = summary.message;
  out.cost = summary.final_cost;
  out.iterations = static_cast<int>(summary.iterations.size());
  out.params = from_x(x, shunt);
  if (!want_covariance || out.status == FitStatus::failed) return out;

  ceres::Covariance::Options cov_options;
  cov_options.algorithm_type = ceres::DENSE_SVD;  // copes with near-singular J'J and says so
  cov_options.num_threads = 1;
  ceres::Covariance covariance(cov_options);
  std::vector<std::pair<const double*, const double*>> blocks{{x.data(), x.data()}};
  if (covariance.Compute(blocks, &problem)) {
    std::array<double, 16> c{};
    covariance.GetCovarianceBlock(x.data(), x.data(), c.data());
    for (int r = 0; r < dim; ++r)
      for (int col = 0; col < dim; ++col) out.covariance_x[r][col] = c[static_cast<std::size_t>(r * dim + col)];
    out.covariance_ok = true;
  }
  return out;
}

void weighted_residuals(const WeightedProblem& wp, const DiodeParams& p, std::span<double> out) {
  const std::vector<Reading> readings = readings_of(wp);
  const std::array<double, 4> x = to_x(p);
  const double vt = thermal_voltage_v(wp.temp_k);
  std::vector<double> r(wp.points.size(), std::numeric_limits<double>::quiet_NaN());
  // Plain residuals (no loss): the report judges outliers by them.
  const bool ok = wp.fit_shunt ? CurveResidual<true>{readings, vt, RobustLoss::none, 1.0}(x.data(), r.data())
                               : CurveResidual<false>{readings, vt, RobustLoss::none, 1.0}(x.data(), r.data());
  if (!ok) std::fill(r.begin(), r.end(), std::numeric_limits<double>::quiet_NaN());
  std::copy_n(r.begin(), std::min(r.size(), out.size()), out.begin());
}

}  // namespace junco::fitting
