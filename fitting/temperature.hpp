// The SPICE level-1 diode's temperature law: the one home for it in junco.
// Every calculator, the SPICE card, the model document and the
// electro-thermal fit take a part from the temperature its parameters were
// measured at (TNOM) to a junction temperature T through these functions.
//
//   Vt(T)  = k·T/q
//   Is(T)  = IS·(T/TNOM)^(XTI/N)·exp((T/TNOM − 1)·EG/(N·Vt(T)))
//   RS(T)  = RS·(1 + TRS1·(T − TNOM) + TRS2·(T − TNOM)²)
//
// Source: the Berkeley SPICE3 / ngspice diode (ngspice manual, "Diode model"
// temperature effects; src/spicelib/devices/dio/diotemp.c: DIOtSatCur and the
// series-conductance factor 1 + TRS1·dt + TRS2·dt²), docs/references.md §2.
// EG and XTI default to SPICE's 1.11 eV and 3 (silicon pn junction). Note the
// exponent: (T/TNOM − 1)·EG/(N·Vt(T)) = EG·q/(N·k)·(1/TNOM − 1/T), so taking
// a part from T1 to T2 and then to T3 equals going from T1 to T3 (Is part).
// N does not change with temperature in this law. The depletion law's VJ and
// CJO move too (depletion_at_temperature, ngspice tlevc = 0).
#pragma once

#include "fitting/diode.hpp"

#include <cmath>

namespace junco::fitting {

inline constexpr double spice_default_eg_ev = 1.11;  // SPICE default EG
inline constexpr double spice_default_xti = 3.0;     // SPICE default XTI (pn junction)

struct TemperatureLaw {
  double eg_ev = spice_default_eg_ev;  // activation energy EG
  double xti = spice_default_xti;      // saturation-current temperature exponent XTI
  double trs1_per_k = 0.0;             // TRS1 (ngspice alias TRS): linear RS coefficient
  double trs2_per_k2 = 0.0;            // TRS2: quadratic RS coefficient
};

// ln(Is(T)/IS): the exponent of the law, written once for doubles and for
// Ceres's dual numbers (the electro-thermal fit differentiates through it).
template <typename T, typename N>
T log_saturation_current_ratio(const N& n, const T& temp_k, double tnom_k, const TemperatureLaw& law) {
  using std::log;
  const T ratio = temp_k / tnom_k;
  const T vt = temp_k * (boltzmann_j_per_k / elementary_charge_c);
  return (ratio - 1.0) * law.eg_ev / (n * vt) + (law.xti / n) * log(ratio);
}

// Is at temp_k of a part whose IS holds at tnom_k.
double saturation_current_at_a(double is_a, double n, double tnom_k, double temp_k, const TemperatureLaw& law);

// RS at temp_k (TRS1, TRS2 zero: RS itself).
double series_resistance_at_ohm(double rs_ohm, double tnom_k, double temp_k, const TemperatureLaw& law);

// The whole DC model at temp_k: Is and RS moved by the law, N and the shunt
// as they are. Use the result with temp_k in diode.hpp's functions.
DiodeParams diode_at_temperature(const DiodeParams& p, double tnom_k, double temp_k, const TemperatureLaw& law);

// VJ and CJO at temp_k of a depletion law given at tnom_k, the SPICE3 /
// ngspice default (tlevc = 0, diotemp.c; docs/references.md §2, check values E4):
//   pb(T)  = EG_Si(T) − EG_Si(300.15)·T/300.15 − 3·Vt·ln(T/300.15) (as the code
//            writes it: −2·Vt·(1.5·ln(T/300.15) + q·(−EG_Si(T)/(2kT) + 1.1150877/(2k·300.15))))
//   EG_Si(T) = 1.16 − 7.02e-4·T²/(T + 1108) eV
//   pbo    = (VJ − pb(TNOM))·300.15/TNOM,  VJ(T) = pb(T) + (T/300.15)·pbo
//   CJO(T) = CJO·[1 + M·(4e-4·(T − 300.15) − (VJ(T) − pbo)/pbo)]
//               / [1 + M·(4e-4·(TNOM − 300.15) − (VJ − pbo)/pbo)]
// M itself is held (no TM1/TM2).
struct DepletionAtTemperature {
  double cj0_f = 0.0;
  double vj_v = 1.0;
};
DepletionAtTemperature depletion_at_temperature(double cj0_f, double vj_v, double m, double tnom_k, double temp_k);

}  // namespace junco::fitting
