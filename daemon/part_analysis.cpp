#include "daemon/part_analysis.hpp"

#include "daemon/part_export.hpp"

#include <cmath>

namespace junco::daemon {

namespace {

Json number_or_null(double x) { return std::isfinite(x) ? Json(x) : Json(nullptr); }

Json estimate_json(const fitting::Estimate& e) { return {{"value", number_or_null(e.value)}, {"std_error", number_or_null(e.std_error)}}; }

Json simple_fit_json(const fitting::SimpleFit& f) {
  return {{"ok", f.ok},          {"message", f.message},       {"is_a", estimate_json(f.is_a)},
          {"n", estimate_json(f.n)}, {"rs_ohm", estimate_json(f.rs_ohm)}, {"reduced_chi2", number_or_null(f.reduced_chi2)},
          {"dc_points", f.dc_points}, {"ac_points", f.ac_points}};
}

}  // namespace

std::vector<fitting::IvPoint> dc_fit_points(const std::vector<PointRow>& points) {
  std::vector<fitting::IvPoint> out;
  for (const auto& p : points)
    if (p.kind == "dc" && !(p.flags & (flag_current_limit | flag_power_limit)) && std::isfinite(p.v) && std::isfinite(p.i_a))
      out.push_back({p.v, p.i_a});
  return out;
}

std::vector<fitting::AcPoint> ac_points(const std::vector<PointRow>& points) {
  std::vector<fitting::AcPoint> ac;
  double bias_i_a = kNaN;  // the DC reading of the step the AC readings belong to
  for (const auto& p : points) {
    if (p.kind == "dc") bias_i_a = p.i_a;
    else if (p.kind != "ac") bias_i_a = kNaN;
    else if (std::isfinite(bias_i_a) && std::isfinite(p.freq_hz) && std::isfinite(p.ac_in_v) && std::isfinite(p.ac_out_v))
      ac.push_back({bias_i_a, p.freq_hz, p.ac_in_v, p.ac_out_v});
  }
  return ac;
}

fitting::Fixture ac_fixture(const Json& f) {
  const auto ohm = [&](const char* key, double fallback) {
    return f.is_object() && f.contains(key) && f[key].is_number() ? f[key].get<double>() : fallback;
  };
  fitting::Fixture fx;
  fx.rg_ohm = ohm("source_ohm", 50.0);
  fx.rl_ohm = ohm("load_ohm", 50.0);
  const double ret = ohm("dc_return_ohm", 0.0);
  fx.dc_return_ohm = ret > 0 ? ret : fitting::no_shunt_ohm;
  fx.bias_feed_ohm = fitting::no_shunt_ohm;
  return fx;
}

fitting::DesignPart design_part(const PartRow& part, const Json& fit) {
  const fitting::FitResult r = fit_result_from_json(fit);
  fitting::DesignPart p;
  p.label = part.label + " (lot " + part.lot + ", fit " + std::to_string(fit.value("fit_id", 0L)) + ")";
  p.dc = r.params();
  if (std::isfinite(r.temp_k)) p.temp_k = r.temp_k;
  return p;
}

Json transfer_report(const PartRow& part, const RunRow& run, const Json& fit, const std::vector<PointRow>& points,
                     const TransferOptions& options) {
  const fitting::FitResult r = fit_result_from_json(fit);
  const double temp_k = std::isfinite(r.temp_k) ? r.temp_k : 300.15;
  const fitting::Fixture fx = ac_fixture(run.fixture);
  const double z_cathode_ohm = std::abs(1.0 / (1.0 / fx.rl_ohm + 1.0 / fx.dc_return_ohm));
  const fitting::AcPart ac_part{r.params(), options.cj_f};
  // The AC readings with the bias of their step and their level unit.
  std::vector<fitting::AcPoint> all;
  std::vector<double> peak_per_unit;  // peak volts per reading unit (√2 for vrms, ½ for vpp)
  double bias_i_a = kNaN;
  for (const auto& p : points) {
    if (p.kind == "dc") bias_i_a = p.i_a;
    else if (p.kind != "ac") bias_i_a = kNaN;
    else if (std::isfinite(bias_i_a) && std::isfinite(p.freq_hz) && std::isfinite(p.ac_in_v) && std::isfinite(p.ac_out_v)) {
      all.push_back({bias_i_a, p.freq_hz, p.ac_in_v, p.ac_out_v});
      peak_per_unit.push_back(p.ac_unit == "vpp" ? 0.5 : std::sqrt(2.0));
    }
  }
  std::vector<fitting::AcPoint> used;
  Json rows = Json::array();
  double sum_sq = 0.0, worst = 0.0;
  long large_signal = 0, below_floor = 0;
  const auto residuals = fitting::ac_residuals(fx, ac_part, all, temp_k);
  for (std::size_t k = 0; k < all.size(); ++k) {
    const auto& pt = all[k];
    const auto& res = residuals[k];
    Json row{{"bias_i_a", pt.bias_i_a}, {"freq_hz", pt.freq_hz}, {"measured_db", res.measured_db}, {"model_db", res.model_db},
             {"residual_db", res.residual_db}, {"used", true}};
    const double signal_peak_a = pt.vout * peak_per_unit[k] / z_cathode_ohm;
    if (!(pt.vout >= options.ac_floor_v && pt.vin >= options.ac_floor_v)) {
      row["used"] = false;
      row["excluded"] = "below the level floor";
      ++below_floor;
    } else if (!(signal_peak_a <= options.max_signal_ratio * pt.bias_i_a)) {
      row["used"] = false;
      row["excluded"] = "large signal";
      ++large_signal;
    } else {
      used.push_back(pt);
      sum_sq += res.residual_db * res.residual_db;
      worst = std::max(worst, std::abs(res.residual_db));
    }
    rows.push_back(std::move(row));
  }
  Json out{{"part_id", part.id},
           {"run_id", run.id},
           {"fit_id", fit.value("fit_id", Json())},
           {"temp_k", temp_k},
           {"fixture",
            {{"rl_ohm", fx.rl_ohm}, {"dc_return_ohm", number_or_null(fx.dc_return_ohm)}, {"rg_ohm", fx.rg_ohm}}},
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
  const auto& ac = used;
  if (ac.empty()) return out;
  fitting::JointFitOptions jo;
  jo.temp_k = temp_k;
  jo.ac_sigma_db = options.ac_sigma_db;
  jo.cj_f = options.cj_f;
  const auto dc = dc_fit_points(points);
  const auto rep = fitting::compare_dc_and_joint(dc, ac, fx, jo);
  out["joint"] = {{"dc_only", simple_fit_json(rep.dc_only)},
                  {"joint", simple_fit_json(rep.joint)},
                  {"agree", rep.agree},
                  {"agreement", rep.agreement}};
  // A junction warmed by its own dissipation at the top of the sweep reads a
  // lower Vf there, which the DC fit takes as a smaller Rs; the AC readings
  // see the dynamic resistance directly (REFERENCES.md §3, self-heating).
  if (!rep.agree && rep.dc_only.ok && rep.joint.ok && rep.joint.rs_ohm.value > rep.dc_only.rs_ohm.value)
    out["joint"]["hint"] =
        "the AC readings see a larger Rs than the DC curve: typical of self-heating at the top of the DC sweep "
        "(shorter settling or pulsed readings there, or trust the joint fit's Rs)";
  return out;
}

}  // namespace junco::daemon
