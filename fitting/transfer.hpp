// Small-signal AC transfer of the fixture's series switch, from a fitted part.
//
//   source EMF ── Rg ──┬── block ──┬── diode ──┬── block ──┬── RL ── gnd
//                  (ch1, input)    │           │       (ch2, output)
//                                 Rb          Rr
//                                  │           │
//                          bias supply       gnd
//
// At the signal frequency the DC blocks are shorts and the bias supply is AC
// ground, so the bias feed resistor Rb is a shunt at the anode node and the
// DC-return resistor Rr a shunt at the cathode node (infinite = absent; a
// choke is an infinite shunt). The diode is Rs + rj, where rj = n·Vt/(I + Is)
// is the junction's small-signal resistance at bias current I, with the
// junction's stored charge (when known) in parallel with rj only: a constant
// Cj or the law Cj(V) at the bias, plus the diffusion capacitance TT·gd
// (junction_charge.hpp), so the junction is 1/(gd + jω(Cj + TT·gd)).
//
// Naming: the ratio the level meter measures, Vout/Vin (ch2/ch1), is the
// "fixture gain" (in dB, the fixture ratio); it is not a loss. Insertion loss
// and isolation have one definition (design_switch.hpp, docs/design.md).

//
// Two ratios are offered:
//   * fixture gain   Vout/Vin (ch2 over ch1): what the level meter measures;
//   * transfer ratio Vout/Vout_thru, where Vout_thru = EMF·RL/(Rg + RL) is the
//     load voltage with source and load joined directly. Insertion loss is
//     −20·log10|transfer ratio|; with Rg = RL = Z0 and no shunts it is the
//     textbook 20·log10|1 + Z/(2·Z0)| (docs/references.md §6).
#pragma once

#include "fitting/diode.hpp"
#include "fitting/junction_charge.hpp"

#include <cmath>
#include <complex>
#include <limits>
#include <span>
#include <vector>

namespace junco::fitting {

inline constexpr double no_shunt_ohm = std::numeric_limits<double>::infinity();

struct Fixture {
  double source_ohm = 50.0;               // signal source resistance
  double load_ohm = 50.0;               // load
  double bias_feed_ohm = no_shunt_ohm;  // Rb: supply to anode (AC shunt at the anode)
  double dc_return_ohm = no_shunt_ohm;  // Rr: cathode to ground (AC shunt at the cathode)
};

// The part as the AC model needs it: DC parameters plus an optional
// zero-bias junction capacitance (0 = unknown/ignored).
struct AcPart {
  // A constructor (not an aggregate) so the common {dc, cj_f} stays complete.
  AcPart(DiodeParams dc_ = {}, double cj_f_ = 0.0, double tt_s_ = 0.0, JunctionCap cap_ = {})
      : dc(dc_), cj_f(cj_f_), tt_s(tt_s_), cap(cap_) {}
  DiodeParams dc;
  double cj_f = 0.0;  // constant junction capacitance (parallel to rj); adds to the law's
  double tt_s = 0.0;  // transit time: diffusion capacitance TT·gd (parallel to rj)
  JunctionCap cap;    // depletion law Cj(V) at the bias point; cap.cj0_f = 0: none
};

// Junction small-signal resistance n·Vt/(I + Is) (without Rs).
double junction_resistance_ohm(const DiodeParams& p, double bias_i_a, double temp_k);

// Impedance of the forward-biased diode at the signal frequency.
std::complex<double> diode_on_impedance(const AcPart& part, double bias_i_a, double freq_hz, double temp_k);

// What the diode drives at the cathode: RL ∥ Rr (Rr infinite: RL alone).
double cathode_load_ohm(const Fixture& fx);

// Vout/Vin (ch2/ch1) of the fixture with the diode of impedance z_diode.
std::complex<double> fixture_gain(const Fixture& fx, std::complex<double> z_diode);
// Vout/Vout_thru (see above).
std::complex<double> transfer_ratio(const Fixture& fx, std::complex<double> z_diode);

inline double to_db(std::complex<double> ratio) { return 20.0 * std::log10(std::abs(ratio)); }

// 20·log10|Vout/Vin| of the fixture for a diode Rs + (rj ∥ Cj ∥ TT·gd) in
// series with the cathode's load z_load = RL ∥ Rr, omega_cj = ω·Cj (0: no
// Cj; a dual number too when Cj(V) follows the fitted junction, as in the
// electro-thermal fit), omega_tt = ω·TT (0: no stored charge; TT·gd·rj = TT).
// The same value as to_db(fixture_gain(...)), written out in real arithmetic
// so the fits can differentiate it with Ceres's dual numbers.
template <typename T, typename U = double, typename C = double>
T fixture_gain_db_of(const T& rj, const T& rs, const C& omega_cj, double z_load, const U& omega_tt = U(0.0)) {
  using std::log10;
  const T a = omega_cj * rj + omega_tt;  // ω·(Cj·rj + TT)
  const T re = rs + rj / (1.0 + a * a) + z_load;
  const T im = -a * rj / (1.0 + a * a);
  return 10.0 * log10((z_load * z_load) / (re * re + im * im));
}

// Insertion loss (dB, positive = loss) of the biased part in the fixture.
double insertion_loss_db(const Fixture& fx, const AcPart& part, double bias_i_a, double freq_hz, double temp_k);

// One AC reading of a run: the bias current measured during the reading and
// the two level-meter channels (same unit on both; only the ratio is used).
struct AcPoint {
  double bias_i_a = 0.0;
  double freq_hz = 0.0;
  double vin = 0.0;   // ch1, fixture input
  double vout = 0.0;  // ch2, fixture output
  double peak_per_unit = 1.4142135623730951;  // peak volts per reading unit: √2 for Vrms readings, ½ for Vpp

  // The one rule for a reading any AC fit may take at all: both levels and
  // the bias finite and positive, the frequency finite and ≥ 0 (NaN, ±inf,
  // zero or negative levels fail). Fits of a frequency
  // dependence (stored charge, PIN law) need freq_hz > 0 besides; which
  // usable readings the small-signal model can describe is
  // screen_ac_readings (joint_fit.hpp).
  bool usable() const {
    const auto positive = [](double x) { return x > 0.0 && std::isfinite(x); };
    return positive(vin) && positive(vout) && positive(bias_i_a) && freq_hz >= 0.0 && std::isfinite(freq_hz);
  }
};

struct AcResidual {
  double bias_i_a = 0.0;
  double measured_db = 0.0;  // 20·log10(vout/vin)
  double model_db = 0.0;     // 20·log10|fixture_gain|
  double residual_db = 0.0;  // measured − model
};

std::vector<AcResidual> ac_residuals(const Fixture& fx, const AcPart& part, std::span<const AcPoint> points,
                                     double temp_k);

}  // namespace junco::fitting
