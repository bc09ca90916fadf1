#include "fitting/deembed.hpp"

#include <Eigen/Dense>

#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <numbers>

namespace junco::fitting {

using cplx = std::complex<double>;

namespace {
constexpr double two_pi = 2.0 * std::numbers::pi;
}  // namespace

cplx packaged_impedance(cplx z_chip, const PackageParasitics& pkg, double freq_hz) {
  const double w = two_pi * freq_hz;
  const cplx z_series = z_chip + cplx(0.0, w * pkg.ls_h);
  if (!(pkg.cp_f > 0.0)) return z_series;
  return 1.0 / (1.0 / z_series + cplx(0.0, w * pkg.cp_f));
}

cplx chip_impedance_from_packaged(cplx z_packaged, const PackageParasitics& pkg, double freq_hz) {
  const double w = two_pi * freq_hz;
  const cplx y_branch = 1.0 / z_packaged - cplx(0.0, w * pkg.cp_f);
  return 1.0 / y_branch - cplx(0.0, w * pkg.ls_h);
}

cplx slot_impedance_ohm(cplx transfer, double z_load_ohm) { return z_load_ohm * (1.0 / transfer - 1.0); }

cplx deembed_open_short(cplx z_meas, cplx z_open, cplx z_short) {
  const cplx y_open = 1.0 / z_open;
  const cplx z_series = z_short == cplx(0.0, 0.0) ? cplx(0.0, 0.0) : 1.0 / (1.0 / z_short - y_open);
  return 1.0 / (1.0 / z_meas - y_open) - z_series;
}

double reverse_capacitance_f(cplx z_chip, double freq_hz) {
  if (!(z_chip.imag() < 0.0) || !(freq_hz > 0.0)) return std::numeric_limits<double>::quiet_NaN();
  return -1.0 / (two_pi * freq_hz * z_chip.imag());
}

namespace {

// For a trial Cp: the linear least squares of Im(1/(Y − jωCp)) = ω·Ls − b_v/ω
// over all readings (b_v = 1/Cj at bias v). Returns the RMS relative residual;
// fills ls_h.
double residual_at_cp(std::span<const PackagedOffReading> rs, const std::vector<double>& biases, double cp_f, double* ls_h) {
  const std::size_t n = rs.size(), p = 1 + biases.size();
  Eigen::MatrixXd a = Eigen::MatrixXd::Zero(static_cast<Eigen::Index>(n), static_cast<Eigen::Index>(p));
  Eigen::VectorXd y(static_cast<Eigen::Index>(n));
  for (std::size_t k = 0; k < n; ++k) {
    const double w = two_pi * rs[k].freq_hz;
    const double im = (1.0 / (1.0 / rs[k].z_ohm - cplx(0.0, w * cp_f))).imag();
    const double scale = 1.0 / std::max(std::abs(rs[k].z_ohm.imag()), 1e-30);  // relative: every reading weighs alike
    const auto col = static_cast<Eigen::Index>(1 + (std::lower_bound(biases.begin(), biases.end(), rs[k].reverse_v) - biases.begin()));
    const auto row = static_cast<Eigen::Index>(k);
    a(row, 0) = w * scale;
    a(row, col) = -scale / w;
    y(row) = im * scale;
  }
  // Columns differ by ~15 decades (ω·Ls against 1/(ω·Cj)): scale each to
  // unit norm so the QR's rank test does not drop the small ones.
  Eigen::VectorXd norms = a.colwise().norm().transpose();
  for (Eigen::Index c = 0; c < norms.size(); ++c)
    if (norms(c) > 0) a.col(c) /= norms(c);
  Eigen::VectorXd x = a.colPivHouseholderQr().solve(y);
  const double rms = std::sqrt((a * x - y).squaredNorm() / static_cast<double>(n));
  for (Eigen::Index c = 0; c < norms.size(); ++c)
    if (norms(c) > 0) x(c) /= norms(c);
  if (ls_h) *ls_h = x(0);
  return rms;
}

// Covariance of (Cp, Ls) at the fitted package: the Jacobian of the weighted
// residuals r_k = s_k·(Im(1/(Y_k − jωCp)) − ω·Ls + b_v/ω) over (Cp, Ls, b_v)
// (d/dCp of Im(1/(Y − jωCp)) is Im(jω/(Y − jωCp)²)), σ² = Σr²/(N − P),
// cov = σ²·(JᵀJ)⁻¹ (Gauss–Newton, columns scaled to unit norm first).
void package_std_errors(std::span<const PackagedOffReading> rs, const std::vector<double>& biases, PackageFit& f) {
  const std::size_t n = rs.size(), p = 2 + biases.size();
  if (n <= p) return;
  const double cp = f.package.cp_f, ls = f.package.ls_h;
  // b_v at the fitted Cp, Ls: the mean over the bias's readings (the linear
  // solve's own answer, each reading weighted alike).
  std::vector<double> b_sum(biases.size(), 0.0), w_sum(biases.size(), 0.0);
  const auto col_of = [&](double v) { return static_cast<std::size_t>(std::lower_bound(biases.begin(), biases.end(), v) - biases.begin()); };
  Eigen::MatrixXd j = Eigen::MatrixXd::Zero(static_cast<Eigen::Index>(n), static_cast<Eigen::Index>(p));
  std::vector<double> im(n), w(n), s(n);
  for (std::size_t k = 0; k < n; ++k) {
    w[k] = two_pi * rs[k].freq_hz;
    const cplx y = 1.0 / rs[k].z_ohm - cplx(0.0, w[k] * cp);
    im[k] = (1.0 / y).imag();
    s[k] = 1.0 / std::max(std::abs(rs[k].z_ohm.imag()), 1e-30);
    const auto row = static_cast<Eigen::Index>(k);
    j(row, 0) = s[k] * (cplx(0.0, w[k]) / (y * y)).imag();
    j(row, 1) = -s[k] * w[k];
    j(row, static_cast<Eigen::Index>(2 + col_of(rs[k].reverse_v))) = s[k] / w[k];
    // b_v estimate for this reading: (ω·Ls − Im)·ω, weighted by (s/ω)².
    const std::size_t c = col_of(rs[k].reverse_v);
    const double wt = (s[k] / w[k]) * (s[k] / w[k]);
    b_sum[c] += wt * (w[k] * ls - im[k]) * w[k];
    w_sum[c] += wt;
  }
  double ssr = 0.0;
  for (std::size_t k = 0; k < n; ++k) {
    const std::size_t c = col_of(rs[k].reverse_v);
    const double r = s[k] * (im[k] - w[k] * ls + (b_sum[c] / w_sum[c]) / w[k]);
    ssr += r * r;
  }
  Eigen::VectorXd norms = j.colwise().norm().transpose();
  for (Eigen::Index c = 0; c < norms.size(); ++c) {
    if (!(norms(c) > 0)) return;
    j.col(c) /= norms(c);
  }
  const Eigen::MatrixXd jtj = j.transpose() * j;
  Eigen::FullPivLU<Eigen::MatrixXd> lu(jtj);
  if (!lu.isInvertible()) return;
  const Eigen::MatrixXd inv = lu.inverse();
  const double sigma2 = ssr / static_cast<double>(n - p);
  const double var_cp = sigma2 * inv(0, 0) / (norms(0) * norms(0));
  const double var_ls = sigma2 * inv(1, 1) / (norms(1) * norms(1));
  if (!(var_cp >= 0.0) || !(var_ls >= 0.0)) return;
  f.cp_f_std_error = std::sqrt(var_cp);
  f.ls_h_std_error = std::sqrt(var_ls);
  f.ls_cp_correlation = inv(0, 1) / std::sqrt(inv(0, 0) * inv(1, 1));
}

}  // namespace

PackageFit fit_package(std::span<const PackagedOffReading> readings, double cp_max_f) {
  PackageFit f;
  std::map<double, std::vector<double>> freqs_at;
  for (const auto& r : readings) {
    if (!(r.freq_hz > 0.0) || !(r.reverse_v >= 0.0) || !std::isfinite(r.z_ohm.real()) || !std::isfinite(r.z_ohm.imag())) {
      f.message = "a reading with a bad bias, frequency or impedance";
      return f;
    }
    freqs_at[r.reverse_v].push_back(r.freq_hz);
  }
  std::vector<double> biases;
  for (auto& [v, fs] : freqs_at) {
    std::sort(fs.begin(), fs.end());
    if (std::unique(fs.begin(), fs.end()) - fs.begin() >= 2) biases.push_back(v);
  }
  if (biases.size() < 2 || biases.size() != freqs_at.size()) {
    f.message = "needs at least 2 reverse biases, each read at 2 or more frequencies";
    return f;
  }
  // Scan Cp over [0, cp_max], then golden-section around the best cell.
  const int cells = 200;
  double best_cp = 0.0, best = std::numeric_limits<double>::infinity();
  for (int k = 0; k <= cells; ++k) {
    const double cp = cp_max_f * k / cells;
    const double r = residual_at_cp(readings, biases, cp, nullptr);
    if (r < best) best = r, best_cp = cp;
  }
  double lo = std::max(0.0, best_cp - cp_max_f / cells), hi = std::min(cp_max_f, best_cp + cp_max_f / cells);
  const double g = (std::sqrt(5.0) - 1.0) / 2.0;
  double x1 = hi - g * (hi - lo), x2 = lo + g * (hi - lo);
  double f1 = residual_at_cp(readings, biases, x1, nullptr), f2 = residual_at_cp(readings, biases, x2, nullptr);
  for (int it = 0; it < 80 && hi - lo > 1e-19; ++it) {
    if (f1 < f2) {
      hi = x2, x2 = x1, f2 = f1;
      x1 = hi - g * (hi - lo);
      f1 = residual_at_cp(readings, biases, x1, nullptr);
    } else {
      lo = x1, x1 = x2, f1 = f2;
      x2 = lo + g * (hi - lo);
      f2 = residual_at_cp(readings, biases, x2, nullptr);
    }
  }
  f.package.cp_f = 0.5 * (lo + hi);
  f.rms_relative = residual_at_cp(readings, biases, f.package.cp_f, &f.package.ls_h);
  f.ok = f.package.ls_h >= 0.0;
  f.readings_used = readings.size();
  package_std_errors(readings, biases, f);
  f.message = f.ok ? "" : "the readings give a negative Ls: too little frequency span to separate Ls and Cp";
  if (f.ok && f.package.cp_f < 1e-3 * cp_max_f)
    f.message = "Cp at the bottom of its range: none, or not resolved by these frequencies (ω²·Ls·Cj near the noise)";
  if (f.package.cp_f >= cp_max_f * (1 - 1e-6)) {
    f.ok = false;
    f.message = "Cp at the top of its range: no minimum found";
  }
  return f;
}

}  // namespace junco::fitting
