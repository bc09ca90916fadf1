// Large-signal distortion of a diode switch, series or shunt, from a
// time-domain solve of the nonlinear circuit over one signal period.
//
//   series:  EMF v̂·sin(ωt) ── Rg ── block ── diode ── block ── RL ── gnd
//   shunt:   EMF v̂·sin(ωt) ── Rg ── block ──┬── block ── RL ── gnd
//                                          diode ── gnd
// The bias I arrives and leaves through chokes (ideal current sources, so no
// signal current is lost in the bias network) and the DC blocks are ideal
// capacitors. The diode sees a Thévenin source: series Rth = Rg + RL and the
// full EMF; shunt Rth = Rg ∥ RL and the EMF times RL/(Rg + RL). The load
// voltage is i·RL (series) or the diode node's voltage (shunt), AC part.
//
// The diode is the SPICE level-1 junction (junction_charge.hpp): exponential
// current, RS, depletion charge of Cj(V) and diffusion charge TT·Id. Loop:
//   E(t) = Vd(I) + I·(Rth + RS) + u + a·sin(ωt),
//   E(t) = v(t) + (Rth + RS)·i(t),   i = Id(v) + dq(v)/dt,
// v the junction voltage. Without stored charge each instant is an exact
// Lambert-W solve (the resistive, low-frequency nonlinearity of rj = n·Vt/I).
// With it, the periodic steady state is found by shooting on v(0) (Newton,
// with the period map's derivative carried along the steps), integrating the
// charge with Alexander's 2-stage L-stable SDIRK (order 2; L-stable because
// the junction's time constant can be far shorter than a step) at `samples`
// steps per period; each stage is a safeguarded scalar Newton in v. The
// harmonics come from a DFT of one period of the load voltage.
// u is the charge the blocks take up: in steady state no DC flows through a
// capacitor, so u makes the mean diode current equal the bias I (rectification
// lowers the effective drive); hold_dc_point = true instead keeps the blocks
// at their DC operating-point voltage (u = 0), which is what a transient
// simulator shows in the first periods after its DC operating point.
// Stored charge is what makes distortion fall with frequency: above
// 1/(2π·TT) the diffusion charge carries the signal and the junction voltage
// (the nonlinearity) hardly moves (docs/references.md §6).
#pragma once

#include "design/switch.hpp"
#include "fitting/diode.hpp"
#include "design/harmonics.hpp"
#include "fitting/pin_diode.hpp"

#include <limits>
#include <optional>
#include <string>
#include <vector>

namespace junco::fitting {

struct DistortionInput {
  DiodeParams part;
  JunctionCharge charge;  // Cj(V) and TT; none: the resistive solve
  SwitchKind kind = SwitchKind::series;
  double freq_hz = 10e6;  // signal frequency (matters only with stored charge)
  double bias_i_a = 10e-3;
  double source_peak_v = 0.1;  // open-circuit EMF amplitude of the generator
  double source_ohm = 50.0;
  double load_ohm = 50.0;
  double temp_k = 300.15;
  int samples = 256;       // per period (time steps of the charge solve)
  int harmonics = 9;       // highest harmonic reported
  bool hold_dc_point = false;
  // Warm start of the charge solve (a neighbouring solution, as a bias
  // search has): the blocks' offset u and the start's distance from the
  // quasi-static v(0) (DistortionResult::block_offset_v, start_offset_v).
  // NaN: start quasi-statically with u = 0.
  double start_u = std::numeric_limits<double>::quiet_NaN();
  double start_offset_v = std::numeric_limits<double>::quiet_NaN();
};

struct DistortionResult {
  HarmonicSummary load;          // harmonics of the load voltage
  double load_peak_v = 0.0;      // fundamental at the load
  double mean_current_a = 0.0;   // DC through the diode over a period
  double min_current_a = 0.0;    // trough of the diode (terminal) current
  double min_junction_current_a = 0.0;  // trough of Id(v): ≤ 0 means the junction turns off
                                        // (the terminal current may go negative while stored
                                        // charge keeps the junction on)
  double max_current_a = 0.0;
  double block_offset_v = 0.0;   // u above
  double start_offset_v = 0.0;   // the periodic v(0) less the quasi-static one (charge solve)
  int periods = 0;               // periods integrated (0: the resistive solve)
  std::vector<double> load_v;    // one period of the load voltage (AC part)
};

DistortionResult solve_distortion(const DistortionInput& in);

// Least bias current whose THD is at most target_thd (a ratio, e.g. 0.01 for
// 1 %), read as the least bias above which every bias meets the target (with
// stored charge THD need not fall monotonically at small biases): a scan down
// from 1 A in steps of √10 brackets the crossing, then a secant on log THD
// against log I (Illinois; THD falls roughly as a power law) pins it to 1e-4
// of I. 1 µA when even that meets the target; nullopt with *why when 1 A is
// not enough.
std::optional<double> bias_for_thd_a(DistortionInput in, double target_thd, std::string* why = nullptr);

// The same search with the distortion at the answer (no second solve), and
// an optional guess: a bias near the answer (a neighbouring answer, as the
// uncertainty's perturbed evaluations have). From a guess the search steps
// along ln THD against ln I (slope from the first two solves) to a bracket
// of the crossing nearest the guess and pins it with the same Illinois
// secant; when that fails within 12 solves it falls back to the full scan.
// Each solve starts warm from the last one when the bias moved by less than
// a factor 1.5.
// slope: d ln THD / d ln I near the guess when known (a neighbouring
// search's BiasForThd::slope): the first step is then Newton's, and the
// search from a guess ends when a secant step moves ln I by less than 1e-3
// (superlinear: the answer is then within ~1e-6 of I). in.start_u and
// in.start_offset_v, when given, start the first solve warm.
struct BiasForThd {
  double bias_a = 0.0;
  DistortionResult at;  // the distortion at bias_a
  double slope = std::numeric_limits<double>::quiet_NaN();  // d ln THD / d ln I from the last two solves
  int solves = 0;       // solve_distortion calls the search made
};
std::optional<BiasForThd> solve_bias_for_thd(DistortionInput in, double target_thd, std::string* why = nullptr,
                                             double guess_a = std::numeric_limits<double>::quiet_NaN(),
                                             double slope = std::numeric_limits<double>::quiet_NaN());

// A PIN part (fitting/pin_diode.hpp): the least bias whose THD in the
// switch, from the charge-control time-domain solve the distortion
// calculator uses (pin_series_distortion, pin_shunt_distortion), is at most
// target_thd. The stored charge I·τ grows with the bias and the RF charge
// per half cycle stays, so THD falls with the bias; the search works on
// ln THD against ln I: from a start (guess_a when given, else the bias whose
// stored charge is ten times the RF charge per half cycle Î/(π·f), Î the
// small-signal current the EMF drives through Rg + RL) it steps by the local
// slope (at least x1.5, at most x100 a step) to a bracket of the crossing,
// then an Illinois secant pins it to 1e-4 of I or of THD. Bounds 1 µA … 1 A:
// below the least, 1 µA is the answer; nullopt with *why when 1 A is not
// enough. With a guess and the slope d ln THD / d ln I there (a neighbouring
// answer's, as the uncertainty's perturbed runs have), a Newton-secant from
// the guess first: a parameter that moves THD little costs one solve.
struct PinBiasForThd {
  double bias_a = 0.0;
  PinDistortion at;  // the distortion at (within 1e-4 of) bias_a
  double slope = std::numeric_limits<double>::quiet_NaN();  // d ln THD / d ln I near the answer
  int solves = 0;
};
std::optional<PinBiasForThd> pin_bias_for_thd(SwitchKind kind, const PinLaw& law, double is_a, double target_thd, double freq_hz,
                                              double source_peak_v, double source_ohm, double load_ohm, double temp_k,
                                              std::string* why = nullptr,
                                              double guess_a = std::numeric_limits<double>::quiet_NaN(),
                                              double slope = std::numeric_limits<double>::quiet_NaN());

}  // namespace junco::fitting
