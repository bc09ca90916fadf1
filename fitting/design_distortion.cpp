#include "fitting/design_distortion.hpp"

#include "fitting/junction_charge.hpp"
#include "fitting/transfer.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>

namespace junco::fitting {

namespace {

// The Thévenin loop the diode sees (header comment).
struct Loop {
  DiodeParams with_loop_r;  // the diode with Rth added to Rs
  double r_th_ohm;          // Rg + RL (series) or Rg ∥ RL (shunt)
  double drive_peak_v;      // a: the EMF's share at the diode
  double v_dc;              // drive that gives I with no signal
};

Loop make_loop(const DistortionInput& in) {
  const bool series = in.kind == SwitchKind::series;
  Loop l{in.part, series ? in.rg_ohm + in.rl_ohm : in.rg_ohm * in.rl_ohm / (in.rg_ohm + in.rl_ohm),
         series ? in.source_peak_v : in.source_peak_v * in.rl_ohm / (in.rg_ohm + in.rl_ohm), 0.0};
  l.with_loop_r.rs_ohm += l.r_th_ohm;
  l.v_dc = diode_voltage_v(in.part, in.bias_i_a, in.temp_k) + in.bias_i_a * l.r_th_ohm;
  return l;
}

double phase_of(std::size_t j, std::size_t n) { return 2.0 * std::numbers::pi * static_cast<double>(j) / static_cast<double>(n); }

double mean(const std::vector<double>& x) {
  double s = 0.0;
  for (double v : x) s += v;
  return s / static_cast<double>(x.size());
}

// ---- the resistive solve: exact per sample ---------------------------------

void solve_currents(const DistortionInput& in, const Loop& loop, double u, std::vector<double>& i_a) {
  const auto n = static_cast<std::size_t>(in.samples);
  i_a.resize(n);
  for (std::size_t j = 0; j < n; ++j)
    i_a[j] = diode_current_a(loop.with_loop_r, loop.v_dc + u + loop.drive_peak_v * std::sin(phase_of(j, n)), in.temp_k);
}

// ---- the charge solve: periodic steady state by shooting -------------------

class ChargeSolver {
 public:
  ChargeSolver(const DistortionInput& in, const Loop& loop)
      : in_(in), loop_(loop), r_ohm_(loop.r_th_ohm + in.part.rs_ohm), nvt_(in.part.n * thermal_voltage_v(in.temp_k)),
        omega_(2.0 * std::numbers::pi * in.freq_hz), h_(1.0 / (in.freq_hz * in.samples)) {}

  // One period from junction voltage v0 at t = 0 with offset u: terminal
  // currents at the sample instants (i_a[j] at t_j = j·T/N), the voltage
  // at t = T and d v(T)/d v(0).
  struct Period {
    double v_end, dv_end;
  };
  Period integrate(double v0, double u, std::vector<double>& i_a, double* min_id_a = nullptr) const {
    const auto n = static_cast<std::size_t>(in_.samples);
    i_a.resize(n);
    double v = v0;
    State s = state(v);
    double dq = s.c;  // d q_n / d v0
    if (min_id_a) *min_id_a = s.i;
    for (std::size_t j = 0; j < n; ++j) {
      const double t = static_cast<double>(j) * h_;
      i_a[j] = (emf(t, u) - v) / r_ohm_;
      if (min_id_a) *min_id_a = std::min(*min_id_a, s.i);
      // Stage 1 at t + γh: q(v1) = q_n + hγ·f(t1, v1).
      const double v1 = solve_stage(t + gamma * h_, s.q, u, v);
      const State s1 = state(v1);
      const double k1 = (s1.q - s.q) / (h_ * gamma);
      const double dv1 = dq / stage_slope(s1);
      const double dk1 = (s1.c * dv1 - dq) / (h_ * gamma);
      // Stage 2 at t + h: q(v2) = q_n + h(1−γ)·k1 + hγ·f(t + h, v2); q_{n+1} = q(v2).
      const double rhs = s.q + h_ * (1.0 - gamma) * k1;
      const double v2 = solve_stage(t + h_, rhs, u, v1);
      const State s2 = state(v2);
      const double dv2 = (dq + h_ * (1.0 - gamma) * dk1) / stage_slope(s2);
      dq = s2.c * dv2;
      v = v2;
      s = s2;
    }
    return {v, dq / s.c};  // d v(T)/d v0 = (dq_N/dv0)/C(v_N)
  }

  // Junction voltage of the quasi-static solution at t = 0 (start of shooting).
  double quasi_static_v0(double u) const {
    const double e = emf(0.0, u);
    return e - r_ohm_ * diode_current_a(loop_.with_loop_r, e, in_.temp_k);
  }

 private:
  static constexpr double gamma = 1.0 - 0.70710678118654752;  // Alexander's SDIRK2: γ = 1 − 1/√2

  struct State {
    double q, c, i, g;  // charge, capacitance, junction current, conductance
  };
  State state(double v) const {
    const double e = std::exp(std::min(v / nvt_, 700.0));
    const double i = in_.part.is_a * (e - 1.0), g = in_.part.is_a * e / nvt_;
    const ChargeAt dep = depletion_charge(in_.charge.cap, v);
    return {dep.q_c + in_.charge.tt_s * i, dep.c_f + in_.charge.tt_s * g, i, g};
  }
  double emf(double t, double u) const { return loop_.v_dc + u + loop_.drive_peak_v * std::sin(omega_ * t); }
  double stage_slope(const State& s) const { return s.c + h_ * gamma * (1.0 / r_ohm_ + s.g); }

  // Solves q(v) − rhs − hγ·((E(t) − v)/R − Id(v)) = 0 for v. The left side
  // rises with v and is convex, so Newton converges from above; steps up are
  // limited (the exponential), and a bracket catches any stray step.
  double solve_stage(double t, double rhs, double u, double v) const {
    const double e = emf(t, u);
    double lo = -1e300, hi = 1e300;
    for (int k = 0; k < 100; ++k) {
      const State s = state(v);
      const double g = s.q - rhs - h_ * gamma * ((e - v) / r_ohm_ - s.i);
      if (g > 0) hi = std::min(hi, v);
      else lo = std::max(lo, v);
      double step = -g / stage_slope(s);
      step = std::min(step, 4.0 * nvt_);
      double next = v + step;
      if (next <= lo || next >= hi) next = (lo > -1e300 && hi < 1e300) ? 0.5 * (lo + hi) : next;
      if (std::abs(next - v) <= 1e-13 + 1e-12 * std::abs(v)) return next;
      v = next;
    }
    return v;
  }

  const DistortionInput& in_;
  const Loop& loop_;
  double r_ohm_, nvt_, omega_, h_;
};

// Periodic steady state at offset u, from the guess v0 (updated).
int steady_period(const ChargeSolver& solver, double u, double& v0, std::vector<double>& i_a) {
  int periods = 0;
  for (int k = 0; k < 30; ++k) {
    const auto p = solver.integrate(v0, u, i_a);
    ++periods;
    const double mismatch = p.v_end - v0;
    if (std::abs(mismatch) <= 1e-10) break;
    // Newton on v(T) − v0 = 0; the period map contracts (0 ≤ dv_end < 1).
    v0 -= mismatch / (p.dv_end - 1.0);
  }
  return periods;
}

}  // namespace

DistortionResult solve_distortion(const DistortionInput& in) {
  const Loop loop = make_loop(in);
  std::vector<double> i_a;
  double u = 0.0;
  int periods = 0;
  double min_id_a = 0.0;  // trough of the junction current Id(v)
  if (!in.charge.any() || !(in.freq_hz > 0)) {
    solve_currents(in, loop, u, i_a);
    if (!in.hold_dc_point) {
      // Newton on mean(i(u)) = I; d mean/du = mean(1/(R_loop + rd(i))).
      for (int k = 0; k < 50; ++k) {
        const double err = mean(i_a) - in.bias_i_a;
        double slope = 0.0;
        for (double i : i_a) slope += 1.0 / (loop.r_th_ohm + dynamic_resistance_ohm(in.part, i, in.temp_k));
        slope /= static_cast<double>(i_a.size());
        u -= err / slope;
        solve_currents(in, loop, u, i_a);
        if (std::abs(err) <= 1e-12 * in.bias_i_a) break;
      }
    }
    min_id_a = *std::min_element(i_a.begin(), i_a.end());  // no stored charge: Id is the terminal current
  } else {
    const ChargeSolver solver(in, loop);
    double v0 = solver.quasi_static_v0(u);
    periods += steady_period(solver, u, v0, i_a);
    if (!in.hold_dc_point) {
      // mean(i(u)) = I by a secant, started with the quasi-static slope
      // mean(1/(R_loop + rd(i))); stored charge carries no DC, so the mean
      // current is the junction's and the slope is close.
      double slope = 0.0;
      for (double i : i_a) slope += 1.0 / (loop.r_th_ohm + dynamic_resistance_ohm(in.part, std::max(i, 0.0), in.temp_k));
      slope /= static_cast<double>(i_a.size());
      double err = mean(i_a) - in.bias_i_a;
      for (int k = 0; k < 40 && std::abs(err) > 1e-10 * in.bias_i_a; ++k) {
        const double du = -err / slope;
        u += du;
        periods += steady_period(solver, u, v0, i_a);
        const double next = mean(i_a) - in.bias_i_a;
        if (next != err) slope = (next - err) / du;
        err = next;
      }
    }
    solver.integrate(v0, u, i_a, &min_id_a);  // the converged period once more, for the junction's trough
    ++periods;
  }
  DistortionResult r;
  r.block_offset_v = u;
  r.min_junction_current_a = min_id_a;
  r.periods = periods;
  r.mean_current_a = mean(i_a);
  const auto [lo, hi] = std::minmax_element(i_a.begin(), i_a.end());
  r.min_current_a = *lo;
  r.max_current_a = *hi;
  r.load_v.resize(i_a.size());
  const bool series = in.kind == SwitchKind::series;
  for (std::size_t j = 0; j < i_a.size(); ++j) {
    const double di = i_a[j] - r.mean_current_a;
    r.load_v[j] = series ? di * in.rl_ohm : loop.drive_peak_v * std::sin(phase_of(j, i_a.size())) - loop.r_th_ohm * di;
  }
  r.load = summarize_harmonics(harmonic_phasors(r.load_v, in.harmonics));
  r.load_peak_v = r.load.fundamental_peak;
  return r;
}

std::optional<double> bias_for_thd_a(DistortionInput in, double target_thd, std::string* why) {
  // f(x) = ln THD(e^x) − ln target, x = ln I: nearly straight (THD ~ I^−k).
  const auto f = [&](double x) {
    in.bias_i_a = std::exp(x);
    return std::log(solve_distortion(in).load.thd) - std::log(target_thd);
  };
  double lo = std::log(1e-6), hi = std::log(1.0);
  double f_hi = f(hi);
  if (f_hi > 0) {
    if (why) *why = "even 1 A of bias leaves THD above the target (Rs-dominated or amplitude too high)";
    return std::nullopt;
  }
  double f_lo = f(lo);
  if (f_lo <= 0) return std::exp(lo);
  // Illinois: regula falsi that halves the stale end's value, so the bracket
  // shrinks from both sides; stop at 1e-4 of I.
  int stale = 0;
  for (int k = 0; k < 100 && hi - lo > 1e-4; ++k) {
    double x = hi - f_hi * (hi - lo) / (f_hi - f_lo);
    if (!(x > lo && x < hi)) x = 0.5 * (lo + hi);
    const double fx = f(x);
    if (fx <= 0) {
      hi = x;
      f_hi = fx;
      if (stale == -1) f_lo *= 0.5;
      stale = -1;
    } else {
      lo = x;
      f_lo = fx;
      if (stale == 1) f_hi *= 0.5;
      stale = 1;
    }
  }
  return std::exp(hi);
}

}  // namespace junco::fitting
