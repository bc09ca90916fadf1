#include "fitting/heating.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>

namespace junco::fitting {

namespace {

// dV/dI of the part at current i_a and Ta: Rs + n·Vt/(I + Is).
double slope_ohm(const DiodeParams& p, double i_a, double temp_k) {
  return p.rs_ohm + p.n * thermal_voltage_v(temp_k) / (i_a + p.is_a);
}

// Terminal voltage at current i_a and junction temperature t (SPICE law).
double part_v(const DiodeParams& p, double i_a, double tnom_k, double t_k, const TemperatureLaw& law) {
  const double is = saturation_current_at_a(p.is_a, p.n, tnom_k, t_k, law);
  return p.n * thermal_voltage_v(t_k) * std::log1p(i_a / is) + i_a * series_resistance_at_ohm(p.rs_ohm, tnom_k, t_k, law);
}

// The temperature rise that moves the part's voltage at i_a by dv (< 0 for
// a warming silicon junction): bisection on the law's secant.
double rise_for_k(const DiodeParams& p, double i_a, double ta, double dv, const TemperatureLaw& law) {
  const double v0 = part_v(p, i_a, ta, ta, law);
  double lo = 0, hi = 1000;
  const double target = v0 + dv;
  const double v_hi = part_v(p, i_a, ta, ta + hi, law);
  if (!((v_hi - target) * (v0 - target) <= 0)) return kUnset;  // not reachable within 1000 K
  for (int k = 0; k < 80; ++k) {
    const double mid = 0.5 * (lo + hi);
    const double v = part_v(p, i_a, ta, ta + mid, law);
    if ((v - target) * (v0 - target) > 0) lo = mid;
    else hi = mid;
  }
  return 0.5 * (lo + hi);
}

double sigma_difference_v(const DiodeParams& p, const IvPoint& q, const HeatingOptions& o) {
  return std::sqrt(2.0) * residual_sigma_v(p, q, o.accuracy, o.ambient_k);
}

}  // namespace

double first_order_tau_s(double t0, double t1, double t2, double ratio) {
  if (!(t0 >= 0 && t1 > t0 && t2 > t1)) return kUnset;
  const auto r = [&](double tau) {
    // (e^(−t0/τ) − e^(−t1/τ)) / (e^(−t0/τ) − e^(−t2/τ)), scaled by e^(t0/τ) against underflow
    const double a1 = std::exp(-(t1 - t0) / tau), a2 = std::exp(-(t2 - t0) / tau);
    return (1.0 - a1) / (1.0 - a2);
  };
  const double r_long = (t1 - t0) / (t2 - t0);
  if (!(ratio > r_long && ratio < 1.0)) return kUnset;
  // r falls from 1 (τ → 0) to r_long (τ → ∞): bisection on log τ.
  double lo = std::log((t1 - t0) * 1e-3), hi = std::log((t2 - t0) * 1e4);
  if (!(r(std::exp(hi)) < ratio && r(std::exp(lo)) > ratio)) return kUnset;
  for (int k = 0; k < 100; ++k) {
    const double mid = 0.5 * (lo + hi);
    if (r(std::exp(mid)) > ratio) lo = mid;
    else hi = mid;
  }
  return std::exp(0.5 * (lo + hi));
}

DwellThermal dwell_thermal(std::span<const DwellStep> steps, const DiodeParams& p, const HeatingOptions& o) {
  DwellThermal out;
  const double ta = o.ambient_k;
  double w_sum = 0, rth_sum = 0, tau_sum = 0;
  std::vector<std::pair<double, double>> rth_tau;
  std::vector<double> weights;
  for (const auto& s : steps) {
    DwellStepResult r;
    r.i_a = s.start.i_a;
    const TimedReading* all[3] = {&s.start, &s.short_dwell, &s.long_dwell};
    bool finite = true;
    for (const auto* t : all) finite = finite && std::isfinite(t->v) && std::isfinite(t->i_a) && std::isfinite(t->dwell_s) && t->i_a > 0;
    if (!finite) {
      r.why = "a reading is missing";
      out.steps.push_back(r);
      continue;
    }
    // Each reading moved to the current of the pulse's first one.
    const auto at_start_i = [&](const TimedReading& t) { return t.v - slope_ohm(p, 0.5 * (t.i_a + s.start.i_a), ta) * (t.i_a - s.start.i_a); };
    const double d1 = at_start_i(s.short_dwell) - s.start.v, d2 = at_start_i(s.long_dwell) - s.start.v;
    const double sigma = sigma_difference_v(p, {s.start.v, s.start.i_a}, o);
    if (!(std::abs(d2) > o.min_rise_sigmas * sigma)) {
      char why[160];
      std::snprintf(why, sizeof why, "the long dwell moves Vf by %.3g mV, under %.0f sigma (%.3g mV) of a difference", d2 * 1e3,
                    o.min_rise_sigmas, o.min_rise_sigmas * sigma * 1e3);
      r.why = why;
      out.steps.push_back(r);
      continue;
    }
    const double tau_obs = first_order_tau_s(s.start.dwell_s, s.short_dwell.dwell_s, s.long_dwell.dwell_s, d1 / d2);
    if (!std::isfinite(tau_obs)) {
      r.why = "the two dwells do not fit a first-order rise (d1/d2 outside its range): the dwells too short or too long for this junction";
      out.steps.push_back(r);
      continue;
    }
    r.delta_vf_inf_v = d2 / (std::exp(-s.start.dwell_s / tau_obs) - std::exp(-s.long_dwell.dwell_s / tau_obs));
    r.delta_t_inf_k = rise_for_k(p, s.start.i_a, ta, r.delta_vf_inf_v, o.law);
    r.power_w = s.start.i_a * (s.start.v + r.delta_vf_inf_v);
    r.rth_k_per_w = r.delta_t_inf_k / r.power_w;
    const double dvf_dt = r.delta_vf_inf_v / r.delta_t_inf_k;
    r.tau_s = tau_obs * (1.0 + r.rth_k_per_w * s.start.i_a * std::abs(dvf_dt));
    if (!(std::isfinite(r.rth_k_per_w) && r.rth_k_per_w > 0)) {
      r.why = "the voltage moved the wrong way for a warming junction";
      out.steps.push_back(r);
      continue;
    }
    r.used = true;
    const double w = d2 * d2;
    w_sum += w;
    rth_sum += w * r.rth_k_per_w;
    tau_sum += w * r.tau_s;
    rth_tau.emplace_back(r.rth_k_per_w, r.tau_s);
    weights.push_back(w);
    out.steps.push_back(r);
  }
  out.used = rth_tau.size();
  if (out.used == 0) {
    out.status = "not_determined";
    out.note = steps.empty() ? "no pulsed step with its two dwell readings"
                             : "no step gave a usable rise: " + (out.steps.empty() ? std::string() : out.steps.back().why);
    return out;
  }
  out.status = "measured";
  out.rth_k_per_w.value = rth_sum / w_sum;
  out.tau_s.value = tau_sum / w_sum;
  if (out.used >= 2) {
    // Standard error of a weighted mean from the scatter (effective number of steps).
    double w2 = 0, vr = 0, vt = 0;
    for (std::size_t k = 0; k < rth_tau.size(); ++k) {
      const double w = weights[k] / w_sum;
      w2 += w * w;
      vr += w * std::pow(rth_tau[k].first - out.rth_k_per_w.value, 2);
      vt += w * std::pow(rth_tau[k].second - out.tau_s.value, 2);
    }
    // s² = Σw(x − x̄)²·n_eff/(n_eff − 1), SE² = s²·Σw² (w normalised, n_eff = 1/Σw²)
    const double n_eff = 1.0 / w2;
    if (n_eff > 1.0 + 1e-9) {
      out.rth_k_per_w.std_error = std::sqrt(vr * n_eff / (n_eff - 1.0) * w2);
      out.tau_s.std_error = std::sqrt(vt * n_eff / (n_eff - 1.0) * w2);
    }
  }
  char line[200];
  std::snprintf(line, sizeof line, "Rth %.4g K/W and thermal time constant %.3g ms from the two dwells of %zu pulsed step%s",
                out.rth_k_per_w.value, out.tau_s.value * 1e3, out.used, out.used == 1 ? "" : "s");
  out.note = line;
  return out;
}

Hysteresis sweep_hysteresis(std::span<const SweepPair> pairs, const DiodeParams& p, const HeatingOptions& o) {
  Hysteresis h;
  double sum = 0;
  for (const auto& q : pairs) {
    if (!(std::isfinite(q.up.v) && std::isfinite(q.down.v) && q.up.i_a > 0 && q.down.i_a > 0)) continue;
    const double down_at_up_i = q.down.v + slope_ohm(p, 0.5 * (q.up.i_a + q.down.i_a), o.ambient_k) * (q.up.i_a - q.down.i_a);
    const double d = q.up.v - down_at_up_i;
    const double sigma = sigma_difference_v(p, q.up, o);
    const double z = std::abs(d) / sigma;
    ++h.pairs;
    sum += d;
    if (!(std::abs(d) <= h.max_abs_v)) {
      h.max_abs_v = std::abs(d);
      h.at_i_a = q.up.i_a;
      h.sigma_v = sigma;
    }
    if (!(z <= h.max_z)) h.max_z = z;
  }
  if (h.pairs == 0) {
    h.note = "no pair of up and down readings to compare";
    return h;
  }
  h.mean_v = sum / static_cast<double>(h.pairs);
  h.flagged = h.max_z > o.flag_z;
  char line[420];
  std::snprintf(line, sizeof line,
                "sweep up vs down: largest |Vup - Vdown| %.3g mV at %.3g A (%.1f sigma of the difference, %.3g mV), mean %+.3g mV "
                "over %zu pairs: %s",
                h.max_abs_v * 1e3, h.at_i_a, h.max_z, h.sigma_v * 1e3, h.mean_v * 1e3, h.pairs,
                h.flagged ? "above the noise: the junction lags its power (self-heating); Rs from these readings is biased low"
                          : "within the noise");
  h.note = line;
  return h;
}

}  // namespace junco::fitting
