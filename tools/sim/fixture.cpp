#include "tools/sim/fixture.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <numbers>

namespace junco::sim {

DcPoint solve_dc(const FixtureConfig& fx, const PartParams* part, const BiasSetting& bias, double temp_k) {
  DcPoint dc;
  if (!bias.output_on) return dc;  // an output that is off is an open circuit
  dc.supply_v = bias.voltage_v;
  if (!part) {  // open slot: no current, the full voltage across the slot
    dc.v_part_v = bias.voltage_v;
    return dc;
  }
  const double r_dc = fx.rb_ohm + (fx.return_kind == ReturnKind::resistor ? fx.return_ohm : 0.0);
  const auto loop = dc_params(*part, temp_k, r_dc);
  double i = fitting::diode_current_a(loop, bias.voltage_v, temp_k);
  if (part->pin && i > 0.0) {
    // The I-region's drop i·R_I(τ·i) only lowers the current: bisect on
    // [0, the junction's current] (the drop is nondecreasing in i).
    double lo = 0.0, hi = i;
    for (int it = 0; it < 200 && hi - lo > 1e-15 * hi; ++it) {
      const double mid = 0.5 * (lo + hi);
      const double v = fitting::diode_voltage_v(loop, mid, temp_k) + i_region_drop_v(*part, mid);
      (v < bias.voltage_v ? lo : hi) = mid;
    }
    i = 0.5 * (lo + hi);
  }
  if (i > bias.current_limit_a) {
    // Compliance: the supply regulates current and its voltage folds back.
    i = bias.current_limit_a;
    dc.current_limited = true;
    dc.v_part_v = fitting::diode_voltage_v(dc_params(*part, temp_k), i, temp_k) + i_region_drop_v(*part, i);
    dc.supply_v = dc.v_part_v + i * r_dc;
  } else {
    dc.v_part_v = bias.voltage_v - i * r_dc;
  }
  dc.i_a = i;
  dc.supply_i_a = i;
  dc.power_w = i * dc.v_part_v;
  return dc;
}

namespace {

constexpr double gmin_s = 1e-12;  // conductance across the junction, as SPICE adds

// Junction current and conductance with the exponent limited for robustness
// (linear continuation beyond exp(80), far outside any real operating point),
// and the junction's charge and capacitance (part.hpp), all from one exp()
// and at most one pow() per voltage: the period solve evaluates this at every
// Newton iterate of every time step.
struct Junction {
  struct At {
    double i_a, g_s, q_c, c_f;
    double r_i_ohm = 0.0, dr_i_dv = 0.0;  // a PIN part's I-region resistance at the stored charge τ·Id, and its slope
  };
  Junction(const PartParams& part, double is, double n_vt) : p(part), depletion(part), is_a(is), nvt(n_vt) {}
  PartParams p;
  DepletionLaw depletion;
  double is_a;
  double nvt;
  At at(double v) const {
    const double x = v / nvt;
    const double e = std::exp(std::min(x, 80.0));
    At r;
    r.i_a = is_a * ((x < 80.0 ? e : e * (1.0 + x - 80.0)) - 1.0) + gmin_s * v;
    r.g_s = is_a / nvt * e + gmin_s;
    const auto d = depletion.at(v);
    r.q_c = d.q_c + p.tt_s * r.i_a;
    r.c_f = d.c_f + p.tt_s * r.g_s;
    if (p.pin && v > 0.0) {
      r.r_i_ohm = i_region_resistance_ohm(p, p.tt_s * r.i_a);
      // R_I ∝ 1/Id where not capped: dR_I/dv = −R_I·g/Id.
      if (r.r_i_ohm > 0.0 && r.r_i_ohm < p.pin_r_max_ohm) r.dr_i_dv = -r.r_i_ohm * r.g_s / r.i_a;
    }
    return r;
  }
  double charge(double v) const { return at(v).q_c; }
};

// Which constant unknowns the period solve has (block voltages, choke currents).
struct Unknowns {
  bool bias_current_unknown = false;  // bias choke in CV mode
  bool return_current_unknown = false;  // inductor return
  int count() const { return 2 + bias_current_unknown + return_current_unknown; }
};

struct PeriodSolution {
  std::vector<double> ch1, ch2, i, va, vk;
  double mean(const std::vector<double>& x) const {
    double s = 0;
    for (double v : x) s += v;
    return s / static_cast<double>(x.size());
  }
};

class PeriodSolver {
 public:
  PeriodSolver(const FixtureConfig& fx, const PartParams* part, const BiasSetting& bias, bool current_limited,
               double temp_k, const AcDrive& drive)
      : fx_(fx), part_(part), bias_(bias), cc_(current_limited), drive_(drive),
        junction_(part ? *part : PartParams{}, part ? saturation_current_a(*part, temp_k) : 0.0,
                  part ? part->n * fitting::thermal_voltage_v(temp_k) : 1.0) {
    u_.bias_current_unknown = bias.output_on && !cc_ && fx.bias_choke;
    u_.return_current_unknown = fx.return_kind == ReturnKind::inductor;
    // The generator EMF at each time step, the same for every residual evaluation.
    const int n = fx.steps_per_period;
    const double period = 1.0 / drive.freq_hz, h = period / n, w = 2.0 * M_PI * drive.freq_hz;
    const double amp = drive.emf_vpp / 2.0;
    emf_.resize(static_cast<std::size_t>(n));
    for (int step = 0; step < n; ++step) emf_[static_cast<std::size_t>(step)] = amp * std::sin(w * h * step);
  }
  const Unknowns& unknowns() const { return u_; }

  // Runs periods until periodic; fills `out`; returns the residuals
  // (all in amperes: voltage conditions are divided by RL).
  std::vector<double> residuals(const std::vector<double>& x, PeriodSolution& out) {
    const double vc1 = x[0], vc2 = x[1];
    int k = 2;
    const double ib_unknown = u_.bias_current_unknown ? x[k++] : 0.0;
    const double il = u_.return_current_unknown ? x[k++] : 0.0;

    double ga = 1.0 / fx_.source_ohm, ja_const = -vc1 / fx_.source_ohm;
    double ib_const = 0.0;  // constant current into A from the bias branch
    if (bias_.output_on) {
      if (cc_) ib_const = bias_.current_limit_a;
      else if (fx_.bias_choke) ib_const = ib_unknown;
      else {
        ga += 1.0 / fx_.rb_ohm;
        ja_const += bias_.voltage_v / fx_.rb_ohm;
      }
    }
    ja_const += ib_const;
    double gk = 1.0 / fx_.load_ohm, jk = vc2 / fx_.load_ohm - il;
    if (fx_.return_kind == ReturnKind::resistor) gk += 1.0 / fx_.return_ohm;
    const double ra = 1.0 / ga, rk = 1.0 / gk, vk0 = jk / gk;
    const double rth = ra + (part_ ? part_->rs_ohm : 0.0) + rk;

    const int n = fx_.steps_per_period;
    const double h = 1.0 / drive_.freq_hz / n;
    auto emf = [&](int step) { return emf_[static_cast<std::size_t>(step)]; };
    out.ch1.assign(n, 0.0);
    out.ch2.assign(n, 0.0);
    out.i.assign(n, 0.0);
    out.va.assign(n, 0.0);
    out.vk.assign(n, 0.0);
    auto record = [&](int step, double e, double i) {
      const double va0 = (e / fx_.source_ohm + ja_const) * ra;
      const double va = va0 - ra * i, vk = vk0 + rk * i;
      out.i[step] = i;
      out.va[step] = va;
      out.vk[step] = vk;
      out.ch1[step] = vc1 + va;
      out.ch2[step] = vk - vc2;
    };
    if (!part_) {
      for (int s = 0; s < n; ++s) record(s, emf(s), 0.0);
    } else {
      periodic_junction(n, h, rth, [&](int step) { return (emf(step) / fx_.source_ohm + ja_const) * ra - vk0; });
      for (int s = 0; s < n; ++s) {
        const double vth = (emf(s) / fx_.source_ohm + ja_const) * ra - vk0;
        record(s, emf(s), (vth - vj_[s]) / (rth + junction_.at(vj_[s]).r_i_ohm));
      }
    }
    std::vector<double> r;
    double ig_mean = 0, il_mean = 0;
    for (int s = 0; s < n; ++s) {
      ig_mean += (emf(s) - out.ch1[s]) / fx_.source_ohm;
      il_mean += out.ch2[s] / fx_.load_ohm;
    }
    r.push_back(ig_mean / n);
    r.push_back(il_mean / n);
    if (u_.bias_current_unknown) r.push_back((bias_.voltage_v - out.mean(out.va)) / fx_.rb_ohm - ib_unknown);
    if (u_.return_current_unknown) r.push_back(out.mean(out.vk) / fx_.load_ohm);
    return r;
  }

  double start_v = 0.0;  // junction voltage at t = 0 (warm start between calls)

 private:
  // Junction voltage over one period in periodic steady state: BDF2 on the
  // charge, repeated periods until the start and end states agree.
  template <class Vth>
  void periodic_junction(int n, double h, double rth, Vth vth) {
    vj_.assign(n, 0.0);
    double v_prev = start_v, q_prev = junction_.charge(start_v);
    double q_prev2 = q_prev;
    bool first = true;
    for (int period = 0; period < 400; ++period) {
      const double v_start = v_prev;
      for (int s = 1; s <= n; ++s) {
        const int step = s % n;
        // BDF2: (3q − 4q₁ + q₂)/(2h) = i_c; first step backward Euler.
        const double a = first ? 1.0 : 1.5;
        const double b = first ? q_prev : 2.0 * q_prev - 0.5 * q_prev2;
        const double v = solve_step(vth(step), rth, a, b, h, v_prev);
        q_prev2 = q_prev;
        q_prev = junction_.charge(v);
        v_prev = v;
        vj_[step] = v;
        first = false;
      }
      if (period > 0 && std::abs(v_prev - v_start) < 1e-12) break;
    }
    start_v = v_prev;
  }

  // Solves (vth − v)/(rth + R_I(v)) − Id(v) − (a·q(v) − b)/h = 0. Without
  // an I-region (R_I = 0) f is strictly decreasing in v; with one it is
  // continuous, negative above vth and positive far below, so the bracket
  // plus safeguarded Newton still converges to a root.
  double solve_step(double vth, double rth, double a, double b, double h, double guess) const {
    auto f = [&](double v) {
      const auto j = junction_.at(v);
      return (vth - v) / (rth + j.r_i_ohm) - j.i_a - (a * j.q_c - b) / h;
    };
    const auto j0 = junction_.at(guess);
    const double f0 = (vth - guess) / (rth + j0.r_i_ohm) - j0.i_a - (a * j0.q_c - b) / h;
    if (f0 == 0.0) return guess;
    double lo = guess, hi = guess;
    double step = 0.05;
    if (f0 > 0) {
      do { lo = hi; hi += step; step *= 2; } while (f(hi) > 0);
    } else {
      do { hi = lo; lo -= step; step *= 2; } while (f(lo) < 0);
    }
    double v = f0 > 0 ? lo : hi;
    for (int it = 0; it < 200; ++it) {
      const auto j = v == guess ? j0 : junction_.at(v);  // the first iterate is the guess
      const double r = rth + j.r_i_ohm;
      const double fv = (vth - v) / r - j.i_a - (a * j.q_c - b) / h;
      const double dfv = (-r - (vth - v) * j.dr_i_dv) / (r * r) - j.g_s - a * j.c_f / h;
      if (fv > 0) lo = v; else hi = v;
      double next = v - fv / dfv;
      // Bisect only when Newton leaves the bracket. An iterate that has
      // converged to the last bit (next == v, an end of the bracket) stays:
      // throwing it away for a bisection cost three times the iterations.
      if (!(next >= lo && next <= hi)) next = 0.5 * (lo + hi);
      if (std::abs(next - v) < 1e-15 + 1e-13 * std::abs(v) || hi - lo < 1e-15) return next;
      v = next;
    }
    return v;
  }

  const FixtureConfig& fx_;
  const PartParams* part_;
  BiasSetting bias_;
  bool cc_;
  AcDrive drive_;
  Junction junction_;
  Unknowns u_;
  std::vector<double> emf_;
  std::vector<double> vj_;
};

// Gaussian elimination with partial pivoting on a small dense system.
bool solve_linear(std::vector<std::vector<double>> a, std::vector<double>& b) {
  const size_t n = b.size();
  for (size_t c = 0; c < n; ++c) {
    size_t piv = c;
    for (size_t r = c + 1; r < n; ++r)
      if (std::abs(a[r][c]) > std::abs(a[piv][c])) piv = r;
    if (std::abs(a[piv][c]) < 1e-300) return false;
    std::swap(a[piv], a[c]);
    std::swap(b[piv], b[c]);
    for (size_t r = c + 1; r < n; ++r) {
      const double f = a[r][c] / a[c][c];
      for (size_t k = c; k < n; ++k) a[r][k] -= f * a[c][k];
      b[r] -= f * b[c];
    }
  }
  for (size_t c = n; c-- > 0;) {
    for (size_t k = c + 1; k < n; ++k) b[c] -= a[c][k] * b[k];
    b[c] /= a[c][c];
  }
  return true;
}

}  // namespace

std::complex<double> small_signal_transfer(const FixtureConfig& fx, SlotContent content, const PartParams* part,
                                           const DcPoint& dc, double temp_k, double freq_hz) {
  using cplx = std::complex<double>;
  const double w = 2.0 * std::numbers::pi * freq_hz;
  const cplx j(0.0, 1.0);
  // Admittance of what is in the slot, slot inductance included.
  cplx y_series(0.0, 0.0);
  if (content == SlotContent::short_link) {
    y_series = fx.slot_ls_h > 0 ? 1.0 / (j * w * fx.slot_ls_h) : cplx(1e12, 0.0);  // 1 pΩ: a link
  } else if (content == SlotContent::part && part) {
    const double rs = series_resistance_ohm(*part, temp_k);
    const double is = saturation_current_a(*part, temp_k);
    const double nvt = part->n * fitting::thermal_voltage_v(temp_k);
    // A PIN part's I-region carries part of the DC drop: the junction sees the rest.
    const double r_i = part->pin && dc.i_a > 0.0 ? i_region_resistance_ohm(*part, part->tt_s * dc.i_a) : 0.0;
    const double vj = dc.v_part_v - dc.i_a * (rs + r_i);
    const double gd = is * std::exp(vj / nvt) / nvt;
    const double c = junction_capacitance_f(*part, vj, gd);
    const cplx z_j = 1.0 / (gd + j * w * c);
    // The I-region's drop i·R_I(Q) also moves with the signal's diffusion
    // charge q = TT·gd·v_j (charge control, the same quasi-static charge as
    // the period solve's): R_I ∝ 1/Q gives I·dR_I/dQ·q = −R_I·gd·v_j (none
    // where R_I is capped).
    const double modulation = r_i > 0.0 && r_i < part->pin_r_max_ohm ? r_i * gd : 0.0;
    const cplx z_chip = rs + r_i + z_j * (1.0 - modulation);
    const cplx y_pkg = 1.0 / (z_chip + j * w * fx.package_ls_h) + j * w * fx.package_cp_f;
    y_series = 1.0 / (1.0 / y_pkg + j * w * fx.slot_ls_h);
  }
  const cplx y_slot = y_series + j * w * fx.stray_c_f;
  const double z_load = fx.return_kind == ReturnKind::resistor ? fx.load_ohm * fx.return_ohm / (fx.load_ohm + fx.return_ohm) : fx.load_ohm;
  // H = Z_load/(Z_load + 1/Y_slot) = Z_load·Y_slot/(Z_load·Y_slot + 1): no division by a zero Y.
  return z_load * y_slot / (z_load * y_slot + 1.0);
}

AcResult solve_ac(const FixtureConfig& fx, const PartParams* part, const BiasSetting& bias, double temp_k,
                  const AcDrive& drive) {
  AcResult res;
  res.dc = solve_dc(fx, part, bias, temp_k);
  if (!drive.on || drive.emf_vpp <= 0.0 || drive.freq_hz <= 0.0) return res;

  // The junction at its temperature: RS(T) (TRS1, TRS2) in the period solve
  // as in the DC point; IS(T) is taken inside the solver from the same law.
  PartParams hot;
  if (part) {
    hot = *part;
    hot.rs_ohm = series_resistance_ohm(*part, temp_k);
    part = &hot;
  }
  PeriodSolver solver(fx, part, bias, res.dc.current_limited, temp_k, drive);
  // Start from the DC point: block voltages and choke currents as at DC.
  const double vk_dc = fx.return_kind == ReturnKind::resistor ? res.dc.i_a * fx.return_ohm : 0.0;
  const double va_dc = vk_dc + (bias.output_on ? res.dc.v_part_v : 0.0);
  std::vector<double> x{-va_dc, vk_dc};
  if (solver.unknowns().bias_current_unknown) x.push_back(res.dc.i_a);
  if (solver.unknowns().return_current_unknown) x.push_back(res.dc.i_a);
  solver.start_v = part ? res.dc.v_part_v - res.dc.i_a * part->rs_ohm - i_region_drop_v(*part, res.dc.i_a) : 0.0;

  PeriodSolution sol;
  std::vector<double> r = solver.residuals(x, sol);
  res.converged = false;
  for (int iter = 0; iter < 30; ++iter) {
    double worst = 0;
    for (double v : r) worst = std::max(worst, std::abs(v));
    if (worst < 1e-13 + 1e-9 * drive.emf_vpp / fx.load_ohm) {
      res.converged = true;
      break;
    }
    // Finite-difference Jacobian; steps sized to volts or amperes.
    const size_t m = x.size();
    std::vector<std::vector<double>> jac(m, std::vector<double>(m));
    const double start_v = solver.start_v;
    for (size_t c = 0; c < m; ++c) {
      auto xp = x;
      const double d = c < 2 ? 1e-6 : 1e-8;
      xp[c] += d;
      PeriodSolution tmp;
      solver.start_v = start_v;
      const auto rp = solver.residuals(xp, tmp);
      for (size_t row = 0; row < m; ++row) jac[row][c] = (rp[row] - r[row]) / d;
    }
    solver.start_v = start_v;
    std::vector<double> dx(r.size());
    for (size_t i = 0; i < r.size(); ++i) dx[i] = -r[i];
    if (!solve_linear(jac, dx)) break;
    // Damped step: accept the first that lowers the worst residual.
    double scale = 1.0;
    for (int tries = 0; tries < 8; ++tries, scale *= 0.5) {
      auto xn = x;
      for (size_t i = 0; i < m; ++i) xn[i] += scale * dx[i];
      solver.start_v = start_v;
      PeriodSolution cand;
      const auto rn = solver.residuals(xn, cand);
      double worst_n = 0;
      for (double v : rn) worst_n = std::max(worst_n, std::abs(v));
      if (worst_n < worst || tries == 7) {
        x = xn;
        r = rn;
        sol = std::move(cand);
        break;
      }
    }
  }

  auto rms = [](const std::vector<double>& w) {
    double s = 0;
    for (double v : w) s += v * v;
    return std::sqrt(s / static_cast<double>(w.size()));
  };
  auto pp = [](const std::vector<double>& w) {
    const auto [mn, mx] = std::minmax_element(w.begin(), w.end());
    return *mx - *mn;
  };
  res.in_vrms = rms(sol.ch1);
  res.in_vpp = pp(sol.ch1);
  res.out_vrms = rms(sol.ch2);
  res.out_vpp = pp(sol.ch2);
  // DC readings with the signal applied: means over the period.
  if (part) {
    res.dc.i_a = sol.mean(sol.i);
    std::vector<double> vpart(sol.va.size());
    double p = 0;
    for (size_t s = 0; s < vpart.size(); ++s) {
      vpart[s] = sol.va[s] - sol.vk[s];
      p += sol.i[s] * vpart[s];
    }
    res.dc.v_part_v = sol.mean(vpart);
    res.dc.power_w = p / static_cast<double>(vpart.size());
  } else {
    std::vector<double> vpart(sol.va.size());
    for (size_t s = 0; s < vpart.size(); ++s) vpart[s] = sol.va[s] - sol.vk[s];
    res.dc.v_part_v = sol.mean(vpart);
  }
  if (bias.output_on && !res.dc.current_limited) {
    if (fx.bias_choke) res.dc.supply_i_a = x[2];
    else res.dc.supply_i_a = (bias.voltage_v - sol.mean(sol.va)) / fx.rb_ohm;
  } else if (res.dc.current_limited) {
    res.dc.supply_v = sol.mean(sol.va) + fx.rb_ohm * bias.current_limit_a;
  }
  res.wave_in_v = std::move(sol.ch1);
  res.wave_out_v = std::move(sol.ch2);
  return res;
}

}  // namespace junco::sim
