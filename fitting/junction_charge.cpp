#include "fitting/junction_charge.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>

namespace junco::fitting {

double junction_capacitance_f(const JunctionCap& cap, double v) { return depletion_charge(cap, v).c_f; }

ChargeAt depletion_charge(const JunctionCap& cap, double v) {
  if (!(cap.cj0_f > 0.0)) return {};
  return depletion_law(cap, v);
}

double junction_voltage_at_current_v(const DiodeParams& p, double i_a, double temp_k) {
  return p.n * thermal_voltage_v(temp_k) * std::log1p(i_a / p.is_a);
}

namespace {
std::complex<double> admittance(const JunctionCharge& charge, double gd, double vd_v, double freq_hz) {
  double c = charge.tt_s * gd;
  if (charge.cap.cj0_f > 0.0) c += junction_capacitance_f(charge.cap, vd_v);
  return {gd, 2.0 * std::numbers::pi * freq_hz * c};
}
}  // namespace

std::complex<double> junction_admittance_at_voltage_s(const DiodeParams& p, const JunctionCharge& charge, double vd_v,
                                                      double freq_hz, double temp_k) {
  const double nvt = p.n * thermal_voltage_v(temp_k);
  return admittance(charge, p.is_a * std::exp(vd_v / nvt) / nvt, vd_v, freq_hz);
}

std::complex<double> junction_admittance_s(const DiodeParams& p, const JunctionCharge& charge, double i_a, double freq_hz,
                                           double temp_k) {
  const double gd = (i_a + p.is_a) / (p.n * thermal_voltage_v(temp_k));
  return admittance(charge, gd, junction_voltage_at_current_v(p, i_a, temp_k), freq_hz);
}

std::complex<double> diode_small_signal_impedance(const DiodeParams& p, const JunctionCharge& charge, double i_a,
                                                  double freq_hz, double temp_k) {
  return p.rs_ohm + 1.0 / junction_admittance_s(p, charge, i_a, freq_hz, temp_k);
}

}  // namespace junco::fitting
