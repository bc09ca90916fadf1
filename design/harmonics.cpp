#include "design/harmonics.hpp"

#include <cmath>
#include <numbers>

namespace junco::fitting {

std::vector<std::complex<double>> harmonic_phasors(std::span<const double> samples, int max_harmonic) {
  const auto n = samples.size();
  std::vector<std::complex<double>> out(static_cast<std::size_t>(max_harmonic) + 1);
  if (n == 0) return out;
  // One table of e^{−j2πm/N}, m = 0..N−1, indexed by k·j mod N: N sin/cos
  // pairs instead of N per harmonic (the distortion search runs this dozens
  // of times per answer).
  std::vector<std::complex<double>> twiddle(n);
  for (std::size_t m = 0; m < n; ++m) {
    const double angle = -2.0 * std::numbers::pi * static_cast<double>(m) / static_cast<double>(n);
    twiddle[m] = {std::cos(angle), std::sin(angle)};
  }
  for (int k = 0; k <= max_harmonic; ++k) {
    std::complex<double> acc = 0.0;
    std::size_t m = 0;  // k·j mod n
    for (std::size_t j = 0; j < n; ++j) {
      acc += samples[j] * twiddle[m];
      m += static_cast<std::size_t>(k);
      while (m >= n) m -= n;
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
