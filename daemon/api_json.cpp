#include "daemon/api_json.hpp"

#include <cmath>

namespace junco::daemon {

namespace {
Json nullable(double v) { return std::isfinite(v) ? Json(v) : Json(nullptr); }
Json text_or_null(const std::string& s) { return s.empty() ? Json(nullptr) : Json(s); }
}  // namespace

Json to_json(const fitting::Estimate& e) { return Json{{"value", nullable(e.value)}, {"std_error", nullable(e.std_error)}}; }

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
              {"temp_k", nullable(r.temp_k)}, {"state", r.state}, {"started_at", r.started_at},
              {"finished_at", text_or_null(r.finished_at)}, {"temp_index", r.temp_index},
              {"setpoint_k", nullable(r.setpoint_k)}, {"ambient_k", nullable(r.ambient_k)}, {"ambient_end_k", nullable(r.ambient_end_k)}};
}

Json to_json(const PointRow& p) {
  return Json{{"run_id", p.run_id}, {"seq", p.seq}, {"kind", p.kind}, {"set_value", p.set_value}, {"set_unit", p.set_unit},
              {"supply_v", nullable(p.supply_v)}, {"v", nullable(p.v)}, {"i_a", nullable(p.i_a)},
              {"ac_in_v", nullable(p.ac_in_v)}, {"ac_out_v", nullable(p.ac_out_v)},
              {"ac_unit", text_or_null(p.ac_unit)}, {"freq_hz", nullable(p.freq_hz)},
              {"temp_k", nullable(p.temp_k)}, {"t_s", p.t_s}, {"flags", p.flags},
              {"series", p.kind == "dc" ? Json(p.series) : Json(nullptr)}, {"dwell_s", nullable(p.dwell_s)}};
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
  const fitting::FitResult& r = f.fit;
  return Json{{"fit_id", f.id},
              {"part_id", f.part_id},
              {"run_id", f.run_id ? Json(*f.run_id) : Json(nullptr)},
              {"model", f.model},
              {"status", fitting::to_string(r.status)},
              {"message", r.message},
              {"is_a", to_json(r.is_a)},
              {"n", to_json(r.n)},
              {"rs_ohm", to_json(r.rs_ohm)},
              {"rsh_ohm", to_json(r.rsh_ohm)},
              {"temp_k", nullable(r.temp_k)},
              {"cost", nullable(r.cost)},
              {"rms_residual", nullable(r.rms_residual)},
              {"points_used", r.points_used},
              {"warnings", r.warnings},
              {"detail", f.detail},
              {"created_at", f.created_at},
              {"cj0_f", to_json(f.cj0_f)},
              {"vj_v", to_json(f.vj_v)},
              {"m", to_json(f.m)},
              {"tt_s", to_json(f.tt_s)},
              {"temperature_law", f.temperature_law},
              // A PIN part's fit (plan.part_type "pin"): the law and lifetime, detail.pin.
              {"part_type", f.detail.contains("pin") ? "pin" : "junction"},
              {"pin", f.detail.contains("pin") ? f.detail["pin"] : Json(nullptr)}};
}

}  // namespace junco::daemon
