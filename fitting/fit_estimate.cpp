#include "fitting/fit_estimate.hpp"

#include "fitting/fit_solve.hpp"

#include <Eigen/Dense>

#include <algorithm>
#include <cmath>
#include <vector>

namespace junco::fitting {

namespace {

struct LineFit {
  double a = 0.0, b = 0.0, rs = 0.0;
  bool ok = false;
};

// Weighted least squares of V on (ln I, 1[, I]) over the points flagged in `use`.
LineFit regress(std::span<const IvPoint> pts, std::span<const double> sigma, const std::vector<bool>& use,
                bool with_rs) {
  const int cols = with_rs ? 3 : 2;
  const auto rows = static_cast<Eigen::Index>(std::count(use.begin(), use.end(), true));
  LineFit fit;
  if (rows < cols + 1) return fit;
  Eigen::MatrixXd a(rows, cols);
  Eigen::VectorXd y(rows);
  Eigen::Index r = 0;
  for (std::size_t k = 0; k < pts.size(); ++k) {
    if (!use[k]) continue;
    const double w = 1.0 / sigma[k];
    a(r, 0) = w * std::log(pts[k].i_a);
    a(r, 1) = w;
    if (with_rs) a(r, 2) = w * pts[k].i_a;
    y(r) = w * pts[k].v;
    ++r;
  }
  // Column scaling keeps ln I and I (which differ by ~1e4) well conditioned.
  const Eigen::VectorXd scale = a.colwise().norm().cwiseMax(1e-300).cwiseInverse();
  const Eigen::VectorXd c = (a * scale.asDiagonal()).colPivHouseholderQr().solve(y).cwiseProduct(scale);
  fit.a = c(0);
  fit.b = c(1);
  fit.rs = with_rs ? c(2) : 0.0;
  fit.ok = std::isfinite(fit.a) && std::isfinite(fit.b) && std::isfinite(fit.rs);
  return fit;
}

double median(std::vector<double> v) {
  if (v.empty()) return 0.0;
  const auto mid = v.begin() + static_cast<std::ptrdiff_t>(v.size() / 2);
  std::nth_element(v.begin(), mid, v.end());
  return *mid;
}

// Keep points whose residual from `fit` is within 4 robust standard deviations.
std::vector<bool> trim(std::span<const IvPoint> pts, std::span<const double> sigma, const LineFit& fit) {
  std::vector<double> z(pts.size());
  for (std::size_t k = 0; k < pts.size(); ++k)
    z[k] = std::abs(pts[k].v - (fit.a * std::log(pts[k].i_a) + fit.b + fit.rs * pts[k].i_a)) / sigma[k];
  const double mad = 1.4826 * median(z);
  std::vector<bool> use(pts.size());
  for (std::size_t k = 0; k < pts.size(); ++k) use[k] = z[k] <= std::max(4.0 * mad, 3.0);
  return use;
}

LineFit fit_line(std::span<const IvPoint> pts, std::span<const double> sigma, const std::vector<bool>& use) {
  LineFit fit = regress(pts, sigma, use, true);
  if (!fit.ok || fit.rs < 0.0) fit = regress(pts, sigma, use, false);
  return fit;
}

}  // namespace

DiodeParams initial_estimate(std::span<const IvPoint> pts, std::span<const double> sigma_v, double temp_k,
                             bool fit_shunt) {
  const double vt = thermal_voltage_v(temp_k);
  std::vector<bool> all(pts.size(), true);
  LineFit fit = fit_line(pts, sigma_v, all);
  if (fit.ok) {
    const std::vector<bool> kept = trim(pts, sigma_v, fit);
    const LineFit refit = fit_line(pts, sigma_v, kept);
    if (refit.ok) fit = refit;
  }
  const double n_lo = fit_n_min + 0.05, n_hi = fit_n_max - 0.05;
  if (!fit.ok || !(fit.a / vt > n_lo && fit.a / vt < n_hi)) {
    // Log-linear region alone: the lower half of the currents, no Rs.
    std::vector<double> currents;
    for (const auto& p : pts) currents.push_back(p.i_a);
    const double i_mid = median(currents);
    std::vector<bool> low(pts.size());
    for (std::size_t k = 0; k < pts.size(); ++k) low[k] = pts[k].i_a <= i_mid;
    fit = regress(pts, sigma_v, low, false);
    if (!fit.ok) fit = {1.5 * vt, 0.0, 0.0, false};
  }
  DiodeParams p;
  p.n = std::clamp(fit.a / vt, n_lo, n_hi);
  const double nvt = p.n * vt;
  p.rs_ohm = std::max(fit.rs, 0.0);
  // ln Is as the median over points of ln I − (V − I·Rs)/(n·Vt), consistent with the clamped n.
  std::vector<double> ln_is;
  for (const auto& q : pts) ln_is.push_back(std::log(q.i_a) - (q.v - q.i_a * p.rs_ohm) / nvt);
  p.is_a = std::exp(std::clamp(median(ln_is), fit_ln_is_min, fit_ln_is_max));
  if (fit_shunt) {
    // I ≥ V/Rsh at every point, so the largest V/I (the bottom of the sweep)
    // bounds Rsh from below; starting ten times above it keeps every
    // junction current positive at the start.
    double r_max = 0.0;
    for (const auto& q : pts) r_max = std::max(r_max, q.v / q.i_a);
    p.rsh_ohm = std::clamp(10.0 * r_max, std::exp(fit_ln_rsh_min), std::exp(fit_ln_rsh_max));
  }
  return p;
}

}  // namespace junco::fitting
