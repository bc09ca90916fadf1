#include "fitting/design_switch.hpp"

#include "fitting/transfer.hpp"

#include <cmath>
#include <numbers>

namespace junco::fitting {

using cplx = std::complex<double>;

const char* to_string(SwitchKind kind) { return kind == SwitchKind::series ? "series" : "shunt"; }

double series_loss_db(cplx z, double rg_ohm, double rl_ohm) {
  return 20.0 * std::log10(std::abs(1.0 + z / (rg_ohm + rl_ohm)));
}

double shunt_loss_db(cplx z, double rg_ohm, double rl_ohm) {
  const double r_par = rg_ohm * rl_ohm / (rg_ohm + rl_ohm);
  return 20.0 * std::log10(std::abs(1.0 + r_par / z));
}

double switch_loss_db(SwitchKind kind, cplx z, double rg_ohm, double rl_ohm) {
  return kind == SwitchKind::series ? series_loss_db(z, rg_ohm, rl_ohm) : shunt_loss_db(z, rg_ohm, rl_ohm);
}

double series_shunt_loss_db(cplx zs, cplx zsh, double z0_ohm) {
  const cplx a = 1.0 + zs / zsh, b = zs, c = 1.0 / zsh, d = 1.0;
  const cplx s21 = 2.0 / (a + b / z0_ohm + c * z0_ohm + d);
  return -20.0 * std::log10(std::abs(s21));
}

double junction_capacitance_f(const JunctionCap& cap, double v) {
  const double vj = std::min(cap.vj_v, 1.0 / cap.fc);  // ngspice limits VJ to 1/FC
  if (v < cap.fc * vj) return cap.cj0_f * std::pow(1.0 - v / vj, -cap.m);
  const double f2 = std::pow(1.0 - cap.fc, 1.0 + cap.m);
  const double f3 = 1.0 - cap.fc * (1.0 + cap.m);
  return cap.cj0_f / f2 * (f3 + cap.m * v / vj);
}

cplx off_impedance(double c_f, double freq_hz, const Parasitics& par) {
  const double w = 2.0 * std::numbers::pi * freq_hz;
  return cplx(par.r_reverse_ohm, w * par.ls_h - 1.0 / (w * c_f));
}

namespace {

cplx on_impedance(const DiodeParams& p, double bias_i_a, double freq_hz, const Parasitics& par, double temp_k) {
  const double w = 2.0 * std::numbers::pi * freq_hz;
  return cplx(p.rs_ohm + junction_resistance_ohm(p, bias_i_a, temp_k), w * par.ls_h);
}

}  // namespace

double on_state_loss_db(SwitchKind kind, const DiodeParams& p, double bias_i_a, double rg_ohm, double rl_ohm,
                        double freq_hz, const Parasitics& par, double temp_k) {
  return switch_loss_db(kind, on_impedance(p, bias_i_a, freq_hz, par, temp_k), rg_ohm, rl_ohm);
}

std::optional<double> bias_for_loss_a(SwitchKind kind, const DiodeParams& p, double target_db, double rg_ohm,
                                      double rl_ohm, double freq_hz, const Parasitics& par, double temp_k,
                                      std::string* why) {
  // Series loss falls and shunt isolation rises monotonically with bias, so
  // bisect on log(I) between a leakage-level and an unreasonably high bias.
  const auto loss = [&](double i) { return on_state_loss_db(kind, p, i, rg_ohm, rl_ohm, freq_hz, par, temp_k); };
  double lo = 1e-9, hi = 10.0;
  const double at_hi = loss(hi), at_lo = loss(lo);
  const bool series = kind == SwitchKind::series;
  if (series ? target_db <= at_hi : target_db >= at_hi) {
    if (why)
      *why = std::string("target ") + (series ? "insertion loss" : "isolation") +
             " cannot be reached: even 10 A gives " + std::to_string(at_hi) + " dB (limited by Rs and Ls)";
    return std::nullopt;
  }
  if (series ? target_db >= at_lo : target_db <= at_lo) return lo;
  for (int k = 0; k < 200 && hi / lo > 1.0 + 1e-12; ++k) {
    const double mid = std::sqrt(lo * hi);
    const bool mid_meets = series ? loss(mid) <= target_db : loss(mid) >= target_db;
    (mid_meets ? hi : lo) = mid;
  }
  return hi;
}

}  // namespace junco::fitting
