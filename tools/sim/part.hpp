// One simulated part (a silicon small-signal switching diode) and the seeded
// lot of parts that sits in the fixture slots.
#pragma once

#include "fitting/diode.hpp"
#include "fitting/temperature.hpp"

#include <cstdint>
#include <string>
#include <vector>

namespace junco::sim {

// SPICE level-1 parameters (names as in docs/references.md §2), at tnom_k.
struct PartParams {
  double is_a = 2.5e-9;  // saturation current
  double n = 1.85;       // ideality
  double rs_ohm = 0.7;   // series resistance
  double cj0_f = 2.0e-12;  // zero-bias junction capacitance
  double vj_v = 0.65;    // junction potential
  double m = 0.4;        // grading coefficient
  double fc = 0.5;       // forward-bias depletion capacitance coefficient
  double tt_s = 0.0;     // transit time (diffusion capacitance TT·gd); 0 = none
  double eg_ev = 1.11;   // band gap for IS(T)
  double xti = 3.0;      // IS temperature exponent
  double trs1_per_k = 0.0;   // TRS1: RS(T) = RS·(1 + TRS1·ΔT + TRS2·ΔT²)
  double trs2_per_k2 = 0.0;  // TRS2
  double tnom_k = 300.15;
  // A PIN part (type "pin"): the junction above, with tt_s its carrier
  // lifetime τ, in series with an intrinsic region of width W whose
  // resistance is set by the stored charge Q = τ·Id (charge control:
  // dQ/dt = i − Q/τ): R_I = W²/((µn + µp)·Q), capped at pin_r_max_ohm where
  // hardly any charge is stored; reverse biased the region is depleted
  // (its capacitance is the depletion law's CJO) and R_I = 0.
  bool pin = false;
  double i_region_width_m = 30e-6;
  double mobility_sum_m2_per_v_s = 0.183;  // silicon µn + µp at 300 K (1350 + 480 cm²/Vs)
  double pin_r_max_ohm = 1e4;

  // The part's temperature coefficients in the one home of the SPICE law.
  fitting::TemperatureLaw law() const { return {eg_ev, xti, trs1_per_k, trs2_per_k2}; }
};

// IS(T) and RS(T) by fitting/temperature.hpp (the SPICE law, docs/references.md §2);
// the simulator has no copy of its own.
double saturation_current_a(const PartParams& p, double temp_k);
double series_resistance_ohm(const PartParams& p, double temp_k);
// DC diode parameters at temperature (IS(T), RS(T)), with extra series resistance added.
fitting::DiodeParams dc_params(const PartParams& p, double temp_k, double extra_series_ohm = 0.0);

// Junction (depletion + diffusion) charge and capacitance at junction voltage
// v; SPICE C–V law with the FC linearisation (docs/references.md §2).
double junction_charge_c(const PartParams& p, double v, double diode_current_a);
double junction_capacitance_f(const PartParams& p, double v, double diode_conductance_s);

// The same depletion C–V law with its constant factors worked out once, for
// callers that evaluate it many times (the AC solve: millions of times per
// second). Charge and capacitance come from one evaluation: at most one pow().
class DepletionLaw {
 public:
  explicit DepletionLaw(const PartParams& p);
  struct At {
    double q_c, c_f;
  };
  At at(double v) const;

 private:
  double cj0_f_, vj_v_, m_, fcv_;
  double q_scale_;       // CJO·VJ/(1 − M)
  double q_fcv_;         // charge at FC·VJ
  double c_lin_, f3_;    // CJO/(1 − FC)^(1+M), 1 − FC·(1 + M)
};

struct LotSpread {
  double is_ln_sigma = 0.25;     // spread of ln(Is)
  double n_sigma = 0.02;         // absolute
  double rs_rel_sigma = 0.08;    // relative
  double cj0_rel_sigma = 0.08;   // relative
};

struct Slot {
  int slot = 0;          // 1-based
  bool fitted = true;    // false: empty slot (open circuit)
  PartParams part;
};

// The I-region's resistance at stored charge q_c (0 for a junction part or
// a charge ≤ 0); the PIN fields above.
double i_region_resistance_ohm(const PartParams& p, double q_c);
// The I-region's DC drop at diode current i_a: i·R_I(τ·i).
double i_region_drop_v(const PartParams& p, double i_a);

std::vector<Slot> draw_lot(const PartParams& nominal, const LotSpread& spread, int slots, std::uint64_t seed);

}  // namespace junco::sim
