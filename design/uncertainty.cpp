#include "design/uncertainty.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <random>
#include <stdexcept>

namespace junco::fitting {

namespace {
constexpr double nan = std::numeric_limits<double>::quiet_NaN();
}

SymmetricEigen symmetric_eigen(const std::vector<std::vector<double>>& a_in) {
  const std::size_t n = a_in.size();
  if (n > 16) throw std::invalid_argument("symmetric_eigen: at most 16 parameters");
  std::vector<std::vector<double>> a = a_in, v(n, std::vector<double>(n, 0.0));
  for (std::size_t i = 0; i < n; ++i) v[i][i] = 1.0;
  // Cyclic Jacobi: each rotation zeroes one off-diagonal pair; a few sweeps
  // reach round-off for the small matrices here (Golub & Van Loan §8.5).
  for (int sweep = 0; sweep < 50; ++sweep) {
    double off = 0.0, diag = 0.0;
    for (std::size_t i = 0; i < n; ++i) {
      diag += a[i][i] * a[i][i];
      for (std::size_t j = i + 1; j < n; ++j) off += a[i][j] * a[i][j];
    }
    if (off <= 1e-30 * diag || off == 0.0) break;
    for (std::size_t p = 0; p < n; ++p)
      for (std::size_t q = p + 1; q < n; ++q) {
        if (a[p][q] == 0.0) continue;
        const double theta = (a[q][q] - a[p][p]) / (2.0 * a[p][q]);
        const double t = (theta >= 0 ? 1.0 : -1.0) / (std::abs(theta) + std::sqrt(theta * theta + 1.0));
        const double c = 1.0 / std::sqrt(t * t + 1.0), s = t * c;
        for (std::size_t k = 0; k < n; ++k) {  // A ← A·J
          const double akp = a[k][p], akq = a[k][q];
          a[k][p] = c * akp - s * akq;
          a[k][q] = s * akp + c * akq;
        }
        for (std::size_t k = 0; k < n; ++k) {  // A ← Jᵀ·A
          const double apk = a[p][k], aqk = a[q][k];
          a[p][k] = c * apk - s * aqk;
          a[q][k] = s * apk + c * aqk;
        }
        for (std::size_t k = 0; k < n; ++k) {  // V ← V·J
          const double vkp = v[k][p], vkq = v[k][q];
          v[k][p] = c * vkp - s * vkq;
          v[k][q] = s * vkp + c * vkq;
        }
      }
  }
  SymmetricEigen e;
  e.values.resize(n);
  e.vectors.assign(n, std::vector<double>(n));
  for (std::size_t k = 0; k < n; ++k) {
    e.values[k] = a[k][k];
    for (std::size_t i = 0; i < n; ++i) e.vectors[k][i] = v[i][k];
  }
  return e;
}

namespace {

// The principal-axis steps. The axes are those of the correlation matrix R
// (V = D·R·D, D = diag(u)), so that parameters in units twenty decades
// apart (Is in A, N) do not make the decomposition lose the small ones:
// s_k = D·√λ_k·e_k, and Σ_k s_k·s_kᵀ = D·R·D = V as the law needs
// (λ_k ≤ 0: a direction with no spread, skipped).
std::vector<std::vector<double>> principal_steps(const ParameterCovariance& cov) {
  const std::size_t n = cov.matrix.size();
  std::vector<double> u(n);
  for (std::size_t i = 0; i < n; ++i) u[i] = std::sqrt(std::max(0.0, cov.matrix[i][i]));
  std::vector<std::vector<double>> r(n, std::vector<double>(n, 0.0));
  for (std::size_t i = 0; i < n; ++i)
    for (std::size_t j = 0; j < n; ++j) r[i][j] = u[i] > 0 && u[j] > 0 ? cov.matrix[i][j] / (u[i] * u[j]) : 0.0;
  const auto e = symmetric_eigen(r);
  std::vector<std::vector<double>> steps;
  for (std::size_t k = 0; k < e.values.size(); ++k) {
    if (!(e.values[k] > 1e-12)) continue;  // round-off of a singular correlation
    const double sd = std::sqrt(e.values[k]);
    std::vector<double> s(n);
    for (std::size_t i = 0; i < n; ++i) s[i] = u[i] * sd * e.vectors[k][i];
    steps.push_back(std::move(s));
  }
  return steps;
}

}  // namespace

Propagation propagate_gum(const DesignFunction& f, const std::vector<double>& x0, const std::vector<double>& y0,
                          const ParameterCovariance& cov, const std::function<bool(const std::vector<double>&)>& valid) {
  Propagation out;
  out.lines.assign(y0.size(), {});
  std::vector<double> sum_c1(y0.size(), 0.0), sum_c2(y0.size(), 0.0);
  for (const auto& s : principal_steps(cov)) {
    double scale = 1.0;
    std::vector<double> plus(x0.size()), minus(x0.size());
    for (int tries = 0;; ++tries) {
      for (std::size_t i = 0; i < x0.size(); ++i) {
        plus[i] = x0[i] + scale * s[i];
        minus[i] = x0[i] - scale * s[i];
      }
      if (!valid || (valid(plus) && valid(minus))) break;
      if (tries == 4) {
        for (auto& l : out.lines) l.std_error = nan;
        return out;
      }
      scale *= 0.5;
    }
    const auto yp = f(plus), ym = f(minus);
    out.evaluations += 2;
    for (std::size_t j = 0; j < y0.size(); ++j) {
      const double c1 = (yp[j] - ym[j]) / (2.0 * scale);  // the axis' contribution c·s_k
      const double c2 = (yp[j] + ym[j] - 2.0 * y0[j]) / (2.0 * scale * scale);
      sum_c1[j] += c1 * c1;
      sum_c2[j] += c2 * c2;
    }
  }
  for (std::size_t j = 0; j < y0.size(); ++j) {
    auto& l = out.lines[j];
    l.std_error = std::sqrt(sum_c1[j]);  // NaN when any evaluation had none
    l.curvature = std::sqrt(sum_c2[j]);
    l.nonlinear = std::isfinite(l.std_error) && l.curvature > 0.1 * l.std_error;
  }
  return out;
}

std::vector<MonteCarloLine> monte_carlo(const DesignFunction& f, const std::vector<double>& x0, const ParameterCovariance& cov,
                                        long draws, std::uint64_t seed) {
  const auto steps = principal_steps(cov);
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> normal(0.0, 1.0);
  std::vector<MonteCarloLine> lines;
  std::vector<double> sum, sum_sq;  // running mean and Σ(y − mean)² (Welford)
  std::vector<double> x(x0.size());
  for (long d = 0; d < draws; ++d) {
    x = x0;
    for (const auto& s : steps) {
      const double z = normal(rng);
      for (std::size_t i = 0; i < x.size(); ++i) x[i] += z * s[i];
    }
    const auto y = f(x);
    if (lines.empty()) {
      lines.assign(y.size(), {});
      sum.assign(y.size(), 0.0);
      sum_sq.assign(y.size(), 0.0);
    }
    for (std::size_t j = 0; j < y.size() && j < lines.size(); ++j) {
      if (!std::isfinite(y[j])) {
        ++lines[j].missing;
        continue;
      }
      // Welford's update (steady where Σy² − n·ȳ² would cancel: a spread of 1e-5 of the value)
      const double n = static_cast<double>(++lines[j].finite);
      const double delta = y[j] - sum[j];
      sum[j] += delta / n;
      sum_sq[j] += delta * (y[j] - sum[j]);
    }
  }
  for (std::size_t j = 0; j < lines.size(); ++j) {
    const double n = static_cast<double>(lines[j].finite);
    if (n < 2) {
      lines[j].mean = lines[j].std_dev = nan;
      continue;
    }
    lines[j].mean = sum[j];
    lines[j].std_dev = std::sqrt(std::max(0.0, sum_sq[j] / (n - 1.0)));
  }
  return lines;
}

}  // namespace junco::fitting
