// fit_dc_ac gives the same results as its former implementation (commit
// 3e5e99b: a Ceres residual block per reading, derivatives by automatic
// differentiation, ceres::Covariance with DENSE_SVD), written out again below
// as the reference. This is an equivalence check of a speed change, not of
// correctness (the fit against generating parameters: design_joint_lot_test,
// heating_options_test). Figures in docs/fitting.md, "Timing".
#include "fitting/extract.hpp"
#include "fitting/joint_fit.hpp"

#include <ceres/ceres.h>  // before Catch2: glog's CHECK would replace Catch2's (and abort)
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <random>
#include <vector>

using namespace junco::fitting;

namespace {

struct RefDcCost {
  double v, i_a, nvt_t, inv_sigma;
  template <typename T>
  bool operator()(const T* const x, T* r) const {
    const T model = T(i_a) * x[2] + x[1] * T(nvt_t) * log(T(1.0) + T(i_a) / exp(x[0]));
    r[0] = (model - T(v)) * T(inv_sigma);
    return true;
  }
};

struct RefAcCost {
  double bias_i_a, measured_db, vt, omega_cj, z_load, inv_sigma;
  template <typename T>
  bool operator()(const T* const x, T* r) const {
    const T rj = x[1] * T(vt) / (T(bias_i_a) + exp(x[0]));
    r[0] = (fixture_gain_db_of(rj, x[2], omega_cj, z_load) - T(measured_db)) * T(inv_sigma);
    return true;
  }
};

void ref_initial_estimate(std::span<const IvPoint> dc, double vt, double x[3]) {
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

// The former fit_dc_ac, step for step.
SimpleFit reference_fit_dc_ac(std::span<const IvPoint> dc, std::span<const AcPoint> ac, const Fixture& fixture,
                              const JointFitOptions& o) {
  SimpleFit f;
  FitOptions screen;
  screen.accuracy = o.accuracy;
  const double floor_a = effective_noise_floor_a(screen);
  std::vector<IvPoint> fwd;
  for (const auto& p : dc)
    if (p.i_a >= floor_a && p.v > 0.0 && std::isfinite(p.v)) fwd.push_back(p);
  if (fwd.size() < 4) return f;
  const double vt = thermal_voltage_v(o.temp_k);
  double x[3];
  ref_initial_estimate(fwd, vt, x);
  std::vector<double> inv_sigma(fwd.size());
  const auto weigh = [&](const double* at) {
    const DiodeParams p{std::exp(at[0]), at[1], at[2]};
    for (std::size_t k = 0; k < fwd.size(); ++k)
      inv_sigma[k] = 1.0 / (o.dc_sigma_scale * residual_sigma_v(p, fwd[k], o.accuracy, o.temp_k));
  };
  weigh(x);
  ceres::Problem problem;
  std::vector<RefDcCost*> dc_costs;
  for (std::size_t k = 0; k < fwd.size(); ++k) {
    auto* cost = new RefDcCost{fwd[k].v, fwd[k].i_a, vt, inv_sigma[k]};
    dc_costs.push_back(cost);
    problem.AddResidualBlock(new ceres::AutoDiffCostFunction<RefDcCost, 1, 3>(cost), nullptr, x);
  }
  const double z_load = cathode_load_ohm(fixture);
  for (const auto& p : ac) {
    if (!p.usable()) continue;
    problem.AddResidualBlock(new ceres::AutoDiffCostFunction<RefAcCost, 1, 3>(new RefAcCost{
                                 p.bias_i_a, 20.0 * std::log10(p.vout / p.vin), vt,
                                 2.0 * std::numbers::pi * p.freq_hz * o.cj_f, z_load, 1.0 / o.ac_sigma_db}),
                             nullptr, x);
    ++f.ac_points;
  }
  f.dc_points = fwd.size();
  problem.SetParameterLowerBound(x, 1, 0.5);
  problem.SetParameterUpperBound(x, 1, 5.0);
  problem.SetParameterLowerBound(x, 2, 0.0);
  problem.SetParameterUpperBound(x, 2, 1e3);
  ceres::Solver::Options so;  // fitting/fit_solve.cpp, solver_options()
  so.linear_solver_type = ceres::DENSE_NORMAL_CHOLESKY;
  so.max_num_line_search_step_size_iterations = 0;
  so.trust_region_strategy_type = ceres::LEVENBERG_MARQUARDT;
  so.max_num_iterations = o.max_iterations;
  so.function_tolerance = 1e-12;
  so.parameter_tolerance = 1e-12;
  so.gradient_tolerance = 1e-14;
  so.num_threads = 1;
  so.logging_type = ceres::SILENT;
  ceres::Solver::Summary summary;
  ceres::Solve(so, &problem, &summary);
  if (summary.termination_type == ceres::CONVERGENCE) {
    weigh(x);
    for (std::size_t k = 0; k < fwd.size(); ++k) dc_costs[k]->inv_sigma = inv_sigma[k];
    ceres::Solve(so, &problem, &summary);
  }
  f.cost = summary.final_cost;
  f.is_a.value = std::exp(x[0]);
  f.n.value = x[1];
  f.rs_ohm.value = x[2];
  if (summary.termination_type != ceres::CONVERGENCE) return f;
  f.ok = true;
  ceres::Covariance::Options co;
  co.algorithm_type = ceres::DENSE_SVD;
  ceres::Covariance cov(co);
  std::vector<std::pair<const double*, const double*>> blocks{{x, x}};
  const std::size_t dof = f.dc_points + f.ac_points - 3;
  if (dof > 0 && cov.Compute(blocks, &problem)) {
    double c[9];
    cov.GetCovarianceBlock(x, x, c);
    const double scale = 2.0 * summary.final_cost / static_cast<double>(dof);
    f.reduced_chi2 = scale;
    f.is_a.std_error = f.is_a.value * std::sqrt(c[0] * scale);
    f.n.std_error = std::sqrt(c[4] * scale);
    f.rs_ohm.std_error = std::sqrt(c[8] * scale);
  }
  return f;
}

struct Part {
  std::vector<IvPoint> dc;
  std::vector<AcPoint> ac;
  Fixture fixture;
  JointFitOptions options;
};

// Parts spread like a lot and beyond: Is 1e-11..1e-7 A, n 1.0..2.2, Rs 0..3 Ω
// (some at the Rs = 0 bound), with and without Cj, a DC-return shunt, AC
// readings or none, DC noise of the accuracy model scaled 0.5..3×.
Part make_part(std::mt19937_64& rng) {
  std::uniform_real_distribution<double> u(0.0, 1.0);
  std::normal_distribution<double> g(0.0, 1.0);
  Part part;
  const DiodeParams truth{1e-11 * std::pow(1e4, u(rng)), 1.0 + 1.2 * u(rng), u(rng) < 0.15 ? 0.0 : 3.0 * u(rng)};
  const double ta = 300.15, noise = 0.5 + 2.5 * u(rng);
  if (u(rng) < 0.3) part.fixture.dc_return_ohm = 100.0 + 900.0 * u(rng);
  part.options.cj_f = u(rng) < 0.5 ? 0.0 : 1e-12 * (0.5 + 5.0 * u(rng));
  part.options.ac_sigma_db = 0.005 + 0.02 * u(rng);
  part.options.dc_sigma_scale = u(rng) < 0.3 ? 1.0 + 2.0 * u(rng) : 1.0;
  const AccuracyModel acc = part.options.accuracy;
  const int dc_count = 20 + static_cast<int>(60 * u(rng));
  for (int k = 0; k < dc_count; ++k) {
    const double i = 1e-6 * std::pow(5e4, k / (dc_count - 1.0));
    const double v = diode_voltage_v(truth, i, ta);
    part.dc.push_back({v + noise * g(rng) * standard_uncertainty_v(acc, v), i + noise * g(rng) * standard_uncertainty_i(acc, i)});
  }
  const int ac_count = u(rng) < 0.2 ? 0 : 5 + static_cast<int>(50 * u(rng));
  const double freq_hz = 1e6 * std::pow(100.0, u(rng));
  for (int k = 0; k < ac_count; ++k) {
    const double i = 5e-4 * std::pow(100.0, k / std::max(1.0, ac_count - 1.0));
    const double db = to_db(fixture_gain(part.fixture, diode_on_impedance({truth, part.options.cj_f}, i, freq_hz, ta))) +
                      part.options.ac_sigma_db * g(rng);
    AcPoint p;
    p.bias_i_a = i;
    p.freq_hz = freq_hz;
    p.vin = 0.05;
    p.vout = 0.05 * std::pow(10.0, db / 20.0);
    part.ac.push_back(p);
  }
  return part;
}

double relative(double a, double b) {
  if (a == b) return 0.0;  // also both infinite
  return std::abs(a - b) / std::max(std::abs(a), std::abs(b));
}

}  // namespace

TEST_CASE("fit_dc_ac: the same values, standard errors and chi2 as its former implementation") {
  std::mt19937_64 rng(20261203);
  double worst = 0.0;
  int fitted = 0, at_rs_bound = 0;
  for (int k = 0; k < 300; ++k) {
    const Part part = make_part(rng);
    const SimpleFit ref = reference_fit_dc_ac(part.dc, part.ac, part.fixture, part.options);
    const SimpleFit now = fit_dc_ac(part.dc, part.ac, part.fixture, part.options);
    INFO("part " << k << ": ref is " << ref.is_a.value << " n " << ref.n.value << " rs " << ref.rs_ohm.value
                 << ", now is " << now.is_a.value << " n " << now.n.value << " rs " << now.rs_ohm.value);
    REQUIRE(now.ok == ref.ok);
    REQUIRE(now.dc_points == ref.dc_points);
    REQUIRE(now.ac_points == ref.ac_points);
    if (!ref.ok) continue;
    ++fitted;
    if (ref.rs_ohm.value == 0.0) ++at_rs_bound;
    for (const auto& [a, b] : {std::pair{now.is_a.value, ref.is_a.value}, std::pair{now.n.value, ref.n.value},
                               std::pair{now.cost, ref.cost}, std::pair{now.reduced_chi2, ref.reduced_chi2},
                               std::pair{now.is_a.std_error, ref.is_a.std_error},
                               std::pair{now.n.std_error, ref.n.std_error},
                               std::pair{now.rs_ohm.std_error, ref.rs_ohm.std_error}})
      worst = std::max(worst, relative(a, b));
    // Rs may sit at its bound 0: compare it against its standard error there.
    worst = std::max(worst, std::abs(now.rs_ohm.value - ref.rs_ohm.value) /
                                std::max(std::abs(ref.rs_ohm.value), ref.rs_ohm.std_error));
  }
  INFO(fitted << " parts fitted, " << at_rs_bound << " with Rs at its bound 0; worst relative difference " << worst);
  CHECK(fitted > 250);
  CHECK(worst <= 1e-12);
  WARN("fit_dc_ac against its former implementation: " << fitted << " parts, worst relative difference " << worst);
}
