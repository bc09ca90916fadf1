#include "fitting/design_distortion.hpp"

#include "fitting/transfer.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>

namespace junco::fitting {

namespace {

struct Loop {
  DiodeParams with_loop_r;  // the diode with Rg + RL added to Rs
  double r_loop_ohm;
  double v_dc;              // drive that gives I with no signal
};

Loop make_loop(const DistortionInput& in) {
  Loop l{in.part, in.rg_ohm + in.rl_ohm, 0.0};
  l.with_loop_r.rs_ohm += l.r_loop_ohm;
  l.v_dc = diode_voltage_v(in.part, in.bias_i_a, in.temp_k) + in.bias_i_a * l.r_loop_ohm;
  return l;
}

void solve_currents(const DistortionInput& in, const Loop& loop, double u, std::vector<double>& i_a) {
  const auto n = static_cast<std::size_t>(in.samples);
  i_a.resize(n);
  for (std::size_t j = 0; j < n; ++j) {
    const double phase = 2.0 * std::numbers::pi * static_cast<double>(j) / static_cast<double>(n);
    i_a[j] = diode_current_a(loop.with_loop_r, loop.v_dc + u + in.source_peak_v * std::sin(phase), in.temp_k);
  }
}

double mean(const std::vector<double>& x) {
  double s = 0.0;
  for (double v : x) s += v;
  return s / static_cast<double>(x.size());
}

}  // namespace

DistortionResult solve_distortion(const DistortionInput& in) {
  const Loop loop = make_loop(in);
  std::vector<double> i_a;
  double u = 0.0;
  solve_currents(in, loop, u, i_a);
  if (!in.hold_dc_point) {
    // Newton on mean(i(u)) = I; d mean/du = mean(1/(R_loop + rd(i))).
    for (int k = 0; k < 50; ++k) {
      const double err = mean(i_a) - in.bias_i_a;
      double slope = 0.0;
      for (double i : i_a) slope += 1.0 / (loop.r_loop_ohm + dynamic_resistance_ohm(in.part, i, in.temp_k));
      slope /= static_cast<double>(i_a.size());
      const double step = err / slope;
      u -= step;
      solve_currents(in, loop, u, i_a);
      if (std::abs(err) <= 1e-12 * in.bias_i_a) break;
    }
  }
  DistortionResult r;
  r.block_offset_v = u;
  r.mean_current_a = mean(i_a);
  const auto [lo, hi] = std::minmax_element(i_a.begin(), i_a.end());
  r.min_current_a = *lo;
  r.max_current_a = *hi;
  r.load_v.resize(i_a.size());
  for (std::size_t j = 0; j < i_a.size(); ++j) r.load_v[j] = (i_a[j] - r.mean_current_a) * in.rl_ohm;
  r.load = summarize_harmonics(harmonic_phasors(r.load_v, in.harmonics));
  r.load_peak_v = r.load.fundamental_peak;
  return r;
}

std::optional<double> bias_for_thd_a(DistortionInput in, double target_thd, std::string* why) {
  const auto thd = [&](double i) {
    in.bias_i_a = i;
    return solve_distortion(in).load.thd;
  };
  double lo = 1e-6, hi = 1.0;
  if (thd(hi) > target_thd) {
    if (why) *why = "even 1 A of bias leaves THD above the target (Rs-dominated or amplitude too high)";
    return std::nullopt;
  }
  if (thd(lo) <= target_thd) return lo;
  // THD falls with bias over this range; 60 halvings of the log interval
  // pin the answer far below any meaningful precision.
  for (int k = 0; k < 60; ++k) {
    const double mid = std::sqrt(lo * hi);
    (thd(mid) <= target_thd ? hi : lo) = mid;
  }
  return hi;
}

}  // namespace junco::fitting
