#include "daemon/api_json.hpp"

#include "formats/fit_json.hpp"

#include <cmath>

namespace junco::daemon {

namespace {
Json nullable(double v) { return std::isfinite(v) ? Json(v) : Json(nullptr); }
Json text_or_null(const std::string& s) { return s.empty() ? Json(nullptr) : Json(s); }
}  // namespace

Json to_json(const fitting::Estimate& e) { return fitting::estimate_json(e); }

namespace {
// A number as stored: null (or absent) is NaN; anything else not a number is damage.
double number_of(const Json& j, const char* key) {
  const auto it = j.find(key);
  if (it == j.end() || it->is_null()) return kNaN;
  if (!it->is_number()) throw std::invalid_argument(std::string(key) + ": a number or null, not " + it->type_name());
  return it->get<double>();
}
fitting::Estimate estimate_of(const Json& j, const char* key) {
  const auto it = j.find(key);
  if (it == j.end() || it->is_null()) return {};
  if (!it->is_object()) throw std::invalid_argument(std::string(key) + ": {value, std_error}, not " + it->type_name());
  return {number_of(*it, "value"), number_of(*it, "std_error")};
}
}  // namespace

Json to_json(const JunctionCapReport& r) {
  Json out{{"ok", r.ok},
           {"message", r.message},
           {"cj0_f", to_json(r.cj0_f)},
           {"vj_v", to_json(r.vj_v)},
           {"m", to_json(r.m)},
           {"law_held", r.law_held},
           {"points_used", r.points_used},
           {"reduced_chi2", nullable(r.reduced_chi2)},
           {"vj_m_correlation", nullable(r.vj_m_correlation)}};
  if (r.readings) {
    Json rows = Json::array();
    for (const auto& p : *r.readings)
      rows.push_back({{"reverse_v", p.reverse_v},
                      {"freq_hz", p.freq_hz},
                      {"fixture_ratio_db", nullable(p.fixture_ratio_db)},
                      // the same ratio under its former name, for readers of older reports (one release)
                      {"isolation_db", nullable(p.fixture_ratio_db)},
                      {"c_f", nullable(p.c_f)},
                      {"left_out", p.left_out}});
    out["readings"] = rows;
  }
  return out;
}

JunctionCapReport junction_cap_report_of(const Json& j) {
  if (!j.is_object()) throw std::invalid_argument(std::string("an object, not ") + j.type_name());
  JunctionCapReport r;
  r.ok = j.value("ok", false);
  r.message = j.value("message", std::string());
  r.cj0_f = estimate_of(j, "cj0_f");
  r.vj_v = estimate_of(j, "vj_v");
  r.m = estimate_of(j, "m");
  r.law_held = j.value("law_held", false);
  r.points_used = j.value("points_used", 0L);
  r.reduced_chi2 = number_of(j, "reduced_chi2");
  r.vj_m_correlation = number_of(j, "vj_m_correlation");
  if (j.contains("readings")) {
    r.readings.emplace();
    for (const auto& p : j.at("readings")) {
      // fixture_ratio_db; rows stored before its rename have only isolation_db
      const double ratio = p.contains("fixture_ratio_db") ? number_of(p, "fixture_ratio_db") : number_of(p, "isolation_db");
      r.readings->push_back({number_of(p, "reverse_v"), number_of(p, "freq_hz"), ratio, number_of(p, "c_f"), p.value("left_out", std::string())});
    }
  }
  return r;
}

Json to_json(const ElectrothermalReport& r) {
  return Json{{"status", r.status},
              {"note", r.note},
              {"ac_readings", r.ac_readings},
              {"ac_left_out", r.ac_left_out},
              {"rs_ohm", to_json(r.rs_ohm)},
              {"is_a", to_json(r.is_a)},
              {"n", to_json(r.n)},
              {"rth_k_per_w", to_json(r.rth_k_per_w)},
              {"top_tj_k", to_json(r.top_tj_k)},
              {"top_power_w", nullable(r.top_power_w)},
              {"apparent_rs_ohm", to_json(r.apparent_rs_ohm)},
              {"reduced_chi2", nullable(r.reduced_chi2)},
              {"rs_bias_per_100_k_per_w_ohm", nullable(r.rs_bias_per_100_k_per_w_ohm)},
              {"eg_ev", nullable(r.eg_ev)},
              {"xti", nullable(r.xti)},
              {"ambient_k", nullable(r.ambient_k)}};
}

ElectrothermalReport electrothermal_report_of(const Json& j) {
  if (!j.is_object()) throw std::invalid_argument(std::string("an object, not ") + j.type_name());
  ElectrothermalReport r;
  r.status = j.value("status", std::string());
  r.note = j.value("note", std::string());
  r.ac_readings = j.value("ac_readings", 0L);
  r.ac_left_out = j.value("ac_left_out", 0L);
  r.rs_ohm = estimate_of(j, "rs_ohm");
  r.is_a = estimate_of(j, "is_a");
  r.n = estimate_of(j, "n");
  r.rth_k_per_w = estimate_of(j, "rth_k_per_w");
  r.top_tj_k = estimate_of(j, "top_tj_k");
  r.top_power_w = number_of(j, "top_power_w");
  r.apparent_rs_ohm = estimate_of(j, "apparent_rs_ohm");
  r.reduced_chi2 = number_of(j, "reduced_chi2");
  r.rs_bias_per_100_k_per_w_ohm = number_of(j, "rs_bias_per_100_k_per_w_ohm");
  r.eg_ev = number_of(j, "eg_ev");
  r.xti = number_of(j, "xti");
  r.ambient_k = number_of(j, "ambient_k");
  return r;
}

Json to_json(const JobRecord& j) {
  Json out{{"job_id", j.id},
           {"state", to_string(j.state)},
           {"plan", to_json(j.plan)},
           {"points_done", j.points_done},
           {"points_total", j.points_total},
           {"error", text_or_null(j.error)},
           {"submitted_by", {{"uid", j.submitted_uid}, {"pid", j.submitted_pid}}},
           {"submitted_at", j.submitted_at},
           {"started_at", text_or_null(j.started_at)},
           {"finished_at", text_or_null(j.finished_at)},
           {"updated_at", j.updated_at}};
  if (!j.persisted) out["persisted"] = false;  // held in memory: the store could not write it
  return out;
}

// Only what was recorded: rows written by older versions lack some keys.
Json to_json(const RunFixture& f) {
  Json out = Json::object();
  const auto put = [&](const char* key, double v) {
    if (std::isfinite(v)) out[key] = v;
  };
  put("bias_resistor_ohm", f.bias_resistor_ohm);
  put("dc_return_ohm", f.dc_return_ohm);
  put("source_ohm", f.source_ohm);
  put("load_ohm", f.load_ohm);
  if (!f.current_from.empty()) out["current_from"] = f.current_from;
  put("stray_c_f", f.stray_c_f);
  if (f.ac_units) out["ac_units"] = {{"plan", f.ac_units->plan}, {"siggen", f.ac_units->siggen}, {"levelmeter", f.ac_units->levelmeter}};
  return out;
}

Json to_json(const RunRecord& r) {
  return Json{{"run_id", r.id}, {"job_id", r.job_id}, {"part_id", r.part_id}, {"slot", r.slot}, {"fixture", to_json(r.fixture)},
              {"temp_k", nullable(r.temp_k)}, {"state", to_string(r.state)}, {"started_at", r.started_at},
              {"finished_at", text_or_null(r.finished_at)}, {"temp_index", r.temp_index},
              {"setpoint_k", nullable(r.setpoint_k)}, {"ambient_k", nullable(r.ambient_k)}, {"ambient_end_k", nullable(r.ambient_end_k)}};
}

Json to_json(const PointRow& p) {
  return Json{{"run_id", p.run_id}, {"seq", p.seq}, {"kind", p.kind}, {"set_value", p.set_value}, {"set_unit", p.set_unit},
              {"supply_v", nullable(p.supply_v)}, {"v", nullable(p.v)}, {"i_a", nullable(p.i_a)},
              {"ac_in_v", nullable(p.ac_in_v)}, {"ac_out_v", nullable(p.ac_out_v)},
              {"ac_unit", text_or_null(p.ac_unit)}, {"freq_hz", nullable(p.freq_hz)},
              {"temp_k", nullable(p.temp_k)}, {"t_s", p.t_s}, {"flags", p.flags},
              {"series", p.kind == "dc" ? Json(p.series) : Json(nullptr)}, {"dwell_s", nullable(p.dwell_s)},
              {"ratio", nullable(p.ratio)}, {"phase_deg", nullable(p.phase_deg)}};
}

Json to_json(const PointRow& p, const std::optional<FitUse>& use) {
  Json out = to_json(p);
  out["used_by_fit"] = use ? Json(use->used) : Json(nullptr);
  out["fit_excluded"] = use && !use->used ? Json(use->reason) : Json(nullptr);
  return out;
}

Json to_json(const PartRow& p) {
  return Json{{"part_id", p.id}, {"lot_id", p.lot_id}, {"lot", p.lot}, {"label", p.label}, {"slot", p.slot}};
}

Json to_json(const PartListRow& p) {
  Json j = to_json(p.part);
  j["has_fit"] = p.has_fit;
  return j;
}

Json to_json(const LotRow& l) { return Json{{"lot_id", l.id}, {"name", l.name}, {"created_at", l.created_at}, {"parts", l.parts}}; }

Json to_json(const InstrumentRow& i) {
  return Json{{"role", i.role},       {"address", i.address},   {"manufacturer", i.manufacturer}, {"model", i.model},
              {"serial", i.serial},   {"firmware", i.firmware}, {"first_seen", i.first_seen},     {"last_seen", i.last_seen}};
}

Json to_json(const FitRecord& f) {
  // The fit itself as `junco fit --json` writes it (one writer), then what the store adds.
  Json out = fitting::fit_result_json(f.fit);
  out["fit_id"] = f.id;
  out["part_id"] = f.part_id;
  out["run_id"] = f.run_id ? Json(*f.run_id) : Json(nullptr);
  out["model"] = f.model;
  Json detail = f.detail;
  if (f.junction_cap) detail["junction_cap"] = to_json(*f.junction_cap);
  if (f.electrothermal) detail["electrothermal"] = to_json(*f.electrothermal);
  out["detail"] = detail;
  out["created_at"] = f.created_at;
  out["cj0_f"] = to_json(f.cj0_f);
  out["vj_v"] = to_json(f.vj_v);
  out["m"] = to_json(f.m);
  out["tt_s"] = to_json(f.tt_s);
  out["temperature_law"] = f.temperature_law;
  // A PIN part's fit (plan.part_type "pin"): the law and lifetime, detail.pin.
  out["part_type"] = f.detail.contains("pin") ? "pin" : "junction";
  out["pin"] = f.detail.contains("pin") ? f.detail["pin"] : Json(nullptr);
  // The package from the run's vector readings (plan.vector): Ls and Cp with
  // standard errors, and the chip's Cj(V) law fitted with it removed.
  out["package"] = f.detail.contains("package") ? f.detail["package"] : Json(nullptr);
  return out;
}

}  // namespace junco::daemon
