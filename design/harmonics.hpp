// Harmonic amplitudes of one period of a uniformly sampled waveform, by a
// direct DFT evaluated only at the harmonic bins (no FFT: a few bins of a
// few hundred samples is cheaper and needs no power-of-two length).
#pragma once

#include <complex>
#include <span>
#include <vector>

namespace junco::fitting {

// phasors[k] for k = 0..max_harmonic: k = 0 is the mean, k ≥ 1 the peak
// amplitude and phase of the k-th harmonic (x ≈ Σ Re(a_k·e^{jkωt})).
// The samples must cover exactly one period, t_j = j·T/N, j = 0..N−1.
std::vector<std::complex<double>> harmonic_phasors(std::span<const double> samples, int max_harmonic);

struct HarmonicSummary {
  double fundamental_peak = 0.0;
  std::vector<double> dbc;  // dbc[k] for k ≥ 2 (dbc[0], dbc[1] unused, 0)
  double thd = 0.0;         // sqrt(Σ_{k≥2} |a_k|²)/|a_1|, a ratio
  double thd_db() const;
};

HarmonicSummary summarize_harmonics(const std::vector<std::complex<double>>& phasors);

}  // namespace junco::fitting
