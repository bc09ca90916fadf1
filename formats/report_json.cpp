#include "formats/report_json.hpp"

#include "formats/fit_json.hpp"

#include <cmath>
#include <cstdint>
#include <limits>
#include <stdexcept>
#include <string>
#include <vector>

namespace junco::fitting {

using nlohmann::json;

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

void require_object(const json& j) {
  if (!j.is_object()) throw std::invalid_argument(std::string("an object, not ") + j.type_name());
}
// A number as stored: null (or absent) is NaN; anything else not a number is damage.
double number_of(const json& j, const char* key) {
  const auto it = j.find(key);
  if (it == j.end() || it->is_null()) return kNaN;
  if (!it->is_number()) throw std::invalid_argument(std::string(key) + ": a number or null, not " + it->type_name());
  return it->get<double>();
}
// A square matrix of numbers (null: NaN), [] for none.
std::vector<std::vector<double>> matrix_of(const json& j, const char* key) {
  std::vector<std::vector<double>> out;
  const auto it = j.find(key);
  if (it == j.end() || it->is_null()) return out;
  if (!it->is_array()) throw std::invalid_argument(std::string(key) + ": an array of rows, not " + it->type_name());
  for (const auto& row : *it) {
    if (!row.is_array() || row.size() != it->size()) throw std::invalid_argument(std::string(key) + ": not a square matrix");
    std::vector<double> r;
    for (const auto& c : row) {
      if (!c.is_null() && !c.is_number()) throw std::invalid_argument(std::string(key) + ": a number or null, not " + c.type_name());
      r.push_back(c.is_null() ? kNaN : c.get<double>());
    }
    out.push_back(std::move(r));
  }
  return out;
}
std::vector<std::string> strings_of(const json& j, const char* key) {
  const auto it = j.find(key);
  if (it == j.end() || it->is_null()) return {};
  return it->get<std::vector<std::string>>();
}
Estimate estimate_of(const json& j, const char* key) {
  const auto it = j.find(key);
  if (it == j.end() || it->is_null()) return {};
  if (!it->is_object()) throw std::invalid_argument(std::string(key) + ": {value, std_error}, not " + it->type_name());
  return {number_of(*it, "value"), number_of(*it, "std_error")};
}

}  // namespace

// ---- capacitance law ---------------------------------------------------------

json junction_cap_json(const JunctionCapReport& r) {
  json out{{"ok", r.ok},
           {"message", r.message},
           {"cj0_f", estimate_json(r.cj0_f)},
           {"vj_v", estimate_json(r.vj_v)},
           {"m", estimate_json(r.m)},
           {"law_held", r.law_held},
           {"points_used", r.points_used},
           {"reduced_chi2", number_or_null(r.reduced_chi2)},
           {"vj_m_correlation", number_or_null(r.vj_m_correlation)}};
  if (r.readings) {
    json rows = json::array();
    for (const auto& p : *r.readings)
      rows.push_back({{"reverse_v", p.reverse_v},
                      {"freq_hz", p.freq_hz},
                      {"fixture_ratio_db", number_or_null(p.fixture_ratio_db)},
                      // the same ratio under its former name, for readers of older reports (one release)
                      {"isolation_db", number_or_null(p.fixture_ratio_db)},
                      {"c_f", number_or_null(p.c_f)},
                      {"left_out", p.left_out}});
    out["readings"] = rows;
  }
  return out;
}

json junction_cap_json(const JunctionCapFit& fit) { return junction_cap_json(junction_cap_report(fit)); }

JunctionCapReport junction_cap_report_of(const json& j) {
  require_object(j);
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

// ---- electro-thermal fit -------------------------------------------------------

json electrothermal_json(const ElectrothermalReport& r) {
  return json{{"status", r.status},
              {"note", r.note},
              {"ac_readings", r.ac_readings},
              {"ac_left_out", r.ac_left_out},
              {"rs_ohm", estimate_json(r.rs_ohm)},
              {"is_a", estimate_json(r.is_a)},
              {"n", estimate_json(r.n)},
              {"rth_k_per_w", estimate_json(r.rth_k_per_w)},
              {"top_tj_k", estimate_json(r.top_tj_k)},
              {"top_power_w", number_or_null(r.top_power_w)},
              {"apparent_rs_ohm", estimate_json(r.apparent_rs_ohm)},
              {"reduced_chi2", number_or_null(r.reduced_chi2)},
              {"rs_bias_per_100_k_per_w_ohm", number_or_null(r.rs_bias_per_100_k_per_w_ohm)},
              {"eg_ev", number_or_null(r.eg_ev)},
              {"xti", number_or_null(r.xti)},
              {"ambient_k", number_or_null(r.ambient_k)}};
}

json electrothermal_run_json(const ElectroThermalRun& run, const ElectroThermalRunOptions& options) {
  return electrothermal_json(electrothermal_report(run, options));
}

ElectrothermalReport electrothermal_report_of(const json& j) {
  require_object(j);
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

// ---- heating ---------------------------------------------------------------------

json dwell_thermal_json(const DwellThermal& d) {
  json steps = json::array();
  for (const auto& s : d.steps)
    steps.push_back({{"used", s.used}, {"why", s.why}, {"i_a", number_or_null(s.i_a)}, {"power_w", number_or_null(s.power_w)},
                     {"delta_vf_inf_v", number_or_null(s.delta_vf_inf_v)}, {"delta_t_inf_k", number_or_null(s.delta_t_inf_k)},
                     {"tau_s", number_or_null(s.tau_s)}, {"rth_k_per_w", number_or_null(s.rth_k_per_w)}});
  return {{"status", d.status}, {"note", d.note}, {"rth_k_per_w", estimate_json(d.rth_k_per_w)}, {"tau_s", estimate_json(d.tau_s)},
          {"steps_used", d.used}, {"steps", steps}};
}

json hysteresis_json(const Hysteresis& h) {
  return {{"pairs", h.pairs},     {"max_abs_v", number_or_null(h.max_abs_v)}, {"at_i_a", number_or_null(h.at_i_a)}, {"sigma_v", number_or_null(h.sigma_v)},
          {"max_z", number_or_null(h.max_z)}, {"mean_v", number_or_null(h.mean_v)}, {"flagged", h.flagged},         {"note", h.note}};
}

json heating_json(const HeatingReport& r) {
  json j{{"pulsed_readings", r.pulsed_readings}, {"pulse_dwell_s", number_or_null(r.pulse_dwell_s)}};
  if (r.dwell) j["dwell"] = dwell_thermal_json(*r.dwell);
  if (r.hysteresis) j["hysteresis"] = hysteresis_json(*r.hysteresis);
  if (r.rs_heating_ohm) j["rs_heating_ohm"] = *r.rs_heating_ohm;
  return j;
}

namespace {
DwellThermal dwell_thermal_of(const json& j) {
  require_object(j);
  DwellThermal d;
  d.status = j.value("status", std::string());
  d.note = j.value("note", std::string());
  d.rth_k_per_w = estimate_of(j, "rth_k_per_w");
  d.tau_s = estimate_of(j, "tau_s");
  d.used = j.value("steps_used", std::size_t{0});
  for (const auto& s : j.value("steps", json::array())) {
    require_object(s);
    d.steps.push_back({s.value("used", false), s.value("why", std::string()), number_of(s, "i_a"), number_of(s, "power_w"),
                       number_of(s, "delta_vf_inf_v"), number_of(s, "delta_t_inf_k"), number_of(s, "tau_s"), number_of(s, "rth_k_per_w")});
  }
  return d;
}

Hysteresis hysteresis_of(const json& j) {
  require_object(j);
  Hysteresis h;
  h.pairs = j.value("pairs", std::size_t{0});
  h.max_abs_v = number_of(j, "max_abs_v");
  h.at_i_a = number_of(j, "at_i_a");
  h.sigma_v = number_of(j, "sigma_v");
  h.max_z = number_of(j, "max_z");
  h.mean_v = number_of(j, "mean_v");
  h.flagged = j.value("flagged", false);
  h.note = j.value("note", std::string());
  return h;
}
}  // namespace

HeatingReport heating_report_of(const json& j) {
  require_object(j);
  HeatingReport r;
  r.pulsed_readings = j.value("pulsed_readings", std::size_t{0});
  r.pulse_dwell_s = number_of(j, "pulse_dwell_s");
  if (j.contains("dwell")) r.dwell = dwell_thermal_of(j["dwell"]);
  if (j.contains("hysteresis")) r.hysteresis = hysteresis_of(j["hysteresis"]);
  if (j.contains("rs_heating_ohm")) r.rs_heating_ohm = number_of(j, "rs_heating_ohm");
  return r;
}

// ---- stored charge ---------------------------------------------------------------

json ac_charge_fit_json(const AcChargeFit& fit) {
  json j{{"ok", fit.ok},
         {"message", fit.message},
         {"n", estimate_json(fit.n)},
         {"rs_ohm", estimate_json(fit.rs_ohm)},
         {"tt_s", estimate_json(fit.tt_s)},
         {"reduced_chi2", fit.reduced_chi2},
         {"points", fit.points},
         {"frequencies", fit.frequencies}};
  if (std::isfinite(fit.cj_f.value)) j["cj_f"] = estimate_json(fit.cj_f);
  return j;
}

AcChargeFit ac_charge_fit_of(const json& j) {
  require_object(j);
  AcChargeFit f;
  f.ok = j.value("ok", false);
  f.message = j.value("message", std::string());
  f.n = estimate_of(j, "n");
  f.rs_ohm = estimate_of(j, "rs_ohm");
  f.tt_s = estimate_of(j, "tt_s");
  f.cj_f = estimate_of(j, "cj_f");
  f.reduced_chi2 = number_of(j, "reduced_chi2");
  f.points = j.value("points", std::size_t{0});
  f.frequencies = j.value("frequencies", std::size_t{0});
  return f;
}

// ---- joint fit, temperature law, PIN -------------------------------------------------

json simple_fit_json(const SimpleFit& f) {
  return {{"ok", f.ok},
          {"message", f.message},
          {"is_a", estimate_json(f.is_a)},
          {"n", estimate_json(f.n)},
          {"rs_ohm", estimate_json(f.rs_ohm)},
          {"reduced_chi2", number_or_null(f.reduced_chi2)},
          {"dc_points", f.dc_points},
          {"ac_points", f.ac_points}};
}

json joint_report_json(const JointFitReport& r) {
  json j{{"dc_only", simple_fit_json(r.dc_only)}, {"ac_only", simple_fit_json(r.ac_only)}, {"joint", simple_fit_json(r.joint)},
         {"agree", r.agree}, {"agreement", r.agreement}};
  if (!r.hint.empty()) j["hint"] = r.hint;
  return j;
}

json temperature_fit_json(const TemperatureFit& f) {
  json temps = json::array();
  for (std::size_t i = 0; i < f.temps_k.size(); ++i)
    temps.push_back({{"temp_k", f.temps_k[i]}, {"ln_is_residual", i < f.residuals_ln_is.size() ? json(f.residuals_ln_is[i]) : json(nullptr)}});
  json j{{"status", f.ok ? "ok" : "failed"},
         {"message", f.message},
         {"tnom_k", f.tnom_k},
         {"n", f.n},
         {"is_a", estimate_json(f.is_a)},
         {"eg_ev", estimate_json(f.eg_ev)},
         {"xti", estimate_json(f.xti)},
         {"trs1_per_k", estimate_json(f.trs1_per_k)},
         {"rs_ohm", estimate_json(f.rs_ohm)},
         {"corr_eg_xti", number_or_null(f.corr_eg_xti)},
         {"reduced_chi2", f.reduced_chi2},
         {"dof", f.dof},
         {"temperatures", temps},
         {"notes", f.notes}};
  j["xti"]["held"] = f.xti_held;
  j["trs1_per_k"]["resolved"] = f.trs_resolved;
  return j;
}

TemperatureFit temperature_fit_of(const json& j) {
  require_object(j);
  TemperatureFit f;
  f.ok = j.value("status", std::string()) == "ok";
  f.message = j.value("message", std::string());
  f.tnom_k = number_of(j, "tnom_k");
  f.n = number_of(j, "n");
  f.is_a = estimate_of(j, "is_a");
  f.eg_ev = estimate_of(j, "eg_ev");
  f.xti = estimate_of(j, "xti");
  f.trs1_per_k = estimate_of(j, "trs1_per_k");
  f.rs_ohm = estimate_of(j, "rs_ohm");
  if (const auto it = j.find("xti"); it != j.end() && it->is_object()) f.xti_held = it->value("held", false);
  if (const auto it = j.find("trs1_per_k"); it != j.end() && it->is_object()) f.trs_resolved = it->value("resolved", false);
  f.corr_eg_xti = number_of(j, "corr_eg_xti");
  f.reduced_chi2 = number_of(j, "reduced_chi2");
  f.dof = j.value("dof", 0);
  for (const auto& t : j.value("temperatures", json::array())) {
    require_object(t);
    f.temps_k.push_back(number_of(t, "temp_k"));
    f.residuals_ln_is.push_back(number_of(t, "ln_is_residual"));
  }
  f.notes = strings_of(j, "notes");
  return f;
}

json temperature_law_json(const TemperatureLawReport& r) {
  json j = temperature_fit_json(r.fit);
  j["runs"] = r.runs;
  return j;
}

TemperatureLawReport temperature_law_report_of(const json& j) {
  TemperatureLawReport r;
  r.fit = temperature_fit_of(j);
  if (j.contains("runs")) r.runs = j["runs"].get<std::vector<std::int64_t>>();
  return r;
}

json pin_fit_json(const PinFit& f) {
  return {{"ok", f.ok},
          {"message", f.message},
          {"n", estimate_json(f.n)},
          {"tau_s", estimate_json(f.tau_s)},
          {"r0_ohm", estimate_json(f.r0_ohm)},
          {"k_ohm_a_x", estimate_json(f.k_ohm_a_x)},
          {"x", estimate_json(f.x)},
          {"r_1ma_ohm", estimate_json(f.r_1ma_ohm)},
          {"knee_freq_hz", f.knee_freq_hz},
          {"parameter_names", f.parameter_names},
          {"covariance", f.covariance},
          {"reduced_chi2", f.reduced_chi2},
          {"points", f.points},
          {"frequencies", f.frequencies},
          {"above_knee", f.above_knee}};
}

json pin_off_fit_json(const PinOffFit& f) {
  return {{"ok", f.ok},       {"message", f.message},   {"ct_f", estimate_json(f.ct_f)}, {"rp_ohm", estimate_json(f.rp_ohm)},
          {"reduced_chi2", number_or_null(f.reduced_chi2)}, {"points", f.points}};
}

json pin_report_json(const PinReport& r) {
  json j = r.law ? pin_fit_json(*r.law) : json{{"ok", false}, {"message", r.not_fitted}};
  if (r.screen)
    j["screen"] = {{"readings", r.screen->readings},
                   {"used", r.screen->used},
                   {"large_signal", r.screen->large_signal},
                   {"below_floor", r.screen->below_floor},
                   {"kept_by_charge_rule", r.screen->kept_by_charge_rule},
                   {"tau_for_screen_s", r.screen->tau_for_screen_s}};
  if (r.off_state) j["off_state"] = pin_off_fit_json(*r.off_state);
  return j;
}

namespace {
PinFit pin_fit_of(const json& j) {
  PinFit f;
  f.ok = j.value("ok", false);
  f.message = j.value("message", std::string());
  f.n = estimate_of(j, "n");
  f.tau_s = estimate_of(j, "tau_s");
  f.r0_ohm = estimate_of(j, "r0_ohm");
  f.k_ohm_a_x = estimate_of(j, "k_ohm_a_x");
  f.x = estimate_of(j, "x");
  f.r_1ma_ohm = estimate_of(j, "r_1ma_ohm");
  f.knee_freq_hz = number_of(j, "knee_freq_hz");
  f.parameter_names = strings_of(j, "parameter_names");
  f.covariance = matrix_of(j, "covariance");
  f.reduced_chi2 = number_of(j, "reduced_chi2");
  f.points = j.value("points", std::size_t{0});
  f.frequencies = j.value("frequencies", std::size_t{0});
  f.above_knee = j.value("above_knee", std::size_t{0});
  return f;
}

PinOffFit pin_off_fit_of(const json& j) {
  require_object(j);
  PinOffFit f;
  f.ok = j.value("ok", false);
  f.message = j.value("message", std::string());
  f.ct_f = estimate_of(j, "ct_f");
  f.rp_ohm = estimate_of(j, "rp_ohm");
  f.reduced_chi2 = number_of(j, "reduced_chi2");
  f.points = j.value("points", std::size_t{0});
  return f;
}
}  // namespace

PinReport pin_report_of(const json& j) {
  require_object(j);
  PinReport r;
  // pin_fit_json always writes tau_s; {ok: false, message} alone: no fit was tried.
  if (j.contains("tau_s")) r.law = pin_fit_of(j);
  else r.not_fitted = j.value("message", std::string());
  if (const auto it = j.find("screen"); it != j.end()) {
    require_object(*it);
    r.screen = PinScreenReport{it->value("readings", std::size_t{0}), it->value("used", std::size_t{0}), it->value("large_signal", 0L),
                               it->value("below_floor", 0L),          it->value("kept_by_charge_rule", 0L), number_of(*it, "tau_for_screen_s")};
  }
  if (const auto it = j.find("off_state"); it != j.end()) r.off_state = pin_off_fit_of(*it);
  return r;
}

// ---- package from vector readings -------------------------------------------------

namespace {
json compared_json(const std::optional<ForwardVectorFit::Compared>& c) {
  if (!c) return nullptr;
  return {{"fit", estimate_json(c->other)}, {"z", number_or_null(c->z)}};
}

std::optional<ForwardVectorFit::Compared> compared_of(const json& j, const char* key) {
  const auto it = j.find(key);
  if (it == j.end() || it->is_null()) return std::nullopt;
  require_object(*it);
  return ForwardVectorFit::Compared{estimate_of(*it, "fit"), number_of(*it, "z")};
}

json forward_vector_fit_json(const ForwardVectorFit& f) {
  json j = pin_fit_json(f.fit);
  j["model"] = f.pin ? "pin" : "junction";
  j["readings"] = f.readings;
  j["currents"] = f.currents;
  j["package_removed"] = f.package_removed;
  j["deembedded"] = f.deembedded;
  if (!f.pin) j["against_fit"] = {{"rs_ohm", compared_json(f.rs_ohm)}, {"n", compared_json(f.n)}, {"tt_s", compared_json(f.tt_s)}};
  return j;
}

ForwardVectorFit forward_vector_fit_of(const json& j) {
  require_object(j);
  ForwardVectorFit f;
  f.fit = pin_fit_of(j);
  f.pin = j.value("model", std::string()) == "pin";
  f.readings = j.value("readings", std::size_t{0});
  f.currents = j.value("currents", std::size_t{0});
  f.package_removed = j.value("package_removed", false);
  f.deembedded = j.value("deembedded", false);
  if (const auto it = j.find("against_fit"); it != j.end() && !it->is_null()) {
    require_object(*it);
    f.rs_ohm = compared_of(*it, "rs_ohm");
    f.n = compared_of(*it, "n");
    f.tt_s = compared_of(*it, "tt_s");
  }
  return f;
}
}  // namespace

json vector_run_fit_json(const VectorRunFit& v) {
  json j{{"ok", v.package.ok},
         {"message", v.package.message},
         {"ls_h", estimate_json({v.package.package.ls_h, v.package.ls_h_std_error})},
         {"cp_f", estimate_json({v.package.package.cp_f, v.package.cp_f_std_error})},
         {"ls_cp_correlation", number_or_null(v.package.ls_cp_correlation)},
         {"rms_relative", number_or_null(v.package.rms_relative)},
         {"readings", v.readings},
         {"standards", v.standards},
         {"deembedded", v.deembedded},
         {"z_load_ohm", v.z_load_ohm},
         {"package_in_law_errors", v.package_in_law_errors}};
  j["junction_cap"] = v.cap ? junction_cap_json(*v.cap) : json(nullptr);
  j["forward"] = v.forward ? forward_vector_fit_json(*v.forward) : json(nullptr);
  return j;
}

VectorRunFit vector_run_fit_of(const json& j) {
  require_object(j);
  VectorRunFit v;
  v.package.ok = j.value("ok", false);
  v.package.message = j.value("message", std::string());
  const Estimate ls = estimate_of(j, "ls_h"), cp = estimate_of(j, "cp_f");
  v.package.package = {ls.value, cp.value};
  v.package.ls_h_std_error = ls.std_error;
  v.package.cp_f_std_error = cp.std_error;
  v.package.ls_cp_correlation = number_of(j, "ls_cp_correlation");
  v.package.rms_relative = number_of(j, "rms_relative");
  v.readings = j.value("readings", std::size_t{0});
  v.standards = j.value("standards", std::size_t{0});
  v.deembedded = j.value("deembedded", false);
  v.z_load_ohm = number_of(j, "z_load_ohm");
  v.package_in_law_errors = j.value("package_in_law_errors", false);
  if (const auto it = j.find("junction_cap"); it != j.end() && !it->is_null()) {
    const JunctionCapReport r = junction_cap_report_of(*it);
    JunctionCapFit& cap = v.cap.emplace();
    cap.ok = r.ok;
    cap.message = r.message;
    cap.cj0_f = r.cj0_f;
    cap.vj_v = r.vj_v;
    cap.m = r.m;
    cap.law_held = r.law_held;
    cap.points_used = r.points_used > 0 ? static_cast<std::size_t>(r.points_used) : 0;
    cap.reduced_chi2 = r.reduced_chi2;
    cap.vj_m_correlation = r.vj_m_correlation;
  }
  if (const auto it = j.find("forward"); it != j.end() && !it->is_null()) v.forward = forward_vector_fit_of(*it);
  return v;
}

}  // namespace junco::fitting
