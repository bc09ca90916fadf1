#include "fitting/temperature.hpp"

namespace junco::fitting {

double saturation_current_at_a(double is_a, double n, double tnom_k, double temp_k, const TemperatureLaw& law) {
  return is_a * std::exp(log_saturation_current_ratio(n, temp_k, tnom_k, law));
}

double series_resistance_at_ohm(double rs_ohm, double tnom_k, double temp_k, const TemperatureLaw& law) {
  const double dt_k = temp_k - tnom_k;
  return rs_ohm * (1.0 + law.trs1_per_k * dt_k + law.trs2_per_k2 * dt_k * dt_k);
}

DiodeParams diode_at_temperature(const DiodeParams& p, double tnom_k, double temp_k, const TemperatureLaw& law) {
  DiodeParams hot = p;
  hot.is_a = saturation_current_at_a(p.is_a, p.n, tnom_k, temp_k, law);
  hot.rs_ohm = series_resistance_at_ohm(p.rs_ohm, tnom_k, temp_k, law);
  return hot;
}

namespace {

constexpr double spice_ref_temp_k = 300.15;  // REFTEMP of SPICE3 / ngspice

// The built-in potential's temperature term pb(T) of diotemp.c (see the header).
double depletion_pb_v(double temp_k) {
  const double vt = thermal_voltage_v(temp_k);
  const double eg_si_ev = 1.16 - 7.02e-4 * temp_k * temp_k / (temp_k + 1108.0);
  // q·arg of the code, with EG in eV: the charge cancels against k in J/K.
  const double q_arg = (-eg_si_ev / (2.0 * temp_k) + 1.1150877 / (2.0 * spice_ref_temp_k)) * elementary_charge_c / boltzmann_j_per_k;
  return -2.0 * vt * (1.5 * std::log(temp_k / spice_ref_temp_k) + q_arg);
}

}  // namespace

DepletionAtTemperature depletion_at_temperature(double cj0_f, double vj_v, double m, double tnom_k, double temp_k) {
  const double fact1 = tnom_k / spice_ref_temp_k, fact2 = temp_k / spice_ref_temp_k;
  const double pbo = (vj_v - depletion_pb_v(tnom_k)) / fact1;
  const double gma_old = (vj_v - pbo) / pbo;
  DepletionAtTemperature d;
  d.vj_v = depletion_pb_v(temp_k) + fact2 * pbo;
  const double gma_new = (d.vj_v - pbo) / pbo;
  d.cj0_f = cj0_f / (1.0 + m * (400e-6 * (tnom_k - spice_ref_temp_k) - gma_old)) *
            (1.0 + m * (400e-6 * (temp_k - spice_ref_temp_k) - gma_new));
  return d;
}

}  // namespace junco::fitting
