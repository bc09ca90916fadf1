// DC bias calculators for a diode switch fed from a supply through a bias
// resistor: operating point, resistor for a target current, drive headroom,
// power against limits. DC path: supply → Rb → diode → Rr (DC return, may
// be 0) → ground; the signal source and load are DC-blocked.
#pragma once

#include "fitting/diode.hpp"

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
