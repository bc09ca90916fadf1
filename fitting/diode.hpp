// The diode model shared by the fit, the calculators and the simulated bench.
//
//   I = Is·(exp((V − I·Rs)/(n·Vt)) − 1) + (V − I·Rs)/Rsh
//
// Rs is in series with the junction; the optional shunt Rsh sits across the
// junction only (infinite by default). Vt = k·T/q with the exact CODATA 2018
// (SI 2019) constants. All functions are pure and thread-safe.
#pragma once

#include <limits>

namespace junco::fitting {

inline constexpr double boltzmann_j_per_k = 1.380649e-23;       // exact, SI 2019
inline constexpr double elementary_charge_c = 1.602176634e-19;  // exact, SI 2019
inline constexpr double zero_celsius_k = 273.15;                 // exact

struct DiodeParams {
  double is_a = 1e-14;  // saturation current
  double n = 1.0;       // ideality (emission coefficient)
  double rs_ohm = 0.0;  // series resistance
  double rsh_ohm = std::numeric_limits<double>::infinity();  // shunt across the junction
};

double thermal_voltage_v(double temp_k);
inline double kelvin_from_celsius(double temp_c) { return temp_c + zero_celsius_k; }

// W0(e^x) for any real x without overflow: Boost.Math's lambert_w0 where e^x
// is representable, Newton on w + ln w = x beyond (the asymptotic form).
double lambert_w0_of_exp(double x);

// Terminal voltage at terminal current i_a. Explicit without a shunt; with a
// shunt, the junction voltage comes from Lambert W as well. NaN when i_a is
// at or below −Is with no shunt (no real solution).
double diode_voltage_v(const DiodeParams& p, double i_a, double temp_k);

// Terminal current at terminal voltage v, explicit via Lambert W
// (Banwell & Jayakumar 2000; with shunt, Ortiz-Conde et al. 2000).
double diode_current_a(const DiodeParams& p, double v, double temp_k);

// Voltage across the junction alone (terminal voltage minus I·Rs).
inline double junction_voltage_v(const DiodeParams& p, double v, double i_a) { return v - i_a * p.rs_ohm; }

// Small-signal resistance dV/dI at terminal current i_a (includes Rs and Rsh).
double dynamic_resistance_ohm(const DiodeParams& p, double i_a, double temp_k);

}  // namespace junco::fitting
