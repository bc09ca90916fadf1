// Series and shunt switch loss from an element impedance, the SPICE C–V law
// for the off state, and the bias needed for a target loss.
//
// Relations (docs/references.md §6, from the ABCD matrix), with source Rg and load RL:
//   series element Z:  loss = 20·log10|1 + Z/(Rg + RL)|      (= |1 + Z/2Z0| when matched)
//   shunt element Z:   loss = 20·log10|1 + (Rg∥RL)/Z|      (= |1 + Z0/(2Z)| when matched)
// Both are the load voltage relative to a direct source-to-load connection.
// "Loss" is the insertion loss in the passing state and the isolation in the
// blocking state: series passes when biased, shunt passes when off.
#pragma once

#include "fitting/diode.hpp"

#include <complex>
#include <optional>
#include <string>

namespace junco::fitting {

enum class SwitchKind { series, shunt };
const char* to_string(SwitchKind kind);

double series_loss_db(std::complex<double> z, double rg_ohm, double rl_ohm);
double shunt_loss_db(std::complex<double> z, double rg_ohm, double rl_ohm);
double switch_loss_db(SwitchKind kind, std::complex<double> z, double rg_ohm, double rl_ohm);
// Series Zs followed by shunt Zsh between Z0 ports (S21 = 2/(A + B/Z0 + C·Z0 + D)).
double series_shunt_loss_db(std::complex<double> zs, std::complex<double> zsh, double z0_ohm);

// Junction capacitance parameters in SPICE form (CJO, VJ, M, FC).
struct JunctionCap {
  double cj0_f = 0.0;
  double vj_v = 1.0;  // SPICE default
  double m = 0.5;     // SPICE default
  double fc = 0.5;    // SPICE default
};

// C(V) at junction voltage v (negative = reverse bias), ngspice dioload.c law:
// CJO·(1 − V/VJ)^−M below FC·VJ, the linear extension above.
double junction_capacitance_f(const JunctionCap& cap, double v);

// Extra parasitics of the package/mount, both optional.
struct Parasitics {
  double ls_h = 0.0;           // series inductance
  double r_reverse_ohm = 0.0;  // series resistance in the off state
};

// Off state: Rr + jωLs − j/(ωC).
std::complex<double> off_impedance(double c_f, double freq_hz, const Parasitics& par);

// Bias current at which the biased-state loss of the switch equals
// target_db: insertion loss for a series switch, isolation for a shunt one.
// Includes Rs and the inductance; Cj is ignored in the on state. nullopt with
// *why when the target cannot be met (e.g. Rs alone exceeds it).
std::optional<double> bias_for_loss_a(SwitchKind kind, const DiodeParams& p, double target_db, double rg_ohm,
                                      double rl_ohm, double freq_hz, const Parasitics& par, double temp_k,
                                      std::string* why = nullptr);

// Biased-state loss (series: insertion loss; shunt: isolation) at a bias current.
double on_state_loss_db(SwitchKind kind, const DiodeParams& p, double bias_i_a, double rg_ohm, double rl_ohm,
                        double freq_hz, const Parasitics& par, double temp_k);

}  // namespace junco::fitting
