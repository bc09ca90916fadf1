// Extraction of Is, n, Rs (and optionally Rsh) from forward (V, I) readings.
// Contract shared by the daemon (fit after each part's sweep) and
// `junco fit`; the Ceres machinery stays behind this header.
#pragma once

#include "fitting/diode.hpp"

#include <cstddef>
#include <limits>
#include <span>
#include <string>
#include <vector>

namespace junco::fitting {

struct IvPoint {
  double v = 0.0;    // terminal voltage across the part
  double i_a = 0.0;  // current through the part
};

// Instrument accuracy as "± (rel·|reading| + abs)", one line per quantity; the
// fit weights each residual by the standard uncertainty this implies.
struct AccuracyModel {
  double v_rel = 5e-4;
  double v_abs_v = 1e-4;
  double i_rel = 2e-3;
  double i_abs_a = 1e-9;
};

enum class RobustLoss { none, huber, cauchy };

struct FitOptions {
  double temp_k = 300.15;
  bool fit_shunt = false;
  RobustLoss loss = RobustLoss::none;
  double loss_scale = 3.0;  // in units of each residual's standard uncertainty
  AccuracyModel accuracy;
  // Points whose current is below this are excluded as under the noise floor.
  // NaN means: derive it from accuracy.i_abs_a (a few times the offset).
  double noise_floor_a = std::numeric_limits<double>::quiet_NaN();
  int max_iterations = 200;
};

struct Estimate {
  double value = std::numeric_limits<double>::quiet_NaN();
  double std_error = std::numeric_limits<double>::quiet_NaN();  // NaN when not determined
};

enum class FitStatus {
  converged,       // parameters valid
  no_convergence,  // iteration limit reached; parameters are the last iterate
  failed,          // solver failure; parameters not valid
  insufficient,    // not enough usable points; nothing fitted
};
const char* to_string(FitStatus status);

struct ExcludedPoint {
  std::size_t index = 0;  // index into the input
  std::string reason;     // e.g. "reverse bias", "below noise floor 3e-09 A"
};

struct FitResult {
  FitStatus status = FitStatus::insufficient;
  std::string message;
  Estimate is_a, n, rs_ohm, rsh_ohm;      // rsh_ohm stays NaN unless fitted
  std::vector<std::string> parameter_names;  // order of the correlation matrix
  std::vector<std::vector<double>> correlation;
  double cost = std::numeric_limits<double>::quiet_NaN();  // ½·Σ(weighted residual)²
  double rms_residual = std::numeric_limits<double>::quiet_NaN();  // see DEVELOPERS.md for its unit
  std::size_t points_used = 0;
  std::vector<ExcludedPoint> excluded;
  std::vector<std::string> warnings;
  int iterations = 0;
  double temp_k = 0.0;
  // Added by the fit engine (additive): see docs/fitting.md.
  double reduced_chi2 = std::numeric_limits<double>::quiet_NaN();  // 2·cost/(points_used − parameters)
  std::vector<std::vector<double>> covariance;  // of parameter_names, SI units, already scaled by reduced_chi2
  DiodeParams initial;                          // the estimate the solver started from

  bool usable() const { return status == FitStatus::converged; }
  DiodeParams params() const { return {is_a.value, n.value, rs_ohm.value, rsh_ohm.value == rsh_ohm.value ? rsh_ohm.value : std::numeric_limits<double>::infinity()}; }
};

// The noise floor the fit applies with these options (see noise_floor_a).
inline double effective_noise_floor_a(const FitOptions& options) {
  return options.noise_floor_a == options.noise_floor_a ? options.noise_floor_a : 10.0 * options.accuracy.i_abs_a;
}

FitResult fit_forward(std::span<const IvPoint> points, const FitOptions& options = {});

// Standard uncertainties implied by the accuracy model. The figures are read
// as limits of a rectangular distribution, so u = (rel·|x| + abs)/√3 (GUM 4.3.7).
double standard_uncertainty_v(const AccuracyModel& accuracy, double v);
double standard_uncertainty_i(const AccuracyModel& accuracy, double i_a);

// Standard uncertainty of one point's residual (in volts) for parameters p:
// sqrt(u_V² + (dV/dI·u_I)²), the effective-variance weight used by the fit.
double residual_sigma_v(const DiodeParams& p, const IvPoint& point, const AccuracyModel& accuracy, double temp_k);

}  // namespace junco::fitting
