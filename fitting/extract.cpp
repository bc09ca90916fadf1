// fit_forward: screen the readings, estimate, solve with refreshed weights,
// and turn the solver's outcome into a report. The residual and weighting
// are described in fit_solve.hpp and docs/fitting.md.
#include "fitting/extract.hpp"

#include "fitting/fit_estimate.hpp"
#include "fitting/fit_solve.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <string>

namespace junco::fitting {

const char* to_string(FitStatus status) {
  switch (status) {
    case FitStatus::converged: return "converged";
    case FitStatus::no_convergence: return "no_convergence";
    case FitStatus::failed: return "failed";
    case FitStatus::insufficient: return "insufficient";
  }
  return "unknown";
}

double standard_uncertainty_v(const AccuracyModel& a, double v) {
  return (a.v_rel * std::abs(v) + a.v_abs_v) / std::sqrt(3.0);
}

double standard_uncertainty_i(const AccuracyModel& a, double i_a) {
  return (a.i_rel * std::abs(i_a) + a.i_abs_a) / std::sqrt(3.0);
}

double residual_sigma_v(const DiodeParams& p, const IvPoint& q, const AccuracyModel& a, double temp_k) {
  // Partial derivatives of r = V − I·Rs − nVt·ln(1 + Id/Is), Id = I − (V − I·Rs)/Rsh.
  const double nvt = p.n * thermal_voltage_v(temp_k);
  const double g_sh = std::isfinite(p.rsh_ohm) ? 1.0 / p.rsh_ohm : 0.0;
  const double id = q.i_a - (q.v - q.i_a * p.rs_ohm) * g_sh;
  const double rj = nvt / std::max(id + p.is_a, 1e-300);  // junction small-signal resistance
  const double dr_dv = 1.0 + rj * g_sh;
  const double dr_di = p.rs_ohm + rj * (1.0 + p.rs_ohm * g_sh);
  const double uv = dr_dv * standard_uncertainty_v(a, q.v);
  const double ui = dr_di * standard_uncertainty_i(a, q.i_a);
  return std::sqrt(uv * uv + ui * ui);
}

namespace {

std::string fmt(const char* format, double value) {
  char buf[64];
  std::snprintf(buf, sizeof buf, format, value);
  return buf;
}

// Drops readings that cannot enter the fit, saying why for each.
std::vector<IvPoint> screen(std::span<const IvPoint> points, double floor_a, FitResult& result,
                            std::vector<std::size_t>& kept_index) {
  std::vector<IvPoint> kept;
  for (std::size_t k = 0; k < points.size(); ++k) {
    const IvPoint& p = points[k];
    std::string why;
    if (!std::isfinite(p.v) || !std::isfinite(p.i_a)) {
      why = "not a finite number";
    } else if (p.v <= 0.0 || p.i_a <= 0.0) {
      why = "reverse bias or zero (forward fit needs v > 0 and i > 0)";
    } else if (p.i_a < floor_a) {
      why = "below noise floor " + fmt("%.3g", floor_a) + " A";
    }
    if (why.empty()) {
      kept.push_back(p);
      kept_index.push_back(k);
    } else {
      result.excluded.push_back({k, why});
    }
  }
  return kept;
}

bool distinct_currents(std::span<const IvPoint> pts, std::size_t need) {
  std::vector<double> i;
  for (const auto& p : pts) i.push_back(p.i_a);
  std::sort(i.begin(), i.end());
  std::size_t distinct = i.empty() ? 0 : 1;
  for (std::size_t k = 1; k < i.size(); ++k)
    if (i[k] > i[k - 1] * (1.0 + 1e-9)) ++distinct;
  return distinct >= need;
}

double max_relative_change(const DiodeParams& a, const DiodeParams& b) {
  double d = std::abs(std::log(a.is_a / b.is_a));
  d = std::max(d, std::abs(a.n - b.n) / b.n);
  d = std::max(d, std::abs(a.rs_ohm - b.rs_ohm) / std::max(b.rs_ohm, 1e-6));
  if (std::isfinite(a.rsh_ohm) && std::isfinite(b.rsh_ohm)) d = std::max(d, std::abs(std::log(a.rsh_ohm / b.rsh_ohm)));
  return d;
}

// Covariance of x = (ln Is, n, Rs, ln Rsh) → of (Is, n, Rs, Rsh) by the delta method, scaled.
void fill_uncertainties(const SolveOutcome& s, std::size_t dim, double scale, FitResult& r) {
  const DiodeParams& p = s.params;
  const double jac[4] = {p.is_a, 1.0, 1.0, std::isfinite(p.rsh_ohm) ? p.rsh_ohm : 0.0};
  r.covariance.assign(dim, std::vector<double>(dim, 0.0));
  r.correlation.assign(dim, std::vector<double>(dim, 0.0));
  for (std::size_t a = 0; a < dim; ++a)
    for (std::size_t b = 0; b < dim; ++b) {
      r.covariance[a][b] = scale * s.covariance_x[a][b] * jac[a] * jac[b];
      const double den = std::sqrt(s.covariance_x[a][a] * s.covariance_x[b][b]);
      r.correlation[a][b] = den > 0.0 ? s.covariance_x[a][b] / den : std::numeric_limits<double>::quiet_NaN();
    }
  Estimate* est[4] = {&r.is_a, &r.n, &r.rs_ohm, &r.rsh_ohm};
  for (std::size_t a = 0; a < dim; ++a) est[a]->std_error = std::sqrt(std::max(r.covariance[a][a], 0.0));
}

void add_region_warnings(std::span<const IvPoint> pts, const FitResult& r, double temp_k,
                         std::vector<std::string>& warnings) {
  const double nvt = r.n.value * thermal_voltage_v(temp_k);
  const double rs = r.rs_ohm.value;
  std::size_t ideal = 0, rs_region = 0;
  double i_max = 0.0;
  for (const auto& p : pts) {
    if (p.i_a * rs < 0.1 * nvt) ++ideal;
    if (p.i_a * rs > 0.25 * nvt) ++rs_region;
    i_max = std::max(i_max, p.i_a);
  }
  if (ideal < 3)
    warnings.push_back("only " + std::to_string(ideal) +
                       " point(s) in the exponential region (I·Rs < 0.1·n·Vt): n and Is rest on few readings");
  const bool rs_known = r.rs_ohm.std_error < 0.5 * rs;  // false for NaN too
  if (!rs_known) {
    warnings.push_back("Rs not determined by this sweep: no high-current points (top reading " + fmt("%.3g", i_max) +
                       " A gives I·Rs = " + fmt("%.3g", i_max * rs * 1e3) + " mV against n·Vt = " +
                       fmt("%.3g", nvt * 1e3) + " mV)");
  } else if (rs_region < 3) {
    warnings.push_back("only " + std::to_string(rs_region) +
                       " point(s) where Rs matters (I·Rs > n·Vt/4): Rs rests on few readings");
  }
}

void add_bound_warnings(const FitResult& r, std::vector<std::string>& warnings) {
  if (r.n.value <= fit_n_min + 1e-9 || r.n.value >= fit_n_max - 1e-9)
    warnings.push_back("n = " + fmt("%.4g", r.n.value) + " is at its bound (0.5..4): the model does not fit this curve");
  if (r.rs_ohm.value <= 0.0) warnings.push_back("Rs at its lower bound 0 Ω");
}

// Readings far from the fit, judged against the robust spread of all residuals.
void add_outlier_warnings(std::span<const double> z, const std::vector<std::size_t>& index,
                          std::vector<std::string>& warnings) {
  std::vector<double> a(z.size());
  for (std::size_t k = 0; k < z.size(); ++k) a[k] = std::abs(z[k]);
  std::vector<double> sorted = a;
  std::nth_element(sorted.begin(), sorted.begin() + static_cast<std::ptrdiff_t>(sorted.size() / 2), sorted.end());
  const double spread = std::max(1.4826 * sorted[sorted.size() / 2], 1.0);
  std::string list;
  std::size_t count = 0;
  for (std::size_t k = 0; k < a.size(); ++k) {
    if (a[k] <= 6.0 * spread) continue;
    ++count;
    if (count <= 8) list += (list.empty() ? "" : ", ") + std::to_string(index[k]);
  }
  if (count > 0)
    warnings.push_back(std::to_string(count) + " reading(s) lie more than 6 robust σ from the fit (input index " +
                       list + (count > 8 ? ", …" : "") + "); a robust loss limits their pull");
}

}  // namespace

FitResult fit_forward(std::span<const IvPoint> points, const FitOptions& opt) {
  FitResult r;
  r.temp_k = opt.temp_k;
  const std::size_t dim = opt.fit_shunt ? 4 : 3;
  r.parameter_names = {"is_a", "n", "rs_ohm"};
  if (opt.fit_shunt) r.parameter_names.push_back("rsh_ohm");
  if (!(opt.temp_k > 0.0) || !std::isfinite(opt.temp_k)) {
    r.message = "temperature must be a finite number above 0 K";
    return r;
  }
  const double floor_a = effective_noise_floor_a(opt);
  std::vector<std::size_t> index;
  const std::vector<IvPoint> pts = screen(points, floor_a, r, index);
  r.points_used = pts.size();
  const std::size_t need = dim + 1;
  if (pts.size() < need || !distinct_currents(pts, need)) {
    r.message = "need at least " + std::to_string(need) + " forward readings at distinct currents above the noise floor, have " +
                std::to_string(pts.size());
    return r;
  }

  // Start weights from σ_V alone, then refresh from each solve's parameters.
  std::vector<double> sigma(pts.size());
  for (std::size_t k = 0; k < pts.size(); ++k) sigma[k] = standard_uncertainty_v(opt.accuracy, pts[k].v);
  r.initial = initial_estimate(pts, sigma, opt.temp_k, opt.fit_shunt);
  WeightedProblem wp{pts, sigma, opt.temp_k, opt.fit_shunt, opt.loss, opt.loss_scale, opt.max_iterations};
  CurveSolver solver(wp);  // reads `sigma` afresh at every solve
  DiodeParams current = r.initial;
  SolveOutcome s;
  constexpr int max_passes = 4;
  for (int pass = 0; pass < max_passes; ++pass) {
    for (std::size_t k = 0; k < pts.size(); ++k) sigma[k] = residual_sigma_v(current, pts[k], opt.accuracy, opt.temp_k);
    // The covariance is wanted only once the weights have settled (last pass).
    const bool last = pass == max_passes - 1;
    s = solver.solve(current, last);
    r.iterations += s.iterations;
    if (s.status == FitStatus::failed) break;
    const double change = max_relative_change(s.params, current);
    current = s.params;
    if (change < 1e-7 && !last) {
      // Settled: a final solve with these weights starts at the optimum and adds the covariance.
      for (std::size_t k = 0; k < pts.size(); ++k) sigma[k] = residual_sigma_v(current, pts[k], opt.accuracy, opt.temp_k);
      s = solver.solve(current, true);
      r.iterations += s.iterations;
      break;
    }
  }
  r.status = s.status;
  r.message = s.message;
  if (s.status == FitStatus::failed) return r;

  r.is_a.value = s.params.is_a;
  r.n.value = s.params.n;
  r.rs_ohm.value = s.params.rs_ohm;
  if (opt.fit_shunt) r.rsh_ohm.value = s.params.rsh_ohm;
  r.cost = s.cost;
  r.reduced_chi2 = 2.0 * s.cost / static_cast<double>(pts.size() - dim);

  std::vector<double> z(pts.size());
  weighted_residuals(wp, s.params, z);
  double sum_sq_v = 0.0;
  for (std::size_t k = 0; k < pts.size(); ++k) sum_sq_v += (z[k] * sigma[k]) * (z[k] * sigma[k]);
  r.rms_residual = std::sqrt(sum_sq_v / static_cast<double>(pts.size()));

  if (s.covariance_ok) {
    fill_uncertainties(s, dim, r.reduced_chi2, r);
  } else {
    r.warnings.push_back("covariance not computable (parameters not jointly determined by these readings)");
  }
  add_bound_warnings(r, r.warnings);
  add_region_warnings(pts, r, opt.temp_k, r.warnings);
  add_outlier_warnings(z, index, r.warnings);
  if (r.reduced_chi2 > 10.0)
    r.warnings.push_back("scatter is " + fmt("%.3g", std::sqrt(r.reduced_chi2)) +
                         "× the accuracy model: check the accuracy figures, outliers or the model (self-heating, high injection)");
  if (!r.excluded.empty())
    r.warnings.push_back(std::to_string(r.excluded.size()) + " reading(s) excluded (see the excluded list)");
  return r;
}

}  // namespace junco::fitting
