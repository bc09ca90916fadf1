#include "fitting/joint_fit.hpp"

#include "fitting/solver_options.hpp"

#include <Eigen/Dense>
#include <ceres/ceres.h>

#include <algorithm>
#include <array>
#include <limits>
#include <cmath>
#include <cstdio>
#include <numbers>
#include <utility>
#include <vector>

namespace junco::fitting {

namespace {

// Every reading of the joint fit in one residual block, DC readings first,
// with analytic derivatives. Why one block and no autodiff: with a block per
// reading Ceres's per-block bookkeeping (evaluation preparers, validity
// checks, Jacobian copies) and the dual-number arithmetic cost more than the
// model itself, and the fit solves twice (weights refreshed once); the
// residuals are the same expressions as before, so the solver takes the same
// steps (docs/fitting.md, "Timing": values within 1e-12 of the former code,
// tests/unit/joint_fit_same_results_test.cpp).
//   DC: r = (I·Rs + n·Vt·ln(1 + I/Is) − V)/σ_V, x = {ln Is, n, Rs};
//   AC: r = (fixture_gain_db_of(rj, Rs) − measured dB)/σ_dB, rj = n·Vt/(I + Is).
class JointCost final : public ceres::CostFunction {
 public:
  struct Dc {
    double v, i_a;
  };
  struct Ac {
    double bias_i_a, measured_db, omega_cj;
  };
  // dc_inv_sigma is read at every evaluation (the caller refreshes it between solves).
  JointCost(std::vector<Dc> dc, const std::vector<double>& dc_inv_sigma, std::vector<Ac> ac, double vt, double z_load,
            double ac_inv_sigma)
      : dc_(std::move(dc)), dc_inv_sigma_(dc_inv_sigma), ac_(std::move(ac)), vt_(vt), z_load_(z_load),
        ac_inv_sigma_(ac_inv_sigma) {
    set_num_residuals(static_cast<int>(dc_.size() + ac_.size()));
    mutable_parameter_block_sizes()->push_back(3);
  }

  bool Evaluate(double const* const* parameters, double* residuals, double** jacobians) const override {
    const double* x = parameters[0];
    double* jac = jacobians != nullptr ? jacobians[0] : nullptr;  // row-major, 3 per residual
    const double is_a = std::exp(x[0]);
    for (std::size_t k = 0; k < dc_.size(); ++k) {
      const double u = dc_[k].i_a / is_a, ln_term = std::log(1.0 + u), w = dc_inv_sigma_[k];
      residuals[k] = (dc_[k].i_a * x[2] + x[1] * vt_ * ln_term - dc_[k].v) * w;
      if (jac != nullptr) {
        double* row = jac + 3 * k;
        row[0] = -x[1] * vt_ * (u / (1.0 + u)) * w;  // d/d ln Is: du/d ln Is = −u
        row[1] = vt_ * ln_term * w;
        row[2] = dc_[k].i_a * w;
      }
    }
    const double w = ac_inv_sigma_;
    for (std::size_t k = 0; k < ac_.size(); ++k) {
      const Ac& p = ac_[k];
      const double denom_a = p.bias_i_a + is_a;
      const double rj = x[1] * vt_ / denom_a;
      const std::size_t m = dc_.size() + k;
      residuals[m] = (fixture_gain_db_of(rj, x[2], p.omega_cj, z_load_) - p.measured_db) * w;
      if (jac != nullptr) {
        // gain dB = 10·log10(z²/D), D = re² + im², a = ω·Cj·rj, q = 1 + a²,
        // re = Rs + rj/q + z, im = −a·rj/q: dre/drj = (1 − a²)/q², dim/drj = −2a/q².
        const double a = p.omega_cj * rj, q = 1.0 + a * a;
        const double re = x[2] + rj / q + z_load_, im = -a * rj / q;
        const double d_db_d_d = -10.0 / (std::numbers::ln10 * (re * re + im * im));
        const double d_d_d_rj = (2.0 * re * (1.0 - a * a) - 4.0 * im * a) / (q * q);
        const double d_db_d_rj = d_db_d_d * d_d_d_rj;
        double* row = jac + 3 * m;
        row[0] = d_db_d_rj * (-rj * is_a / denom_a) * w;
        row[1] = d_db_d_rj * (vt_ / denom_a) * w;
        row[2] = d_db_d_d * 2.0 * re * w;
      }
    }
    return true;
  }

 private:
  std::vector<Dc> dc_;
  const std::vector<double>& dc_inv_sigma_;
  std::vector<Ac> ac_;
  double vt_, z_load_, ac_inv_sigma_;
};

// The covariance of x from the Jacobian at the solution, as ceres::Covariance
// with DENSE_SVD and its default options computes it (singular values of J,
// V·diag(1/s²)·Vᵀ, refused when s_min/s_max < √1e-14), without building the
// problem's evaluator again. Returns false when J is that close to rank deficient.
bool covariance_from_jacobian(const JointCost& cost, const double x[3], double c[9]) {
  const int rows = cost.num_residuals();
  std::vector<double> residuals(static_cast<std::size_t>(rows));
  Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor> j(rows, 3);
  const double* parameters[] = {x};
  double* jacobians[] = {j.data()};
  if (!cost.Evaluate(parameters, residuals.data(), jacobians) || !j.allFinite()) return false;
  const Eigen::MatrixXd dense = j;
  const Eigen::JacobiSVD<Eigen::MatrixXd> svd(dense, Eigen::ComputeThinV);
  const Eigen::VectorXd s = svd.singularValues();
  const double min_ratio = std::sqrt(1e-14);  // ceres::Covariance::Options::min_reciprocal_condition_number
  for (Eigen::Index k = 0; k < s.size(); ++k)
    if (!(s[k] / s[0] >= min_ratio)) return false;
  const Eigen::Matrix3d cov = svd.matrixV() * s.cwiseAbs2().cwiseInverse().asDiagonal() * svd.matrixV().transpose();
  for (int r = 0; r < 3; ++r)
    for (int k = 0; k < 3; ++k) c[3 * r + k] = cov(r, k);
  return true;
}

struct AcOnlyCost {
  double bias_i_a, measured_db, vt, omega_cj, z_load, inv_sigma;
  template <typename T>
  bool operator()(const T* const x, T* r) const {
    // x = {n, Rs}
    const T rj = x[0] * T(vt) / T(bias_i_a);
    r[0] = (fixture_gain_db_of(rj, x[1], omega_cj, z_load) - T(measured_db)) * T(inv_sigma);
    return true;
  }
};

// Refines the dynamic-resistance line's n and Rs by least squares on the
// readings in dB with the junction capacitance in the model: the line takes
// each reading's |Vout/Vin| as resistive, which reads ω·Cj·rj as extra
// resistance where rj is large (low bias, high frequency).
void refine_ac_with_cj(std::span<const AcPoint> ac, const Fixture& fixture, const JointFitOptions& o, SimpleFit& f) {
  const double vt = thermal_voltage_v(o.temp_k), z_load = cathode_load_ohm(fixture);
  double x[2] = {f.n.value, std::max(f.rs_ohm.value, 0.0)};
  ceres::Problem problem;
  std::size_t used = 0;
  for (const auto& p : ac) {
    if (!p.usable()) continue;
    problem.AddResidualBlock(new ceres::AutoDiffCostFunction<AcOnlyCost, 1, 2>(new AcOnlyCost{
                                 p.bias_i_a, 20.0 * std::log10(p.vout / p.vin), vt,
                                 2.0 * std::numbers::pi * p.freq_hz * o.cj_f, z_load, 1.0 / o.ac_sigma_db}),
                             nullptr, x);
    ++used;
  }
  problem.SetParameterLowerBound(x, 0, 0.5);
  problem.SetParameterUpperBound(x, 0, 5.0);
  problem.SetParameterLowerBound(x, 1, 0.0);
  problem.SetParameterUpperBound(x, 1, 1e3);
  const ceres::Solver::Options so = solver_options(o.max_iterations);
  ceres::Solver::Summary summary;
  ceres::Solve(so, &problem, &summary);
  if (summary.termination_type != ceres::CONVERGENCE) {
    f.ok = false;
    f.message = "the AC-alone fit with Cj did not converge: " + summary.message;
    return;
  }
  ceres::Covariance::Options co;
  co.algorithm_type = ceres::DENSE_SVD;
  ceres::Covariance cov(co);
  std::vector<std::pair<const double*, const double*>> blocks{{x, x}};
  f.n.value = x[0];
  f.rs_ohm.value = x[1];
  f.cost = summary.final_cost;
  f.reduced_chi2 = 2.0 * summary.final_cost / static_cast<double>(used - 2);
  if (cov.Compute(blocks, &problem)) {
    double c[4];
    cov.GetCovarianceBlock(x, x, c);
    f.n.std_error = std::sqrt(c[0] * f.reduced_chi2);
    f.rs_ohm.std_error = std::sqrt(c[3] * f.reduced_chi2);
  } else {
    f.n.std_error = f.rs_ohm.std_error = std::numeric_limits<double>::quiet_NaN();
    f.message = "covariance not determined";
  }
}

// Start from the slope of the lowest decade and the excess at the top.
void initial_estimate(std::span<const IvPoint> dc, double vt, double x[3]) {
  std::vector<IvPoint> pts(dc.begin(), dc.end());
  std::sort(pts.begin(), pts.end(), [](const IvPoint& a, const IvPoint& b) { return a.i_a < b.i_a; });
  const IvPoint lo = pts.front();
  IvPoint up = pts.back();
  for (const auto& p : pts)
    if (p.i_a >= 10.0 * lo.i_a) {
      up = p;
      break;
    }
  double n = (up.v - lo.v) / (vt * std::log(up.i_a / lo.i_a));
  if (!(n > 0.5 && n < 5.0)) n = 1.5;
  const double ln_is = std::log(lo.i_a) - lo.v / (n * vt);
  const IvPoint top = pts.back();
  const double rs = std::max(0.0, (top.v - n * vt * (std::log(top.i_a) - ln_is)) / top.i_a);
  x[0] = ln_is;
  x[1] = n;
  x[2] = std::min(rs, 100.0);
}

}  // namespace

SimpleFit fit_dc_ac(std::span<const IvPoint> dc, std::span<const AcPoint> ac, const Fixture& fixture,
                    const JointFitOptions& o) {
  SimpleFit f;
  // The stored fit's screening and σ (extract.hpp): points above its noise
  // floor, each weighted by residual_sigma_v (effective variance, accuracy
  // figures read as rectangular limits, σ = limit/√3), so a χ² here means the
  // same as part.fit's for the same readings (docs/fitting.md, "One σ").
  FitOptions screen;
  screen.accuracy = o.accuracy;
  const double floor_a = effective_noise_floor_a(screen);
  std::vector<IvPoint> fwd;
  for (const auto& p : dc)
    if (p.i_a >= floor_a && p.v > 0.0 && std::isfinite(p.v)) fwd.push_back(p);
  if (fwd.size() < 4) {
    f.message = "need at least 4 forward points above the noise floor";
    return f;
  }
  const double vt = thermal_voltage_v(o.temp_k);
  double x[3];
  initial_estimate(fwd, vt, x);
  // σ from the start, then once more from the solution (dV/dI depends on
  // the parameters), as fit_forward re-weights.
  std::vector<double> inv_sigma(fwd.size());
  const auto weigh = [&](const double* at) {
    const DiodeParams p{std::exp(at[0]), at[1], at[2]};
    for (std::size_t k = 0; k < fwd.size(); ++k) inv_sigma[k] = 1.0 / (o.dc_sigma_scale * residual_sigma_v(p, fwd[k], o.accuracy, o.temp_k));
  };
  weigh(x);
  std::vector<JointCost::Dc> dc_readings;
  dc_readings.reserve(fwd.size());
  for (const auto& p : fwd) dc_readings.push_back({p.v, p.i_a});
  std::vector<JointCost::Ac> ac_readings;
  for (const auto& p : ac) {
    if (!p.usable()) continue;
    ac_readings.push_back({p.bias_i_a, 20.0 * std::log10(p.vout / p.vin), 2.0 * std::numbers::pi * p.freq_hz * o.cj_f});
  }
  f.dc_points = fwd.size();
  f.ac_points = ac_readings.size();
  JointCost cost(std::move(dc_readings), inv_sigma, std::move(ac_readings), vt, cathode_load_ohm(fixture),
                 1.0 / o.ac_sigma_db);
  ceres::Problem::Options po;
  po.cost_function_ownership = ceres::DO_NOT_TAKE_OWNERSHIP;  // `cost` lives on this stack
  ceres::Problem problem(po);
  problem.AddResidualBlock(&cost, nullptr, x);
  problem.SetParameterLowerBound(x, 1, 0.5);
  problem.SetParameterUpperBound(x, 1, 5.0);
  problem.SetParameterLowerBound(x, 2, 0.0);
  problem.SetParameterUpperBound(x, 2, 1e3);
  const ceres::Solver::Options so = solver_options(o.max_iterations);
  ceres::Solver::Summary summary;
  ceres::Solve(so, &problem, &summary);
  if (summary.termination_type == ceres::CONVERGENCE) {
    weigh(x);  // the cost reads inv_sigma at every evaluation
    ceres::Solve(so, &problem, &summary);
  }
  f.cost = summary.final_cost;
  f.is_a.value = std::exp(x[0]);
  f.n.value = x[1];
  f.rs_ohm.value = x[2];
  if (summary.termination_type != ceres::CONVERGENCE) {
    f.message = "solver did not converge: " + summary.message;
    return f;
  }
  f.ok = true;
  const std::size_t dof = f.dc_points + f.ac_points - 3;
  double c[9];
  if (dof > 0 && covariance_from_jacobian(cost, x, c)) {
    const double scale = 2.0 * summary.final_cost / static_cast<double>(dof);
    f.reduced_chi2 = scale;
    f.is_a.std_error = f.is_a.value * std::sqrt(c[0] * scale);
    f.n.std_error = std::sqrt(c[4] * scale);
    f.rs_ohm.std_error = std::sqrt(c[8] * scale);
  } else {
    f.message = "covariance not determined";
  }
  return f;
}

SimpleFit fit_ac_only(std::span<const AcPoint> ac, const Fixture& fixture, const JointFitOptions& o) {
  SimpleFit f;
  const double vt = thermal_voltage_v(o.temp_k);
  const double z = cathode_load_ohm(fixture);
  // Weighted normal equations for rd = Rs + n·x, x = Vt/I.
  double s_w = 0, s_x = 0, s_y = 0, s_xx = 0, s_xy = 0;
  std::vector<std::array<double, 3>> rows;  // x, rd, weight
  for (const auto& p : ac) {
    if (!p.usable()) continue;
    const double g = p.vout / p.vin;
    const double rd = z * (1.0 / g - 1.0);
    const double sigma = z / g * o.ac_sigma_db * std::log(10.0) / 20.0;
    const double w = 1.0 / (sigma * sigma), x = vt / p.bias_i_a;
    rows.push_back({x, rd, w});
    s_w += w;
    s_x += w * x;
    s_y += w * rd;
    s_xx += w * x * x;
    s_xy += w * x * rd;
  }
  f.ac_points = rows.size();
  if (rows.size() < 3) {
    f.message = "need at least 3 AC readings for the dynamic-resistance fit";
    return f;
  }
  const double det = s_w * s_xx - s_x * s_x;
  if (!(det > 0) || !std::isfinite(det)) {
    f.message = "the AC readings span too little of 1/I to separate Rs and n";
    return f;
  }
  const double rs = (s_xx * s_y - s_x * s_xy) / det, n = (s_w * s_xy - s_x * s_y) / det;
  double chi2 = 0;
  for (const auto& [x, rd, w] : rows) chi2 += w * (rd - rs - n * x) * (rd - rs - n * x);
  const double scale = chi2 / static_cast<double>(rows.size() - 2);
  f.reduced_chi2 = scale;
  f.cost = 0.5 * chi2;
  f.rs_ohm = {rs, std::sqrt(s_xx / det * scale)};
  f.n = {n, std::sqrt(s_w / det * scale)};
  f.is_a = {std::numeric_limits<double>::quiet_NaN(), std::numeric_limits<double>::quiet_NaN()};
  f.ok = std::isfinite(rs) && std::isfinite(n);
  if (!f.ok) f.message = "the dynamic-resistance fit did not give finite values";
  else if (o.cj_f > 0.0) refine_ac_with_cj(ac, fixture, o, f);
  return f;
}

JointFitReport compare_dc_and_joint(std::span<const IvPoint> dc, std::span<const AcPoint> ac, const Fixture& fixture,
                                    const JointFitOptions& options) {
  JointFitReport r;
  r.dc_only = fit_dc_ac(dc, {}, fixture, options);
  r.ac_only = fit_ac_only(ac, fixture, options);
  JointFitOptions joint_options = options;
  if (r.dc_only.ok && r.dc_only.reduced_chi2 > 1.0) joint_options.dc_sigma_scale *= std::sqrt(r.dc_only.reduced_chi2);
  r.joint = fit_dc_ac(dc, ac, fixture, joint_options);
  r.agree = r.dc_only.ok && r.joint.ok;
  const auto check = [&](const char* name, const Estimate& a, const Estimate& b) {
    const double limit = options.agree_k * std::hypot(a.std_error, b.std_error);
    const double diff = std::abs(a.value - b.value);
    const bool ok = std::isfinite(limit) && diff <= limit;
    r.agree = r.agree && ok;
    char line[200];
    std::snprintf(line, sizeof line, "%s: DC %.6g ± %.3g, joint %.6g ± %.3g, |diff| %.3g %s %.3g (%s)\n", name,
                  a.value, a.std_error, b.value, b.std_error, diff, ok ? "<=" : ">", limit,
                  ok ? "agree" : "DISAGREE");
    r.agreement += line;
  };
  check("is_a", r.dc_only.is_a, r.joint.is_a);
  check("n", r.dc_only.n, r.joint.n);
  check("rs_ohm", r.dc_only.rs_ohm, r.joint.rs_ohm);
  // DC alone against AC alone (independent data).
  const auto versus_ac = [&](const char* name, const Estimate& a, const Estimate& b) {
    const double limit = options.agree_k * std::hypot(a.std_error, b.std_error);
    const double diff = b.value - a.value;
    const bool ok = std::isfinite(limit) && std::abs(diff) <= limit;
    r.agree = r.agree && ok;
    char line[200];
    std::snprintf(line, sizeof line, "%s: DC %.6g ± %.3g, AC alone %.6g ± %.3g, |diff| %.3g %s %.3g (%s)\n", name, a.value,
                  a.std_error, b.value, b.std_error, std::abs(diff), ok ? "<=" : ">", limit, ok ? "agree" : "DISAGREE");
    r.agreement += line;
    return diff > limit;  // AC above DC by more than the limit
  };
  bool ac_rs_higher = false;
  if (r.ac_only.ok) {
    versus_ac("n", r.dc_only.n, r.ac_only.n);
    ac_rs_higher = versus_ac("rs_ohm", r.dc_only.rs_ohm, r.ac_only.rs_ohm);
  }
  const bool consistent = r.joint.reduced_chi2 <= options.max_reduced_chi2;
  r.agree = r.agree && consistent;
  char line[160];
  std::snprintf(line, sizeof line, "joint reduced chi2 %.3g %s %.3g (%s)\n", r.joint.reduced_chi2,
                consistent ? "<=" : ">", options.max_reduced_chi2, consistent ? "consistent" : "DISAGREE: AC and DC data inconsistent");
  r.agreement += line;
  // A junction warmed by its own dissipation at the top of the sweep reads a
  // lower Vf there, which the DC fit takes as a smaller Rs; the AC readings
  // see the dynamic resistance directly (docs/references.md §3, self-heating).
  if (r.dc_only.ok && ac_rs_higher)
    r.hint =
        "the AC readings alone see a larger Rs than the DC curve: typical of self-heating at the top of the DC sweep "
        "(shorter settling or pulsed readings there, or take Rs from the AC readings)";
  return r;
}

std::vector<std::string> screen_ac_readings(std::span<const AcPoint> ac, const Fixture& fx, const AcScreen& screen) {
  const double z_cathode_ohm = cathode_load_ohm(fx);
  std::vector<std::string> why;
  why.reserve(ac.size());
  for (const auto& p : ac) {
    const double signal_peak_a = p.vout * p.peak_per_unit / z_cathode_ohm;
    if (!(p.vout >= screen.floor_v && p.vin >= screen.floor_v)) why.emplace_back("below the level floor");
    else if (!(signal_peak_a <= screen.max_signal_ratio * p.bias_i_a)) why.emplace_back("large signal");
    else why.emplace_back();
  }
  return why;
}

}  // namespace junco::fitting
