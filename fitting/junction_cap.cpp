#include "fitting/junction_cap.hpp"

#include "fitting/solver_options.hpp"

#include <ceres/ceres.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <map>
#include <numbers>

namespace junco::fitting {

namespace {

constexpr double nan_v = std::numeric_limits<double>::quiet_NaN();
constexpr double vj_min_v = 0.1, vj_max_v = 2.0;  // ngspice accepts VJ up to 2 V
constexpr double m_min = 0.05, m_max = 0.95;
// Readings whose biases differ by less than this are at one bias (a supply's
// setting resolution; common practice, no source).
constexpr double same_bias_v = 1e-3;

// (z/|G|)² and (z + Rs)² of one reading; the reactance² is their difference.
struct Divider {
  double a_ohm2 = nan_v, r_ohm2 = nan_v;
};
Divider divider(const OffStatePoint& p, const Fixture& fx, double rs_ohm) {
  const double z = cathode_load_ohm(fx), g = p.vout / p.vin;
  if (!(p.vin > 0.0 && p.vout > 0.0 && g < 1.0 && std::isfinite(g))) return {};
  return {(z / g) * (z / g), (z + rs_ohm) * (z + rs_ohm)};
}

struct LawCost {
  double ln_c, reverse_v, inv_sigma;
  template <typename T>
  bool operator()(const T* const x, T* r) const {
    // x = {ln CJO, VJ, M}
    r[0] = (T(ln_c) - x[0] + x[2] * log(T(1.0) + T(reverse_v) / x[1])) * T(inv_sigma);
    return true;
  }
};

struct Reading {
  double reverse_v, ln_c, w;  // w = 1/σ_lnC²
};

// Weighted linear fit of ln C = a − M·ln(1 + Vr/VJ) at fixed VJ; M clamped to
// its bounds (then a refitted). Returns χ².
double linear_at_vj(const std::vector<Reading>& rs, double vj_v, double& a, double& m) {
  double sw = 0, su = 0, sy = 0, suu = 0, suy = 0;
  for (const auto& r : rs) {
    const double u = std::log1p(r.reverse_v / vj_v);
    sw += r.w;
    su += r.w * u;
    sy += r.w * r.ln_c;
    suu += r.w * u * u;
    suy += r.w * u * r.ln_c;
  }
  const double det = sw * suu - su * su;
  m = det > 0.0 ? -(sw * suy - su * sy) / det : 0.5;
  m = std::clamp(m, m_min, m_max);
  a = (sy + m * su) / sw;
  double chi2 = 0;
  for (const auto& r : rs) {
    const double d = r.ln_c - a + m * std::log1p(r.reverse_v / vj_v);
    chi2 += r.w * d * d;
  }
  return chi2;
}

std::size_t distinct_biases(const std::vector<Reading>& rs) {
  std::vector<double> v;
  for (const auto& r : rs) v.push_back(r.reverse_v);
  std::sort(v.begin(), v.end());
  std::size_t n = v.empty() ? 0 : 1;
  for (std::size_t k = 1; k < v.size(); ++k)
    if (v[k] - v[k - 1] >= same_bias_v) ++n;
  return n;
}

std::string format(const char* fmt, double a, double b = 0.0) {
  char line[200];
  std::snprintf(line, sizeof line, fmt, a, b);
  return line;
}

void fit_held(const std::vector<Reading>& rs, const JunctionCapOptions& o, std::size_t biases, JunctionCapFit& f) {
  f.law_held = true;
  double sw = 0, sy = 0;
  for (const auto& r : rs) {
    sw += r.w;
    sy += r.w * (r.ln_c + o.m_held * std::log1p(r.reverse_v / o.vj_v_held));
  }
  const double a = sy / sw;
  double chi2 = 0;
  for (const auto& r : rs) {
    const double d = r.ln_c + o.m_held * std::log1p(r.reverse_v / o.vj_v_held) - a;
    chi2 += r.w * d * d;
  }
  f.cj0_f = {std::exp(a), nan_v};
  f.vj_v = {o.vj_v_held, nan_v};
  f.m = {o.m_held, nan_v};
  f.message = "VJ and M held at " + format("%.6g V and %.6g", o.vj_v_held, o.m_held) + ": " +
              std::to_string(biases) + " distinct reverse bias(es), the law needs 4; CJO's standard error leaves out the held law's error";
  double scale = 1.0;
  if (rs.size() > 1) {
    f.reduced_chi2 = chi2 / static_cast<double>(rs.size() - 1);
    scale = f.reduced_chi2;
  } else {
    f.message += "; one reading: standard error from its own uncertainty, not scaled by the reduced chi2";
  }
  // d CJO = CJO · d ln CJO
  f.cj0_f.std_error = f.cj0_f.value * std::sqrt(scale / sw);
  f.ok = std::isfinite(f.cj0_f.value);
  if (!f.ok) f.message = "the held-law CJO is not finite";
}

void fit_full(const std::vector<Reading>& rs, const JunctionCapOptions& o, JunctionCapFit& f) {
  // Start: the best linear fit over a log grid of VJ.
  double x[3] = {0.0, o.vj_v_held, o.m_held};
  double best = std::numeric_limits<double>::infinity();
  constexpr int grid = 48;
  for (int k = 0; k < grid; ++k) {
    const double vj = vj_min_v * std::pow(vj_max_v / vj_min_v, k / double(grid - 1));
    double a, m;
    const double chi2 = linear_at_vj(rs, vj, a, m);
    if (chi2 < best) {
      best = chi2;
      x[0] = a;
      x[1] = vj;
      x[2] = m;
    }
  }
  ceres::Problem problem;
  for (const auto& r : rs)
    problem.AddResidualBlock(new ceres::AutoDiffCostFunction<LawCost, 1, 3>(
                                 new LawCost{r.ln_c, r.reverse_v, std::sqrt(r.w)}),
                             nullptr, x);
  problem.SetParameterLowerBound(x, 1, vj_min_v);
  problem.SetParameterUpperBound(x, 1, vj_max_v);
  problem.SetParameterLowerBound(x, 2, m_min);
  problem.SetParameterUpperBound(x, 2, m_max);
  const ceres::Solver::Options so = solver_options(o.max_iterations);
  ceres::Solver::Summary summary;
  ceres::Solve(so, &problem, &summary);
  f.cj0_f.value = std::exp(x[0]);
  f.vj_v.value = x[1];
  f.m.value = x[2];
  if (summary.termination_type != ceres::CONVERGENCE) {
    f.message = "solver did not converge: " + summary.message;
    return;
  }
  f.ok = true;
  const std::size_t dof = rs.size() - 3;  // >= 1: 4 distinct biases
  f.reduced_chi2 = 2.0 * summary.final_cost / static_cast<double>(dof);
  ceres::Covariance::Options co;
  co.algorithm_type = ceres::DENSE_SVD;
  ceres::Covariance cov(co);
  std::vector<std::pair<const double*, const double*>> blocks{{x, x}};
  if (cov.Compute(blocks, &problem)) {
    double c[9];
    cov.GetCovarianceBlock(x, x, c);
    const double scale = f.reduced_chi2;
    f.cj0_f.std_error = f.cj0_f.value * std::sqrt(c[0] * scale);
    f.vj_v.std_error = std::sqrt(c[4] * scale);
    f.m.std_error = std::sqrt(c[8] * scale);
    f.vj_m_correlation = c[5] / std::sqrt(c[4] * c[8]);
  } else {
    f.message = "covariance not determined";
  }
  // At a bound the optimum is the bound, not a minimum: the readings do not
  // fix that parameter there, and its standard error means little.
  const auto at_bound = [&](const char* name, double v, double lo, double hi) {
    if (v - lo > 1e-9 * hi && hi - v > 1e-9 * hi) return;
    if (!f.message.empty()) f.message += "; ";
    f.message += std::string(name) + format(" at its bound %.6g", v - lo <= 1e-9 * hi ? lo : hi);
  };
  at_bound("VJ", x[1], vj_min_v, vj_max_v);
  at_bound("M", x[2], m_min, m_max);
}

}  // namespace

double off_state_capacitance_f(const OffStatePoint& p, const Fixture& fixture, double rs_ohm) {
  const Divider d = divider(p, fixture, rs_ohm);
  if (!(d.a_ohm2 > d.r_ohm2) || !(p.freq_hz > 0.0)) return nan_v;
  return 1.0 / (2.0 * std::numbers::pi * p.freq_hz * std::sqrt(d.a_ohm2 - d.r_ohm2));
}

double off_state_fixture_ratio_db(const OffStatePoint& p) { return -20.0 * std::log10(p.vout / p.vin); }

double off_state_sigma_ln_c(const OffStatePoint& p, const Fixture& fixture, double rs_ohm, double sigma_db) {
  const Divider d = divider(p, fixture, rs_ohm);
  if (!(d.a_ohm2 > d.r_ohm2)) return nan_v;
  return sigma_db * std::numbers::ln10 / 20.0 * d.a_ohm2 / (d.a_ohm2 - d.r_ohm2);
}

JunctionCapFit fit_junction_cap(std::span<const OffStatePoint> points, const Fixture& fixture, double rs_ohm,
                                const JunctionCapOptions& o) {
  JunctionCapFit f;
  f.c_f.assign(points.size(), nan_v);
  f.left_out.assign(points.size(), "");
  if (!(rs_ohm >= 0.0 && std::isfinite(rs_ohm))) {
    f.message = "rs_ohm must be a finite value >= 0";
    return f;
  }
  if (!(o.ac_sigma_db > 0.0 && o.vj_v_held > 0.0 && o.m_held >= 0.0 && o.stray_c_f >= 0.0 && std::isfinite(o.stray_c_f))) {
    f.message = "options: ac_sigma_db and vj_v_held must be positive, m_held and stray_c_f not negative";
    return f;
  }
  std::vector<Reading> used;
  std::map<std::string, int> why;
  for (std::size_t k = 0; k < points.size(); ++k) {
    const auto& p = points[k];
    std::string& reason = f.left_out[k];
    const double g = p.vout / p.vin;
    if (!(p.vin > 0.0 && p.vout > 0.0 && std::isfinite(g))) reason = "level not a positive number";
    else if (!(p.reverse_v >= 0.0 && std::isfinite(p.reverse_v) && p.freq_hz > 0.0 && std::isfinite(p.freq_hz)))
      reason = "bias or frequency not valid";
    else if (!(p.vin >= o.floor_v && p.vout >= o.floor_v)) reason = "below the level floor";
    else if (!(g <= o.max_gain)) reason = "gain above max_gain";
    else {
      const double c_seen = off_state_capacitance_f(p, fixture, rs_ohm);
      const double c = c_seen - o.stray_c_f;  // the stray is in parallel with the part
      if (!std::isfinite(c_seen)) reason = "no series C gives this gain";
      else if (!(c > 0.0)) reason = "not above the fixture's stray capacitance";
      else {
        // dC = dC_seen: the relative uncertainty grows by C_seen/C.
        const double s = off_state_sigma_ln_c(p, fixture, rs_ohm, o.ac_sigma_db) * c_seen / c;
        f.c_f[k] = c;
        used.push_back({p.reverse_v, std::log(c), 1.0 / (s * s)});
      }
    }
    if (!reason.empty()) ++why[reason];
  }
  f.points_used = used.size();
  if (used.empty()) {
    f.message = "no usable off-state reading among " + std::to_string(points.size());
    std::string sep = " (";
    for (const auto& [reason, count] : why) {
      f.message += sep + std::to_string(count) + " " + reason;
      sep = ", ";
    }
    if (!why.empty()) f.message += ")";
    return f;
  }
  const std::size_t biases = distinct_biases(used);
  if (biases < 4) fit_held(used, o, biases, f);
  else fit_full(used, o, f);
  return f;
}

JunctionCapFit fit_junction_cap_values(std::span<const CapacitanceReading> readings, const JunctionCapOptions& o) {
  JunctionCapFit f;
  f.c_f.assign(readings.size(), nan_v);
  f.left_out.assign(readings.size(), "");
  std::vector<Reading> used;
  for (std::size_t k = 0; k < readings.size(); ++k) {
    const auto& r = readings[k];
    if (!(r.c_f > 0.0 && std::isfinite(r.c_f) && r.sigma_ln_c > 0.0 && r.reverse_v >= 0.0 && std::isfinite(r.reverse_v))) {
      f.left_out[k] = "capacitance, bias or uncertainty not valid";
      continue;
    }
    f.c_f[k] = r.c_f;
    used.push_back({r.reverse_v, std::log(r.c_f), 1.0 / (r.sigma_ln_c * r.sigma_ln_c)});
  }
  f.points_used = used.size();
  if (used.empty()) {
    f.message = "no usable capacitance among " + std::to_string(readings.size());
    return f;
  }
  const std::size_t biases = distinct_biases(used);
  if (biases < 4) fit_held(used, o, biases, f);
  else fit_full(used, o, f);
  return f;
}

}  // namespace junco::fitting
