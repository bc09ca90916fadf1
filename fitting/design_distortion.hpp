// Large-signal distortion of a series diode switch, from a time-domain solve
// of the nonlinear circuit over one signal period.
//
//   EMF v̂·sin(ωt) ── Rg ── block ── diode ── block ── RL ── gnd
//                                  ↑ I (bias)  ↓ I (return)
//
// The bias arrives and leaves through chokes (ideal current sources, so no
// signal current is lost in the bias network) and the DC blocks are ideal
// capacitors. Nothing in the loop stores energy at the signal frequency, so
// each instant is an exact Lambert-W solve of
//   v_eff(t) = i(t)·(Rg + RL) + Vd(i(t)),  v_eff = Vd(I) + I·(Rg+RL) + u + v̂·sin(ωt).
// u is the charge the blocks take up: in steady state no DC flows through a
// capacitor, so u makes the mean diode current equal the bias I (rectification
// lowers the effective drive); hold_dc_point = true instead keeps the blocks
// at their DC operating-point voltage (u = 0), which is what a transient
// simulator shows in the first periods after its DC operating point.
// Junction capacitance is not modelled: this is the low-frequency (resistive)
// nonlinearity of rj = n·Vt/I (docs/references.md §6: for PIN diodes well above
// 1/(2πτ) this overestimates the distortion).
#pragma once

#include "fitting/diode.hpp"
#include "fitting/harmonics.hpp"

#include <optional>
#include <string>
#include <vector>

namespace junco::fitting {

struct DistortionInput {
  DiodeParams part;
  double bias_i_a = 10e-3;
  double source_peak_v = 0.1;  // open-circuit EMF amplitude of the generator
  double rg_ohm = 50.0;
  double rl_ohm = 50.0;
  double temp_k = 300.15;
  int samples = 256;       // per period
  int harmonics = 9;       // highest harmonic reported
  bool hold_dc_point = false;
};

struct DistortionResult {
  HarmonicSummary load;          // harmonics of the load voltage
  double load_peak_v = 0.0;      // fundamental at the load
  double mean_current_a = 0.0;   // DC through the diode over a period
  double min_current_a = 0.0;    // trough of the diode current
  double max_current_a = 0.0;
  double block_offset_v = 0.0;   // u above
  std::vector<double> load_v;    // one period of the load voltage (AC part)
};

DistortionResult solve_distortion(const DistortionInput& in);

// Least bias current whose THD is at most target_thd (a ratio, e.g. 0.01 for
// 1 %), by bisection on log(I). nullopt with *why when 1 A is not enough.
std::optional<double> bias_for_thd_a(DistortionInput in, double target_thd, std::string* why = nullptr);

}  // namespace junco::fitting
