#include "design/switch.hpp"

#include "fitting/transfer.hpp"

#include <cmath>
#include <numbers>

namespace junco::fitting {

using cplx = std::complex<double>;

const char* to_string(SwitchKind kind) { return kind == SwitchKind::series ? "series" : "shunt"; }

double series_loss_db(cplx z, double source_ohm, double load_ohm) {
  return 20.0 * std::log10(std::abs(1.0 + z / (source_ohm + load_ohm)));
}

double shunt_loss_db(cplx z, double source_ohm, double load_ohm) {
  const double r_par = source_ohm * load_ohm / (source_ohm + load_ohm);
  return 20.0 * std::log10(std::abs(1.0 + r_par / z));
}

double switch_loss_db(SwitchKind kind, cplx z, double source_ohm, double load_ohm) {
  return kind == SwitchKind::series ? series_loss_db(z, source_ohm, load_ohm) : shunt_loss_db(z, source_ohm, load_ohm);
}

double series_shunt_loss_db(cplx zs, cplx zsh, double z0_ohm) {
  const cplx a = 1.0 + zs / zsh, b = zs, c = 1.0 / zsh, d = 1.0;
  const cplx s21 = 2.0 / (a + b / z0_ohm + c * z0_ohm + d);
  return -20.0 * std::log10(std::abs(s21));
}

cplx off_impedance(double c_f, double freq_hz, const Parasitics& par) {
  const double w = 2.0 * std::numbers::pi * freq_hz;
  return cplx(par.r_reverse_ohm, w * par.ls_h - 1.0 / (w * c_f));
}

cplx diode_off_impedance(const DiodeParams& p, const JunctionCharge& charge, double reverse_v, double freq_hz,
                         const Parasitics& par, double temp_k) {
  const double w = 2.0 * std::numbers::pi * freq_hz;
  const cplx zj = 1.0 / junction_admittance_at_voltage_s(p, charge, -reverse_v, freq_hz, temp_k);
  return cplx(p.rs_ohm + par.r_reverse_ohm, w * par.ls_h) + zj;
}

double on_state_loss_db(SwitchKind kind, const DiodeParams& p, const JunctionCharge& charge, double bias_i_a,
                        double source_ohm, double load_ohm, double freq_hz, const Parasitics& par, double temp_k) {
  const double w = 2.0 * std::numbers::pi * freq_hz;
  const cplx z = diode_small_signal_impedance(p, charge, bias_i_a, freq_hz, temp_k) + cplx(0.0, w * par.ls_h);
  return switch_loss_db(kind, z, source_ohm, load_ohm);
}

std::optional<double> bias_for_loss_a(SwitchKind kind, const DiodeParams& p, const JunctionCharge& charge,
                                      double target_db, double source_ohm, double load_ohm, double freq_hz,
                                      const Parasitics& par, double temp_k, std::string* why) {
  const auto loss = [&](double i) { return on_state_loss_db(kind, p, charge, i, source_ohm, load_ohm, freq_hz, par, temp_k); };
  return bias_for_loss_a(kind, loss, target_db, "Rs", why);
}

std::optional<double> bias_for_loss_a(SwitchKind kind, const std::function<double(double)>& loss, double target_db,
                                      const std::string& limit, std::string* why) {
  const bool series = kind == SwitchKind::series;
  const auto meets = [&](double db) { return series ? db <= target_db : db >= target_db; };
  // Scan log(I) from a leakage-level to an unreasonably high bias in steps of
  // 10^(1/8) for the first bias that meets the target; without capacitance the
  // loss is monotonic and this is the same answer as bisection over the range.
  constexpr double lo_a = 1e-9, hi_a = 10.0, step = 1.333521432163324;  // 10^(1/8)
  if (meets(loss(lo_a))) return lo_a;
  double lo = lo_a, hi = 0.0;
  for (double i = lo_a * step; i <= hi_a * 1.0000001; i *= step) {
    if (meets(loss(i))) {
      hi = i;
      break;
    }
    lo = i;
  }
  if (!(hi > 0.0)) {
    if (why)
      *why = std::string("target ") + (series ? "insertion loss" : "isolation") +
             " cannot be reached: even 10 A gives " + std::to_string(loss(hi_a)) + " dB (limited by " + limit + ", Ls and the capacitances)";
    return std::nullopt;
  }
  for (int k = 0; k < 200 && hi / lo > 1.0 + 1e-12; ++k) {
    const double mid = std::sqrt(lo * hi);
    (meets(loss(mid)) ? hi : lo) = mid;
  }
  return hi;
}

}  // namespace junco::fitting
