#include "fitting/fit_solve.hpp"

#include <ceres/ceres.h>

#include <cmath>
#include <memory>
#include <vector>

namespace junco::fitting {

namespace {

// One reading's whitened voltage residual; templated so Ceres differentiates it.
template <bool Shunt>
struct VoltageResidual {
  double v, i_a, vt, inv_sigma;

  template <typename T>
  bool operator()(const T* x, T* residual) const {
    const T& ln_is = x[0];
    const T& n = x[1];
    const T& rs = x[2];
    const T vj_meas = T(v) - T(i_a) * rs;
    T id = T(i_a);
    if constexpr (Shunt) id = id - vj_meas * exp(-x[3]);
    const T u = id * exp(-ln_is);
    if (!(u > T(-1.0))) return false;  // junction current at or below −Is: no real log
    residual[0] = (vj_meas - n * T(vt) * log1p(u)) * T(inv_sigma);
    return true;
  }
};

template <bool Shunt>
double residual_value(const VoltageResidual<Shunt>& f, const double* x) {
  double r = std::numeric_limits<double>::quiet_NaN();
  f(x, &r);
  return r;
}

std::array<double, 4> to_x(const DiodeParams& p) {
  const double ln_rsh = std::isfinite(p.rsh_ohm) ? std::log(p.rsh_ohm) : fit_ln_rsh_max;
  return {std::log(p.is_a), p.n, p.rs_ohm, ln_rsh};
}

DiodeParams from_x(const std::array<double, 4>& x, bool shunt) {
  return {std::exp(x[0]), x[1], x[2], shunt ? std::exp(x[3]) : std::numeric_limits<double>::infinity()};
}

double clamp(double v, double lo, double hi) { return v < lo ? lo : (v > hi ? hi : v); }

ceres::LossFunction* make_loss(RobustLoss loss, double scale) {
  switch (loss) {
    case RobustLoss::huber: return new ceres::HuberLoss(scale);
    case RobustLoss::cauchy: return new ceres::CauchyLoss(scale);
    case RobustLoss::none: break;
  }
  return nullptr;
}

template <bool Shunt>
void add_residuals(ceres::Problem& problem, const WeightedProblem& wp, double* x) {
  constexpr int dim = Shunt ? 4 : 3;
  const double vt = thermal_voltage_v(wp.temp_k);
  for (std::size_t k = 0; k < wp.points.size(); ++k) {
    auto* cost = new ceres::AutoDiffCostFunction<VoltageResidual<Shunt>, 1, dim>(
        new VoltageResidual<Shunt>{wp.points[k].v, wp.points[k].i_a, vt, 1.0 / wp.sigma_v[k]});
    problem.AddResidualBlock(cost, make_loss(wp.loss, wp.loss_scale), x);
  }
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
  ceres::Problem::Options problem_options;
  problem_options.enable_fast_removal = false;
  ceres::Problem problem(problem_options);
  if (shunt) {
    add_residuals<true>(problem, wp, x.data());
  } else {
    add_residuals<false>(problem, wp, x.data());
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
  options.linear_solver_type = ceres::DENSE_QR;
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
  const double vt = thermal_voltage_v(wp.temp_k);
  const std::array<double, 4> x = to_x(p);
  for (std::size_t k = 0; k < wp.points.size() && k < out.size(); ++k) {
    const double inv_sigma = 1.0 / wp.sigma_v[k];
    if (wp.fit_shunt) {
      out[k] = residual_value(VoltageResidual<true>{wp.points[k].v, wp.points[k].i_a, vt, inv_sigma}, x.data());
    } else {
      out[k] = residual_value(VoltageResidual<false>{wp.points[k].v, wp.points[k].i_a, vt, inv_sigma}, x.data());
    }
  }
}

}  // namespace junco::fitting
