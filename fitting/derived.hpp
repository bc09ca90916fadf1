// Figures a designer reads off a fitted part: forward voltage at a bias
// current, small-signal resistance rd(I) = n·Vt/I + Rs, and the bias current
// that gives a wanted rd. With a FitResult, each comes with a standard error
// propagated from the fit's covariance (first-order, delta method).
#pragma once

#include "fitting/diode.hpp"
#include "fitting/extract.hpp"
#include "fitting/temperature.hpp"

namespace junco::fitting {

// Forward voltage at current i_a (exact, includes I·Rs and the shunt).
double forward_voltage_v(const DiodeParams& p, double i_a, double temp_k);

// rd = dV/dI at i_a; without a shunt exactly n·Vt/(I + Is) + Rs.
double small_signal_resistance_ohm(const DiodeParams& p, double i_a, double temp_k);

// The forward current at which rd equals rd_ohm; NaN when no forward current
// reaches it (rd_ohm ≤ Rs, or above the zero-bias resistance).
double current_for_resistance_a(const DiodeParams& p, double rd_ohm, double temp_k);

// Each of the above for a fitted part, with its standard error (NaN when the
// fit has no covariance).
Estimate forward_voltage_v(const FitResult& fit, double i_a);
Estimate small_signal_resistance_ohm(const FitResult& fit, double i_a);
Estimate current_for_resistance_a(const FitResult& fit, double rd_ohm);

// The same at another junction temperature: the fit's Is and Rs moved from
// fit.temp_k (TNOM) to temp_k by the SPICE law (temperature.hpp), the
// standard error propagated through the law (EG, XTI held as given).
Estimate forward_voltage_v(const FitResult& fit, double i_a, double temp_k, const TemperatureLaw& law);
Estimate small_signal_resistance_ohm(const FitResult& fit, double i_a, double temp_k, const TemperatureLaw& law);

}  // namespace junco::fitting
