#include "fitting/fit_solve.hpp"

#include "fitting/solver_options.hpp"

#include <ceres/ceres.h>

#include <Eigen/Dense>

#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

namespace junco::fitting {

namespace {

// Robust loss folded into the residual: r̃ = f(r) = r·sqrt(ρ(r²)/r²), so
// Σr̃² = Σρ(r²); returns f(r) and writes f'(r) for the chain rule. (Ceres's
// own LossFunction acts on a whole residual block; all points share one block
// here, which is what makes a fit cheap, so the loss is applied per point.)
double robust_residual(double r, RobustLoss loss, double a, double& slope) {
  slope = 1.0;
  if (loss == RobustLoss::none) return r;
  const double s = r * r;
  const double a2 = a * a;
  if (loss == RobustLoss::huber) {
    if (s <= a2) return r;
    const double t = std::sqrt(2.0 * a * std::abs(r) - a2);  // = |r̃|
    slope = a / t;
    return std::copysign(t, r);
  }
  // Cauchy: ρ(s) = a²·ln(1 + s/a²); ρ(s)/s → 1 − s/(2a²) as s → 0.
  if (s < 1e-12 * a2) {
    slope = 1.0 - 0.75 * s / a2;
    return r * (1.0 - 0.25 * s / a2);
  }
  const double t = std::sqrt(a2 * std::log1p(s / a2));
  slope = std::abs(r) / (t * (1.0 + s / a2));
  return std::copysign(t, r);
}

// Per-reading constants, computed once per curve.
struct Reading {
  double v, i_a, log_i, inv_i;
};

// ln(1 + ε) for 0 ≤ ε: a five-term series below 1e-3, where its truncation
// error ε⁶/6 < 2e-19 is far below a double's rounding of the sum it joins.
double log1p_small(double e) {
  if (e < 1e-3) return e * (1.0 - e * (0.5 - e * (1.0 / 3.0 - e * (0.25 - e * 0.2))));
  return std::log1p(e);
}

struct Curve {
  std::span<const Reading> readings;
  std::span<const double> inv_sigma;
  double vt;
  RobustLoss loss;
  double loss_scale;
};

// All readings' residuals and, when jac is not null, their analytic Jacobian
// (row-major, points × dim). Without a shunt, ln(1 + I/Is) is evaluated as
// ln I − ln Is + ln(1 + Is/I): ln I and 1/I are per-reading constants and
// exp(ln Is) is taken once, so a reading costs a few multiply-adds.
//   ∂r/∂ln Is = n·Vt·w/(1 + Is/I),  ∂r/∂n = −Vt·ln(1 + I/Is)·w,  ∂r/∂Rs = −I·w.
// With a shunt, u = Id/Is, Vj = V − I·Rs, G = 1/Rsh:
//   ∂r/∂ln Is = n·Vt·w·u/(1+u),  ∂r/∂n = −Vt·ln(1+u)·w,
//   ∂r/∂Rs = −(I + n·Vt·I·G/(Is·(1+u)))·w,  ∂r/∂ln Rsh = −n·Vt·Vj·G/(Is·(1+u))·w.
template <bool Shunt>
bool evaluate(const Curve& c, const double* x, double* res, double* jac) {
  const double ln_is = x[0];
  const double n = x[1];
  const double nvt = n * c.vt;
  const double rs = x[2];
  const std::size_t count = c.readings.size();
  double slope = 1.0;
  if constexpr (Shunt) {
    const double inv_is = std::exp(-ln_is);
    const double g_sh = std::exp(-x[3]);
    for (std::size_t k = 0; k < count; ++k) {
      const Reading& p = c.readings[k];
      const double w = c.inv_sigma[k];
      const double vj = p.v - p.i_a * rs;
      const double u = (p.i_a - vj * g_sh) * inv_is;
      if (!(u > -1.0)) return false;  // junction current at or below −Is: no real log
      const double l = std::log1p(u);
      res[k] = robust_residual((vj - nvt * l) * w, c.loss, c.loss_scale, slope);
      if (jac == nullptr) continue;
      const double q = nvt * inv_is / (1.0 + u);  // n·Vt/(Is·(1+u))
      const double ws = w * slope;
      double* row = jac + 4 * k;
      row[0] = nvt * u / (1.0 + u) * ws;
      row[1] = -c.vt * l * ws;
      row[2] = -(p.i_a + q * p.i_a * g_sh) * ws;
      row[3] = -q * vj * g_sh * ws;
    }
  } else {
    const double is = std::exp(ln_is);
    for (std::size_t k = 0; k < count; ++k) {
      const Reading& p = c.readings[k];
      const double w = c.inv_sigma[k];
      const double e = is * p.inv_i;
      const double l = (p.log_i - ln_is) + log1p_small(e);
      res[k] = robust_residual((p.v - p.i_a * rs - nvt * l) * w, c.loss, c.loss_scale, slope);
      if (jac == nullptr) continue;
      const double ws = w * slope;
      double* row = jac + 3 * k;
      row[0] = nvt / (1.0 + e) * ws;
      row[1] = -c.vt * l * ws;
      row[2] = -p.i_a * ws;
    }
  }
  return true;
}

bool evaluate_curve(const Curve& c, bool shunt, const double* x, double* res, double* jac) {
  return shunt ? evaluate<true>(c, x, res, jac) : evaluate<false>(c, x, res, jac);
}

std::vector<Reading> readings_of(std::span<const IvPoint> points) {
  std::vector<Reading> out(points.size());
  for (std::size_t k = 0; k < out.size(); ++k) {
    const IvPoint& p = points[k];
    out[k] = {p.v, p.i_a, std::log(p.i_a), 1.0 / p.i_a};
  }
  return out;
}

std::vector<double> inverse_of(std::span<const double> sigma) {
  std::vector<double> out(sigma.size());
  for (std::size_t k = 0; k < out.size(); ++k) out[k] = 1.0 / sigma[k];
  return out;
}

// One residual block holding every reading; the Curve it reads is owned by the solver.
class CurveCost final : public ceres::CostFunction {
 public:
  CurveCost(const Curve& curve, bool shunt) : curve_(curve), shunt_(shunt) {
    set_num_residuals(static_cast<int>(curve.readings.size()));
    mutable_parameter_block_sizes()->push_back(shunt ? 4 : 3);
  }
  bool Evaluate(double const* const* parameters, double* residuals, double** jacobians) const override {
    double* jac = jacobians != nullptr ? jacobians[0] : nullptr;
    return evaluate_curve(curve_, shunt_, parameters[0], residuals, jac);
  }

 private:
  const Curve& curve_;
  bool shunt_;
};

std::array<double, 4> to_x(const DiodeParams& p) {
  const double ln_rsh = std::isfinite(p.rsh_ohm) ? std::log(p.rsh_ohm) : fit_ln_rsh_max;
  return {std::log(p.is_a), p.n, p.rs_ohm, ln_rsh};
}

DiodeParams from_x(const std::array<double, 4>& x, bool shunt) {
  return {std::exp(x[0]), x[1], x[2], shunt ? std::exp(x[3]) : std::numeric_limits<double>::infinity()};
}

FitStatus status_of(const ceres::Solver::Summary& summary) {
  switch (summary.termination_type) {
    case ceres::CONVERGENCE: return FitStatus::converged;
    case ceres::NO_CONVERGENCE: return summary.IsSolutionUsable() ? FitStatus::no_convergence : FitStatus::failed;
    default: return FitStatus::failed;
  }
}



// Levenberg–Marquardt on the dim×dim normal equations, for the usual case of
// an optimum strictly inside the bounds. Ceres's general machinery (program
// preprocessing, block-sparse Jacobian copies, evaluator bookkeeping) costs
// several times the arithmetic of a 3-parameter curve fit, so the common case
// is solved here with the same analytic residuals and the same rules as the
// Ceres solve (Marquardt diagonal with Jacobi scaling, trust-region ratio
// update, function/parameter/gradient tolerances). Any step that would leave
// the bounds or the model's domain, or an iteration limit, returns false and
// the caller hands the problem to the bounded Ceres solve instead.
struct FastResult {
  bool ok = false;
  double cost = 0.0;
  int iterations = 0;
};

struct Buffers {
  std::vector<double> r, r_new, jac;
};

// J'J, J'r and ½·r'r from the row-major Jacobian in one pass (a plain loop:
// Eigen's blocked product packs and tiles, which costs more than the sums at 3 columns).
template <int Dim>
void normal_equations(const double* jac, const double* r, std::size_t count, Eigen::Matrix<double, Dim, Dim>& a,
                      Eigen::Matrix<double, Dim, 1>& g, double& cost) {
  double aa[Dim][Dim] = {};
  double gg[Dim] = {};
  double rr = 0.0;
  for (std::size_t k = 0; k < count; ++k) {
    const double* row = jac + Dim * k;
    for (int i = 0; i < Dim; ++i) {
      gg[i] += row[i] * r[k];
      for (int j = i; j < Dim; ++j) aa[i][j] += row[i] * row[j];
    }
    rr += r[k] * r[k];
  }
  for (int i = 0; i < Dim; ++i) {
    g[i] = gg[i];
    for (int j = i; j < Dim; ++j) a(i, j) = a(j, i) = aa[i][j];
  }
  cost = 0.5 * rr;
}

template <int Dim>
FastResult fast_lm(const Curve& c, bool shunt, const ceres::Solver::Options& o, double* x, Buffers& b) {
  using Vec = Eigen::Matrix<double, Dim, 1>;
  using Mat = Eigen::Matrix<double, Dim, Dim>;
  static constexpr double lower[4] = {fit_ln_is_min, fit_n_min, 0.0, fit_ln_rsh_min};
  static constexpr double upper[4] = {fit_ln_is_max, fit_n_max, fit_rs_max_ohm, fit_ln_rsh_max};
  const std::size_t count = c.readings.size();
  FastResult out;
  Vec xv = Eigen::Map<const Vec>(x);
  Mat a;
  Vec g;
  double cost = 0.0;
  // Normal equations J'J and gradient J'r at xv.
  const auto linearise = [&]() {
    if (!evaluate_curve(c, shunt, xv.data(), b.r.data(), b.jac.data())) return false;
    normal_equations<Dim>(b.jac.data(), b.r.data(), count, a, g, cost);
    return std::isfinite(cost) && a.allFinite() && g.allFinite();
  };
  if (!linearise()) return out;
  double mu = 1.0 / o.initial_trust_region_radius;
  double nu = 2.0;
  for (int it = 1; it <= o.max_num_iterations; ++it) {
    out.iterations = it;
    if (g.template lpNorm<Eigen::Infinity>() <= o.gradient_tolerance) break;
    // Jacobi-scaled system (S·A·S + μ·diag(S·A·S))·z = −S·g, step δ = S·z.
    const Vec s = a.diagonal().cwiseMax(1e-300).cwiseSqrt().cwiseInverse();
    Mat m = s.asDiagonal() * a * s.asDiagonal();
    m.diagonal() += mu * m.diagonal().cwiseMax(o.min_lm_diagonal).cwiseMin(o.max_lm_diagonal);
    const Eigen::LDLT<Mat> ldlt(m);
    if (ldlt.info() != Eigen::Success) return out;
    const Vec step = s.asDiagonal() * ldlt.solve(-(s.asDiagonal() * g));
    if (!step.allFinite()) return out;
    if (step.norm() <= o.parameter_tolerance * (xv.norm() + o.parameter_tolerance)) {
      out.ok = true;
      break;
    }
    const Vec x_new = xv + step;
    for (int k = 0; k < Dim; ++k)
      if (!(x_new[k] >= lower[k] && x_new[k] <= upper[k])) return out;  // a bound matters: Ceres decides
    if (!evaluate_curve(c, shunt, x_new.data(), b.r_new.data(), nullptr)) return out;
    const double cost_new = 0.5 * Eigen::Map<const Eigen::VectorXd>(b.r_new.data(), static_cast<Eigen::Index>(count)).squaredNorm();
    if (!std::isfinite(cost_new)) return out;
    const double predicted = -(g.dot(step) + 0.5 * step.dot(a * step));
    const double actual = cost - cost_new;
    if (std::abs(actual) <= o.function_tolerance * cost) {
      if (actual > 0.0) {
        xv = x_new;
        cost = cost_new;
      }
      out.ok = true;
      break;
    }
    const double rho = predicted > 0.0 ? actual / predicted : -1.0;
    if (actual > 0.0 && rho > o.min_relative_decrease) {
      xv = x_new;
      if (!linearise()) return out;
      const double t = 2.0 * rho - 1.0;
      mu *= std::max(1.0 / 3.0, 1.0 - t * t * t);
      nu = 2.0;
    } else {
      mu *= nu;
      nu *= 2.0;
    }
  }
  if (!out.ok && g.template lpNorm<Eigen::Infinity>() <= o.gradient_tolerance) out.ok = true;
  if (!out.ok) return out;
  out.cost = cost;
  std::copy_n(xv.data(), Dim, x);
  return out;
}

// Covariance (J'J)⁻¹ of the whitened residuals at x, refusing a rank-deficient
// J as ceres::Covariance's DENSE_SVD does: σ_min/σ_max < sqrt(1e-14) (its
// default min_reciprocal_condition_number), here as λ_min/λ_max < 1e-14 on the
// eigenvalues λ = σ² of J'J.
template <int Dim>
bool covariance_at(const Curve& c, bool shunt, const double* x, Buffers& b, std::array<std::array<double, 4>, 4>& cov) {
  using Mat = Eigen::Matrix<double, Dim, Dim>;
  if (!evaluate_curve(c, shunt, x, b.r.data(), b.jac.data())) return false;
  Mat a;
  Eigen::Matrix<double, Dim, 1> g;
  double cost = 0.0;
  normal_equations<Dim>(b.jac.data(), b.r.data(), c.readings.size(), a, g, cost);
  if (!a.allFinite()) return false;
  const Eigen::SelfAdjointEigenSolver<Mat> eig(a);
  if (eig.info() != Eigen::Success) return false;
  const auto lambda = eig.eigenvalues();  // ascending
  if (!(lambda(0) >= 1e-14 * lambda(Dim - 1))) return false;
  const Mat c_x = eig.eigenvectors() * lambda.cwiseInverse().asDiagonal() * eig.eigenvectors().transpose();
  for (int r = 0; r < Dim; ++r)
    for (int col = 0; col < Dim; ++col) cov[static_cast<std::size_t>(r)][static_cast<std::size_t>(col)] = c_x(r, col);
  return true;
}

}  // namespace

struct CurveSolver::Impl {
  WeightedProblem wp;
  std::vector<Reading> readings;
  std::vector<double> inv_sigma;
  Buffers buffers;
  Curve curve;
  std::array<double, 4> x{};
  std::unique_ptr<ceres::Problem> problem;  // built on first need: most solves never reach Ceres
  ceres::Solver::Options options;

  explicit Impl(const WeightedProblem& p)
      : wp(p),
        readings(readings_of(p.points)),
        inv_sigma(p.points.size()),
        buffers{std::vector<double>(p.points.size()), std::vector<double>(p.points.size()),
                std::vector<double>(p.points.size() * (p.fit_shunt ? 4 : 3))},
        curve{readings, inv_sigma, thermal_voltage_v(p.temp_k), p.loss, p.loss_scale},
        options(solver_options(p.max_iterations)) {
  }

  ceres::Problem& ceres_problem();
  SolveOutcome solve(const DiodeParams& start, bool want_covariance);
};

ceres::Problem& CurveSolver::Impl::ceres_problem() {
  if (problem) return *problem;
  problem = std::make_unique<ceres::Problem>();
  ceres::Problem& pr = *problem;
  pr.AddResidualBlock(new CurveCost(curve, wp.fit_shunt), nullptr, x.data());
  pr.SetParameterLowerBound(x.data(), 0, fit_ln_is_min);
  pr.SetParameterUpperBound(x.data(), 0, fit_ln_is_max);
  pr.SetParameterLowerBound(x.data(), 1, fit_n_min);
  pr.SetParameterUpperBound(x.data(), 1, fit_n_max);
  pr.SetParameterLowerBound(x.data(), 2, 0.0);
  pr.SetParameterUpperBound(x.data(), 2, fit_rs_max_ohm);
  if (wp.fit_shunt) {
    pr.SetParameterLowerBound(x.data(), 3, fit_ln_rsh_min);
    pr.SetParameterUpperBound(x.data(), 3, fit_ln_rsh_max);
  }
  return pr;
}

SolveOutcome CurveSolver::Impl::solve(const DiodeParams& start, bool want_covariance) {
  const bool shunt = wp.fit_shunt;
  for (std::size_t k = 0; k < inv_sigma.size(); ++k) inv_sigma[k] = 1.0 / wp.sigma_v[k];
  x = to_x(start);
  x[0] = std::clamp(x[0], fit_ln_is_min, fit_ln_is_max);
  x[1] = std::clamp(x[1], fit_n_min, fit_n_max);
  x[2] = std::clamp(x[2], 0.0, fit_rs_max_ohm);
  x[3] = std::clamp(x[3], fit_ln_rsh_min, fit_ln_rsh_max);

  // Ceres stops (and logs) if the start cannot be evaluated; say so plainly instead.
  std::vector<double>& scratch = buffers.r_new;
  const bool start_ok = evaluate_curve(curve, shunt, x.data(), scratch.data(), nullptr) &&
                        std::all_of(scratch.begin(), scratch.end(), [](double r) { return std::isfinite(r); });
  if (!start_ok) {
    SolveOutcome bad;
    bad.params = from_x(x, shunt);
    bad.message = "the starting point is outside the model's domain (junction current at or below -Is)";
    return bad;
  }

  SolveOutcome out;
  const std::array<double, 4> x_start = x;
  const FastResult fast = wp.method == SolveMethod::ceres_only ? FastResult{}
                          : shunt ? fast_lm<4>(curve, true, options, x.data(), buffers)
                                  : fast_lm<3>(curve, false, options, x.data(), buffers);
  if (fast.ok) {
    out.status = FitStatus::converged;
    out.message = "converged (interior optimum, normal-equation Levenberg-Marquardt)";
    out.cost = fast.cost;
    out.iterations = fast.iterations;
  } else {
    x = x_start;
    ceres::Solver::Summary summary;
    ceres::Solve(options, &ceres_problem(), &summary);
    out.status = status_of(summary);
    out.message = summary.message;
    out.cost = summary.final_cost;
    out.iterations = fast.iterations + static_cast<int>(summary.iterations.size());
  }
  out.params = from_x(x, shunt);
  if (want_covariance && out.status != FitStatus::failed)
    out.covariance_ok = shunt ? covariance_at<4>(curve, true, x.data(), buffers, out.covariance_x)
                               : covariance_at<3>(curve, false, x.data(), buffers, out.covariance_x);
  return out;
}

CurveSolver::CurveSolver(const WeightedProblem& problem) : impl_(std::make_unique<Impl>(problem)) {}
CurveSolver::~CurveSolver() = default;

SolveOutcome CurveSolver::solve(const DiodeParams& start, bool want_covariance) {
  return impl_->solve(start, want_covariance);
}

SolveOutcome solve_weighted(const WeightedProblem& wp, const DiodeParams& start, bool want_covariance) {
  CurveSolver solver(wp);
  return solver.solve(start, want_covariance);
}

void weighted_residuals(const WeightedProblem& wp, const DiodeParams& p, std::span<double> out) {
  const std::vector<Reading> readings = readings_of(wp.points);
  const std::vector<double> inv_sigma = inverse_of(wp.sigma_v);
  const std::array<double, 4> x = to_x(p);
  std::vector<double> r(wp.points.size());
  // Plain residuals (no loss): the report judges outliers by them.
  const Curve curve{readings, inv_sigma, thermal_voltage_v(wp.temp_k), RobustLoss::none, 1.0};
  if (!evaluate_curve(curve, wp.fit_shunt, x.data(), r.data(), nullptr))
    std::fill(r.begin(), r.end(), std::numeric_limits<double>::quiet_NaN());
  std::copy_n(r.begin(), std::min(r.size(), out.size()), out.begin());
}

bool solver_residuals_and_jacobian(const WeightedProblem& wp, std::span<const double> x, std::span<double> residuals,
                                   std::span<double> jacobian) {
  const std::size_t dim = wp.fit_shunt ? 4 : 3;
  if (x.size() < dim || residuals.size() < wp.points.size() || jacobian.size() < wp.points.size() * dim) return false;
  const std::vector<Reading> readings = readings_of(wp.points);
  const std::vector<double> inv_sigma = inverse_of(wp.sigma_v);
  const Curve curve{readings, inv_sigma, thermal_voltage_v(wp.temp_k), wp.loss, wp.loss_scale};
  return evaluate_curve(curve, wp.fit_shunt, x.data(), residuals.data(), jacobian.data());
}

ceres::Solver::Options solver_options(int max_iterations) {
  ceres::Solver::Options options;
  options.linear_solver_type = ceres::DENSE_NORMAL_CHOLESKY;  // 3 or 4 columns: J'J is tiny and well scaled (Jacobi scaling)
  options.max_num_line_search_step_size_iterations = 0;
  options.trust_region_strategy_type = ceres::LEVENBERG_MARQUARDT;
  options.max_num_iterations = max_iterations;
  options.function_tolerance = 1e-12;
  options.parameter_tolerance = 1e-12;
  options.gradient_tolerance = 1e-14;
  options.num_threads = 1;
  options.logging_type = ceres::SILENT;
  return options;
}

}  // namespace junco::fitting
