// What the heating plan options measure (plan.heating, docs/daemon-core.md):
// the thermal resistance and time constant from two dwells per pulsed step,
// and the hysteresis between a sweep up and a sweep down. Pure computation,
// no I/O; juncod calls it after a run (daemon/part_analysis.hpp).
//
// Two dwells. Each pulsed step is one pulse from cold (the output off long
// enough before it), read three times at the same supply setting: at its
// start t0 (the pulsed reading itself, a few ms), at t1 = dwell.short_s and
// t2 = dwell.long_s. Model, first-order thermal RC (a single thermal
// resistance and capacitance, common practice, no source):
//   Tj(t) − Ta = ΔT∞·(1 − e^(−t/τ)),  so  Vf(t) = Vf(0) + ΔVf∞·(1 − e^(−t/τ))
// while dVf/dT is constant over the rise. With d1 = Vf(t1) − Vf(t0) and
// d2 = Vf(t2) − Vf(t0) (each corrected to the current of the t0 reading by
// the part's dV/dI = Rs + n·Vt/I: the supply is held, the current moves a
// little as Vf falls):
//   d1/d2 = (e^(−t0/τ) − e^(−t1/τ)) / (e^(−t0/τ) − e^(−t2/τ))
// is monotonic in τ (from (t1 − t0)/(t2 − t0) as τ → ∞ to 1 as τ → 0) and is
// solved for τ by bisection; then ΔVf∞ = d2 / (e^(−t0/τ) − e^(−t2/τ)).
// No assumption t0 ≪ τ or t2 ≫ τ is needed (only t0 < t1 < t2).
// Rth: ΔT∞ is the temperature rise that moves the SPICE law's junction
// voltage Vj(I, T) = n·Vt(T)·ln(1 + I/Is(T)) by ΔVf∞ (fitting/temperature.hpp,
// Is(T) with EG, XTI; plus I·(RS(T) − RS) when TRS is given) — the secant,
// not the slope at Ta; near Ta the slope is dVj/dT = (Vj − EG − XTI·Vt)/T,
// about −1.5 mV/K — and Rth = ΔT∞ / P∞ with P∞ = I·(Vf(0) + ΔVf∞), the power
// in the settled state. The power falls as the junction warms (P = I·V), which
// shortens the observed time constant by the loop gain g = Rth·I·|dVf/dT|:
// τ = τ_observed·(1 + g), reported corrected.
//
// Hysteresis. A sweep up and the same steps down: a junction that lags its
// power (steps shorter than a few τ) is cooler going up and warmer coming
// down, so Vf(up) − Vf(down) > 0 where the power is high. Each pair is
// compared at the up reading's current (dV/dI correction as above); the noise
// of a difference of two readings is √2·σ with σ = residual_sigma_v of the
// bench config's accuracy (the fit's σ, extract.hpp). Flagged when the
// largest |difference| exceeds flag_z of its σ.
#pragma once

#include "fitting/diode.hpp"
#include "fitting/extract.hpp"
#include "fitting/temperature.hpp"

#include <limits>
#include <span>
#include <string>
#include <vector>

namespace junco::fitting {

inline constexpr double kUnset = std::numeric_limits<double>::quiet_NaN();

struct TimedReading {
  double dwell_s = kUnset;  // output on → reading
  double v = kUnset;
  double i_a = kUnset;
};

// One pulsed step: the pulse's first reading and its two dwell readings.
struct DwellStep {
  TimedReading start, short_dwell, long_dwell;
};

struct HeatingOptions {
  double ambient_k = 300.15;  // Ta, TNOM of params
  TemperatureLaw law;
  AccuracyModel accuracy;     // the bench config's DC accuracy (σ = limit/√3)
  double min_rise_sigmas = 10;  // a step's d2 must exceed this many σ of a difference to be used
  double flag_z = 4;            // hysteresis flagged above this many σ
};

struct DwellStepResult {
  bool used = false;
  std::string why;  // why not used
  double i_a = kUnset, power_w = kUnset, delta_vf_inf_v = kUnset, delta_t_inf_k = kUnset, tau_s = kUnset, rth_k_per_w = kUnset;
};

struct DwellThermal {
  std::string status;  // "measured" | "not_determined" (note says why)
  std::string note;
  Estimate rth_k_per_w, tau_s;  // mean over the used steps (weighted by d2²), SE from their scatter (NaN from one step)
  std::vector<DwellStepResult> steps;
  std::size_t used = 0;
};

// params: the part at Ta (for dV/dI and Vj), e.g. its DC fit.
DwellThermal dwell_thermal(std::span<const DwellStep> steps, const DiodeParams& params, const HeatingOptions& options);

// The time constant τ that gives ratio d1/d2 at t0 < t1 < t2; NaN when the
// ratio is outside ((t1 − t0)/(t2 − t0), 1).
double first_order_tau_s(double t0, double t1, double t2, double ratio);

struct SweepPair {
  double set_value = 0;
  IvPoint up, down;
};

struct Hysteresis {
  std::size_t pairs = 0;
  double max_abs_v = kUnset;     // largest |Vup − Vdown| at the same current
  double at_i_a = kUnset;        // where
  double sigma_v = kUnset;       // σ of that difference
  double max_z = kUnset;         // largest |difference|/σ over the pairs
  double mean_v = kUnset;        // mean signed Vup − Vdown
  bool flagged = false;
  std::string note;
};

Hysteresis sweep_hysteresis(std::span<const SweepPair> pairs, const DiodeParams& params, const HeatingOptions& options);

}  // namespace junco::fitting
