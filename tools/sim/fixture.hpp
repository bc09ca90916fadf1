// The fixture's circuit and its two solves. Pure functions, no state.
//
//   supply ──Rb──[choke]──┬── A ──Rs──|>|── K ──┬──[DC block]── RL ── gnd
//                         │   (anode)  (Cj)      │                (ch2 = v across RL)
//   gen EMF ──Rg──(ch1)──[DC block]──┘           └── return: inductor (0 Ω DC,
//                                                    open at AC) or resistor ── gnd
//
// Channel 1 is the generator terminal voltage after its source resistance
// Rg (the fixture input); channel 2 is the voltage across RL. The bias choke
// (optional) makes the bias branch open at AC; without it Rb loads the anode.
// DC blocks are ideal large capacitors: their voltages are constant over a
// signal period and settle so that their mean current is zero; the chokes
// carry constant currents and settle so that their mean voltage is zero.
#pragma once

#include "tools/sim/part.hpp"

#include <complex>
#include <vector>

namespace junco::sim {

enum class ReturnKind { inductor, resistor };

struct FixtureConfig {
  double rb_ohm = 100.0;     // bias resistor
  bool bias_choke = true;    // choke in series with Rb (Rb open at AC)
  ReturnKind return_kind = ReturnKind::inductor;
  double return_ohm = 1000.0;  // when return_kind == resistor
  double source_ohm = 50.0;      // generator source resistance
  double load_ohm = 50.0;      // load
  int steps_per_period = 256;  // time steps of the AC solve
  // Parasitics the vector meter sees (sim truth; docs/sim.md "Vector
  // meter"): each part's package, and the fixture's own slot. The level
  // meter's large-signal solve leaves them out.
  double package_ls_h = 0.0;  // package series inductance of every part
  double package_cp_f = 0.0;  // package capacitance across every part's leads
  double stray_c_f = 0.0;     // fixture stray across the slot (an empty slot reads it)
  double slot_ls_h = 0.0;     // the slot's series trace inductance (a short link reads it)
};

// The supply as the fixture sees it: a voltage source, unless the current
// limit is reached (then a current source of ilim).
struct BiasSetting {
  bool output_on = false;
  double voltage_v = 0.0;
  double current_limit_a = 0.1;
};

struct DcPoint {
  double i_a = 0.0;          // through the part, anode → cathode
  double v_part_v = 0.0;     // across the part terminals (anode − cathode)
  double supply_v = 0.0;     // at the supply terminals
  double supply_i_a = 0.0;
  bool current_limited = false;
  double power_w = 0.0;      // dissipated in the part
};

// Exact DC operating point (Lambert W; Rb and the return resistance act as a
// larger Rs). `part` null = empty slot (open circuit).
DcPoint solve_dc(const FixtureConfig& fx, const PartParams* part, const BiasSetting& bias, double temp_k);

struct AcDrive {
  bool on = false;
  double emf_vpp = 0.0;   // generator open-circuit EMF, peak to peak (sine)
  double freq_hz = 1e6;
};

struct AcResult {
  double in_vrms = 0, in_vpp = 0;    // channel 1
  double out_vrms = 0, out_vpp = 0;  // channel 2
  DcPoint dc;                        // mean values with the signal applied (rectification)
  std::vector<double> wave_in_v, wave_out_v;  // one period, steps_per_period samples
  bool converged = true;
};

// Periodic steady state over one period of the drive (BDF2 in time on the
// junction charge, shooting for periodicity, Newton on the block voltages and
// choke currents). With the drive off it returns the DC point and zero levels.
AcResult solve_ac(const FixtureConfig& fx, const PartParams* part, const BiasSetting& bias, double temp_k,
                  const AcDrive& drive);

// What sits in the selected slot, as the vector meter sees it.
enum class SlotContent { part, open, short_link };

// Small-signal transfer ch2/ch1 at freq_hz, linearised at the DC point `dc`
// (the junction's gd and Cj(V) + TT·gd at temperature; a PIN part's
// I-region R_I(τ·Id) in series, modulated by the signal's stored charge:
// Z_chip = RS + R_I + Z_j·(1 − R_I·gd), Z_j = 1/(gd + jω(Cj + τ·gd))), with the package
// (Ls in series with the chip, Cp across the leads) and the slot (stray C
// across it, slot_ls_h in series):
//   Z_slot = 1/(jω·stray + 1/(jω·slot_ls + Z_packaged)),  H = Z_load/(Z_load + Z_slot),
// Z_load = RL, in parallel with the return resistor when the return is one.
// An open slot has Z_packaged = ∞, a short link 0.
std::complex<double> small_signal_transfer(const FixtureConfig& fx, SlotContent content, const PartParams* part,
                                           const DcPoint& dc, double temp_k, double freq_hz);

}  // namespace junco::sim
