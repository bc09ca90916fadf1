#include "design/bias.hpp"

#include "units/si_text.hpp"
#include "fitting/transfer.hpp"

#include <cmath>

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
