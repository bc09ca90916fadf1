// The junction's stored charge from AC readings at several frequencies: a
// least-squares fit of N, RS and the transit time TT (and, optionally, a
// constant junction capacitance) to the fixture gain in dB of forward-biased
// readings (transfer.hpp model: Rs + 1/(gd + jω(Cj + TT·gd)) against the
// cathode's load RL ∥ Rr).
//
// Why several frequencies: at one frequency and one bias, TT·gd and Cj are one
// capacitance; over bias, TT·gd grows with the current while the depletion
// Cj(V) hardly moves, and over frequency the reactance separates capacitance
// from resistance. Readings below 1/(2π·TT) alone see rd only and leave TT
// undetermined (its standard error says so).
//
// The depletion capacitance is taken as given: a law (CJO, VJ, M from the
// off-state fit, junction_cap.hpp) evaluated at each reading's junction
// voltage, and/or a constant; fit_cj adds a constant Cj as a fourth
// parameter when neither is known. IS comes from the DC fit (it sets the
// junction voltage for Cj(V) and the tiny Is in gd = (I + IS)/(N·Vt)).
// Minimiser: Levenberg–Marquardt on the weighted residuals
// (measured − model)/σ_dB with a forward-difference Jacobian; TT is started
// from the best of a log grid (1 ps … 10 µs) with N and RS from the
// dynamic-resistance line. Standard errors from (JᵀJ)⁻¹ scaled by the reduced
// χ² when that exceeds 1 (N − p degrees of freedom).
#pragma once

#include "fitting/extract.hpp"
#include "fitting/transfer.hpp"

#include <span>
#include <string>

namespace junco::fitting {

struct AcChargeFitOptions {
  double temp_k = 300.15;
  double is_a = 1e-9;          // from the DC fit
  double ac_sigma_db = 0.01;   // standard uncertainty of one reading's ratio
  JunctionCap cap;             // depletion law; cap.cj0_f = 0: none
  double cj_f = 0.0;           // constant capacitance across the junction (added to the law's)
  bool fit_cj = false;         // fit the constant capacitance as well
  int max_iterations = 200;
};

struct AcChargeFit {
  bool ok = false;
  std::string message;
  Estimate n, rs_ohm, tt_s, cj_f;  // cj_f only when fitted
  double reduced_chi2 = 0.0;
  std::size_t points = 0;
  std::size_t frequencies = 0;  // distinct frequencies among the readings
};

// Needs at least 2 distinct frequencies and more readings than parameters.
AcChargeFit fit_ac_stored_charge(std::span<const AcPoint> ac, const Fixture& fixture, const AcChargeFitOptions& options);

}  // namespace junco::fitting
