// Speed of the fit on 100- and 1000-point curves: median time per fit of
// (a) one weighted solve — the problem handed to SciPy too: same residual,
//     weights and start — and (b) the whole fit_forward (screening, estimate,
//     weight refreshes, covariance, report).
// Writes each curve and the C++ figures into DIR for tests/bench/fit_scipy.py:
//   build/<preset>/bin/bench_fit_speed DIR      (or tests/bench/run_fit_bench.sh)
#include "fitting/fit_estimate.hpp"
#include "fitting/fit_solve.hpp"
#include "tests/bench/fit_curves.hpp"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <string>

using namespace junco;
namespace fs = std::filesystem;

namespace {

template <typename F>
double median_seconds(int reps, F&& f) {
  std::vector<double> t;
  for (int k = 0; k < reps; ++k) {
    const auto start = std::chrono::steady_clock::now();
    f();
    t.push_back(std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count());
  }
  std::nth_element(t.begin(), t.begin() + reps / 2, t.end());
  return t[static_cast<std::size_t>(reps / 2)];
}

struct CurveSpec {
  const char* label;
  fitting::DiodeParams truth;
  std::size_t count;
  double i_lo_a, i_hi_a;
};

}  // namespace

int main(int argc, char** argv) {
  if (argc != 2) {
    std::fprintf(stderr, "usage: bench_fit_speed DIR\n");
    return 2;
  }
  const fs::path dir = argv[1];
  fs::create_directories(dir);
  const double temp_k = 300.15;
  const CurveSpec specs[] = {
      {"signal-100", {2.52e-9, 1.752, 0.568}, 100, 1e-6, 0.1},  {"pin-100", {5e-11, 2.2, 3.5}, 100, 1e-6, 0.05},
      {"e7-100", {1e-9, 1.8, 0.5}, 100, 1e-6, 0.1},             {"signal-1000", {2.52e-9, 1.752, 0.568}, 1000, 1e-6, 0.1},
      {"pin-1000", {5e-11, 2.2, 3.5}, 1000, 1e-6, 0.05},        {"e7-1000", {1e-9, 1.8, 0.5}, 1000, 1e-6, 0.1},
  };
  fitting::FitOptions opt;
  opt.temp_k = temp_k;
  std::mt19937_64 rng(424242);
  nlohmann::json summary = nlohmann::json::array();
  std::printf("%-12s %6s %14s %14s %16s\n", "curve", "points", "solve [us]", "fit_forward [us]", "solve cost");
  for (std::size_t c = 0; c < std::size(specs); ++c) {
    const CurveSpec& s = specs[c];
    const auto pts = fitbench::add_noise(fitbench::clean_curve(s.truth, temp_k, s.count, s.i_lo_a, s.i_hi_a), opt.accuracy, rng);
    // The first pass of fit_forward: σ_V-only regression start, effective-variance weights at that start.
    std::vector<double> sigma(pts.size());
    for (std::size_t k = 0; k < pts.size(); ++k) sigma[k] = fitting::standard_uncertainty_v(opt.accuracy, pts[k].v);
    const auto start = fitting::initial_estimate(pts, sigma, temp_k, false);
    for (std::size_t k = 0; k < pts.size(); ++k) sigma[k] = fitting::residual_sigma_v(start, pts[k], opt.accuracy, temp_k);
    const fitting::WeightedProblem wp{pts, sigma, temp_k, false, fitting::RobustLoss::none, 3.0, 200};
    const auto once = fitting::solve_weighted(wp, start, false);
    const int reps = s.count > 500 ? 300 : 2000;
    const double t_solve = median_seconds(reps, [&] { (void)fitting::solve_weighted(wp, start, false); });
    const double t_full = median_seconds(reps, [&] { (void)fitting::fit_forward(pts, opt); });
    const std::string file = std::string("curve_") + s.label + ".csv";
    std::ofstream out(dir / file);
    out.precision(17);
    out << "v_v,i_a,sigma_v\n";
    for (std::size_t k = 0; k < pts.size(); ++k) out << pts[k].v << "," << pts[k].i_a << "," << sigma[k] << "\n";
    summary.push_back({{"label", s.label},
                       {"file", file},
                       {"points", s.count},
                       {"temp_k", temp_k},
                       {"start", {std::log(start.is_a), start.n, start.rs_ohm}},
                       {"junco_solve_s", t_solve},
                       {"junco_fit_forward_s", t_full},
                       {"junco_cost", once.cost},
                       {"junco_x", {std::log(once.params.is_a), once.params.n, once.params.rs_ohm}},
                       {"junco_status", fitting::to_string(once.status)}});
    std::printf("%-12s %6zu %14.1f %14.1f %16.10g\n", s.label, s.count, t_solve * 1e6, t_full * 1e6, once.cost);
  }
  std::ofstream(dir / "summary.json") << summary.dump(2) << "\n";
  return 0;
}
