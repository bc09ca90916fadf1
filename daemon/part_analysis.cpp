#include "daemon/part_analysis.hpp"

#include "fitting/temperature_fit.hpp"
#include "formats/fit_json.hpp"
#include "formats/report_json.hpp"

#include "daemon/part_export.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>

namespace junco::daemon {

using fitting::number_or_null;

std::vector<fitting::IvPoint> dc_fit_points(const std::vector<PointRow>& points) {
  std::vector<fitting::IvPoint> out;
  for (const auto& p : points)
    if (p.kind == "dc" && p.series == "up" && !(p.flags & kLimitFlags) && std::isfinite(p.v) && std::isfinite(p.i_a))
      out.push_back({p.v, p.i_a});
  return out;
}

std::vector<std::optional<FitUse>> fit_use_of_points(const std::vector<PointRow>& points, const fitting::FitResult& fit) {
  std::vector<std::optional<FitUse>> out(points.size());
  std::vector<std::size_t> input;  // index into points of each fit input, in dc_fit_points' order
  for (std::size_t k = 0; k < points.size(); ++k) {
    const PointRow& p = points[k];
    if (p.kind != "dc" || p.series != "up" || !std::isfinite(p.v) || !std::isfinite(p.i_a)) continue;
    if (p.flags & kLimitFlags) out[k] = FitUse{false, "taken in a current or power limit"};
    else input.push_back(k);
  }
  if (fit.points_used + fit.excluded.size() != input.size()) return std::vector<std::optional<FitUse>>(points.size());
  for (std::size_t k : input) out[k] = FitUse{true, ""};
  for (const auto& e : fit.excluded) {
    if (e.index >= input.size()) return std::vector<std::optional<FitUse>>(points.size());
    out[input[e.index]] = FitUse{false, e.reason};
  }
  return out;
}

std::vector<fitting::IvPoint> held_dc_points(const std::vector<PointRow>& points) {
  std::vector<fitting::IvPoint> out;
  for (const auto& p : points)
    if (p.kind == "dc" && p.series == "up" && !std::isfinite(p.dwell_s) && !(p.flags & kLimitFlags) && std::isfinite(p.v) &&
        std::isfinite(p.i_a))
      out.push_back({p.v, p.i_a});
  return out;
}

HeatingReadings heating_readings(const std::vector<PointRow>& points) {
  HeatingReadings h;
  const auto usable = [](const PointRow& p) { return !(p.flags & kLimitFlags) && std::isfinite(p.v) && std::isfinite(p.i_a); };
  std::vector<double> pulse_dwells;
  std::vector<const PointRow*> up, down;
  for (std::size_t k = 0; k < points.size(); ++k) {
    const PointRow& p = points[k];
    if (p.kind != "dc" || !usable(p)) continue;
    if (p.series == "down") down.push_back(&p);
    if (p.series != "up") continue;
    up.push_back(&p);
    if (!std::isfinite(p.dwell_s)) continue;
    ++h.pulsed;
    pulse_dwells.push_back(p.dwell_s);
    // The pulse's dwell readings follow it (same set value, consecutive seq).
    if (k + 2 < points.size()) {
      const PointRow& a = points[k + 1];
      const PointRow& b = points[k + 2];
      if (a.kind == "dc" && b.kind == "dc" && a.series == "dwell" && b.series == "dwell" && a.set_value == p.set_value &&
          b.set_value == p.set_value && usable(a) && usable(b))
        h.dwells.push_back({{p.dwell_s, p.v, p.i_a}, {a.dwell_s, a.v, a.i_a}, {b.dwell_s, b.v, b.i_a}});
    }
  }
  if (!pulse_dwells.empty()) {
    std::sort(pulse_dwells.begin(), pulse_dwells.end());
    h.pulse_dwell_median_s = pulse_dwells[pulse_dwells.size() / 2];
  }
  for (const auto* d : down)
    for (const auto* u : up)
      if (u->set_value == d->set_value) {
        h.pairs.push_back({u->set_value, {u->v, u->i_a}, {d->v, d->i_a}});
        break;
      }
  return h;
}

std::vector<fitting::AcPoint> ac_points(const std::vector<PointRow>& points) {
  std::vector<fitting::AcPoint> ac;
  double bias_i_a = kNaN;  // the DC reading of the step the AC readings belong to
  for (const auto& p : points) {
    if (p.kind == "dc") bias_i_a = p.series == "up" && !std::isfinite(p.dwell_s) ? p.i_a : kNaN;  // AC only at a held bias
    else if (p.kind != "ac") bias_i_a = kNaN;
    else if (std::isfinite(bias_i_a) && std::isfinite(p.freq_hz) && std::isfinite(p.ac_in_v) && std::isfinite(p.ac_out_v))
      ac.push_back({bias_i_a, p.freq_hz, p.ac_in_v, p.ac_out_v, p.ac_unit == "vpp" ? 0.5 : std::sqrt(2.0)});
  }
  return ac;
}

std::vector<fitting::OffStatePoint> off_state_points(const std::vector<PointRow>& points) {
  std::vector<fitting::OffStatePoint> out;
  for (const auto& p : points)
    if (p.kind == "reverse_ac" && std::isfinite(p.freq_hz) && std::isfinite(p.ac_in_v) && std::isfinite(p.ac_out_v))
      out.push_back({std::fabs(p.set_value), p.freq_hz, p.ac_in_v, p.ac_out_v});
  return out;
}

std::optional<fitting::JunctionCapFit> junction_cap_of_run(const std::vector<PointRow>& points, const RunFixture& run_fixture,
                                                           double rs_ohm) {
  const auto off = off_state_points(points);
  if (off.empty()) return std::nullopt;
  fitting::JunctionCapOptions o;
  if (std::isfinite(run_fixture.stray_c_f)) o.stray_c_f = run_fixture.stray_c_f;
  return fitting::fit_junction_cap(off, ac_fixture(run_fixture), std::isfinite(rs_ohm) && rs_ohm > 0 ? rs_ohm : 0.0, o);
}

fitting::Fixture ac_fixture(const RunFixture& f) {
  const auto ohm = [](double v, double fallback) { return std::isfinite(v) ? v : fallback; };  // older rows: defaults
  fitting::Fixture fx;
  fx.source_ohm = ohm(f.source_ohm, 50.0);
  fx.load_ohm = ohm(f.load_ohm, 50.0);
  const double ret = ohm(f.dc_return_ohm, 0.0);
  fx.dc_return_ohm = ret > 0 ? ret : fitting::no_shunt_ohm;
  fx.bias_feed_ohm = fitting::no_shunt_ohm;
  return fx;
}

std::optional<fitting::PinPart> pin_part_of_fit(const FitRecord& fit) {
  if (!fit.pin || !fit.pin->law_ok()) return std::nullopt;
  fitting::PinPart p;
  p.law = fit.pin->law->law();
  if (const auto& off = fit.pin->off_state; off && off->ok) {
    p.ct_f = off->ct_f.value;
    p.rp_ohm = off->rp_ohm.value;
  }
  return p;
}

fitting::DesignPart design_part(const PartRow& part, const FitRecord& fit) {
  const fitting::FitResult& r = fit.fit;
  fitting::DesignPart p;
  p.label = part.label + " (lot " + part.lot + ", fit " + std::to_string(fit.id) + ")";
  p.dc = r.params();
  if (std::isfinite(r.temp_k)) p.temp_k = r.temp_k;
  if (const double cj0 = fit.cj0_f.value; cj0 > 0) {
    p.cap.cj0_f = cj0;
    if (const double vj = fit.vj_v.value; vj > 0) p.cap.vj_v = vj;
    if (const double m = fit.m.value; m > 0) p.cap.m = m;
  }
  if (const double tt = fit.tt_s.value; tt >= 0) p.tt_s = tt;  // stored charge from multi-frequency AC readings
  p.pin = pin_part_of_fit(fit);
  p.cov = design_covariance(fit);
  return p;
}

// The covariance the design calculators propagate: the forward fit's
// (is_a, n, rs_ohm[, rsh_ohm], stored with the fit), the capacitance law's
// (CJO, VJ, M: standard errors and the VJ–M correlation, the only one stored;
// CJO taken as uncorrelated with them) and TT's standard error. The three come
// from separate fits to separate readings (DC sweep, off-state C, multi-
// frequency AC), so the blocks are taken as independent.
fitting::ParameterCovariance design_covariance(const FitRecord& fit) {
  fitting::ParameterCovariance c;
  const auto& r = fit.fit;
  const std::size_t dim = r.parameter_names.size();
  bool dc_ok = dim > 0 && r.covariance.size() == dim;
  for (std::size_t a = 0; dc_ok && a < dim; ++a) {
    dc_ok = r.covariance[a].size() == dim;
    for (std::size_t b = 0; dc_ok && b < dim; ++b) dc_ok = std::isfinite(r.covariance[a][b]);
  }
  if (!dc_ok) {
    c.source = "fit " + std::to_string(fit.id) + " has no covariance";
    return c;
  }
  std::vector<std::pair<std::string, double>> extra;  // name, variance
  const auto add = [&](const char* name, const fitting::Estimate& e) {
    if (e.value > 0 && std::isfinite(e.std_error) && e.std_error > 0) extra.emplace_back(name, e.std_error * e.std_error);
  };
  add("cj0_f", fit.cj0_f);
  if (fit.cj0_f.value > 0) {
    add("vj_v", fit.vj_v);
    add("m", fit.m);
  }
  add("tt_s", fit.tt_s);
  c.names = r.parameter_names;
  for (const auto& [name, var] : extra) c.names.push_back(name);
  const std::size_t n = c.names.size();
  c.matrix.assign(n, std::vector<double>(n, 0.0));
  for (std::size_t a = 0; a < dim; ++a)
    for (std::size_t b = 0; b < dim; ++b) c.matrix[a][b] = r.covariance[a][b];
  for (std::size_t k = 0; k < extra.size(); ++k) c.matrix[dim + k][dim + k] = extra[k].second;
  std::size_t ivj = n, im = n;
  for (std::size_t k = 0; k < n; ++k) {
    ivj = c.names[k] == "vj_v" ? k : ivj;
    im = c.names[k] == "m" ? k : im;
  }
  if (const double rho = fit.junction_cap ? fit.junction_cap->vj_m_correlation : kNaN; ivj < n && im < n && std::isfinite(rho)) {
    c.matrix[ivj][im] = c.matrix[im][ivj] = rho * std::sqrt(c.matrix[ivj][ivj] * c.matrix[im][im]);
  }
  std::string names;
  for (const auto& name : c.names) names += (names.empty() ? "" : ", ") + name;
  c.source = "fit " + std::to_string(fit.id) + ": " + names;
  return c;
}

fitting::LotPart lot_part(const PartRow& part, const FitRecord& fit) {
  const fitting::FitResult& r = fit.fit;
  fitting::LotPart lp{part.label, part.lot, r.params(), std::isfinite(r.temp_k) ? r.temp_k : 300.15};
  lp.cj0_f = fit.cj0_f.value;
  lp.vj_v = fit.vj_v.value;
  lp.m = fit.m.value;
  lp.pin = pin_part_of_fit(fit);
  return lp;
}

// The joint fit above is isothermal. When it disagrees, the stored fit may
// still explain both kinds of reading with the junction's heating
// (detail.electrothermal): its isothermal Rs then agrees with the Rs the AC
// readings give alone, within 3 combined standard errors (our bound, no
// source), where the DC-only Rs does not. That comparison needs the two AC
// models alike: when the stored fit has a Cj(V) law or a TT, juncod's
// electro-thermal AC model held them, while the AC-alone line reads |Z| as
// rd (constant Cj only when part.transfer is given cj_f) and its Rs is
// biased high by the capacitance (junco demo's WR-01: AC alone 0.699 +-
// 0.029 ohm, electro-thermal 0.605 +- 0.008, junco-sim's truth 0.608). Then
// the stored fit's own test stands: juncod keeps it ("fitted") only when its
// reduced chi2 is within 10x the DC-only fit's (daemon/executor.cpp).
std::optional<PartType> part_type_from_string(const std::string& text) {
  if (text == "junction") return PartType::junction;
  if (text == "pin") return PartType::pin;
  return std::nullopt;
}

std::string transfer_verdict(const Json& joint, const FitRecord& fit, PartType type) {
  if (type == PartType::pin)
    return "PIN part: the junction model does not describe AC readings above the lifetime's knee (part.fit pin holds the PIN law)";
  if (joint.value("agree", false)) return "agree";
  const Json ac = joint.contains("ac_only") ? joint["ac_only"].value("rs_ohm", Json()) : Json();
  const auto number = [](const Json& j, const char* k) { return j.is_object() && j.value(k, Json()).is_number() ? j[k].get<double>() : kNaN; };
  const bool charge_held = std::isfinite(fit.cj0_f.value) || std::isfinite(fit.tt_s.value);
  if (fit.electrothermal && fit.electrothermal->status == "fitted" && charge_held) return "consistent once heating is modelled";
  if (fit.electrothermal && fit.electrothermal->status == "fitted" && ac.is_object()) {
    const double d = fit.electrothermal->rs_ohm.value - number(ac, "value");
    const double se = std::hypot(fit.electrothermal->rs_ohm.std_error, number(ac, "std_error"));
    if (std::fabs(d) <= 3 * se) return "consistent once heating is modelled";
  }
  return "DISAGREE";
}

Json transfer_report(const PartRow& part, const RunRecord& run, const FitRecord& fit, const std::vector<PointRow>& points,
                     const TransferOptions& options) {
  const fitting::FitResult& r = fit.fit;
  const double temp_k = std::isfinite(r.temp_k) ? r.temp_k : 300.15;
  const fitting::Fixture fx = ac_fixture(run.fixture);
  const fitting::AcPart ac_part{r.params(), options.cj_f};
  const std::vector<fitting::AcPoint> all = ac_points(points);
  // A PIN part's readings are screened by the charge criterion with its fitted τ (fitting/pin_diode.hpp).
  const auto pin = options.part_type == PartType::pin ? pin_part_of_fit(fit) : std::nullopt;
  const auto left_out = pin ? fitting::screen_pin_ac_readings(all, fx, pin->law.tau_s, options.max_signal_ratio, options.ac_floor_v)
                            : fitting::screen_ac_readings(all, fx, {options.max_signal_ratio, options.ac_floor_v});
  std::vector<fitting::AcPoint> used;
  Json rows = Json::array();
  double sum_sq = 0.0, worst = 0.0;
  long large_signal = 0, below_floor = 0;
  const auto residuals = fitting::ac_residuals(fx, ac_part, all, temp_k);
  for (std::size_t k = 0; k < all.size(); ++k) {
    const auto& res = residuals[k];
    Json row{{"bias_i_a", all[k].bias_i_a}, {"freq_hz", all[k].freq_hz}, {"measured_db", res.measured_db}, {"model_db", res.model_db},
             {"residual_db", res.residual_db}, {"used", left_out[k].empty()}};
    if (!left_out[k].empty()) {
      row["excluded"] = left_out[k];
      ++(left_out[k] == "large signal" ? large_signal : below_floor);
    } else {
      used.push_back(all[k]);
      sum_sq += res.residual_db * res.residual_db;
      worst = std::max(worst, std::abs(res.residual_db));
    }
    rows.push_back(std::move(row));
  }
  Json out{{"part_id", part.id},
           {"run_id", run.id},
           {"fit_id", fit.id},
           {"temp_k", temp_k},
           {"fixture",
            {{"load_ohm", fx.load_ohm}, {"dc_return_ohm", number_or_null(fx.dc_return_ohm)}, {"source_ohm", fx.source_ohm}}},
           {"ac_sigma_db", options.ac_sigma_db},
           {"cj_f", options.cj_f},
           {"max_signal_ratio", options.max_signal_ratio},
           {"ac_floor_v", options.ac_floor_v},
           {"points", rows},
           {"points_used", used.size()},
           {"excluded", {{"large_signal", large_signal}, {"below_floor", below_floor}}},
           {"rms_residual_db", used.empty() ? Json(nullptr) : Json(std::sqrt(sum_sq / static_cast<double>(used.size())))},
           {"max_abs_residual_db", used.empty() ? Json(nullptr) : Json(worst)},
           {"joint", nullptr}};
  if (used.empty()) return out;
  fitting::JointFitOptions jo;
  jo.temp_k = temp_k;
  jo.accuracy = options.accuracy;
  jo.ac_sigma_db = options.ac_sigma_db;
  jo.cj_f = options.cj_f;
  const auto dc = dc_fit_points(points);
  const auto rep = fitting::compare_dc_and_joint(dc, used, fx, jo);
  out["joint"] = fitting::joint_report_json(rep);
  out["joint"]["verdict"] = transfer_verdict(out["joint"], fit, options.part_type);
  if (options.part_type == PartType::pin) out["joint"].erase("hint");  // not self-heating (transfer_verdict)
  return out;
}

Json lot_stats_report(const std::string& lot, const std::vector<fitting::LotPart>& parts, const Json& left_out,
                      const fitting::LotStatsOptions& options) {
  const auto all = fitting::lot_statistics(parts, options);
  const fitting::LotStats& st = all.front();  // one lot in, one lot out
  Json quantities = Json::array();
  for (const auto& q : st.quantities)
    quantities.push_back({{"name", q.name}, {"count", q.count}, {"mean", number_or_null(q.mean)}, {"std_dev", number_or_null(q.std_dev)},
                          {"min", number_or_null(q.min)}, {"max", number_or_null(q.max)}, {"median", number_or_null(q.median)},
                          {"mad", number_or_null(q.mad)}, {"outliers", q.outliers}});
  Json matched = Json::array();
  for (const auto& m : st.matched) matched.push_back({{"labels", m.labels}, {"spread_v", m.spread_v}});
  return {{"lot", lot},
          {"parts", st.labels},
          {"left_out", left_out},
          {"currents_a", options.currents_a},
          {"match_current_a", options.match_current_a},
          {"match_tolerance_v", options.match_tolerance_v},
          {"set_size", options.set_size},
          {"quantities", quantities},
          {"matched", matched},
          {"nominal",
           {{"is_a", st.nominal.is_a}, {"n", st.nominal.n}, {"rs_ohm", st.nominal.rs_ohm}, {"cj0_f", number_or_null(st.nominal_cj0_f)},
            {"vj_v", number_or_null(st.nominal_vj_v)}, {"m", number_or_null(st.nominal_m)}}}};
}

TemperatureLawReport temperature_law_of_runs(const std::vector<RunFitAtTemperature>& run_fits, const fitting::TemperatureLaw& held) {
  std::vector<fitting::TemperaturePoint> points;
  TemperatureLawReport out;
  for (const auto& r : run_fits) {
    if (r.status != "converged" || !std::isfinite(r.temp_k)) continue;
    fitting::TemperaturePoint p;
    p.temp_k = r.temp_k;
    // 0.01 K: the chamber readback's resolution (common practice, no source).
    p.temp_se_k = 0.01;
    if (std::isfinite(r.ambient_k) && std::isfinite(r.ambient_end_k))
      p.temp_se_k = std::max(0.01, std::fabs(r.ambient_end_k - r.ambient_k) / 2.0);
    p.is_a = r.is_a;
    p.n = r.n;
    p.rs_ohm = r.rs_ohm;
    p.corr_is_n = r.corr_is_n;
    points.push_back(p);
    out.runs.push_back(r.run_id);
  }
  fitting::TemperatureFitOptions o;
  o.held = held;
  out.fit = fitting::fit_temperature_law(points, o);
  return out;
}

}  // namespace junco::daemon
