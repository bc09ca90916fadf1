#include "design/bias.hpp"

#include "units/si_text.hpp"
#include "fitting/transfer.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>

namespace junco::fitting {

OperatingPoint operating_point(const DiodeParams& p, double supply_v, double bias_r_ohm, double return_r_ohm,
                               double temp_k) {
  DiodeParams loop = p;
  loop.rs_ohm = p.rs_ohm + bias_r_ohm + return_r_ohm;
  OperatingPoint op;
  op.i_a = diode_current_a(loop, supply_v, temp_k);
  op.vd_v = diode_voltage_v(p, op.i_a, temp_k);
  op.v_rb_v = op.i_a * bias_r_ohm;
  op.rd_ohm = p.rs_ohm + junction_resistance_ohm(p, op.i_a, temp_k);
  return op;
}

std::optional<double> bias_resistor_ohm(const DiodeParams& p, double supply_v, double target_i_a,
                                        double return_r_ohm, double temp_k, std::string* why) {
  if (!(target_i_a > 0.0)) {
    if (why) *why = "target bias current must be positive";
    return std::nullopt;
  }
  const double vd = diode_voltage_v(p, target_i_a, temp_k);
  const double r = (supply_v - vd) / target_i_a - return_r_ohm;
  if (!(r >= 0.0)) {
    if (why)
      *why = "a " + units::format_si(supply_v, "V") + " supply cannot drive " + units::format_si(target_i_a, "A") +
             ": the diode alone needs " + units::format_si(vd, "V") +
             (return_r_ohm > 0 ? " plus the DC return's drop" : "");
    return std::nullopt;
  }
  return r;
}

Headroom drive_headroom(double load_peak_v, double load_ohm, double return_r_ohm, double floor_a) {
  Headroom h;
  h.signal_peak_a = load_peak_v / load_ohm + (std::isfinite(return_r_ohm) && return_r_ohm > 0 ? load_peak_v / return_r_ohm : 0.0);
  h.min_bias_a = h.signal_peak_a + floor_a;
  return h;
}

ChargeHeadroom charge_headroom(double signal_peak_a, double freq_hz, double lifetime_s, double floor_a,
                               const std::function<double(double)>& share) {
  ChargeHeadroom h;
  h.omega_tau = 2.0 * std::numbers::pi * freq_hz * lifetime_s;
  const double reach_a = signal_peak_a / std::sqrt(1.0 + h.omega_tau * h.omega_tau);
  // share(I) grows with I (the diffusion admittance does), so from the
  // share-1 answer down the iteration falls monotonically to the largest I
  // that meets the rule.
  h.min_bias_a = reach_a + floor_a;
  for (int k = 0; share && k < 100; ++k) {
    h.share = std::min(1.0, share(h.min_bias_a));
    const double next = h.share * reach_a + floor_a;
    const bool settled = std::abs(next - h.min_bias_a) <= 1e-12 * h.min_bias_a;
    h.min_bias_a = next;
    if (settled) break;
  }
  h.charge_peak_a = h.share * reach_a;
  return h;
}

PowerCheck check_power(const OperatingPoint& op, double bias_r_ohm, double signal_peak_a, const PowerLimits& limits) {
  PowerCheck c;
  c.diode_w = op.vd_v * op.i_a + 0.5 * signal_peak_a * signal_peak_a * op.rd_ohm;
  c.resistor_w = op.i_a * op.i_a * bias_r_ohm;
  const auto judge = [&](const char* what, double w, double max_w) {
    if (!(max_w > 0.0)) return;
    const std::string text = std::string(what) + " dissipates " + units::format_si(w, "W") + ", limit " +
                             units::format_si(max_w, "W");
    if (w > max_w)
      c.failures.push_back(text + ": OVER THE LIMIT");
    else if (w > limits.warn_fraction * max_w)
      c.warnings.push_back(text + ": above " + std::to_string(static_cast<int>(limits.warn_fraction * 100 + 0.5)) +
                           " % of the limit");
  };
  judge("diode", c.diode_w, limits.diode_max_w);
  judge("bias resistor", c.resistor_w, limits.resistor_max_w);
  return c;
}

}  // namespace junco::fitting
