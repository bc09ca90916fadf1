#include "daemon/api_json.hpp"

#include "formats/fit_json.hpp"

#include <cmath>

namespace junco::daemon {

namespace {
using fitting::number_or_null;
Json text_or_null(const std::string& s) { return s.empty() ? Json(nullptr) : Json(s); }

template <typename T>
const T* ptr(const std::optional<T>& x) { return x ? &*x : nullptr; }

// The one writer of a fit's detail document: the fit's own parts, then each report present.
Json fit_detail(const fitting::FitResult& fit, const JunctionCapReport* cap, const ElectrothermalReport* electrothermal,
                const HeatingReport* heating, const fitting::AcChargeFit* stored_charge, const PinReport* pin,
                const VectorRunFit* package) {
  Json excluded = Json::array();
  for (const auto& e : fit.excluded) excluded.push_back({{"index", e.index}, {"reason", e.reason}});
  Json out = {{"parameter_names", fit.parameter_names},
              {"correlation", fitting::matrix_json(fit.correlation)},
              {"excluded", excluded},
              {"iterations", fit.iterations}};
  if (heating) out["heating"] = fitting::heating_json(*heating);
  if (stored_charge) out["stored_charge"] = fitting::ac_charge_fit_json(*stored_charge);
  if (electrothermal) out["electrothermal"] = fitting::electrothermal_json(*electrothermal);
  if (cap) out["junction_cap"] = fitting::junction_cap_json(*cap);
  if (pin) out["pin"] = fitting::pin_report_json(*pin);
  if (package) out["package"] = fitting::vector_run_fit_json(*package);
  return out;
}
}  // namespace

Json to_json(const fitting::Estimate& e) { return fitting::estimate_json(e); }

Json fit_detail_json(const fitting::FitResult& fit, const JunctionCapReport* cap, const ElectrothermalReport* electrothermal,
                     const MoreReports& more) {
  return fit_detail(fit, cap, electrothermal, ptr(more.heating), ptr(more.stored_charge), ptr(more.pin), ptr(more.package));
}

Json fit_detail_json(const FitRecord& f) {
  return fit_detail(f.fit, ptr(f.junction_cap), ptr(f.electrothermal), ptr(f.heating), ptr(f.stored_charge), ptr(f.pin), ptr(f.package));
}

Json to_json(const TemperatureLawRecord& law) {
  Json j = fitting::temperature_law_json(law.report);
  j["temperature_fit_id"] = law.id;
  j["job_id"] = law.job_id;
  j["created_at"] = law.created_at;
  return j;
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
              {"temp_k", number_or_null(r.temp_k)}, {"state", to_string(r.state)}, {"started_at", r.started_at},
              {"finished_at", text_or_null(r.finished_at)}, {"temp_index", r.temp_index},
              {"setpoint_k", number_or_null(r.setpoint_k)}, {"ambient_k", number_or_null(r.ambient_k)}, {"ambient_end_k", number_or_null(r.ambient_end_k)}};
}

Json to_json(const PointRow& p) {
  return Json{{"run_id", p.run_id}, {"seq", p.seq}, {"kind", p.kind}, {"set_value", p.set_value}, {"set_unit", p.set_unit},
              {"supply_v", number_or_null(p.supply_v)}, {"v", number_or_null(p.v)}, {"i_a", number_or_null(p.i_a)},
              {"ac_in_v", number_or_null(p.ac_in_v)}, {"ac_out_v", number_or_null(p.ac_out_v)},
              {"ac_unit", text_or_null(p.ac_unit)}, {"freq_hz", number_or_null(p.freq_hz)},
              {"temp_k", number_or_null(p.temp_k)}, {"t_s", p.t_s}, {"flags", p.flags},
              {"series", p.kind == "dc" ? Json(p.series) : Json(nullptr)}, {"dwell_s", number_or_null(p.dwell_s)},
              {"ratio", number_or_null(p.ratio)}, {"phase_deg", number_or_null(p.phase_deg)}};
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
  out["detail"] = fit_detail_json(f);
  out["created_at"] = f.created_at;
  out["cj0_f"] = to_json(f.cj0_f);
  out["vj_v"] = to_json(f.vj_v);
  out["m"] = to_json(f.m);
  out["tt_s"] = to_json(f.tt_s);
  out["temperature_law"] = f.temperature_law ? to_json(*f.temperature_law) : Json(nullptr);
  // A PIN part's fit (plan.part_type "pin"): the law and lifetime, detail.pin.
  out["part_type"] = f.pin ? "pin" : "junction";
  out["pin"] = f.pin ? fitting::pin_report_json(*f.pin) : Json(nullptr);
  // The package from the run's vector readings (plan.vector): Ls and Cp with
  // standard errors, and the chip's Cj(V) law fitted with it removed.
  out["package"] = f.package ? fitting::vector_run_fit_json(*f.package) : Json(nullptr);
  return out;
}

}  // namespace junco::daemon
