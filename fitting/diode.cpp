#include "fitting/diode.hpp"

#include <boost/math/special_functions/lambert_w.hpp>

#include <cmath>

namespace junco::fitting {

double thermal_voltage_v(double temp_k) { return boltzmann_j_per_k * temp_k / elementary_charge_c; }

double lambert_w0_of_exp(double x) {
  // exp(700) is about 1e304: still finite, and Boost's W0 is exact there.
  if (x < 700.0) return boost::math::lambert_w0(std::exp(x));
  // w + ln w = x; start from the first terms of the asymptotic series.
  double w = x - std::log(x);
  for (int k = 0; k < 8; ++k) {
    const double step = (w + std::log(w) - x) / (1.0 + 1.0 / w);
    w -= step;
    if (std::abs(step) <= 1e-15 * w) break;
  }
  return w;
}

namespace {

bool has_shunt(const DiodeParams& p) { return std::isfinite(p.rsh_ohm); }

// Junction voltage for a junction current split between the diode and Rsh:
// Is·(e^(Vj/nVt) − 1) + Vj/Rsh = i. With c = Is·Rsh/nVt and a = (i + Is)·Rsh/nVt
// the solution is Vj = nVt·(a − W(c·e^a)). Because W + ln W = ln c + a, that
// difference equals ln(W/c): the log form avoids subtracting two numbers of
// size a (about 4e4 at 1 mA into 1 MΩ), which would lose digits.
double junction_voltage_with_shunt_v(const DiodeParams& p, double i_a, double nvt) {
  const double log_c = std::log(p.is_a * p.rsh_ohm / nvt);
  const double a = (i_a + p.is_a) * p.rsh_ohm / nvt;
  const double x = log_c + a;
  // Deep reverse bias: W(e^x) ≈ e^x, whose log would underflow; a − W is exact enough.
  if (x < -30.0) return nvt * (a - std::exp(x));
  return nvt * (std::log(lambert_w0_of_exp(x)) - log_c);
}

}  // namespace

double diode_voltage_v(const DiodeParams& p, double i_a, double temp_k) {
  const double nvt = p.n * thermal_voltage_v(temp_k);
  if (has_shunt(p)) return i_a * p.rs_ohm + junction_voltage_with_shunt_v(p, i_a, nvt);
  if (i_a <= -p.is_a) return std::numeric_limits<double>::quiet_NaN();
  return i_a * p.rs_ohm + nvt * std::log1p(i_a / p.is_a);
}

double diode_current_a(const DiodeParams& p, double v, double temp_k) {
  const double nvt = p.n * thermal_voltage_v(temp_k);
  if (p.rs_ohm <= 0.0) {
    const double shunt = has_shunt(p) ? v / p.rsh_ohm : 0.0;
    return p.is_a * std::expm1(v / nvt) + shunt;
  }
  if (!has_shunt(p)) {
    const double log_arg = std::log(p.is_a * p.rs_ohm / nvt) + (v + p.is_a * p.rs_ohm) / nvt;
    const double i = nvt / p.rs_ohm * lambert_w0_of_exp(log_arg) - p.is_a;
    if (i >= p.is_a) return i;
    // Below Is the subtraction above cancels (relative error ε·Is/I: all of
    // it once a huge resistance leaves I ≪ Is). Solve for d = I/Is instead:
    // ln(1 + d) + y·d = V/nVt with y = Is·R/nVt, increasing and concave in d.
    const double y = p.is_a * p.rs_ohm / nvt, target = v / nvt;
    double d = std::max(i / p.is_a, -0.5);
    for (int k = 0; k < 60; ++k) {
      const double step = (std::log1p(d) + y * d - target) / (1.0 / (1.0 + d) + y);
      double next = d - step;
      if (next <= -1.0) next = 0.5 * (d - 1.0);  // stay above the asymptote
      const bool done = std::abs(next - d) <= 1e-15 * std::abs(next);
      d = next;
      if (done) break;
    }
    return p.is_a * d;
  }
  const double rsum = p.rs_ohm + p.rsh_ohm;
  const double log_arg =
      std::log(p.is_a * p.rs_ohm * p.rsh_ohm / (nvt * rsum)) + p.rsh_ohm * (v + p.is_a * p.rs_ohm) / (nvt * rsum);
  return (v - p.is_a * p.rsh_ohm) / rsum + nvt / p.rs_ohm * lambert_w0_of_exp(log_arg);
}

double dynamic_resistance_ohm(const DiodeParams& p, double i_a, double temp_k) {
  const double nvt = p.n * thermal_voltage_v(temp_k);
  const double vj = diode_voltage_v(p, i_a, temp_k) - i_a * p.rs_ohm;
  // Junction conductance: diode part plus shunt.
  double g = (p.is_a * std::exp(vj / nvt)) / nvt;
  if (has_shunt(p)) g += 1.0 / p.rsh_ohm;
  return p.rs_ohm + 1.0 / g;
}

}  // namespace junco::fitting
