// Series and shunt switch loss from an element impedance, the diode's
// small-signal impedance at a bias point (RS, junction conductance, Cj(V) and
// TT·gd: junction_charge.hpp), the off state, and the bias for a target loss.
//
// One definition of loss (docs/design.md "Loss and isolation"): the load
// voltage with the switch in place relative to the load voltage with source
// and load joined directly, in positive dB. With Rg = RL = Z0 (the default
// 50 Ω) that is −20·log10|S21| of the switch in a matched Z0 system.
// Relations (docs/references.md §6, from the ABCD matrix), with source Rg and load RL:
//   series element Z:  loss = 20·log10|1 + Z/(Rg + RL)|      (= |1 + Z/2Z0| when matched)
//   shunt element Z:   loss = 20·log10|1 + (Rg∥RL)/Z|      (= |1 + Z0/(2Z)| when matched)
// "Insertion loss" is this loss in the passing state and "isolation" the same
// quantity in the blocking state: series passes when biased, shunt passes when
// off. The fixture's own level ratio ch2/ch1 is not a loss: it is the
// "fixture ratio" (transfer.hpp fixture_gain, junction_cap.hpp).
#pragma once

#include "fitting/diode.hpp"
#include "fitting/junction_charge.hpp"

#include <complex>
#include <functional>
#include <optional>
#include <string>

namespace junco::fitting {

enum class SwitchKind { series, shunt };
const char* to_string(SwitchKind kind);

double series_loss_db(std::complex<double> z, double source_ohm, double load_ohm);
double shunt_loss_db(std::complex<double> z, double source_ohm, double load_ohm);
double switch_loss_db(SwitchKind kind, std::complex<double> z, double source_ohm, double load_ohm);
// Series Zs followed by shunt Zsh between Z0 ports (S21 = 2/(A + B/Z0 + C·Z0 + D)).
double series_shunt_loss_db(std::complex<double> zs, std::complex<double> zsh, double z0_ohm);

// Extra parasitics of the package/mount, both optional.
struct Parasitics {
  double ls_h = 0.0;           // series inductance
  double r_reverse_ohm = 0.0;  // series resistance in the off state
};

// Off state of an ideal capacitor: Rr + jωLs − j/(ωC).
std::complex<double> off_impedance(double c_f, double freq_hz, const Parasitics& par);

// Off state of the SPICE diode reverse biased by reverse_v: RS + Rr + jωLs +
// 1/(gd + jω(Cj(−VR) + TT·gd)) (gd ≈ IS/(N·Vt)·e^(−VR/(N·Vt)), tiny).
std::complex<double> diode_off_impedance(const DiodeParams& p, const JunctionCharge& charge, double reverse_v,
                                         double freq_hz, const Parasitics& par, double temp_k);

// Bias current at which the biased-state loss of the switch meets target_db:
// insertion loss at most target for a series switch, isolation at least target
// for a shunt one; the least such bias. Includes Rs, the inductance, Cj(V) and
// TT·gd at freq_hz. The loss need not be monotonic in the bias where the
// capacitances dominate, so a log scan finds the first crossing and bisection
// refines it. nullopt with *why when the target cannot be met (e.g. Rs alone
// exceeds it).
std::optional<double> bias_for_loss_a(SwitchKind kind, const DiodeParams& p, const JunctionCharge& charge,
                                      double target_db, double source_ohm, double load_ohm, double freq_hz,
                                      const Parasitics& par, double temp_k, std::string* why = nullptr);

// The same search over any biased-state loss as a function of the bias
// current (a PIN part's law Z(ω), fitting/pin_diode.hpp): the least bias in
// 1 nA … 10 A at which loss_db_at(I) meets target_db (series: at most, shunt:
// at least). limit names what bounds the loss in the message ("Rs", "R0").
std::optional<double> bias_for_loss_a(SwitchKind kind, const std::function<double(double)>& loss_db_at, double target_db,
                                      const std::string& limit, std::string* why = nullptr);

// Biased-state loss (series: insertion loss; shunt: isolation) at a bias current.
double on_state_loss_db(SwitchKind kind, const DiodeParams& p, const JunctionCharge& charge, double bias_i_a,
                        double source_ohm, double load_ohm, double freq_hz, const Parasitics& par, double temp_k);

}  // namespace junco::fitting
