// Joint fit of Is, n, Rs to a part's DC forward curve and its AC transfer
// readings together, and its comparison with the DC-only fit.
//
// Why: the AC readings see the diode's dynamic resistance Rs + n·Vt/I, so
// they pin Rs and n; the DC curve pins Is (and also n). The residuals are
//   DC: (V_model(I) − V)/σ_V, V_model explicit (no inner solve),
//       σ_V² = σ_v² + (n₀·Vt/I · σ_i)², from the accuracy model, n₀ = 1.5;
//   AC: (20·log10|Vout/Vin|_model − measured)/ac_sigma_db,
//       through the fixture model of transfer.hpp (Cj as given, not fitted).
// Parameters are ln Is, n, Rs, bounded 0.5 ≤ n ≤ 5, 0 ≤ Rs ≤ 1 kΩ. Standard
// errors from the covariance scaled by the reduced χ² (2·cost/(N − 3)).
// Agreement: every parameter within agree_k·sqrt(se_dc² + se_joint²) (the two
// fits share the DC data, so this is a lenient test; k = 2 by default), and
// the joint fit's reduced χ² at most max_reduced_chi2 (default 3): with the
// covariance scaled by χ², inconsistent AC and DC data inflate the standard
// errors instead of moving the estimates, so χ² is what reveals them.
// The DC data carry the scatter the DC-only fit found: when its reduced χ²
// exceeds 1 (the accuracy model understates the bench's noise) the joint fit
// widens the DC uncertainties by its square root (the Birge ratio), so the
// χ² test weighs how well AC and DC agree, not how well the accuracy model
// was guessed. The AC uncertainty is taken as given.
#pragma once

#include "fitting/extract.hpp"
#include "fitting/transfer.hpp"

#include <span>
#include <string>
#include <vector>

namespace junco::fitting {

struct JointFitOptions {
  double temp_k = 300.15;
  AccuracyModel accuracy;
  double ac_sigma_db = 0.01;  // standard uncertainty of one AC ratio reading
  double cj_f = 0.0;          // junction capacitance used by the AC model
  double agree_k = 2.0;
  double max_reduced_chi2 = 3.0;
  double dc_sigma_scale = 1.0;  // multiplies every DC uncertainty (compare_dc_and_joint sets it)
  int max_iterations = 200;
};

struct SimpleFit {
  bool ok = false;
  std::string message;
  Estimate is_a, n, rs_ohm;
  double cost = 0.0;
  double reduced_chi2 = 0.0;  // 2·cost/(N − 3)
  std::size_t dc_points = 0, ac_points = 0;
  DiodeParams params() const { return {is_a.value, n.value, rs_ohm.value}; }
};

struct JointFitReport {
  SimpleFit dc_only;
  SimpleFit ac_only;  // n and Rs from the AC readings alone (is_a not determined)
  SimpleFit joint;
  bool agree = false;
  std::string agreement;  // one line per parameter, then the χ² test
  std::string hint;       // set when the disagreement looks like self-heating
};

// Which AC readings the small-signal model can describe. A reading is left
// out when a level is below the floor (in the readings' unit: the meter's
// noise dominates), or when its signal current peak, Vout·peak_per_unit over
// |RL ∥ Rr|, exceeds max_signal_ratio of the bias (the junction is driven
// nonlinearly). Both thresholds are common practice, no source.
struct AcScreen {
  double max_signal_ratio = 0.1;
  double floor_v = 100e-6;
};
// One entry per reading: "" when used, else "large signal" or "below the level floor".
std::vector<std::string> screen_ac_readings(std::span<const AcPoint> ac, const Fixture& fixture, const AcScreen& screen);


// ac may be empty (then this is the DC-only fit).
SimpleFit fit_dc_ac(std::span<const IvPoint> dc, std::span<const AcPoint> ac, const Fixture& fixture,
                    const JointFitOptions& options);

// n and Rs from the AC readings alone, by the dynamic-resistance method
// (docs/references.md §3): each reading gives rd = Z·(1/G − 1), with G = Vout/Vin
// and Z = RL ∥ Rr, and rd = Rs + n·Vt/I is a straight line in Vt/I; a
// weighted linear least-squares fit gives Rs (intercept) and n (slope), with
// σ(rd) = (Z/G)·σ_dB·ln10/20 and errors scaled by the reduced χ². The line
// neglects the junction capacitance (valid while ω·Cj·rj ≪ 1); when
// options.cj_f > 0 the line's n and Rs start a least-squares fit of the
// readings in dB with Rs + (rj ∥ Cj) in the model (Is, ≪ I, left out), and
// that fit's values and errors (scaled by its reduced χ², N − 2) are
// returned. Needs 3 readings.
SimpleFit fit_ac_only(std::span<const AcPoint> ac, const Fixture& fixture, const JointFitOptions& options);

// The verdict also compares n and Rs of the DC-only and AC-only fits within
// agree_k·sqrt(se² + se²): the AC readings alone are independent of the DC
// curve, so a heated DC sweep cannot pull them (the joint fit, where precise
// DC readings outweigh the AC ones, can be). The self-heating hint is given
// when the AC-only Rs exceeds the DC one by more than that.
JointFitReport compare_dc_and_joint(std::span<const IvPoint> dc, std::span<const AcPoint> ac, const Fixture& fixture,
                                    const JointFitOptions& options);

}  // namespace junco::fitting
