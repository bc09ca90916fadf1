// Electro-thermal fit: Is, n, Rs and the junction-to-ambient thermal
// resistance Rth from a part's DC forward curve and its AC transfer readings
// together. Pure computation, no I/O.
//
// Why: a junction heated by its own dissipation reads a lower Vf at the top of
// a DC sweep, which a DC-only fit turns into a smaller Rs with a tight error
// (apparent Rs ≈ Rs − Rth·V·|dV/dT|, docs/references.md §8). From DC alone Rs and
// Rth are collinear; the AC readings see the dynamic resistance
// Rs + n·Vt(Tj)/(I + Is(Tj)) at each bias and break the tie.
//
// Model, at each reading (steady state, P = I·V of the part):
//   Tj = Ta + Rth·I·V
//   DC: V = I·RS(Tj) + n·Vt(Tj)·ln(1 + I/Is(Tj))          V measured, so Tj is explicit
//   AC: 20·log10|Vout/Vin| of the fixture (transfer.hpp's fixture_gain_db_of,
//       the one small-signal diode the joint and stored-charge fits use):
//       Rs(Tj) + 1/(gd + jω(Cj + Cdep(Vd) + TT·gd)) with
//       gd = (I + Is(Tj))/(n·Vt(Tj)) of the heated junction, Cdep the
//       junction's depletion law (junction_charge.hpp, CJO/VJ/M as given) at
//       the heated junction's voltage Vd = n·Vt(Tj)·ln(1 + I/Is(Tj)), TT·gd
//       the diffusion capacitance of the charge-control model (Q = TT·I,
//       docs/references.md §2, §8) and Cj a constant as given; V at the bias
//       from the model, so Tj = Ta + Rth·I·V(I, Tj) is iterated (the loop
//       gain Rth·I·|dV/dT| is a few per cent, 6 iterations reach 1e-9 K).
//       ω·TT·gd·rj = ω·TT whatever Tj, so the diffusion term needs no
//       temperature; CJO and VJ are taken at the run's temperature (the law
//       is fitted on unheated reverse-bias readings; its own temperature
//       shift over the self-heating's tens of K is neglected, next to TT·gd
//       at forward bias). Without the charge, readings above the corner
//       1/(2π·TT) read as a lower rd: the fit then bends n, Rs and Rth to
//       them (seen: reduced χ² 28 000 on a 5 ns part read to 100 MHz).
// with Is(T), RS(T), Vt(T) from the SPICE law (temperature.hpp), EG, XTI and
// TRS held at options.law, TNOM = Ta. The fitted Is, n, Rs are therefore
// the isothermal values at the ambient (the run's temperature).
//
// Residuals are weighted by the same σ as the stored forward fit
// (extract.hpp's residual_sigma_v, effective variance, GUM-rectangular
// accuracy figures) and options.ac_sigma_db for the AC readings, so χ² means
// the same as the stored fit's. Standard errors from the covariance scaled
// by the reduced χ² (N − 4). Rth here is "in this fixture, at this dwell":
// readings taken before the junction settled see less than the steady rise.
#pragma once

#include "fitting/joint_fit.hpp"
#include "fitting/extract.hpp"
#include "fitting/junction_charge.hpp"
#include "fitting/temperature.hpp"
#include "fitting/transfer.hpp"

#include <limits>
#include <span>
#include <string>
#include <vector>

namespace junco::fitting {

struct ElectroThermalOptions {
  double ambient_k = 300.15;  // Ta of the run; also TNOM of the fitted Is, Rs
  TemperatureLaw law;         // EG, XTI (and TRS1/TRS2) held, SPICE defaults unless given per part type
  AccuracyModel accuracy;     // of the DC readings, as for fit_forward
  double ac_sigma_db = 0.01;  // standard uncertainty of one AC ratio reading
  double cj_f = 0.0;          // constant capacitance across the junction in the AC model (not fitted)
  JunctionCharge charge;      // the junction's Cj(V) law and TT in the AC model (held; none by default)
  double max_rth_k_per_w = 1e4;
  int max_iterations = 200;
};

struct ElectroThermalFit {
  bool ok = false;
  std::string message;
  // Isothermal parameters at ambient_k, and the thermal resistance.
  Estimate is_a, n, rs_ohm, rth_k_per_w;
  std::vector<std::vector<double>> correlation;  // of (ln Is, n, Rs, Rth)
  // The junction at the DC reading with the largest power.
  double top_i_a = std::numeric_limits<double>::quiet_NaN();
  double top_power_w = std::numeric_limits<double>::quiet_NaN();
  Estimate top_tj_k;
  // The DC-only (stored) fit of the same readings: its Rs includes heating.
  Estimate apparent_rs_ohm;
  double cost = 0.0;
  double reduced_chi2 = std::numeric_limits<double>::quiet_NaN();  // 2·cost/(N − 4)
  std::size_t dc_points = 0, ac_points = 0;
  int iterations = 0;
  DiodeParams params() const { return {is_a.value, n.value, rs_ohm.value}; }
};

// Junction temperature at a reading of current i_a and part voltage v.
inline double junction_temperature_k(double ambient_k, double rth_k_per_w, double i_a, double v) {
  return ambient_k + rth_k_per_w * i_a * v;
}

// The model's part voltage at current i_a in steady state with self-heating:
// solves V = V_diode(I, Tj), Tj = Ta + Rth·I·V by fixed-point iteration.
// p holds at tnom_k = ambient_k. Also returns Tj through *tj_k.
double heated_voltage_v(const DiodeParams& p, double i_a, double ambient_k, double rth_k_per_w, const TemperatureLaw& law,
                        double* tj_k = nullptr);

// DC readings: forward points above the fit's noise floor are used (as
// fit_forward screens them); AC readings with both levels > 0 and a bias > 0
// (screen them first with screen_ac_readings). Needs ≥ 4 DC points and ≥ 2
// AC readings: without AC readings Rs and Rth cannot be told apart.
ElectroThermalFit fit_electrothermal(std::span<const IvPoint> dc, std::span<const AcPoint> ac, const Fixture& fixture,
                                     const ElectroThermalOptions& options);

// ---- What juncod calls after a run (one call, pure) -------------------------
//
// fit_run_electrothermal screens the run's AC readings (screen_ac_readings),
// fits electro-thermally when at least 2 remain, and otherwise says what the
// DC-only Rs may hide: the size of the heating bias per 100 K/W of thermal
// resistance at the top reading's power (apparent Rs ≈ Rs − Rth·V·|dVj/dT|,
// dVj/dT = (Vj − EG − XTI·Vt)/T at constant current, docs/references.md §2, §8).

struct ElectroThermalRunOptions {
  ElectroThermalOptions fit;  // ambient_k = the run's temp_k; accuracy, ac_sigma_db from the bench config
  AcScreen screen;            // as part.transfer screens
};

struct ElectroThermalRun {
  // "fitted": fit holds the isothermal parameters and Rth;
  // "no_ac": fewer than 2 usable AC readings, only the DC-only fit;
  // "failed": the fit did not converge or had no start (fit.message says why).
  std::string status;
  ElectroThermalFit fit;
  std::size_t ac_total = 0, ac_left_out = 0;
  // Without AC: the DC-only Rs is low by about this much per 100 K/W of
  // junction-to-ambient thermal resistance (NaN when no DC fit).
  double rs_bias_per_100_k_per_w_ohm = std::numeric_limits<double>::quiet_NaN();
  std::string note;  // one line for the user
};

ElectroThermalRun fit_run_electrothermal(std::span<const IvPoint> dc, std::span<const AcPoint> ac, const Fixture& fixture,
                                         const ElectroThermalRunOptions& options);

}  // namespace junco::fitting
