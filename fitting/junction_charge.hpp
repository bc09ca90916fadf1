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

#include <cmath>
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
template <typename T>
struct DepletionAt {
  T q_c = T(0.0);
  T c_f = T(0.0);
};
using ChargeAt = DepletionAt<double>;
ChargeAt depletion_charge(const JunctionCap& cap, double v);

// The law itself, for doubles and for the fits' dual numbers alike (the
// electro-thermal fit differentiates Cj at the heated junction's voltage with
// Ceres's Jets): the one home of the formula; depletion_charge and
// junction_capacitance_f are this at T = double. cap.cj0_f must be > 0.
template <typename T>
DepletionAt<T> depletion_law(const JunctionCap& cap, const T& v) {
  using std::pow;
  const double vj = cap.vj_v < 1.0 / cap.fc ? cap.vj_v : 1.0 / cap.fc;  // ngspice limits VJ to 1/FC
  const double fcv = cap.fc * vj;
  const double one_m = 1.0 - cap.m;
  if (v < fcv) {
    const T t = 1.0 - v / vj;
    const T t_m = pow(t, -cap.m);
    return {vj * cap.cj0_f * (1.0 - t * t_m) / one_m, cap.cj0_f * t_m};
  }
  const double f1 = vj * (1.0 - std::pow(1.0 - cap.fc, one_m)) / one_m;
  const double f2 = std::pow(1.0 - cap.fc, 1.0 + cap.m);
  const double f3 = 1.0 - cap.fc * (1.0 + cap.m);
  return {cap.cj0_f * f1 + cap.cj0_f / f2 * (f3 * (v - fcv) + cap.m / (2.0 * vj) * (v * v - fcv * fcv)),
          cap.cj0_f / f2 * (f3 + cap.m * v / vj)};
}

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
