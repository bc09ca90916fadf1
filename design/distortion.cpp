#include "design/distortion.hpp"

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
  Loop l{in.part, series ? in.source_ohm + in.load_ohm : in.source_ohm * in.load_ohm / (in.source_ohm + in.load_ohm),
         series ? in.source_peak_v : in.source_peak_v * in.load_ohm / (in.source_ohm + in.load_ohm), 0.0};
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
  // currents at the sample instants (i_a[j] at t_j = j·T/N), the voltage at
  // t = T, and the derivatives of v(T) and of the mean current with respect
  // to v0 and u (carried along the steps, for the Newton of the caller).
  struct Period {
    double v_end = 0.0, dv_end_dv0 = 0.0, dv_end_du = 0.0;
    double mean_i_a = 0.0, dmean_dv0 = 0.0, dmean_du = 0.0;
  };
  Period integrate(double v0, double u, std::vector<double>& i_a, double* min_id_a = nullptr) const {
    const auto n = static_cast<std::size_t>(in_.samples);
    i_a.resize(n);
    double v = v0, v_prev = v0;
    State s = state(v);
    double dq0 = s.c, dqu = 0.0;        // d q_n / d v0, d q_n / d u
    double sum_dv0 = 0.0, sum_dvu = 0.0, sum_i = 0.0;  // Σ d v_j/d v0, Σ d v_j/d u, Σ i_j
    const double hg = h_ * gamma, b1 = h_ * (1.0 - gamma), hg_r = hg / r_ohm_;
    if (min_id_a) *min_id_a = s.i;
    for (std::size_t j = 0; j < n; ++j) {
      const double t = static_cast<double>(j) * h_;
      i_a[j] = (emf(t, u) - v) / r_ohm_;
      sum_i += i_a[j];
      sum_dv0 += dq0 / s.c;
      sum_dvu += dqu / s.c;
      if (min_id_a) *min_id_a = std::min(*min_id_a, s.i);
      // Stage 1 at t + γh: q(v1) = q_n + hγ·f(t1, v1); guess: the last step's slope.
      const double v1 = solve_stage(t + hg, s.q, u, v + gamma * (v - v_prev));
      const State s1 = state(v1);
      const double k1 = (s1.q - s.q) / hg;
      const double slope1 = stage_slope(s1);
      const double dv1_0 = dq0 / slope1, dv1_u = (dqu + hg_r) / slope1;
      const double dk1_0 = (s1.c * dv1_0 - dq0) / hg, dk1_u = (s1.c * dv1_u - dqu) / hg;
      // Stage 2 at t + h: q(v2) = q_n + h(1−γ)·k1 + hγ·f(t + h, v2); q_{n+1} = q(v2).
      const double v2 = solve_stage(t + h_, s.q + b1 * k1, u, v1 + (v1 - v) * (1.0 - gamma) / gamma);
      const State s2 = state(v2);
      const double slope2 = stage_slope(s2);
      dq0 = s2.c * (dq0 + b1 * dk1_0) / slope2;
      dqu = s2.c * (dqu + b1 * dk1_u + hg_r) / slope2;
      v_prev = v;
      v = v2;
      s = s2;
    }
    const double nn = static_cast<double>(n);
    Period p;
    p.v_end = v;
    p.dv_end_dv0 = dq0 / s.c;  // d v(T)/d v0 = (d q_N/d v0)/C(v_N)
    p.dv_end_du = dqu / s.c;
    p.mean_i_a = sum_i / nn;
    p.dmean_dv0 = -sum_dv0 / nn / r_ohm_;
    p.dmean_du = (1.0 - sum_dvu / nn) / r_ohm_;
    return p;
  }

  double loop_ohm() const { return r_ohm_; }

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
  // rises with v and is convex, so Newton converges from above; a step up is
  // made logarithmic (so it cannot land far up the exponential, from where
  // Newton comes down only about N·Vt per iteration), and a bracket catches
  // any stray step.
  double solve_stage(double t, double rhs, double u, double v) const {
    const double e = emf(t, u);
    double lo = -1e300, hi = 1e300;
    for (int k = 0; k < 100; ++k) {
      const State s = state(v);
      const double g = s.q - rhs - h_ * gamma * ((e - v) / r_ohm_ - s.i);
      if (g > 0) hi = std::min(hi, v);
      else lo = std::max(lo, v);
      double step = -g / stage_slope(s);
      if (step > 2.0 * nvt_) step = nvt_ * std::log1p(step / nvt_);  // SPICE's pn-junction step limit: logarithmic above 2·N·Vt
      // Converged first: at round-off level g's sign (and so the bracket) means nothing.
      if (std::abs(step) <= 1e-11) return v + step;  // volts: far below any harmonic of interest
      double next = v + step;
      if (!(next > lo && next < hi) && lo > -1e300 && hi < 1e300) next = 0.5 * (lo + hi);
      v = next;
    }
    return v;
  }

  const DistortionInput& in_;
  const Loop& loop_;
  double r_ohm_, nvt_, omega_, h_;
};

// Periodic steady state by Newton on the period map: v(T) = v0 and, unless
// the blocks are held at the operating point, mean current = I (unknown u).
// v0 and u are the start (updated); returns the periods integrated.
int steady_state(const ChargeSolver& solver, bool hold_dc_point, double bias_i_a, double& v0, double& u,
                 std::vector<double>& i_a, double* min_id_a) {
  int periods = 0;
  double last_v0 = v0, last_u = u;  // the last start whose period was finite
  double step_v0 = 0.0, step_u = 0.0;
  for (int k = 0; k < 60; ++k) {
    const auto p = solver.integrate(v0, u, i_a, min_id_a);
    ++periods;
    const double r1 = p.v_end - v0, r2 = p.mean_i_a - bias_i_a;
    if (!std::isfinite(r1) || !std::isfinite(r2) || !std::isfinite(p.dv_end_dv0)) {
      // A step too far for the exponential: go back half way.
      step_v0 *= 0.5;
      step_u *= 0.5;
      v0 = last_v0 + step_v0;
      u = last_u + step_u;
      continue;
    }
    // Both in volts (the mean current's error across the loop resistance):
    // 1 nV is far below any harmonic of interest and above the stages' 10 pV.
    if (std::abs(r1) <= 1e-9 && (hold_dc_point || std::abs(r2) * solver.loop_ohm() <= 1e-9)) break;
    // First the periodic start alone (u held): the period map contracts
    // (0 ≤ dv_end < 1), so this Newton is safe from any start; only near a
    // periodic solution is the joint step with u taken, whose Jacobian
    // degenerates far from it (a start in deep forward bias, where the
    // stored charge outlasts many periods).
    if (hold_dc_point || std::abs(r1) > 1e-4) {
      step_v0 = -r1 / (p.dv_end_dv0 - 1.0);
      step_u = 0.0;
    } else {
      // [dvT/dv0 − 1, dvT/du; dī/dv0, dī/du]·[δv0, δu] = −[r1, r2]
      const double a = p.dv_end_dv0 - 1.0, b = p.dv_end_du, c = p.dmean_dv0, d = p.dmean_du;
      const double det = a * d - b * c;
      step_v0 = (-r1 * d + b * r2) / det;
      step_u = (-a * r2 + c * r1) / det;
    }
    // At most 50 mV per iteration in either: the junction is exponential,
    // and a far start (a large drive at a small bias) can throw Newton off.
    const double scale = std::min(1.0, 0.05 / std::max(std::abs(step_v0), std::abs(step_u)));
    step_v0 *= scale;
    step_u *= scale;
    last_v0 = v0;
    last_u = u;
    v0 += step_v0;
    u += step_u;
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
  double start_offset_v = 0.0;
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
    const bool warm = std::isfinite(in.start_u) && std::isfinite(in.start_offset_v);
    if (warm && !in.hold_dc_point) u = in.start_u;
    double v0 = solver.quasi_static_v0(u) + (warm ? in.start_offset_v : 0.0);
    periods = steady_state(solver, in.hold_dc_point, in.bias_i_a, v0, u, i_a, &min_id_a);
    start_offset_v = v0 - solver.quasi_static_v0(u);
  }
  DistortionResult r;
  r.block_offset_v = u;
  r.start_offset_v = start_offset_v;
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
    r.load_v[j] = series ? di * in.load_ohm : loop.drive_peak_v * std::sin(phase_of(j, i_a.size())) - loop.r_th_ohm * di;
  }
  r.load = summarize_harmonics(harmonic_phasors(r.load_v, in.harmonics));
  r.load_peak_v = r.load.fundamental_peak;
  return r;
}

std::optional<double> bias_for_thd_a(DistortionInput in, double target_thd, std::string* why) {
  const auto r = solve_bias_for_thd(std::move(in), target_thd, why);
  if (!r) return std::nullopt;
  return r->bias_a;
}

namespace {

// The search's function f(x) = ln THD(e^x) − ln target, x = ln I: nearly
// straight (THD ~ I^−k) above the bias where the diode starts to clip. Keeps
// the last solution to start the next solve from when it is near.
class ThdCrossing {
 public:
  ThdCrossing(DistortionInput in, double target_thd) : in_(std::move(in)), log_target_(std::log(target_thd)) {}
  double operator()(double x) {
    in_.bias_i_a = std::exp(x);
    if (has_last_) {  // the first solve keeps the caller's start, if any
      const bool near = std::abs(x - last_x_) < 0.4055;  // ln 1.5
      in_.start_u = near ? last_.block_offset_v : std::numeric_limits<double>::quiet_NaN();
      in_.start_offset_v = near ? last_.start_offset_v : std::numeric_limits<double>::quiet_NaN();
    }
    DistortionResult r = solve_distortion(in_);
    ++solves;
    if (r.periods > 0 && r.periods < 60) {  // a converged charge solve: worth starting from
      last_ = r;
      last_x_ = x;
      has_last_ = true;
    }
    const double fx = std::log(r.load.thd) - log_target_;
    if (std::isfinite(fx) && std::isfinite(last_fx_) && x != prev_x_) slope = (fx - last_fx_) / (x - prev_x_);
    prev_x_ = x;
    last_fx_ = fx;
    results_.emplace_back(x, std::move(r));
    if (results_.size() > 4) results_.erase(results_.begin());
    return fx;
  }
  double slope = std::numeric_limits<double>::quiet_NaN();  // of the last two solves
  // The solution at x (solved once more only if it is not among the last few).
  DistortionResult at(double x) {
    for (const auto& [xi, r] : results_)
      if (xi == x) return r;
    (*this)(x);
    return results_.back().second;
  }
  int solves = 0;

 private:
  DistortionInput in_;
  double log_target_;
  DistortionResult last_;
  double last_x_ = 0.0, prev_x_ = std::numeric_limits<double>::quiet_NaN();
  double last_fx_ = std::numeric_limits<double>::quiet_NaN();
  bool has_last_ = false;
  std::vector<std::pair<double, DistortionResult>> results_;
};

// Illinois: regula falsi that halves the stale end's value, so the bracket
// shrinks from both sides; stop at 1e-4 of I. f(lo) > 0 ≥ f(hi).
template <class Crossing>
double illinois(Crossing& f, double lo, double f_lo, double hi, double f_hi, double tolerance = 1e-4) {
  int stale = 0;
  for (int k = 0; k < 60 && hi - lo > tolerance; ++k) {
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
  return hi;
}

// From a guess: secant steps (at most 1.5 in ln I each; the first Newton's
// when the slope is known) until one moves ln I by less than 1e-3; failing
// that, to a bracket and Illinois.
template <class Crossing>
std::optional<double> from_guess(Crossing& f, double guess_a, double slope) {
  double x0 = std::log(guess_a), f0 = f(x0);
  if (!std::isfinite(f0)) return std::nullopt;
  double step = (std::isfinite(slope) && slope < 0) ? -f0 / slope : (f0 > 0 ? 0.02 : -0.02);  // THD falls with bias
  double x1 = x0 + std::clamp(step, -1.5, 1.5), f1 = f(x1);
  for (int k = 0; k < 10 && std::isfinite(f1); ++k) {
    if (std::abs(x1 - x0) < 1e-3 && f1 <= 0) return x1;
    if ((f0 > 0) != (f1 > 0) && std::abs(x1 - x0) > 0.05)
      return f0 > 0 ? illinois(f, x0, f0, x1, f1) : illinois(f, x1, f1, x0, f0);
    step = (f1 != f0) ? -f1 * (x1 - x0) / (f1 - f0) : (f1 > 0 ? 0.1 : -0.1);
    if ((f1 > 0) != (step > 0)) step = f1 > 0 ? 0.1 : -0.1;  // a secant that points away: THD falls with bias
    // A hair (1e-6 of I) to the side of more bias, where the target is met.
    step = std::clamp(step + 1e-6, -1.5, 1.5);
    x0 = x1;
    f0 = f1;
    x1 = x1 + step;
    if (x1 > 0.0) return std::nullopt;  // above 1 A: leave it to the scan, which says so
    f1 = f(x1);
  }
  return std::nullopt;
}

}  // namespace

std::optional<BiasForThd> solve_bias_for_thd(DistortionInput in, double target_thd, std::string* why, double guess_a, double slope) {
  ThdCrossing f(in, target_thd);
  const auto done = [&f](double x) {
    const double s = f.slope;
    auto at = f.at(x);
    return BiasForThd{std::exp(x), std::move(at), s, f.solves};
  };
  if (guess_a > 1e-6 && guess_a < 1.0)
    if (const auto x = from_guess(f, guess_a, slope)) return done(*x);
  if (!(guess_a > 0) && in.samples >= 128) {
    // No guess: the scan and a first pin (to 1e-2 of I) on a quarter of the
    // time steps, whose answer is the guess of the full-resolution search
    // (it moves it by a few per cent at most: fewer solves at full cost).
    DistortionInput coarse_in = in;
    coarse_in.samples = in.samples / 4;
    std::string coarse_why;
    if (const auto coarse = solve_bias_for_thd(coarse_in, target_thd, &coarse_why, std::numeric_limits<double>::quiet_NaN(), slope);
        coarse && coarse->bias_a > 1.0001e-6 && coarse->bias_a < 0.9) {
      in.start_u = coarse->at.block_offset_v;
      in.start_offset_v = coarse->at.periods > 0 ? coarse->at.start_offset_v : std::numeric_limits<double>::quiet_NaN();
      ThdCrossing fine(in, target_thd);
      if (const auto x = from_guess(fine, coarse->bias_a, coarse->slope)) {
        const double s_fine = fine.slope;
        auto at = fine.at(*x);
        return BiasForThd{std::exp(*x), std::move(at), s_fine, fine.solves + coarse->solves};
      }
    }
  }
  // Scan down from 1 A in steps of √10 to the first bias that misses the
  // target: the answer is the least bias above which every bias meets it
  // (with stored charge THD need not fall monotonically at small biases).
  constexpr double step = 1.1512925464970229;  // ln √10
  double hi = 0.0, f_hi = f(hi);
  if (f_hi > 0) {
    if (why) *why = "even 1 A of bias leaves THD above the target (Rs-dominated or amplitude too high)";
    return std::nullopt;
  }
  double lo = hi - step, f_lo = f(lo);
  while (f_lo <= 0) {
    if (lo <= std::log(1e-6)) return done(lo);  // 1 µA meets it: no lower answer is meaningful
    hi = lo;
    f_hi = f_lo;
    lo -= step;
    f_lo = f(lo);
  }
  return done(illinois(f, lo, f_lo, hi, f_hi));
}

namespace {

// g(x) = ln(THD/target) of the PIN switch at I = e^x, for the shared search
// (from_guess, illinois above): negative where the target is met. It solves
// at 128 steps a period (the lifetime's smooth charge: THD within ~1e-4 of
// the 512-step solve); the answer's harmonics come from one solve at the
// distortion calculator's 512 (solve_at).
struct PinThdCrossing {
  SwitchKind kind;
  const PinLaw& law;
  double is_a, target_thd, freq_hz, source_peak_v, source_ohm, load_ohm, temp_k;
  int solves = 0;
  double slope = std::numeric_limits<double>::quiet_NaN();  // of the last two solves
  double prev_x = std::numeric_limits<double>::quiet_NaN(), prev_g = std::numeric_limits<double>::quiet_NaN();

  PinDistortion solve_at(double x, int steps) {
    ++solves;
    const double i = std::exp(x);
    return kind == SwitchKind::series ? pin_series_distortion(law, is_a, i, freq_hz, source_peak_v, source_ohm, load_ohm, temp_k, steps)
                                      : pin_shunt_distortion(law, is_a, i, freq_hz, source_peak_v, source_ohm, load_ohm, temp_k, steps);
  }
  PinDistortion last{};  // the solve of the last operator() call
  double operator()(double x) {
    last = solve_at(x, 128);
    const double g = std::log(std::max(last.thd, 1e-300) / target_thd);
    if (std::isfinite(g) && std::isfinite(prev_g) && x != prev_x) slope = (g - prev_g) / (x - prev_x);
    prev_x = x;
    prev_g = g;
    return g;
  }
};

}  // namespace

std::optional<PinBiasForThd> pin_bias_for_thd(SwitchKind kind, const PinLaw& law, double is_a, double target_thd, double freq_hz,
                                              double source_peak_v, double source_ohm, double load_ohm, double temp_k,
                                              std::string* why, double guess_a, double slope_hint) {
  const double lo_x = std::log(1e-6), hi_x = std::log(1.0);
  PinThdCrossing f{kind, law, is_a, target_thd, freq_hz, source_peak_v, source_ohm, load_ohm, temp_k};
  const auto done = [&f](double x) {
    PinBiasForThd out;
    out.bias_a = std::exp(x);
    out.slope = f.slope;
    out.at = f.solve_at(x, 512);
    out.solves = f.solves;
    return out;
  };
  // From a neighbouring answer (the uncertainty's perturbed runs): Newton on
  // ln THD against ln I with the answer's slope, steps of at most 0.5, until
  // one is below 1e-4; the search below when that does not settle in six.
  // (Not the junction's from_guess: it asks to end on the met side and
  // brackets wider, which for the PIN's smooth THD costs three times the solves.)
  if (guess_a > 1e-6 && guess_a < 1.0 && std::isfinite(slope_hint) && slope_hint < 0) {
    double xs = std::log(guess_a), s = slope_hint, gs = f(xs);
    for (int k = 0; k < 6 && std::isfinite(gs); ++k) {
      const double step = std::clamp(-gs / s, -0.5, 0.5);
      if (std::abs(step) < 1e-4 || std::abs(gs) < 1e-4) {
        // The 128-step solve at xs stands for the answer (within 1e-4 in ln I):
        // the perturbed runs need its bias and harmonics, not a 512-step solve.
        PinBiasForThd out;
        out.bias_a = std::exp(xs + step);
        out.at = f.last;
        out.slope = s;
        out.solves = f.solves;
        return out;
      }
      const double gn = f(xs + step);
      if (std::isfinite(gn) && (gn - gs) / step < 0) s = (gn - gs) / step;
      xs += step, gs = gn;
    }
  }
  // Start where the RF charge per half cycle is a tenth of the stored charge
  // (the charge criterion) and step by the local slope of ln THD on ln I
  // until the sign changes.
  double x = 0.0;
  if (std::isfinite(guess_a) && guess_a > 0) {
    x = std::log(guess_a);
  } else {
    const double signal_peak_a = source_peak_v / (source_ohm + load_ohm);
    x = std::log(10.0 * signal_peak_a / (std::numbers::pi * freq_hz) / law.tau_s);
  }
  x = std::clamp(x, lo_x, hi_x);
  double g = f(x);
  double slope = -1.0;  // THD ~ 1/I at first (the charge ratio)
  double x_prev = x, g_prev = g;
  for (int k = 0; k < 30 && (g > 0) == (g_prev > 0); ++k) {
    const double want = -g / (slope < -0.05 ? slope : -0.05);  // Newton on the power law, slope kept falling
    const double step = std::copysign(std::clamp(std::abs(want) * 1.2, std::log(1.5), std::log(100.0)), g > 0 ? 1.0 : -1.0);
    const double next = std::clamp(x + step, lo_x, hi_x);
    if (next == x) break;  // at a bound
    x_prev = x, g_prev = g;
    x = next;
    g = f(x);
    if (std::isfinite(g) && std::isfinite(g_prev)) slope = (g - g_prev) / (x - x_prev);
  }
  if (g > 0 && g_prev > 0) {
    if (why)
      *why = "no bias up to 1 A brings THD to " + std::to_string(100 * target_thd) + " % (at 1 A: " +
             std::to_string(100 * std::exp(g) * target_thd) + " %)";
    return std::nullopt;
  }
  if (g <= 0 && g_prev <= 0) return done(std::min(x, x_prev));  // met already at the least bias searched
  // Bracket: the side not met (g > 0, less bias) and the side met; Illinois.
  return g <= 0 ? done(illinois(f, x_prev, g_prev, x, g)) : done(illinois(f, x, g, x_prev, g_prev));
}

}  // namespace junco::fitting
