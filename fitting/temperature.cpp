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

}  // namespace junco::fitting
