#include "fitting/pin_diode.hpp"

#include "fitting/joint_fit.hpp"
#include "fitting/diode.hpp"

#include <Eigen/Dense>

#include <algorithm>
#include <cmath>
#include <functional>
#include <limits>
#include <numbers>
#include <set>

namespace junco::fitting {

namespace {

constexpr double nan = std::numeric_limits<double>::quiet_NaN();
constexpr double i_ref_a = 1e-3;  // the law's reference current (R0 + K·I_ref^−x is fitted, not K)

using Residuals = std::function<Eigen::VectorXd(const Eigen::VectorXd&)>;
using Project = std::function<void(Eigen::VectorXd&)>;

struct LmResult {
  Eigen::VectorXd x;
  Eigen::MatrixXd jac;
  double cost = 0.0;
  bool converged = false;
};

Eigen::MatrixXd forward_jacobian(const Residuals& f, const Eigen::VectorXd& x, const Eigen::VectorXd& r0) {
  Eigen::MatrixXd j(r0.size(), x.size());
  for (Eigen::Index c = 0; c < x.size(); ++c) {
    Eigen::VectorXd xp = x;
    const double h = 1e-6 * std::max(std::abs(x[c]), 1e-3);
    xp[c] += h;
    j.col(c) = (f(xp) - r0) / h;
  }
  return j;
}

// Levenberg–Marquardt with projection onto the bounds (the same scheme as
// ac_charge_fit.cpp; the residuals are already whitened).
LmResult levenberg_marquardt(const Residuals& f, Eigen::VectorXd x, const Project& project, int max_iterations) {
  Eigen::VectorXd r = f(x);
  double cost = r.squaredNorm(), lambda = 1e-3;
  Eigen::MatrixXd jac = forward_jacobian(f, x, r);
  bool converged = false;
  for (int it = 0; it < max_iterations && !converged; ++it) {
    const Eigen::MatrixXd jtj = jac.transpose() * jac;
    const Eigen::VectorXd jtr = jac.transpose() * r;
    bool stepped = false;
    for (int tries = 0; tries < 20 && !stepped; ++tries) {
      Eigen::MatrixXd a = jtj;
      a.diagonal() += lambda * jtj.diagonal().cwiseMax(1e-12);
      Eigen::VectorXd next = x + a.ldlt().solve(-jtr);
      project(next);
      const Eigen::VectorXd rn = f(next);
      const double cn = rn.squaredNorm();
      if (std::isfinite(cn) && cn <= cost) {
        converged = (cost - cn) <= 1e-12 * std::max(cost, 1e-300) + 1e-20 || (next - x).norm() <= 1e-12 * (1.0 + x.norm());
        x = next;
        r = rn;
        cost = cn;
        jac = forward_jacobian(f, x, r);
        lambda = std::max(lambda / 3.0, 1e-12);
        stepped = true;
      } else {
        lambda *= 4.0;
      }
    }
    if (!stepped) converged = true;  // no step lowers the cost: at the minimum within round-off
  }
  return {x, jac, cost, converged};
}

// (JᵀJ)⁻¹ scaled by max(1, reduced χ²).
Eigen::MatrixXd scaled_covariance(const Eigen::MatrixXd& jac, double reduced_chi2) {
  const Eigen::MatrixXd jtj = jac.transpose() * jac;
  Eigen::MatrixXd cov = jtj.ldlt().solve(Eigen::MatrixXd::Identity(jtj.rows(), jtj.cols()));
  return cov * std::max(1.0, reduced_chi2);
}

double se_of(const Eigen::MatrixXd& cov, Eigen::Index k) {
  const double v = cov(k, k);
  return std::isfinite(v) && v >= 0.0 ? std::sqrt(v) : nan;
}

double measured_db(const AcPoint& p) { return 20.0 * std::log10(p.vout / p.vin); }

// Fit parameters → the law. p = (N, ln τ, R0, ln(R(1 mA) − R0), x).
PinLaw law_of(const Eigen::VectorXd& p) {
  PinLaw law;
  law.n = p[0];
  law.tau_s = std::exp(p[1]);
  law.r0_ohm = p[2];
  law.x = p[4];
  law.k_ohm_a_x = std::exp(p[3]) * std::pow(i_ref_a, p[4]);
  return law;
}

// τ's start: the best of a log grid from tau_lo_s to 1 ms (the other
// parameters held at their starts), written into p[1] = ln τ.
void start_ln_tau(const Residuals& residuals, Eigen::VectorXd& p, double tau_lo_s) {
  double best_cost = std::numeric_limits<double>::infinity(), best_ln_tau = std::log(1e-6);
  for (double tau = tau_lo_s; tau <= 1e-3; tau *= std::sqrt(10.0)) {
    p[1] = std::log(tau);
    const double c = residuals(p).squaredNorm();
    if (c < best_cost) best_cost = c, best_ln_tau = p[1];
  }
  p[1] = best_ln_tau;
}

// The fitted law and its covariance in the reported SI parameters
// (n, τ, R0, K, x), from the fit parameters p = (N, ln τ, R0, ln(R(1 mA) − R0), x)
// and their covariance cov_p (3 × 3 when the I-region is absent: K = 0, x = 1
// held, their errors NaN). J = ∂(SI)/∂p.
void report_law(PinFit& f, const PinLaw& law, const Eigen::VectorXd& p, const Eigen::MatrixXd& cov_p, bool junction_only) {
  const Eigen::Index np = p.size();
  Eigen::MatrixXd t = Eigen::MatrixXd::Zero(5, np);
  t(0, 0) = 1.0;
  t(1, 1) = law.tau_s;
  t(2, 2) = 1.0;
  if (!junction_only) {
    t(3, 3) = law.k_ohm_a_x;                      // ∂K/∂ln(R1m − R0)
    t(3, 4) = law.k_ohm_a_x * std::log(i_ref_a);  // ∂K/∂x at fixed R(1 mA)
    t(4, 4) = 1.0;
  }
  const Eigen::MatrixXd cov = t * cov_p * t.transpose();
  f.n = {law.n, se_of(cov, 0)};
  f.tau_s = {law.tau_s, se_of(cov, 1)};
  f.r0_ohm = {law.r0_ohm, se_of(cov, 2)};
  f.k_ohm_a_x = {law.k_ohm_a_x, junction_only ? nan : se_of(cov, 3)};
  f.x = {law.x, junction_only ? nan : se_of(cov, 4)};
  if (junction_only) {
    f.r_1ma_ohm = f.r0_ohm;
  } else {
    // R(1 mA) = R0 + e^{p3}: var = var(R0) + e^{2 p3} var(p3) + 2 e^{p3} cov(R0, p3).
    const double e3 = std::exp(p[3]);
    const double v1 = cov_p(2, 2) + e3 * e3 * cov_p(3, 3) + 2.0 * e3 * cov_p(2, 3);
    f.r_1ma_ohm = {law.r0_ohm + e3, v1 >= 0.0 ? std::sqrt(v1) : nan};
  }
  f.parameter_names = {"n", "tau_s", "r0_ohm", "k_ohm_a_x", "x"};
  f.covariance.assign(5, std::vector<double>(5, 0.0));
  for (Eigen::Index a = 0; a < 5; ++a)
    for (Eigen::Index b = 0; b < 5; ++b) f.covariance[a][b] = cov(a, b);
  f.knee_freq_hz = pin_knee_freq_hz(law.tau_s);
}

}  // namespace

double pin_rf_resistance_ohm(const PinLaw& law, double i_a) { return law.r0_ohm + law.k_ohm_a_x * std::pow(i_a, -law.x); }

double pin_knee_freq_hz(double tau_s) { return 1.0 / (2.0 * std::numbers::pi * tau_s); }

std::complex<double> pin_on_impedance(const PinLaw& law, double i_a, double freq_hz, double temp_k, double cj_f) {
  const double rd = law.n * thermal_voltage_v(temp_k) / i_a;
  const double r_i = law.k_ohm_a_x * std::pow(i_a, -law.x);
  const double w = 2.0 * std::numbers::pi * freq_hz;
  const std::complex<double> jwt(0.0, w * law.tau_s);
  if (cj_f == 0.0) return law.r0_ohm + rd / (1.0 + jwt) + r_i * (1.0 + jwt - law.x) / (1.0 + jwt);
  const std::complex<double> y_j = (1.0 + jwt) / rd + std::complex<double>(0.0, w * cj_f);
  return law.r0_ohm + r_i + (1.0 - law.x * r_i / rd) / y_j;
}

std::complex<double> pin_off_impedance(double ct_f, double rp_ohm, double freq_hz) {
  const std::complex<double> y(1.0 / rp_ohm, 2.0 * std::numbers::pi * freq_hz * ct_f);
  return 1.0 / y;
}

double pin_ideal_k_ohm_a(double width_m, double mobility_sum_m2_per_v_s, double tau_s) {
  return width_m * width_m / (mobility_sum_m2_per_v_s * tau_s);
}

PinFit fit_pin_law(std::span<const AcPoint> ac_in, const Fixture& fixture, const PinFitOptions& o) {
  PinFit f;
  std::vector<AcPoint> ac;
  std::set<double> freqs;
  for (const auto& p : ac_in)
    if (p.usable() && p.freq_hz > 0.0) {
      ac.push_back(p);
      freqs.insert(p.freq_hz);
    }
  f.points = ac.size();
  f.frequencies = freqs.size();
  constexpr Eigen::Index np = 5;
  if (freqs.size() < 2) {
    f.message = "need AC readings at 2 or more frequencies to find the lifetime's knee";
    return f;
  }
  if (ac.size() <= static_cast<std::size_t>(np)) {
    f.message = "need more AC readings than the 5 parameters (N, tau, R0, K, x)";
    return f;
  }
  const Residuals residuals = [&](const Eigen::VectorXd& p) {
    const PinLaw law = law_of(p);
    Eigen::VectorXd r(static_cast<Eigen::Index>(ac.size()));
    for (std::size_t k = 0; k < ac.size(); ++k) {
      const double model = to_db(fixture_gain(fixture, pin_on_impedance(law, ac[k].bias_i_a, ac[k].freq_hz, o.temp_k)));
      r[static_cast<Eigen::Index>(k)] = (measured_db(ac[k]) - model) / o.ac_sigma_db;
    }
    return r;
  };
  const Project project = [](Eigen::VectorXd& p) {
    p[0] = std::clamp(p[0], 0.3, 10.0);
    p[1] = std::clamp(p[1], std::log(1e-12), std::log(1e-1));
    p[2] = std::clamp(p[2], 0.0, 1e4);
    p[3] = std::clamp(p[3], std::log(1e-6), std::log(1e7));
    p[4] = std::clamp(p[4], 0.1, 3.0);
  };

  // Start: the series resistance each reading implies (dynamic-resistance
  // method, design_joint_fit.hpp) at the highest frequency gives R0 (a fraction
  // of the smallest) and R(1 mA); τ from a log grid with N = 2, x = 1.
  const double fmax = *freqs.rbegin();
  const double z = cathode_load_ohm(fixture);
  double r_min = std::numeric_limits<double>::infinity(), r_near_1ma = nan, best_dist = std::numeric_limits<double>::infinity();
  for (const auto& p : ac) {
    if (p.freq_hz != fmax) continue;
    const double r = z * (p.vin / p.vout - 1.0);  // the fixture's series R at Rg ≈ 0 (a start, not a model)
    if (!(r > 0.0)) continue;
    r_min = std::min(r_min, r);
    const double d = std::abs(std::log(p.bias_i_a / i_ref_a));
    if (d < best_dist) best_dist = d, r_near_1ma = r * std::pow(p.bias_i_a / i_ref_a, 1.0);
  }
  Eigen::VectorXd p(np);
  p[0] = 2.0;
  p[2] = std::isfinite(r_min) ? 0.5 * r_min : 1.0;
  p[3] = std::log(std::isfinite(r_near_1ma) && r_near_1ma > p[2] ? r_near_1ma - p[2] : 10.0);
  p[4] = 1.0;
  start_ln_tau(residuals, p, 1e-9);

  const LmResult lm = levenberg_marquardt(residuals, p, project, o.max_iterations);
  if (!std::isfinite(lm.cost)) {
    f.message = "the PIN fit did not find finite residuals";
    return f;
  }
  const double dof = static_cast<double>(ac.size() - np);
  f.reduced_chi2 = lm.cost / dof;
  const Eigen::MatrixXd cov_p = scaled_covariance(lm.jac, f.reduced_chi2);
  const PinLaw law = law_of(lm.x);
  report_law(f, law, lm.x, cov_p, false);
  for (const auto& q : ac)
    if (q.freq_hz >= 3.0 * f.knee_freq_hz) ++f.above_knee;
  f.ok = true;
  f.message = lm.converged ? "converged" : "stopped at the iteration limit";
  if (f.above_knee == 0) f.message += "; no reading is above 3x the knee: R0, K and x rest on the knee alone";
  return f;
}

PinFit fit_pin_impedance(std::span<const PinImpedanceReading> in, const PinImpedanceFitOptions& o) {
  PinFit f;
  std::vector<PinImpedanceReading> z;
  std::set<double> freqs;
  for (const auto& r : in)
    if (r.i_a > 0.0 && r.freq_hz > 0.0 && std::isfinite(r.z_ohm.real()) && std::isfinite(r.z_ohm.imag()) && std::abs(r.z_ohm) > 0.0) {
      z.push_back(r);
      freqs.insert(r.freq_hz);
    }
  f.points = z.size();
  f.frequencies = freqs.size();
  // Free parameters: (N, ln τ, R0) and, for a PIN part, ln(R(1 mA) − R0) and x
  // (law_of's order); a signal diode's K is 0.
  const Eigen::Index np = o.junction_only ? 3 : 5;
  if (freqs.size() < 2) {
    f.message = "need impedances at 2 or more frequencies to find the knee";
    return f;
  }
  if (2 * z.size() <= static_cast<std::size_t>(np)) {
    f.message = "need more impedance components than the " + std::to_string(np) + " parameters";
    return f;
  }
  const auto law_from = [&](const Eigen::VectorXd& p) {
    if (!o.junction_only) return law_of(p);
    PinLaw law;
    law.n = p[0];
    law.tau_s = std::exp(p[1]);
    law.r0_ohm = p[2];
    law.k_ohm_a_x = 0.0;
    law.x = 1.0;
    return law;
  };
  const Residuals residuals = [&](const Eigen::VectorXd& p) {
    const PinLaw law = law_from(p);
    Eigen::VectorXd r(static_cast<Eigen::Index>(2 * z.size()));
    for (std::size_t k = 0; k < z.size(); ++k) {
      const std::complex<double> d = (pin_on_impedance(law, z[k].i_a, z[k].freq_hz, o.temp_k, z[k].cj_f) - z[k].z_ohm) /
                                     (std::abs(z[k].z_ohm) * o.sigma_relative);
      r[static_cast<Eigen::Index>(2 * k)] = d.real();
      r[static_cast<Eigen::Index>(2 * k + 1)] = d.imag();
    }
    return r;
  };
  const Project project = [&](Eigen::VectorXd& p) {
    p[0] = std::clamp(p[0], 0.3, 10.0);
    p[1] = std::clamp(p[1], std::log(1e-13), std::log(1e-1));
    p[2] = std::clamp(p[2], 0.0, 1e4);
    if (o.junction_only) return;
    p[3] = std::clamp(p[3], std::log(1e-6), std::log(1e7));
    p[4] = std::clamp(p[4], 0.1, 3.0);
  };
  // Start: at the highest frequency the real part is R0 + R_I (far above the
  // knee): R0 a fraction of the smallest, R(1 mA) from the reading nearest
  // 1 mA scaled as 1/I; N = 2 (high injection), x = 1; τ from a log grid.
  const double fmax = *freqs.rbegin();
  double r_min = std::numeric_limits<double>::infinity(), r_near_1ma = nan, best_dist = std::numeric_limits<double>::infinity();
  for (const auto& r : z) {
    if (r.freq_hz != fmax || !(r.z_ohm.real() > 0.0)) continue;
    r_min = std::min(r_min, r.z_ohm.real());
    const double d = std::abs(std::log(r.i_a / i_ref_a));
    if (d < best_dist) best_dist = d, r_near_1ma = r.z_ohm.real() * r.i_a / i_ref_a;
  }
  Eigen::VectorXd p(np);
  p[0] = o.junction_only ? 1.5 : 2.0;
  p[2] = std::isfinite(r_min) ? 0.5 * r_min : 1.0;
  if (!o.junction_only) {
    p[3] = std::log(std::isfinite(r_near_1ma) && r_near_1ma > p[2] ? r_near_1ma - p[2] : 10.0);
    p[4] = 1.0;
  }
  start_ln_tau(residuals, p, 1e-11);
  const LmResult lm = levenberg_marquardt(residuals, p, project, o.max_iterations);
  if (!std::isfinite(lm.cost)) {
    f.message = "the impedance fit did not find finite residuals";
    return f;
  }
  const double dof = static_cast<double>(2 * z.size()) - static_cast<double>(np);
  f.reduced_chi2 = lm.cost / dof;
  const Eigen::MatrixXd jtj = lm.jac.transpose() * lm.jac;
  const Eigen::MatrixXd cov_p = jtj.ldlt().solve(Eigen::MatrixXd::Identity(np, np)) * f.reduced_chi2;
  const PinLaw law = law_from(lm.x);
  report_law(f, law, lm.x, cov_p, o.junction_only);
  for (const auto& r : z)
    if (r.freq_hz >= 3.0 * f.knee_freq_hz) ++f.above_knee;
  f.ok = true;
  f.message = lm.converged ? "converged" : "stopped at the iteration limit";
  if (!o.junction_only && f.above_knee == 0) f.message += "; no reading is above 3x the knee: R0, K and x rest on the knee alone";
  return f;
}

PinOffFit fit_pin_off_state(std::span<const OffStatePoint> off_in, const Fixture& fixture, double sigma_db) {
  PinOffFit f;
  std::vector<OffStatePoint> off;
  for (const auto& p : off_in)
    if (p.vin > 0.0 && p.vout > 0.0 && p.freq_hz > 0.0) off.push_back(p);
  f.points = off.size();
  if (off.size() < 3) {
    f.message = "need 3 or more off-state readings for CT and Rp";
    return f;
  }
  // p = (ln CT [F], ln Rp [Ω])
  const Residuals residuals = [&](const Eigen::VectorXd& p) {
    Eigen::VectorXd r(static_cast<Eigen::Index>(off.size()));
    for (std::size_t k = 0; k < off.size(); ++k) {
      const double model = to_db(fixture_gain(fixture, pin_off_impedance(std::exp(p[0]), std::exp(p[1]), off[k].freq_hz)));
      r[static_cast<Eigen::Index>(k)] = (20.0 * std::log10(off[k].vout / off[k].vin) - model) / sigma_db;
    }
    return r;
  };
  const Project project = [](Eigen::VectorXd& p) {
    p[0] = std::clamp(p[0], std::log(1e-16), std::log(1e-8));
    p[1] = std::clamp(p[1], std::log(1.0), std::log(1e12));
  };
  Eigen::VectorXd p(2);
  double best = std::numeric_limits<double>::infinity();
  Eigen::VectorXd start(2);
  for (double c = 1e-15; c <= 1e-9; c *= std::sqrt(10.0))
    for (double rp = 10.0; rp <= 1e11; rp *= 10.0) {
      p << std::log(c), std::log(rp);
      const double cost = residuals(p).squaredNorm();
      if (cost < best) best = cost, start = p;
    }
  const LmResult lm = levenberg_marquardt(residuals, start, project, 300);
  const double dof = static_cast<double>(off.size()) - 2.0;
  f.reduced_chi2 = dof > 0 ? lm.cost / dof : nan;
  const Eigen::MatrixXd cov = scaled_covariance(lm.jac, dof > 0 ? f.reduced_chi2 : 1.0);
  const double ct = std::exp(lm.x[0]), rp = std::exp(lm.x[1]);
  f.ct_f = {ct, ct * se_of(cov, 0)};
  f.rp_ohm = {rp, rp * se_of(cov, 1)};
  f.ok = std::isfinite(lm.cost);
  f.message = lm.converged ? "converged" : "stopped at the iteration limit";
  return f;
}

std::vector<std::string> screen_pin_ac_readings(std::span<const AcPoint> ac, const Fixture& fx, double tau_s,
                                                double max_signal_ratio, double floor_v) {
  std::vector<std::string> why = screen_ac_readings(ac, fx, {max_signal_ratio, floor_v});
  const double z_cathode_ohm = cathode_load_ohm(fx);
  for (std::size_t k = 0; k < ac.size(); ++k) {
    if (why[k] != "large signal" || !(tau_s > 0.0)) continue;
    const double signal_peak_a = ac[k].vout * ac[k].peak_per_unit / z_cathode_ohm;
    const double rf_charge_c = signal_peak_a / (std::numbers::pi * ac[k].freq_hz);
    if (rf_charge_c <= max_signal_ratio * ac[k].bias_i_a * tau_s) why[k].clear();
  }
  return why;
}

namespace {

// The charge-control PIN in a switch, time domain: the series and the shunt
// mount differ only in the block's current and the load's voltage at a state
// (charge q, EMF e, block voltage vcb). Periodic steady state by shooting on
// (q at t = 0, vcb), RK4 over one period; harmonics of the load voltage (DFT).
PinDistortion pin_switch_distortion(const PinLaw& law, double is_a, double ib, double freq_hz, double amp_v, double rg, double rl,
                                    double temp_k, int n, bool shunt) {
  const double nvt = law.n * thermal_voltage_v(temp_k), w = 2.0 * std::numbers::pi * freq_hz, h = 1.0 / (freq_hz * n);
  const auto r_i = [&](double q) { return law.k_ohm_a_x * std::pow(std::max(q, 1e-30) / law.tau_s, -law.x); };
  const auto v_j = [&](double q) { return nvt * std::log1p(std::max(q, 0.0) / (law.tau_s * is_a)); };
  const double g = 1.0 / rg + 1.0 / rl;
  // The block's current at charge q, EMF e, block voltage vcb.
  //   series: e − vcb = Rg·ig + (R0 + R_I)·(Ib + ig) + v_j + RL·(Ib + ig)
  //   shunt:  e/Rg − G·(vcb + R·(Ib + ic) + v_j) = ic
  const auto ic_of = [&](double q, double e, double vcb) {
    const double r = law.r0_ohm + r_i(q);
    return shunt ? (e / rg - g * (vcb + r * ib + v_j(q))) / (1.0 + g * r) : (e - vcb - v_j(q) - (r + rl) * ib) / (rg + rl + r);
  };
  // The load's AC voltage: series RL·ig (the bias's RL·Ib is DC), shunt the line node.
  const auto load_v = [&](double e, double ic) { return shunt ? (e - rg * ic) * rl / (rg + rl) : rl * ic; };
  const auto dq = [&](double q, double t, double vcb) { return ib + ic_of(q, amp_v * std::sin(w * t), vcb) - q / law.tau_s; };
  // One period from q0: q(T) and the mean block current (RK4).
  std::vector<double> ic(static_cast<std::size_t>(n)), vo(static_cast<std::size_t>(n));
  const auto period = [&](double q0, double vcb, bool keep) {
    double q = q0, mean = 0.0;
    for (int s = 0; s < n; ++s) {
      const double t = s * h, e = amp_v * std::sin(w * t);
      const double i_now = ic_of(q, e, vcb);
      if (keep) {
        ic[static_cast<std::size_t>(s)] = i_now;
        vo[static_cast<std::size_t>(s)] = load_v(e, i_now);
      }
      mean += i_now / n;
      const double k1 = dq(q, t, vcb), k2 = dq(q + 0.5 * h * k1, t + 0.5 * h, vcb), k3 = dq(q + 0.5 * h * k2, t + 0.5 * h, vcb),
                   k4 = dq(q + h * k3, t + h, vcb);
      q += h / 6.0 * (k1 + 2 * k2 + 2 * k3 + k4);
    }
    return std::pair<double, double>{q, mean};
  };
  // Shooting: F(q0, vcb) = (q(T) − q0, mean ic) = 0, Newton with finite differences.
  // The block's DC voltage: series −(v_j + (R + RL)·Ib) (the EMF side at 0), shunt −(v_j + R·Ib).
  double q0 = ib * law.tau_s;
  double vcb = -(v_j(q0) + (pin_rf_resistance_ohm(law, ib) + (shunt ? 0.0 : rl)) * ib);
  PinDistortion out;
  for (int it = 0; it < 50; ++it) {
    const auto [q1, m] = period(q0, vcb, false);
    const double f1 = q1 - q0, f2 = m;
    if (std::abs(f1) <= 1e-12 * q0 && std::abs(f2) <= 1e-12 * std::max(ib, amp_v / (rg + rl))) {
      out.converged = true;
      break;
    }
    const double dq0 = 1e-6 * q0, dv = 1e-6 * std::max(1.0, std::abs(vcb));
    const auto [qa, ma] = period(q0 + dq0, vcb, false);
    const auto [qb, mb] = period(q0, vcb + dv, false);
    const double a = (qa - (q0 + dq0) - f1) / dq0, b = (qb - q0 - f1) / dv, c = (ma - f2) / dq0, d = (mb - f2) / dv;
    const double det = a * d - b * c;
    if (!(std::abs(det) > 0)) break;
    q0 -= (d * f1 - b * f2) / det;
    vcb -= (-c * f1 + a * f2) / det;
    q0 = std::max(q0, 1e-3 * ib * law.tau_s);
  }
  period(q0, vcb, true);
  std::vector<double> mag(10, 0.0);
  for (int k = 1; k < 10; ++k) {
    std::complex<double> s = 0;
    for (int j = 0; j < n; ++j) s += vo[static_cast<std::size_t>(j)] * std::polar(1.0, -2.0 * std::numbers::pi * k * j / n);
    mag[static_cast<std::size_t>(k)] = 2.0 * std::abs(s) / n;
  }
  double sum2 = 0.0;
  for (int k = 2; k < 10; ++k) sum2 += mag[static_cast<std::size_t>(k)] * mag[static_cast<std::size_t>(k)];
  out.load_peak_v = mag[1];
  out.hd2_dbc = 20.0 * std::log10(mag[2] / mag[1]);
  out.hd3_dbc = 20.0 * std::log10(mag[3] / mag[1]);
  out.thd = std::sqrt(sum2) / mag[1];
  const auto [lo, hi] = std::minmax_element(ic.begin(), ic.end());
  out.min_current_a = ib + *lo;
  out.max_current_a = ib + *hi;
  return out;
}

}  // namespace

PinDistortion pin_series_distortion(const PinLaw& law, double is_a, double ib, double freq_hz, double amp_v, double rg, double rl,
                                    double temp_k, int n) {
  return pin_switch_distortion(law, is_a, ib, freq_hz, amp_v, rg, rl, temp_k, n, false);
}

PinDistortion pin_shunt_distortion(const PinLaw& law, double is_a, double ib, double freq_hz, double amp_v, double rg, double rl,
                                   double temp_k, int n) {
  return pin_switch_distortion(law, is_a, ib, freq_hz, amp_v, rg, rl, temp_k, n, true);
}

}  // namespace junco::fitting
