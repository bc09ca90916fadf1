// Statistical efficiency of fit_forward: RMS error of each parameter over many
// noisy replicas of a known curve, against the Cramér–Rao bound from the
// Jacobian and the noise model. Target: ratio ≤ 1.2 for every parameter.
//   build/<preset>/bin/bench_fit_efficiency [replicas] [points]
#include "tests/bench/fit_curves.hpp"

#include <cstdio>
#include <cstdlib>

using namespace junco;

int main(int argc, char** argv) {
  const int replicas = argc > 1 ? std::atoi(argv[1]) : 1000;
  const std::size_t count = argc > 2 ? static_cast<std::size_t>(std::atoi(argv[2])) : 40;
  const double temp_k = 300.0;
  // docs/references.md E7 parameter set, swept 1 µA … 100 mA.
  const fitting::DiodeParams truth{1e-9, 1.8, 0.5};
  fitting::FitOptions opt;
  opt.temp_k = temp_k;
  const auto clean = fitbench::clean_curve(truth, temp_k, count, 1e-6, 0.1);
  const auto crb = fitbench::cramer_rao_sd(truth, clean, opt.accuracy, temp_k);
  std::mt19937_64 rng(20240611);
  double se[3] = {}, chi2 = 0.0;
  int used = 0;
  for (int r = 0; r < replicas; ++r) {
    const auto noisy = fitbench::add_noise(clean, opt.accuracy, rng);
    const auto fit = fitting::fit_forward(noisy, opt);
    if (!fit.usable()) continue;
    const double e[3] = {std::log(fit.is_a.value / truth.is_a), fit.n.value - truth.n, fit.rs_ohm.value - truth.rs_ohm};
    for (int k = 0; k < 3; ++k) se[k] += e[k] * e[k];
    chi2 += fit.reduced_chi2;
    ++used;
  }
  std::printf("replicas %d (converged %d), %zu points 1 uA..100 mA, IS=1e-9 N=1.8 RS=0.5 at 300 K\n", replicas, used,
              count);
  std::printf("mean reduced chi2 %.4f (1 expected)\n", chi2 / used);
  std::printf("%-8s %14s %14s %8s\n", "param", "rms error", "CRB sd", "ratio");
  const char* names[3] = {"ln Is", "n", "Rs ohm"};
  double worst = 0.0;
  for (int k = 0; k < 3; ++k) {
    const double rms = std::sqrt(se[k] / used);
    worst = std::max(worst, rms / crb[static_cast<std::size_t>(k)]);
    std::printf("%-8s %14.6g %14.6g %8.4f\n", names[k], rms, crb[static_cast<std::size_t>(k)],
                rms / crb[static_cast<std::size_t>(k)]);
  }
  std::printf("worst ratio %.4f (target <= 1.2): %s\n", worst, worst <= 1.2 ? "met" : "NOT met");
  return worst <= 1.2 ? 0 : 1;
}
