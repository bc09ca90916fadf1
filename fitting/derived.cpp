#include "fitting/derived.hpp"

#include <cmath>
#include <functional>
#include <limits>

namespace junco::fitting {

namespace {
constexpr double nan_v = std::numeric_limits<double>::quiet_NaN();

// Value and delta-method error of f(params) using the fit's covariance; the
// gradient is a central difference in each parameter's natural scale.
Estimate propagate(const FitResult& fit, const std::function<double(const DiodeParams&)>& f) {
  const DiodeParams p0 = fit.params();
  Estimate e{f(p0), nan_v};
  const std::size_t dim = fit.covariance.size();
  if (dim == 0 || !std::isfinite(e.value)) return e;
  std::vector<double> grad(dim);
  for (std::size_t k = 0; k < dim; ++k) {
    DiodeParams hi = p0, lo = p0;
    double* ph[4] = {&hi.is_a, &hi.n, &hi.rs_ohm, &hi.rsh_ohm};
    double* pl[4] = {&lo.is_a, &lo.n, &lo.rs_ohm, &lo.rsh_ohm};
    const double h = 1e-6 * std::max(std::abs(*ph[k]), k == 2 ? 1e-3 : 1e-300);
    *ph[k] += h;
    *pl[k] -= h;
    if (*pl[k] < 0.0) *pl[k] = 0.0;
    grad[k] = (f(hi) - f(lo)) / (*ph[k] - *pl[k]);
  }
  double var = 0.0;
  for (std::size_t a = 0; a < dim; ++a)
    for (std::size_t b = 0; b < dim; ++b) var += grad[a] * fit.covariance[a][b] * grad[b];
  e.std_error = std::sqrt(std::max(var, 0.0));
  return e;
}
}  // namespace

double forward_voltage_v(const DiodeParams& p, double i_a, double temp_k) { return diode_voltage_v(p, i_a, temp_k); }

double small_signal_resistance_ohm(const DiodeParams& p, double i_a, double temp_k) {
  return dynamic_resistance_ohm(p, i_a, temp_k);
}

double current_for_resistance_a(const DiodeParams& p, double rd_ohm, double temp_k) {
  const double nvt = p.n * thermal_voltage_v(temp_k);
  if (!(rd_ohm > p.rs_ohm)) return nan_v;
  if (!std::isfinite(p.rsh_ohm)) {
    const double i = nvt / (rd_ohm - p.rs_ohm) - p.is_a;
    return i > 0.0 ? i : nan_v;
  }
  // rd falls monotonically with current: bisect in ln I over the forward range.
  double lo = std::log(1e-18), hi = std::log(10.0);
  if (small_signal_resistance_ohm(p, std::exp(lo), temp_k) < rd_ohm) return nan_v;
  if (small_signal_resistance_ohm(p, std::exp(hi), temp_k) > rd_ohm) return nan_v;
  for (int k = 0; k < 200 && hi - lo > 1e-14; ++k) {
    const double mid = 0.5 * (lo + hi);
    (small_signal_resistance_ohm(p, std::exp(mid), temp_k) > rd_ohm ? lo : hi) = mid;
  }
  return std::exp(0.5 * (lo + hi));
}

Estimate forward_voltage_v(const FitResult& fit, double i_a) {
  return propagate(fit, [&](const DiodeParams& p) { return forward_voltage_v(p, i_a, fit.temp_k); });
}

Estimate small_signal_resistance_ohm(const FitResult& fit, double i_a) {
  return propagate(fit, [&](const DiodeParams& p) { return small_signal_resistance_ohm(p, i_a, fit.temp_k); });
}

Estimate current_for_resistance_a(const FitResult& fit, double rd_ohm) {
  return propagate(fit, [&](const DiodeParams& p) { return current_for_resistance_a(p, rd_ohm, fit.temp_k); });
}

Estimate forward_voltage_v(const FitResult& fit, double i_a, double temp_k, const TemperatureLaw& law) {
  return propagate(fit, [&](const DiodeParams& p) {
    return forward_voltage_v(diode_at_temperature(p, fit.temp_k, temp_k, law), i_a, temp_k);
  });
}

Estimate small_signal_resistance_ohm(const FitResult& fit, double i_a, double temp_k, const TemperatureLaw& law) {
  return propagate(fit, [&](const DiodeParams& p) {
    return small_signal_resistance_ohm(diode_at_temperature(p, fit.temp_k, temp_k, law), i_a, temp_k);
  });
}

}  // namespace junco::fitting
