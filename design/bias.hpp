// DC bias calculators for a diode switch fed from a supply through a bias
// resistor: operating point, resistor for a target current, drive headroom,
// power against limits. DC path: supply → Rb → diode → Rr (DC return, may
// be 0) → ground; the signal source and load are DC-blocked.
#pragma once

#include "fitting/diode.hpp"

#include <functional>
#include <optional>
#include <string>
#include <vector>

namespace junco::fitting {

struct OperatingPoint {
  double i_a = 0.0;      // bias current
  double vd_v = 0.0;     // diode terminal voltage (includes I·Rs)
  double v_rb_v = 0.0;   // drop across the bias resistor
  double rd_ohm = 0.0;   // small-signal resistance Rs + n·Vt/(I + Is)
};

// Exact, via Lambert W: the resistors join Rs as one series resistance.
OperatingPoint operating_point(const DiodeParams& p, double supply_v, double bias_r_ohm, double return_r_ohm,
                               double temp_k);

// Rb = (Vs − Vd(I))/I − Rr. nullopt with *why when the supply cannot drive
// that current (Vs ≤ Vd + I·Rr).
std::optional<double> bias_resistor_ohm(const DiodeParams& p, double supply_v, double target_i_a,
                                        double return_r_ohm, double temp_k, std::string* why = nullptr);

// Smallest bias that keeps a series switch conducting over the signal swing:
// the diode carries the AC current of the load and of the DC-return shunt,
// Î = V̂·(1/RL + 1/Rr), and must stay above floor_a at the trough:
// I_min = Î + floor_a.
struct Headroom {
  double signal_peak_a = 0.0;  // Î through the diode
  double min_bias_a = 0.0;
};
Headroom drive_headroom(double load_peak_v, double load_ohm, double return_r_ohm, double floor_a);

// The same switch at a frequency, with stored charge (the charge-control
// model, docs/references.md §8 [CC]). The junction holds a charge Q that the
// current feeds and recombination drains with the lifetime τ (TT of a
// junction diode, the carrier lifetime of a PIN): dQ/dt = i − Q/τ. With
// i = I + Î·sin(ωt) the periodic solution is
//   Q(t) = I·τ + Î·τ/√(1 + (ωτ)²) · sin(ωt − atan(ωτ)),
// (put Q = I·τ + A·sin(ωt − φ) in the equation: A·√(ω² + 1/τ²) = Î), so Q
// stays above floor·τ (the junction current Q/τ above the floor) all cycle
// iff I > Î/√(1 + (ωτ)²) + floor. The terminal current may reverse in the
// trough while the junction stays on: the stored charge outlasts the
// negative half cycle. share(I) (optional, ≤ 1) is the part of Î that reaches
// the stored charge at bias I (the rest flows in the depletion capacitance);
// the least I with I ≥ floor + share(I)·Î/√(1 + (ωτ)²) is found from above.
// ωτ → 0 gives back the DC rule. Conservative: the depletion charge given up
// as the junction voltage sags in the trough also feeds Q, which the rule
// leaves out (ngspice .tran, tests/reference/headroom_ngspice_test.cpp).
struct ChargeHeadroom {
  double omega_tau = 0.0;       // ωτ
  double charge_peak_a = 0.0;   // share·Î/√(1 + (ωτ)²): the RF current's reach into Q
  double share = 1.0;           // share(I) at the answer
  double min_bias_a = 0.0;
};
ChargeHeadroom charge_headroom(double signal_peak_a, double freq_hz, double lifetime_s, double floor_a,
                               const std::function<double(double)>& share = {});

// Dissipation at the operating point against the user's limits. A value above
// its limit fails; above warn_fraction of it warns (derating, common practice).
struct PowerLimits {
  double diode_max_w = 0.0;     // 0 = not given
  double resistor_max_w = 0.0;  // 0 = not given
  double warn_fraction = 0.8;
};
struct PowerCheck {
  double diode_w = 0.0;     // Vd·I plus the signal's ½·Î²·rd
  double resistor_w = 0.0;  // I²·Rb
  std::vector<std::string> warnings;
  std::vector<std::string> failures;
  bool ok() const { return failures.empty(); }
};
PowerCheck check_power(const OperatingPoint& op, double bias_r_ohm, double signal_peak_a, const PowerLimits& limits);

}  // namespace junco::fitting
