// The PIN diode: a junction whose intrinsic (I) region, flooded with stored
// charge Q when forward biased, is a resistance set by that charge.
//
// Charge control (docs/references.md §8): dQ/dt = i − Q/τ, so at a steady
// bias Q = I·τ, and an ideal I-region of width W conducts with
// G_I = (µn + µp)·Q/W², i.e. R_I = W²/((µn + µp)·τ·I) — inversely
// proportional to the stored charge. Practical parts follow the law
// R(I) = R0 + K·I^−x (x ≈ 0.8–1; R0 the contacts and the undepleted ends).
//
// Small signal at bias I and angular frequency ω, linearising the charge
// equation (our derivation, docs/fitting.md "PIN diodes"): the signal charge
// is q = i·τ/(1 + jωτ); the junction's voltage follows q (v_j = rd·q/τ,
// rd = N·Vt/I) and the I-region's drop I·R_I(Q) moves by R_I·i + I·dR_I/dQ·q
// = R_I·i − x·R_I·q/τ (R_I = K·(Q/τ)^−x), so
//   Z(ω) = R0 + rd/(1 + jωτ) + R_I·(1 + jωτ − x)/(1 + jωτ).
// (At DC the I-region adds (1 − x)·R_I, the slope of its drop K·I^(1−x).)
// Below the knee f_τ = 1/(2π τ) the part is a junction (rd + R0; with x = 1
// the I-region's DC drop is independent of I); above it the charge cannot
// follow the signal, the junction is shorted by its diffusion capacitance
// and the part is the resistor R0 + K·I^−x.
//
// Off (reverse biased past punch-through): the total capacitance CT in
// parallel with a loss resistance Rp.
#pragma once

#include "fitting/extract.hpp"
#include "fitting/junction_cap.hpp"
#include "fitting/transfer.hpp"

#include <complex>
#include <limits>
#include <span>
#include <string>
#include <vector>

namespace junco::fitting {

struct PinLaw {
  double n = 2.0;           // junction ideality below the knee (high injection: about 2)
  double tau_s = 1e-6;      // carrier lifetime τ
  double r0_ohm = 0.5;      // R0: resistance that the stored charge does not modulate
  double k_ohm_a_x = 0.02;  // K in Ω·A^x
  double x = 1.0;           // exponent of the current
};

// A PIN part as the calculators take it: the law on, CT ∥ Rp off (ct_f 0: unknown).
struct PinPart {
  PinLaw law;
  double ct_f = 0.0;
  double rp_ohm = std::numeric_limits<double>::infinity();
};

// R0 + K·I^−x: the RF resistance well above the knee (I > 0).
double pin_rf_resistance_ohm(const PinLaw& law, double i_a);
// The lifetime's corner 1/(2π τ).
double pin_knee_freq_hz(double tau_s);
// Z(ω) above, at bias i_a (> 0). cj_f: a depletion capacitance across the
// junction (0: left out, as above). With it the junction's admittance is
// Yj = (1 + jωτ)/rd + jω·Cj and, the I-region's drop moving with the
// diffusion charge only (q = τ·vj/rd),
//   Z(ω) = R0 + R_I + (1 − x·R_I/rd)/Yj,
// which is the form above when Cj = 0 (our derivation, docs/fitting.md).
std::complex<double> pin_on_impedance(const PinLaw& law, double i_a, double freq_hz, double temp_k, double cj_f = 0.0);
// CT ∥ Rp.
std::complex<double> pin_off_impedance(double ct_f, double rp_ohm, double freq_hz);
// K of an ideal I-region: W²/((µn + µp)·τ) (then x = 1, R0 = 0).
double pin_ideal_k_ohm_a(double width_m, double mobility_sum_m2_per_v_s, double tau_s);

struct PinFitOptions {
  double temp_k = 300.15;
  double ac_sigma_db = 0.01;  // standard uncertainty of one reading's ratio
  int max_iterations = 300;
};

// The law fitted to small-signal readings at several biases and frequencies.
// parameter_names/covariance: (n, tau_s, r0_ohm, k_ohm_a_x, x) in SI, scaled
// by the reduced χ² when that exceeds 1.
struct PinFit {
  bool ok = false;
  std::string message;
  Estimate n, tau_s, r0_ohm, k_ohm_a_x, x;
  Estimate r_1ma_ohm;   // R0 + K·(1 mA)^−x, the law at a reference current
  std::vector<std::string> parameter_names;
  std::vector<std::vector<double>> covariance;
  double reduced_chi2 = 0.0;
  std::size_t points = 0;
  std::size_t frequencies = 0;
  std::size_t above_knee = 0;  // readings at f ≥ 3·f_τ of the fitted τ: those that set R0, K, x
  double knee_freq_hz = 0.0;
  PinLaw law() const { return {n.value, tau_s.value, r0_ohm.value, k_ohm_a_x.value, x.value}; }
};

// Levenberg–Marquardt on (measured − model dB)/σ over (N, ln τ, R0,
// ln R(1 mA)−R0, x), τ started from a log grid 1 ns … 1 ms. Readings at one
// frequency only see R(I) or rd: ≥ 2 frequencies and more readings than the
// 5 parameters are needed. R0, K, x are set by the readings above the knee
// and τ by the knee itself: with readings on one side only, the standard
// errors say which is undetermined.
PinFit fit_pin_law(std::span<const AcPoint> ac, const Fixture& fixture, const PinFitOptions& options);

// Its JSON (detail.pin): formats/report_json.hpp.

// The same law fitted to the chip's own complex impedance at forward bias
// (vector readings with the fixture and the package removed,
// daemon/vector_analysis.hpp): the real part above the knee gives R0 + K·I^−x,
// the knee's frequency and the phase around it give τ, the real part below
// it rd + R0 + (1 − x)·R_I. Residuals (Z_model − Z)/|Z|, real and imaginary
// parts, each over sigma_relative; the covariance is scaled by the reduced
// χ² whatever its size (the vector meter's noise on Z is not known in
// advance: the readings' own scatter sets the errors, as fit_package does).
// junction_only: a signal diode (no I-region): K held at 0 and x at 1, so the
// fit is N, τ (then the transit time TT, the diffusion capacitance TT·gd)
// and R0 (then RS); k_ohm_a_x and x carry a NaN standard error.
struct PinImpedanceReading {
  double i_a = 0.0;      // the bias current (> 0)
  double freq_hz = 0.0;
  std::complex<double> z_ohm;  // the chip's impedance
  double cj_f = 0.0;     // depletion capacitance at this bias, when known (pin_on_impedance)
};
struct PinImpedanceFitOptions {
  double temp_k = 300.15;
  double sigma_relative = 0.005;  // standard uncertainty of Re Z and Im Z, relative to |Z|
  bool junction_only = false;
  int max_iterations = 300;
};
PinFit fit_pin_impedance(std::span<const PinImpedanceReading> readings, const PinImpedanceFitOptions& options);

// Off state from off-state readings (any reverse bias past punch-through):
// CT and Rp fitted to the fixture ratio.
struct PinOffFit {
  bool ok = false;
  std::string message;
  Estimate ct_f, rp_ohm;
  double reduced_chi2 = 0.0;
  std::size_t points = 0;
};
PinOffFit fit_pin_off_state(std::span<const OffStatePoint> off, const Fixture& fixture, double ac_sigma_db = 0.01);

// The large-signal screen of a PIN part: a reading whose signal is not small
// against the bias (the junction rule, screen_ac_readings) is still linear
// when the RF current's charge per half cycle, Î/(π f), is small against the
// stored charge I·τ (docs/references.md §8). Kept when either holds, with
// the same ratio (max_signal_ratio) for both. One entry per reading: "" when
// used, else "large signal" or "below the level floor".
std::vector<std::string> screen_pin_ac_readings(std::span<const AcPoint> ac, const Fixture& fixture, double tau_s,
                                                double max_signal_ratio = 0.1, double floor_v = 100e-6);

// Large signal in a series switch: source EMF Â·sin ωt → Rg → DC block →
// anode (bias current I_b fed in, open at AC) → PIN → cathode → RL → ground.
// Charge control in the time domain: dQ/dt = i − Q/τ, the diode's voltage
// R0·i + N·Vt·ln(1 + Q/(τ·IS)) + i·K·(Q/τ)^−x; periodic steady state by
// shooting on (Q at t = 0, the block's voltage), RK4 over one period.
// Harmonics of the load's AC current (DFT).
struct PinDistortion {
  bool converged = false;
  double load_peak_v = 0.0;  // fundamental across RL
  double hd2_dbc = 0.0, hd3_dbc = 0.0;
  double thd = 0.0;          // √(Σ_{k=2..9} h_k²)/h_1
  double min_current_a = 0.0, max_current_a = 0.0;
};
PinDistortion pin_series_distortion(const PinLaw& law, double is_a, double bias_i_a, double freq_hz, double source_peak_v,
                                    double source_ohm, double load_ohm, double temp_k, int steps_per_period = 512);

// The same solve in a shunt switch: source EMF → Rg → line node (RL to
// ground) → DC block → anode (bias current I_b fed in, open at AC) → PIN →
// ground. With G = 1/Rg + 1/RL the block's current is
// i_c = (e/Rg − G·(v_cb + R·I_b + v_j)) / (1 + G·R), R = R0 + R_I(Q); the
// line voltage (the load's) is (e − Rg·i_c)·RL/(Rg + RL); the harmonics are
// of that voltage. load_peak_v its fundamental, min/max_current_a the PIN's.
PinDistortion pin_shunt_distortion(const PinLaw& law, double is_a, double bias_i_a, double freq_hz, double source_peak_v,
                                   double source_ohm, double load_ohm, double temp_k, int steps_per_period = 512);

}  // namespace junco::fitting
