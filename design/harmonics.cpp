#include "design/harmonics.hpp"

#include <cmath>
#include <numbers>

namespace junco::fitting {

std::vector<std::complex<double>> harmonic_phasors(std::span<const double> samples, int max_harmonic) {
  const auto n = samples.size();
  std::vector<std::complex<double>> out(static_cast<std::size_t>(max_harmonic) + 1);
  if (n == 0) return out;
  for (int k = 0; k <= max_harmonic; ++k) {
    std::complex<double> acc = 0.0;
    for (std::size_t j = 0; j < n; ++j) {
      const double angle = -2.0 * std::numbers::pi * k * static_cast<double>(j) / static_cast<double>(n);
      acc += samples[j] * std::complex<double>(std::cos(angle), std::sin(angle));
    }
    // Peak amplitude: one-sided spectrum doubles every bin but DC. The sign
    // convention makes a sin() input come out with phase −90°.
    out[static_cast<std::size_t>(k)] = acc * (k == 0 ? 1.0 : 2.0) / static_cast<double>(n);
  }
  return out;
}

double HarmonicSummary::thd_db() const { return 20.0 * std::log10(thd); }

HarmonicSummary summarize_harmonics(const std::vector<std::complex<double>>& phasors) {
  HarmonicSummary s;
  s.dbc.assign(phasors.size(), 0.0);
  if (phasors.size() < 2) return s;
  s.fundamental_peak = std::abs(phasors[1]);
  double sum_sq = 0.0;
  for (std::size_t k = 2; k < phasors.size(); ++k) {
    const double a = std::abs(phasors[k]);
    s.dbc[k] = 20.0 * std::log10(a / s.fundamental_peak);
    sum_sq += a * a;
  }
  s.thd = std::sqrt(sum_sq) / s.fundamental_peak;
  return s;
}

}  // namespace junco::fitting
