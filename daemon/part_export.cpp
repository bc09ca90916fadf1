#include "daemon/part_export.hpp"

#include "daemon/part_analysis.hpp"

#include "fitting/design_readings_csv.hpp"
#include "fitting/model_document.hpp"

#include <cctype>
#include <cmath>
#include <cstdio>
#include <sstream>
#include <string_view>

namespace junco::daemon {

namespace {

double num_or_nan(const Json& j) { return j.is_number() ? j.get<double>() : kNaN; }

fitting::Estimate estimate(const Json& j) {
  if (!j.is_object()) return {};
  return {num_or_nan(j.value("value", Json())), num_or_nan(j.value("std_error", Json()))};
}

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

fitting::PartModel part_model(const PartRow& part, const Json& fit) {
  const fitting::FitResult r = fit_result_from_json(fit);
  const std::string run_id =
      fit.contains("run_id") && fit["run_id"].is_number_integer() ? "run-" + std::to_string(fit["run_id"].get<Id>()) : "";
  fitting::PartModel m = fitting::part_model_from_fit(r, part.label, part.lot, run_id);
  if (!std::isfinite(m.temp_k)) m.temp_k = fitting::PartModel{}.temp_k;  // a stored fit without a temperature
  // The capacitance law, when the run's off-state readings gave one.
  const fitting::Estimate cj0 = estimate(fit.value("cj0_f", Json())), vj = estimate(fit.value("vj_v", Json())),
                          grading = estimate(fit.value("m", Json()));
  if (cj0.value > 0) {
    m.cj0_f = cj0.value;
    m.vj_v = vj.value;
    m.m = grading.value;
    const Json cap = fit.value("detail", Json::object()).value("junction_cap", Json::object());
    const auto se = [](double x) -> std::string {
      if (!std::isfinite(x)) return "held";  // VJ, M with fewer than 4 reverse biases
      char t[32];
      std::snprintf(t, sizeof t, "%.3g", x);
      return t;
    };
    char note[200];
    std::snprintf(note, sizeof note, "CJO, VJ, M from %ld off-state readings; standard errors %s F, %s V, %s", cap.value("points_used", 0L),
                  se(cj0.std_error).c_str(), se(vj.std_error).c_str(), se(grading.std_error).c_str());
    m.notes.push_back(note);
  }
  return m;
}

std::string export_model_json(const PartRow& part, const Json& fit) { return fitting::model_document_json(part_model(part, fit)); }

std::string export_spice(const PartRow& part, const Json& fit) { return fitting::spice_model_card(part_model(part, fit), spice_name(part)); }

std::string export_csv(const Json& points) {
  static const char* cols[] = {"run_id", "seq", "kind", "set_value", "set_unit", "supply_v", "v", "i_a", "ac_in_v",
                               "ac_out_v", "ac_unit", "freq_hz", "temp_k", "t_s", "flags"};
  std::ostringstream os;
  for (std::size_t k = 0; k < std::size(cols); ++k) os << (k ? "," : "") << cols[k];
  os << "\n";
  for (const auto& p : points) {
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
    if (p.kind == "dc" && std::isfinite(p.v) && std::isfinite(p.i_a)) iv.push_back({p.v, p.i_a});
  return fitting::iv_readings_csv(iv);
}

std::string export_ac_csv(const std::vector<PointRow>& points) { return fitting::ac_readings_csv(ac_points(points)); }

std::string export_off_csv(const std::vector<PointRow>& points) { return fitting::off_state_readings_csv(off_state_points(points)); }

fitting::FitResult fit_result_from_json(const Json& fit) {
  fitting::FitResult r;
  const std::string status = fit.value("status", "");
  r.status = status == "converged" ? fitting::FitStatus::converged
             : status == "no_convergence" ? fitting::FitStatus::no_convergence
             : status == "failed" ? fitting::FitStatus::failed
                                  : fitting::FitStatus::insufficient;
  r.is_a = estimate(fit.value("is_a", Json()));
  r.n = estimate(fit.value("n", Json()));
  r.rs_ohm = estimate(fit.value("rs_ohm", Json()));
  r.rsh_ohm = estimate(fit.value("rsh_ohm", Json()));
  r.temp_k = num_or_nan(fit.value("temp_k", Json()));
  r.points_used = fit.value("points_used", 0u);
  r.rms_residual = num_or_nan(fit.value("rms_residual", Json()));
  const Json detail = fit.value("detail", Json::object());
  if (detail.contains("parameter_names")) r.parameter_names = detail["parameter_names"].get<std::vector<std::string>>();
  if (detail.contains("correlation"))
    for (const auto& row : detail["correlation"]) {
      std::vector<double> v;
      for (const auto& c : row) v.push_back(num_or_nan(c));
      r.correlation.push_back(v);
    }
  return r;
}

}  // namespace junco::daemon
