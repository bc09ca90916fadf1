#include "fitting/fit_reports.hpp"

namespace junco::fitting {

JunctionCapReport junction_cap_report(const JunctionCapFit& fit) {
  return {fit.ok,       fit.message,        fit.cj0_f, fit.vj_v, fit.m, fit.law_held, static_cast<long>(fit.points_used),
          fit.reduced_chi2, fit.vj_m_correlation, std::nullopt};
}

JunctionCapReport junction_cap_report(const JunctionCapFit& fit, std::span<const OffStatePoint> points) {
  JunctionCapReport r = junction_cap_report(fit);
  r.readings.emplace();
  for (std::size_t k = 0; k < points.size(); ++k)
    r.readings->push_back({points[k].reverse_v, points[k].freq_hz, off_state_fixture_ratio_db(points[k]),
                           k < fit.c_f.size() ? fit.c_f[k] : std::numeric_limits<double>::quiet_NaN(),
                           k < fit.left_out.size() ? fit.left_out[k] : std::string()});
  return r;
}

ElectrothermalReport electrothermal_report(const ElectroThermalRun& run, const ElectroThermalRunOptions& options) {
  ElectrothermalReport r;
  r.status = run.status;
  r.note = run.note;
  r.ac_readings = static_cast<long>(run.ac_total);
  r.ac_left_out = static_cast<long>(run.ac_left_out);
  r.rs_ohm = run.fit.rs_ohm;
  r.is_a = run.fit.is_a;
  r.n = run.fit.n;
  r.rth_k_per_w = run.fit.rth_k_per_w;
  r.top_tj_k = run.fit.top_tj_k;
  r.top_power_w = run.fit.top_power_w;
  r.apparent_rs_ohm = run.fit.apparent_rs_ohm;
  r.reduced_chi2 = run.fit.reduced_chi2;
  r.rs_bias_per_100_k_per_w_ohm = run.rs_bias_per_100_k_per_w_ohm;
  r.eg_ev = options.fit.law.eg_ev;
  r.xti = options.fit.law.xti;
  r.ambient_k = options.fit.ambient_k;
  return r;
}

}  // namespace junco::fitting
