#include "daemon/part_export.hpp"

#include "daemon/api_json.hpp"
#include "daemon/part_analysis.hpp"

#include "formats/readings_csv.hpp"
#include "formats/model_document.hpp"

#include <cctype>
#include <cmath>
#include <cstdio>
#include <sstream>
#include <string_view>

namespace junco::daemon {

namespace {

std::string csv_field(const Json& v) {
  if (v.is_null()) return "";
  if (v.is_string()) return v.get<std::string>();
  if (v.is_number_float()) {
    char buf[32];
    std::snprintf(buf, sizeof buf, "%.9g", v.get<double>());
    return buf;
  }
  return v.dump();
}

}  // namespace

std::string spice_name(const PartRow& part) { return fitting::spice_model_name("D_" + part.lot + "_" + part.label); }

fitting::PartModel part_model(const PartRow& part, const FitRecord& fit) {
  const std::string run_id = fit.run_id ? "run-" + std::to_string(*fit.run_id) : "";
  fitting::PartModel m = fitting::part_model_from_fit(fit.fit, part.label, part.lot, run_id);
  if (!std::isfinite(m.temp_k)) m.temp_k = fitting::PartModel{}.temp_k;  // a stored fit without a temperature
  // The capacitance law, when the run's off-state readings gave one.
  const fitting::Estimate &cj0 = fit.cj0_f, &vj = fit.vj_v, &grading = fit.m;
  if (cj0.value > 0) {
    m.cj0_f = cj0.value;
    m.vj_v = vj.value;
    m.m = grading.value;
    const auto se = [](double x) -> std::string {
      if (!std::isfinite(x)) return "held";  // VJ, M with fewer than 4 reverse biases
      char t[32];
      std::snprintf(t, sizeof t, "%.3g", x);
      return t;
    };
    char note[200];
    std::snprintf(note, sizeof note, "CJO, VJ, M from %ld off-state readings; standard errors %s F, %s V, %s", fit.cap_points_used(),
                  se(cj0.std_error).c_str(), se(vj.std_error).c_str(), se(grading.std_error).c_str());
    m.notes.push_back(note);
  }
  // The temperature law measured at several chamber temperatures
  // (part.fit's "temperature_law"): EG and XTI as fitted (or XTI as held),
  // TRS1 when resolved, referred to this card's TNOM: RS is linear in T, so
  // a coefficient a at T_L becomes a/(1 + a·(TNOM − T_L)).
  if (fit.temperature_law && fit.temperature_law->report.fit.ok) {
    const fitting::TemperatureFit& law = fit.temperature_law->report.fit;
    m.law.eg_ev = law.eg_ev.value;
    m.law.xti = law.xti.value;
    if (const double a = law.trs1_per_k.value; law.trs_resolved && std::isfinite(a))
      m.law.trs1_per_k = a / (1.0 + a * (m.temp_k - law.tnom_k));
    char note[240];
    std::snprintf(note, sizeof note, "EG %.4g +- %.2g eV, XTI %.4g%s from %zu temperatures (job %ld)%s", m.law.eg_ev, law.eg_ev.std_error,
                  m.law.xti, law.xti_held ? " (held)" : "", law.temps_k.size(), static_cast<long>(fit.temperature_law->job_id),
                  m.law.trs1_per_k != 0.0 ? ", TRS1 fitted" : "");
    m.notes.push_back(note);
  }
  // Stored charge from multi-frequency AC readings, as part.design uses it.
  if (const fitting::Estimate& tt = fit.tt_s; tt.value >= 0) {
    m.tt_s = tt.value;
    m.tt_se_s = tt.std_error;
  }
  // The covariance part.design propagates (forward fit, CJO/VJ/M, TT), so that
  // junco design --model on this document gives the same std_error.
  if (const auto cov = design_covariance(fit); !cov.empty()) {
    m.covariance_names = cov.names;
    m.covariance = cov.matrix;
    m.covariance_source = cov.source;
  } else {
    m.covariance_names.clear();
    m.covariance.clear();
    m.covariance_source.clear();
  }
  // A PIN part's law (detail.pin): in the model document; the level-1 card cannot hold it.
  if ((m.pin = pin_part_of_fit(fit))) {
    char note[240];
    std::snprintf(note, sizeof note, "PIN part: R(I) = %.4g + %.4g*I^-%.4g ohm above 1/(2 pi tau), tau %.4g s (not in this card)",
                  m.pin->law.r0_ohm, m.pin->law.k_ohm_a_x, m.pin->law.x, m.pin->law.tau_s);
    m.notes.push_back(note);
  }
  return m;
}

std::string export_model_json(const PartRow& part, const FitRecord& fit) { return fitting::model_document_json(part_model(part, fit)); }

std::string export_spice(const PartRow& part, const FitRecord& fit) { return fitting::spice_model_card(part_model(part, fit), spice_name(part)); }

// The columns are the API's reading fields (part.readings), in the same form.
std::string export_csv(const std::vector<PointRow>& rows) {
  static const char* cols[] = {"run_id", "seq", "kind", "set_value", "set_unit", "supply_v", "v", "i_a", "ac_in_v",
                               "ac_out_v", "ac_unit", "freq_hz", "temp_k", "t_s", "flags"};
  std::ostringstream os;
  for (std::size_t k = 0; k < std::size(cols); ++k) os << (k ? "," : "") << cols[k];
  os << "\n";
  for (const auto& row : rows) {
    const Json p = to_json(row);
    for (std::size_t k = 0; k < std::size(cols); ++k) {
      const Json v = p.value(cols[k], Json());
      os << (k ? "," : "");
      // t_s is Unix time (1.7e9 s): nine significant digits would round it to
      // whole seconds and give many readings one time; keep milliseconds.
      if (std::string_view(cols[k]) == "t_s" && v.is_number()) {
        char buf[32];
        std::snprintf(buf, sizeof buf, "%.3f", v.get<double>());
        os << buf;
      } else {
        os << csv_field(v);
      }
    }
    os << "\n";
  }
  return os.str();
}

std::string export_iv_csv(const std::vector<PointRow>& points) {
  std::vector<fitting::IvPoint> iv;
  for (const auto& p : points)
    if (p.kind == "dc" && p.series == "up" && std::isfinite(p.v) && std::isfinite(p.i_a)) iv.push_back({p.v, p.i_a});
  return fitting::iv_readings_csv(iv);
}

std::string export_ac_csv(const std::vector<PointRow>& points) { return fitting::ac_readings_csv(ac_points(points)); }

std::string export_off_csv(const std::vector<PointRow>& points) { return fitting::off_state_readings_csv(off_state_points(points)); }

}  // namespace junco::daemon
