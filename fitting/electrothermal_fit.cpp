#include "fitting/electrothermal_fit.hpp"

#include "fitting/joint_fit.hpp"
#include "fitting/solver_options.hpp"

#include <ceres/ceres.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <numbers>

namespace junco::fitting {

namespace {

constexpr double k_over_q = boltzmann_j_per_k / elementary_charge_c;
constexpr int heat_iterations = 6;

// The part at junction temperature tj: ln Is(Tj), Vt(Tj) and RS(Tj) from the
// law, for doubles and for dual numbers alike.
template <typename T>
struct HotJunction {
  T ln_is, vt, rs;
  HotJunction(const T* x, const T& tj, double ambient_k, const TemperatureLaw& law)
      : ln_is(x[0] + log_saturation_current_ratio(x[1], tj, ambient_k, law)),
        vt(tj * k_over_q),
        rs(x[2] * (1.0 + law.trs1_per_k * (tj - ambient_k) + law.trs2_per_k2 * (tj - ambient_k) * (tj - ambient_k))) {}
  // Junction voltage (RS excluded) at current i: n·Vt·ln(1 + I/Is).
  T junction_voltage(const T& n, double i) const {
    using std::exp;
    using std::log;
    return n * vt * log(1.0 + i * exp(-ln_is));
  }
  // Terminal voltage at current i (explicit, no shunt).
  T voltage(const T& n, double i) const { return i * rs + junction_voltage(n, i); }
};

// Steady state at current i: Tj = Ta + Rth·I·V(I, Tj), iterated from Ta. x = {ln Is, n, Rs, Rth}.
template <typename T>
T heated_junction_k(const T* x, double i, double ambient_k, const TemperatureLaw& law) {
  T tj = T(ambient_k);
  for (int k = 0; k < heat_iterations; ++k) tj = ambient_k + x[3] * i * HotJunction<T>(x, tj, ambient_k, law).voltage(x[1], i);
  return tj;
}

struct DcReading {
  double v, i_a, inv_sigma;
};
struct AcReading {
  double bias_i_a, measured_db;
  double omega_rad_s;  // 2π·f
  double omega_cj;     // ω·(the constant Cj)
  double omega_tt;     // ω·TT
  double z_load_ohm, inv_sigma;
};

// All readings in one residual block (one Jacobian evaluation per iteration
// instead of one per reading: the per-block bookkeeping is what costs at
// this size).
struct ElectroThermalCost {
  std::vector<DcReading> dc;
  std::vector<AcReading> ac;
  double ambient_k;
  TemperatureLaw law;
  JunctionCap cap;  // cap.cj0_f = 0: no depletion law in the AC model

  template <typename T>
  bool operator()(const T* const x, T* r) const {
    std::size_t k = 0;
    for (const auto& d : dc) {
      // Tj explicit: the measured V and I give the dissipation.
      const T tj = ambient_k + x[3] * (d.i_a * d.v);
      const HotJunction<T> hot(x, tj, ambient_k, law);
      r[k++] = (hot.voltage(x[1], d.i_a) - d.v) * d.inv_sigma;
    }
    for (const auto& a : ac) {
      using std::exp;
      const T tj = heated_junction_k(x, a.bias_i_a, ambient_k, law);
      const HotJunction<T> hot(x, tj, ambient_k, law);
      const T rj = x[1] * hot.vt / (a.bias_i_a + exp(hot.ln_is));
      // The depletion capacitance at the heated junction's voltage (a dual
      // number: it moves with Is, n and Rth); TT·gd enters as ω·TT.
      const T omega_c = cap.cj0_f > 0.0
                            ? a.omega_cj + a.omega_rad_s * depletion_law(cap, hot.junction_voltage(x[1], a.bias_i_a)).c_f
                            : T(a.omega_cj);
      r[k++] = (fixture_gain_db_of(rj, hot.rs, omega_c, a.z_load_ohm, a.omega_tt) - a.measured_db) * a.inv_sigma;
    }
    return true;
  }
};

Estimate nan_estimate() { return {}; }

}  // namespace

double heated_voltage_v(const DiodeParams& p, double i_a, double ambient_k, double rth_k_per_w, const TemperatureLaw& law,
                        double* tj_k) {
  const double x[4] = {std::log(p.is_a), p.n, p.rs_ohm, rth_k_per_w};
  const double tj = heated_junction_k(x, i_a, ambient_k, law);
  if (tj_k) *tj_k = tj;
  return HotJunction<double>(x, tj, ambient_k, law).voltage(p.n, i_a);
}

ElectroThermalFit fit_electrothermal(std::span<const IvPoint> dc, std::span<const AcPoint> ac, const Fixture& fixture,
                                     const ElectroThermalOptions& o) {
  ElectroThermalFit f;
  const double ta = o.ambient_k;

  // The stored (DC-only) fit: its screening, its start, and the apparent Rs.
  FitOptions fo;
  fo.temp_k = ta;
  fo.accuracy = o.accuracy;
  const FitResult plain = fit_forward(dc, fo);
  f.apparent_rs_ohm = plain.rs_ohm;
  if (!plain.usable()) {
    f.message = "the DC-only fit failed (" + plain.message + "), so there is no start for the electro-thermal fit";
    return f;
  }
  std::vector<bool> used(dc.size(), true);
  for (const auto& e : plain.excluded) used[e.index] = false;

  auto cost = std::make_unique<ElectroThermalCost>();
  cost->ambient_k = ta;
  cost->law = o.law;
  cost->cap = o.charge.cap;
  const DiodeParams start = plain.params();
  for (std::size_t k = 0; k < dc.size(); ++k) {
    if (!used[k]) continue;
    cost->dc.push_back({dc[k].v, dc[k].i_a, 1.0 / residual_sigma_v(start, dc[k], o.accuracy, ta)});
    const double power_w = dc[k].v * dc[k].i_a;
    if (!(power_w <= f.top_power_w)) {
      f.top_power_w = power_w;
      f.top_i_a = dc[k].i_a;
    }
  }
  const double z_load = cathode_load_ohm(fixture);
  for (const auto& p : ac) {
    if (!p.usable()) continue;
    const double omega = 2.0 * std::numbers::pi * p.freq_hz;
    cost->ac.push_back({p.bias_i_a, 20.0 * std::log10(p.vout / p.vin), omega, omega * o.cj_f, omega * o.charge.tt_s, z_load,
                        1.0 / o.ac_sigma_db});
  }
  f.dc_points = cost->dc.size();
  f.ac_points = cost->ac.size();
  if (f.dc_points < 4 || f.ac_points < 2) {
    f.message = "the electro-thermal fit needs at least 4 DC points and 2 AC readings (has " + std::to_string(f.dc_points) +
                " and " + std::to_string(f.ac_points) + "): from a DC sweep alone Rs and the heating cannot be told apart";
    return f;
  }

  // Start: Is, n from the DC fit; Rs from the AC readings alone, which the
  // heating of the DC sweep does not pull; Rth from the gap between the two
  // Rs: apparent Rs ≈ Rs − Rth·V·|dVj/dT| at the top reading, with
  // dVj/dT = (Vj − EG − XTI·Vt)/T at constant current (docs/references.md §2, §8).
  double x[4] = {std::log(start.is_a), start.n, start.rs_ohm, 0.0};
  JointFitOptions jo;
  jo.temp_k = ta;
  jo.ac_sigma_db = o.ac_sigma_db;
  jo.cj_f = o.cj_f;
  // The dynamic-resistance line reads |Z| as rd: with stored charge only the
  // readings below its corner say that (ω·TT ≤ 0.1: |Z| within 0.5 % of rd).
  std::vector<AcPoint> below_corner;
  if (o.charge.tt_s > 0.0)
    for (const auto& p : ac)
      if (p.usable() && 2.0 * std::numbers::pi * p.freq_hz * o.charge.tt_s <= 0.1) below_corner.push_back(p);
  const SimpleFit ac_alone = fit_ac_only(o.charge.tt_s > 0.0 ? std::span<const AcPoint>(below_corner) : ac, fixture, jo);
  if (ac_alone.ok && ac_alone.rs_ohm.value > start.rs_ohm) {
    const double v_top = f.top_power_w / f.top_i_a, vt = thermal_voltage_v(ta);
    const double vj = v_top - f.top_i_a * start.rs_ohm;
    const double dvj_dt = (vj - o.law.eg_ev - o.law.xti * vt) / ta;
    x[2] = ac_alone.rs_ohm.value;
    x[3] = std::clamp((ac_alone.rs_ohm.value - start.rs_ohm) / (v_top * std::abs(dvj_dt)), 0.0, o.max_rth_k_per_w);
  }

  const int residuals = static_cast<int>(f.dc_points + f.ac_points);
  ceres::Problem problem;
  problem.AddResidualBlock(
      new ceres::AutoDiffCostFunction<ElectroThermalCost, ceres::DYNAMIC, 4>(cost.release(), residuals), nullptr, x);
  problem.SetParameterLowerBound(x, 0, -80.0);
  problem.SetParameterUpperBound(x, 0, -2.0);
  problem.SetParameterLowerBound(x, 1, 0.5);
  problem.SetParameterUpperBound(x, 1, 5.0);
  problem.SetParameterLowerBound(x, 2, 0.0);
  problem.SetParameterUpperBound(x, 2, 1e3);
  problem.SetParameterLowerBound(x, 3, 0.0);
  problem.SetParameterUpperBound(x, 3, o.max_rth_k_per_w);
  ceres::Solver::Summary summary;
  ceres::Solve(solver_options(o.max_iterations), &problem, &summary);
  f.iterations = static_cast<int>(summary.iterations.size());
  f.cost = summary.final_cost;
  f.is_a.value = std::exp(x[0]);
  f.n.value = x[1];
  f.rs_ohm.value = x[2];
  f.rth_k_per_w.value = x[3];
  f.top_tj_k.value = junction_temperature_k(ta, x[3], f.top_i_a, f.top_power_w / f.top_i_a);
  if (summary.termination_type != ceres::CONVERGENCE) {
    f.message = "the electro-thermal fit did not converge: " + summary.message;
    return f;
  }
  const std::size_t dof = f.dc_points + f.ac_points - 4;
  f.reduced_chi2 = 2.0 * summary.final_cost / static_cast<double>(dof);
  ceres::Covariance::Options co;
  co.algorithm_type = ceres::DENSE_SVD;
  ceres::Covariance covariance(co);
  const std::vector<std::pair<const double*, const double*>> blocks{{x, x}};
  if (dof == 0 || !covariance.Compute(blocks, &problem)) {
    f.message = "fitted, but the covariance is not determined (Rs and Rth not separated by these readings)";
    f.is_a.std_error = f.n.std_error = f.rs_ohm.std_error = f.rth_k_per_w.std_error = nan_estimate().std_error;
    f.ok = true;
    return f;
  }
  double c[16];
  covariance.GetCovarianceBlock(x, x, c);
  const double scale = f.reduced_chi2;
  const auto se = [&](int k) { return std::sqrt(std::max(c[k * 4 + k], 0.0) * scale); };
  f.is_a.std_error = f.is_a.value * se(0);
  f.n.std_error = se(1);
  f.rs_ohm.std_error = se(2);
  f.rth_k_per_w.std_error = se(3);
  f.top_tj_k.std_error = f.top_power_w * se(3);
  f.correlation.assign(4, std::vector<double>(4, 0.0));
  for (int a = 0; a < 4; ++a)
    for (int b = 0; b < 4; ++b) {
      const double d = std::sqrt(c[a * 4 + a] * c[b * 4 + b]);
      f.correlation[a][b] = d > 0 ? c[a * 4 + b] / d : 0.0;
    }
  f.ok = true;
  return f;
}

ElectroThermalRun fit_run_electrothermal(std::span<const IvPoint> dc, std::span<const AcPoint> ac, const Fixture& fixture,
                                         const ElectroThermalRunOptions& o) {
  ElectroThermalRun run;
  run.ac_total = ac.size();
  const auto why = screen_ac_readings(ac, fixture, o.screen);
  std::vector<AcPoint> used;
  for (std::size_t k = 0; k < ac.size(); ++k)
    if (why[k].empty()) used.push_back(ac[k]);
  run.ac_left_out = ac.size() - used.size();
  char line[400];
  if (used.size() >= 2) {
    run.fit = fit_electrothermal(dc, used, fixture, o.fit);
    run.status = run.fit.ok ? "fitted" : "failed";
    if (run.fit.ok)
      std::snprintf(line, sizeof line,
                    "isothermal Rs %.4g +/- %.2g ohm with Rth %.4g +/- %.2g K/W (Tj %.1f K at the top reading); the DC-only Rs "
                    "%.4g ohm includes the heating",
                    run.fit.rs_ohm.value, run.fit.rs_ohm.std_error, run.fit.rth_k_per_w.value, run.fit.rth_k_per_w.std_error,
                    run.fit.top_tj_k.value, run.fit.apparent_rs_ohm.value);
    else
      std::snprintf(line, sizeof line, "electro-thermal fit failed: %s", run.fit.message.c_str());
    run.note = line;
    // Which junction charge the AC model held: the values are only as good as it.
    const JunctionCharge& q = o.fit.charge;
    if (q.any() || o.fit.cj_f > 0.0) {
      std::string held;
      if (q.tt_s > 0.0) std::snprintf(line, sizeof line, ", TT %.4g ns", q.tt_s * 1e9), held += line;
      if (q.cap.cj0_f > 0.0)
        std::snprintf(line, sizeof line, ", Cj(V) CJO %.4g pF VJ %.3g V M %.3g", q.cap.cj0_f * 1e12, q.cap.vj_v, q.cap.m), held += line;
      if (o.fit.cj_f > 0.0) std::snprintf(line, sizeof line, ", constant Cj %.4g pF", o.fit.cj_f * 1e12), held += line;
      run.note += "; its AC model held the junction's charge:" + held.substr(1);
    }
    return run;
  }
  // No AC readings to separate Rs from the heating: fit DC alone, and size the bias.
  run.status = "no_ac";
  FitOptions fo;
  fo.temp_k = o.fit.ambient_k;
  fo.accuracy = o.fit.accuracy;
  const FitResult plain = fit_forward(dc, fo);
  run.fit.apparent_rs_ohm = plain.rs_ohm;
  run.fit.message = "no usable AC readings: Rs and the heating cannot be told apart";
  if (!plain.usable()) {
    run.note = run.fit.message + " (and the DC-only fit failed: " + plain.message + ")";
    return run;
  }
  std::vector<bool> used_dc(dc.size(), true);
  for (const auto& e : plain.excluded) used_dc[e.index] = false;
  for (std::size_t k = 0; k < dc.size(); ++k) {
    const double power_w = dc[k].v * dc[k].i_a;
    if (used_dc[k] && !(power_w <= run.fit.top_power_w)) {
      run.fit.top_power_w = power_w;
      run.fit.top_i_a = dc[k].i_a;
    }
  }
  const double ta = o.fit.ambient_k, v_top = run.fit.top_power_w / run.fit.top_i_a;
  const double vj = v_top - run.fit.top_i_a * plain.rs_ohm.value;
  const double dvj_dt = (vj - o.fit.law.eg_ev - o.fit.law.xti * thermal_voltage_v(ta)) / ta;
  run.rs_bias_per_100_k_per_w_ohm = 100.0 * v_top * std::abs(dvj_dt);
  std::snprintf(line, sizeof line,
                "Rs %.4g +/- %.2g ohm is from DC readings alone and may include self-heating: at the top reading (%.3g W) every "
                "100 K/W of junction-to-ambient thermal resistance lowers it by about %.2g ohm; take AC readings to separate them",
                plain.rs_ohm.value, plain.rs_ohm.std_error, run.fit.top_power_w, run.rs_bias_per_100_k_per_w_ohm);
  run.note = line;
  return run;
}

}  // namespace junco::fitting
