// The junction's stored charge in SPICE level-1 form: the depletion charge of
// the C–V law (CJO, VJ, M, FC) and the diffusion charge TT·Id. One home for
// both, used by the small-signal switch model (design_switch.hpp), the AC
// transfer and fits (transfer.hpp) and the large-signal distortion solve
// (design_distortion.hpp).
//
// ngspice dioload.c (level 1), with Vd the junction voltage (RS excluded):
//   Vd < FC·VJ:  Qdep = VJ·CJO·(1 − (1 − Vd/VJ)^(1−M))/(1 − M),
//                Cdep = CJO·(1 − Vd/VJ)^−M
//   above:       the linear extension of Cdep, Qdep its integral, joined at FC·VJ
//   Qdiff = TT·Id,  Cdiff = TT·gd,  gd = dId/dVd = (Id + IS)/(N·Vt)
// Small signal at a bias point the junction is gd + jω(Cdep + TT·gd) in
// series with RS (the same linearisation ngspice's .ac makes).
#pragma once

#include "fitting/diode.hpp"

#include <complex>

namespace junco::fitting {

// Junction capacitance parameters in SPICE form (CJO, VJ, M, FC).
struct JunctionCap {
  double cj0_f = 0.0;
  double vj_v = 1.0;  // SPICE default
  double m = 0.5;     // SPICE default
  double fc = 0.5;    // SPICE default
};

// The whole stored-charge description: depletion law plus transit time.
struct JunctionCharge {
  JunctionCap cap;     // cap.cj0_f = 0: no depletion charge
  double tt_s = 0.0;   // transit time TT; 0 = no diffusion charge
  bool any() const { return cap.cj0_f > 0.0 || tt_s > 0.0; }
};

// C(V) at junction voltage v (negative = reverse bias), ngspice dioload.c law:
// CJO·(1 − V/VJ)^−M below FC·VJ, the linear extension above.
double junction_capacitance_f(const JunctionCap& cap, double v);

// Depletion charge and capacitance at junction voltage v in one evaluation
// (the distortion solve calls this millions of times). Q(0) = 0.
struct ChargeAt {
  double q_c = 0.0;
  double c_f = 0.0;
};
ChargeAt depletion_charge(const JunctionCap& cap, double v);

// Junction voltage (RS excluded) at DC current i_a: N·Vt·ln(1 + I/IS) (no Rsh).
double junction_voltage_at_current_v(const DiodeParams& p, double i_a, double temp_k);

// Small-signal admittance of the junction alone (RS excluded) at junction
// voltage vd_v: gd + jω(Cdep(Vd) + TT·gd), gd = IS·exp(Vd/(N·Vt))/(N·Vt).
std::complex<double> junction_admittance_at_voltage_s(const DiodeParams& p, const JunctionCharge& charge, double vd_v,
                                                      double freq_hz, double temp_k);
// The same at DC current i_a (Vd = junction_voltage_at_current_v).
std::complex<double> junction_admittance_s(const DiodeParams& p, const JunctionCharge& charge, double i_a, double freq_hz,
                                           double temp_k);

// The diode at a bias point: RS + 1/junction_admittance.
std::complex<double> diode_small_signal_impedance(const DiodeParams& p, const JunctionCharge& charge, double i_a,
                                                  double freq_hz, double temp_k);

}  // namespace junco::fitting
