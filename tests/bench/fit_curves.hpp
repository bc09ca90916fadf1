// Synthetic forward curves with noise matching the accuracy model, shared by
// the fit benchmarks and the quick efficiency unit test.
#pragma once

#include "fitting/extract.hpp"

#include <array>
#include <cmath>
#include <random>
#include <vector>

namespace junco::fitbench {

namespace jf = junco::fitting;

// Log-spaced true currents from i_lo_a to i_hi_a and their exact voltages.
inline std::vector<jf::IvPoint> clean_curve(const jf::DiodeParams& p, double temp_k, std::size_t count, double i_lo_a,
                                            double i_hi_a) {
  std::vector<jf::IvPoint> pts;
  for (std::size_t k = 0; k < count; ++k) {
    const double i = i_lo_a * std::pow(i_hi_a / i_lo_a, static_cast<double>(k) / static_cast<double>(count - 1));
    pts.push_back({jf::diode_voltage_v(p, i, temp_k), i});
  }
  return pts;
}

// Gaussian noise of the model's standard uncertainty on both readings.
inline std::vector<jf::IvPoint> add_noise(const std::vector<jf::IvPoint>& clean, const jf::AccuracyModel& a,
                                          std::mt19937_64& rng) {
  std::normal_distribution<double> g(0.0, 1.0);
  std::vector<jf::IvPoint> out;
  for (const auto& q : clean)
    out.push_back({q.v + g(rng) * jf::standard_uncertainty_v(a, q.v), q.i_a + g(rng) * jf::standard_uncertainty_i(a, q.i_a)});
  return out;
}

// Cramér–Rao bound on (ln Is, n, Rs): inverse of Jᵀ·W·J with J the model's
// sensitivities at the true currents and W the inverse effective variances.
inline std::array<double, 3> cramer_rao_sd(const jf::DiodeParams& p, const std::vector<jf::IvPoint>& clean,
                                           const jf::AccuracyModel& a, double temp_k) {
  const double vt = jf::thermal_voltage_v(temp_k);
  double f[3][3] = {};
  for (const auto& q : clean) {
    const double x = q.i_a / p.is_a;
    const double j[3] = {-p.n * vt * x / (1.0 + x), vt * std::log1p(x), q.i_a};
    const double s = jf::residual_sigma_v(p, q, a, temp_k);
    for (int r = 0; r < 3; ++r)
      for (int c = 0; c < 3; ++c) f[r][c] += j[r] * j[c] / (s * s);
  }
  // 3×3 inverse by cofactors.
  const double det = f[0][0] * (f[1][1] * f[2][2] - f[1][2] * f[2][1]) - f[0][1] * (f[1][0] * f[2][2] - f[1][2] * f[2][0]) +
                     f[0][2] * (f[1][0] * f[2][1] - f[1][1] * f[2][0]);
  const double c00 = (f[1][1] * f[2][2] - f[1][2] * f[2][1]) / det;
  const double c11 = (f[0][0] * f[2][2] - f[0][2] * f[2][0]) / det;
  const double c22 = (f[0][0] * f[1][1] - f[0][1] * f[1][0]) / det;
  return {std::sqrt(c00), std::sqrt(c11), std::sqrt(c22)};
}

}  // namespace junco::fitbench
