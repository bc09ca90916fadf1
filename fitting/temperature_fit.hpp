// The temperature law fitted per part from its fits at three or more
// ambient temperatures (a chamber run, plan.temps_k): EG and XTI of
//
//   Is(T) = IS·(T/TNOM)^(XTI/N)·exp((T/TNOM − 1)·EG/(N·Vt(T)))
//
// and TRS1 of RS(T) = RS·(1 + TRS1·(T − TNOM)), with standard errors. The
// law is the SPICE3 / ngspice diode's (fitting/temperature.hpp, the one home
// of it; docs/references.md §2) — the published saturation-current law
// Is ∝ T^(XTI/N)·exp(−EG/(N·k·T)) written relative to TNOM.
//
// How (docs/fitting.md, "Temperature law from several temperatures"):
// - Each temperature's Is is first taken to one common N (the weighted mean
//   of the per-temperature n) at a reference current, where the readings
//   pin the diode voltage: ln Is' = ln Iref + (n/N)·(ln Is − ln Iref), its
//   error from the fit's (ln Is, n) covariance. This removes the strong
//   Is–n correlation of each single fit from the law's input.
// - ln Is'(T) is linear in (ln IS, EG, XTI): weighted linear least squares.
//   Between −40 and 125 °C, ln(T/TNOM) and (T/TNOM − 1)/T are almost
//   proportional, so EG and XTI are strongly correlated (|r| > 0.99): XTI is
//   fitted only from four or more temperatures and when its standard error
//   comes out below xti_resolvable_se, otherwise it is held at the stated value (SPICE's 3 for a pn junction)
//   and EG alone is fitted. The EG–XTI correlation of the joint fit is
//   reported either way.
// - TRS1 by weighted linear regression of the per-temperature RS, reported
//   as resolved only when its standard error is below trs_resolvable_se_per_k.
// - Standard errors are scaled by √(χ²/dof) when that exceeds 1 (Birge
//   ratio: the model or the inputs' errors are off), never scaled down.
#pragma once

#include "fitting/extract.hpp"
#include "fitting/temperature.hpp"

#include <string>
#include <vector>

namespace junco::fitting {

// One temperature's fit (a run's stored forward fit).
struct TemperaturePoint {
  double temp_k = 0.0;        // ambient of the run (the chamber readback)
  double temp_se_k = 0.01;    // how well that ambient is known
  Estimate is_a, n, rs_ohm;   // the run's fit at temp_k
  double corr_is_n = 0.0;     // correlation of (Is, n) in that fit (≈ of ln Is, n)
};

struct TemperatureFitOptions {
  TemperatureLaw held;            // EG, XTI used when not resolved (and as the start of the Vt slope)
  double tnom_k = 0.0;            // 0: the input temperature nearest 300.15 K
  double i_ref_a = 1e-4;          // reference current of the common-N step
  double xti_resolvable_se = 0.5; // XTI fitted only with a standard error below this
  double trs_resolvable_se_per_k = 1e-3;  // TRS1 reported as resolved below this
  int min_temperatures = 3;
};

struct TemperatureFit {
  bool ok = false;
  std::string message;            // why not ok, or notes
  double tnom_k = 0.0;
  double n = 0.0;                 // the common N
  Estimate is_a;                  // IS at tnom_k with the common N
  Estimate eg_ev, xti, trs1_per_k;
  Estimate rs_ohm;                // RS at tnom_k from the TRS regression
  bool xti_held = false;
  bool trs_resolved = false;
  double corr_eg_xti = 0.0;       // of the joint (EG, XTI) fit
  double reduced_chi2 = 0.0;      // of the ln Is fit as used (XTI held or not)
  int dof = 0;
  std::vector<double> temps_k;
  std::vector<double> residuals_ln_is;  // data − law, per temperature
  std::vector<std::string> notes;
};

TemperatureFit fit_temperature_law(const std::vector<TemperaturePoint>& points, const TemperatureFitOptions& options = {});

}  // namespace junco::fitting
