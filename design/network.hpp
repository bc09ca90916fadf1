// The switch around the diode (issue 15, "the whole switch, not only the
// diode"): the off-state headroom rule, the junction temperature that the
// dissipation sets, the bias network as it is built (DC blocks, chokes or
// ferrites, feed and ground-return resistors, an optional isolating diode in
// the feed), the series–shunt switch and the PIN π/T attenuator.
//
// Every signal quantity uses the loss definition of design_switch.hpp: the
// load voltage with the circuit in place against the load voltage with source
// and load joined directly (EMF·RL/(Rg + RL)), in positive dB. The element
// impedances are the small-signal ones of junction_charge.hpp (RS, gd, Cj(V),
// TT·gd), the same linearisation ngspice's .ac makes. Sources:
// docs/references.md §6 (switch relations, off-state rule, bias network) and
// §8 (self-heating), tests/reference/design_network_ngspice_test.cpp.
#pragma once

#include "fitting/pin_diode.hpp"

#include "design/switch.hpp"
#include "fitting/diode.hpp"
#include "fitting/junction_charge.hpp"
#include "fitting/temperature.hpp"

#include <complex>
#include <optional>
#include <string>
#include <vector>

namespace junco::fitting {

// EMF peak of a source of available power power_w and resistance source_ohm:
// P = EMF²/(8·Rg), so EMF = 2·sqrt(2·P·Rg) (the load peak into a matched
// load is then sqrt(2·P·Z0), docs/references.md §6).
double emf_peak_from_power_v(double power_w, double source_ohm);

// Peak current through a series or shunt element z driven by an EMF of peak
// emf_peak_v behind source_ohm, with the load load_ohm (series: in series with the
// load; shunt: across it).
std::complex<double> element_current_a(SwitchKind kind, std::complex<double> z, double emf_peak_v, double source_ohm,
                                       double load_ohm);

// ---- a. off-state headroom ---------------------------------------------------
// A reverse-biased (off) diode sees the RF across its junction on top of the
// reverse bias VR. The rule (docs/references.md §6 [M]): VR − V̂ ≥ margin (the
// junction never swings forward on the peaks) and VR + V̂ ≤ BV − margin (it
// never reaches breakdown on the opposite peaks). The onsets as SPICE draws
// them: forward conduction reaches onset_a when the junction swings to
// N·Vt·ln(1 + onset/IS) forward, i.e. at V̂ = VR + that; breakdown reaches
// IBV at −BV (that is how SPICE defines BV), i.e. at V̂ = BV − VR.
struct OffHeadroom {
  double junction_peak_v = 0.0;     // V̂ across the junction (RS and Ls excluded)
  double forward_margin_v = 0.0;    // VR − V̂
  double breakdown_margin_v = 0.0;  // BV − VR − V̂ (infinite without BV)
  double min_reverse_v = 0.0;       // V̂ + margin
  double max_reverse_v = 0.0;       // BV − V̂ − margin (infinite without BV)
  double conduction_peak_v = 0.0;   // V̂ at which forward current reaches onset_a
  double breakdown_peak_v = 0.0;    // V̂ at which the reverse current reaches IBV (infinite without BV)
  bool forward_ok = false;
  bool breakdown_ok = false;
  bool ok() const { return forward_ok && breakdown_ok; }
};
OffHeadroom off_headroom(SwitchKind kind, const DiodeParams& p, const JunctionCharge& charge, double reverse_v,
                         double emf_peak_v, double source_ohm, double load_ohm, double freq_hz, const Parasitics& par,
                         double temp_k, std::optional<double> bv_v, double margin_v, double onset_a);

// ---- b. dissipation and junction temperature --------------------------------
// The on diode dissipates its DC bias I·Vf(I, Tj) and its share of the RF,
// ½·|Î|²·Re Z(Tj) (small signal); Tj = Ta + θ·P (docs/references.md §8 [M]).
// Vf and Z depend on Tj, so the two are solved together (fixed point; it
// converges while θ·|dP/dT| < 1, otherwise the answer is thermal runaway).
struct JunctionHeating {
  double tj_k = 0.0;
  double dc_w = 0.0;  // I·Vf at Tj
  double rf_w = 0.0;  // ½|Î|²·Re Z at Tj
  double total_w() const { return dc_w + rf_w; }
  bool converged = false;
};
JunctionHeating junction_heating(SwitchKind kind, const DiodeParams& p_tnom, const JunctionCharge& charge_tnom,
                                 double tnom_k, const TemperatureLaw& law, double bias_i_a, double emf_peak_v,
                                 double source_ohm, double load_ohm, double freq_hz, const Parasitics& par, double ambient_k,
                                 double theta_k_per_w);

// ---- c. the bias network -----------------------------------------------------
// A series switch as it is built:
//
//   Rg ─ Cb ─ A ─▶|─ K ─ Cb ─ RL          A: anode, K: cathode
//             │        │
//           choke    choke ─ ground       (DC return of the cathode)
//             │
//             F ─[isolating diode]─ G ─ Rb ─ supply (an AC ground)
//                                   │
//                                 Rgnd ─ ground (ground-return resistor)
//                                 (and an optional bypass capacitor G to ground)
//
// A shunt switch (mount shunt) as it is built: the line between the two DC
// blocks carries the anode, the cathode goes to ground, and the feed comes in
// through the choke at the line:
//
//   Rg ─ Cb ─ L ─ Cb ─ RL                 L: the line node, the anode
//             │  │
//             ▼ choke ─ F ─[isolating diode]─ G ─ Rb ─ supply (Rgnd, bypass at G as above)
//             │
//           ground (cathode)
//
// The DC loop is the same as the series switch's (its cathode choke is a
// short at DC), so network_bias holds for both.
//
// Off state (the supply reversed, −Vs): the diode is reverse biased by the
// feed's Thevenin voltage (its leakage through Rb∥Rgnd neglected: IS·Rth is
// far below a volt) and is RS + its junction at −Vth (Cj(V)). An isolating
// diode would share the reverse bias with it by leakage, which is not
// modelled: the off state is without one.
//
// The choke is an inductor L, or a ferrite modelled as R∥L (0 Ω at DC). The
// DC loop sees the supply through the divider Rb/Rgnd: Vth = Vs·Rgnd/(Rb +
// Rgnd), Rth = Rb∥Rgnd, and the current is the exact solution of Vth = I·Rth
// + Vd(I) (+ Vd(I) of the isolating diode, the same part).
struct BiasNetwork {
  double supply_v = 5.0;
  double rbias_ohm = 390.0;
  double rground_ohm = 0.0;      // 0 or infinite: none
  bool feed_diode = false;       // an isolating diode (the same part) in the feed
  double cblock_f = 0.0;         // each DC block
  double choke_h = 0.0;          // each choke
  double ferrite_r_ohm = 0.0;    // > 0: the chokes are ferrites, R∥L
  double cbypass_f = 0.0;        // > 0: a bypass capacitor from G to ground
  double source_ohm = 50.0, load_ohm = 50.0;
  SwitchKind mount = SwitchKind::series;
};

// Sizing for a band from f_low (the reactances are worst at the low edge):
// |Xc| = min(Rg, RL)/ratio and |XL| = ratio·max(Rg, RL) at f_low (common
// practice: ratio 10, docs/references.md §6 [P]).
double block_capacitor_f(double freq_low_hz, double source_ohm, double load_ohm, double ratio);
double choke_inductance_h(double freq_low_hz, double source_ohm, double load_ohm, double ratio);

struct NetworkBias {
  double thevenin_v = 0.0, thevenin_ohm = 0.0;
  double i_a = 0.0;   // the current the diode actually gets
  double vd_v = 0.0;  // its terminal voltage
};
NetworkBias network_bias(const BiasNetwork& net, const DiodeParams& p, double temp_k);

struct NetworkResponse {
  double loss_db = 0.0;         // signal path, the network included
  double bare_loss_db = 0.0;    // the same diode at the same bias with ideal blocks and chokes
  double supply_leak_db = 0.0;  // RF at G (supply side of the feed) against the direct-connection load level; negative
};
NetworkResponse network_response(const BiasNetwork& net, const DiodeParams& p, const JunctionCharge& charge,
                                 double bias_i_a, double freq_hz, double temp_k);
// The same with the diodes' impedances given (the off state: z_diode the
// reverse-biased diode): z_feed is the isolating diode's, used with
// net.feed_diode only. bare_loss_db is switch_loss_db(net.mount, z_diode).
NetworkResponse network_response(const BiasNetwork& net, std::complex<double> z_diode, std::complex<double> z_feed,
                                 double freq_hz);

// ---- d. topologies -------------------------------------------------------------
// Series zs then shunt zsh across the load, between Rg and RL.
double series_shunt_db(std::complex<double> zs, std::complex<double> zsh, double source_ohm, double load_ohm);

// A PIN diode's RF resistance against its bias current, R(I) = R0 + K·I^−x
// (PinLaw, fitting/pin_diode.hpp: the one home of the law)
// (docs/references.md §8 [P]). A fitted PIN part can take this function's
// place; the attenuator asks only for R(I) and its inverse.
double pin_resistance_ohm(const PinLaw& law, double i_a);
// The current for a resistance; nullopt when r_ohm ≤ R0 (never reached).
std::optional<double> pin_current_for_resistance_a(const PinLaw& law, double r_ohm);

// Matched attenuator of loss a_db between z0_ohm ports (K = 10^(A/20)):
//   T: series arms Z0·(K−1)/(K+1), shunt 2·Z0·K/(K²−1)
//   π: shunt arms Z0·(K+1)/(K−1), series Z0·(K²−1)/(2K)
enum class PadKind { pi, tee };
struct PadResistors {
  double series_ohm = 0.0;  // T: each of the two arms; π: the one series element
  double shunt_ohm = 0.0;   // π: each of the two arms; T: the one shunt element
};
PadResistors matched_pad(PadKind kind, double a_db, double z0_ohm);

// Loss and input return loss of a pad built from the given resistors between
// source_ohm and load_ohm.
struct PadResponse {
  double loss_db = 0.0;
  double reflection = 0.0;      // |Γin|, the input against source_ohm (0 when matched)
  double return_loss_db = 0.0;  // −20·log10|Γin| (infinite when matched)
};
PadResponse pad_response(PadKind kind, const PadResistors& r, double source_ohm, double load_ohm);

}  // namespace junco::fitting
