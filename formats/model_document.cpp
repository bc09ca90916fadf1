#include "formats/model_document.hpp"

#include "formats/json_limits.hpp"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cmath>

namespace junco::fitting {

using Json = nlohmann::json;

namespace {

Json estimate(double value, double se) {
  Json j{{"value", value}};
  if (std::isfinite(se)) j["std_error"] = se;
  return j;
}

struct Bad : std::runtime_error {
  using std::runtime_error::runtime_error;
};

double number_at(const Json& obj, const char* key, const std::string& where) {
  if (!obj.contains(key)) throw Bad(where + "." + key + " is missing");
  const Json& v = obj.at(key);
  if (!v.is_number()) throw Bad(where + "." + key + " must be a number");
  const double d = v.get<double>();
  if (!std::isfinite(d)) throw Bad(where + "." + key + " must be finite");
  return d;
}

// Reads model.<key>; returns false when absent and optional.
bool read_estimate(const Json& model, const char* key, bool required, double& value, double* se) {
  if (!model.contains(key)) {
    if (required) throw Bad(std::string("model.") + key + " is missing");
    return false;
  }
  const Json& e = model.at(key);
  const std::string where = std::string("model.") + key;
  if (!e.is_object()) throw Bad(where + " must be an object {\"value\":..., \"std_error\":...}");
  value = number_at(e, "value", where);
  if (se && e.contains("std_error")) *se = number_at(e, "std_error", where);
  return true;
}

std::string string_at(const Json& obj, const char* key, const std::string& where) {
  if (!obj.contains(key)) return {};
  if (!obj.at(key).is_string()) throw Bad(where + "." + key + " must be a string");
  return obj.at(key).get<std::string>();
}

// covariance: {"parameters":[model keys], "matrix":[[...]] (n x n, finite,
// symmetric, diagonal >= 0), "source":"..."}; each parameter a key of model.
void read_covariance(const Json& c, const Json& model, PartModel& p) {
  if (!c.is_object()) throw Bad("covariance must be an object {\"parameters\":[...], \"matrix\":[[...]]}");
  if (!c.contains("parameters") || !c.at("parameters").is_array()) throw Bad("covariance.parameters must be an array of model keys");
  std::vector<std::string> names;
  for (const auto& n : c.at("parameters")) {
    if (!n.is_string()) throw Bad("covariance.parameters must be an array of model keys");
    const std::string name = n.get<std::string>();
    if (!model.contains(name)) throw Bad("covariance.parameters: '" + name + "' is not a key of model");
    if (std::find(names.begin(), names.end(), name) != names.end()) throw Bad("covariance.parameters: '" + name + "' twice");
    names.push_back(name);
  }
  const std::size_t n = names.size();
  const std::string shape = "covariance.matrix must be " + std::to_string(n) + " x " + std::to_string(n) + " numbers (one row per parameter)";
  if (!c.contains("matrix") || !c.at("matrix").is_array() || c.at("matrix").size() != n) throw Bad(shape);
  std::vector<std::vector<double>> m(n, std::vector<double>(n, 0.0));
  for (std::size_t a = 0; a < n; ++a) {
    const Json& row = c.at("matrix").at(a);
    if (!row.is_array() || row.size() != n) throw Bad(shape);
    for (std::size_t b = 0; b < n; ++b) {
      if (!row.at(b).is_number() || !std::isfinite(row.at(b).get<double>())) throw Bad(shape);
      m[a][b] = row.at(b).get<double>();
    }
  }
  for (std::size_t a = 0; a < n; ++a) {
    if (!(m[a][a] >= 0.0)) throw Bad("covariance.matrix: the variance of " + names[a] + " is negative");
    for (std::size_t b = 0; b < a; ++b)
      if (std::fabs(m[a][b] - m[b][a]) > 1e-9 * std::sqrt(m[a][a] * m[b][b]))
        throw Bad("covariance.matrix is not symmetric (" + names[a] + ", " + names[b] + ")");
  }
  p.covariance_names = std::move(names);
  p.covariance = std::move(m);
  p.covariance_source = string_at(c, "source", "covariance");
}

}  // namespace

std::string model_document_json(const PartModel& p) {
  Json part{{"label", p.part_label}, {"lot", p.lot}};
  if (!p.run_id.empty()) part["run_id"] = p.run_id;
  Json model{{"is_a", estimate(p.params.is_a, p.is_se_a)},
             {"n", estimate(p.params.n, p.n_se)},
             {"rs_ohm", estimate(p.params.rs_ohm, p.rs_se_ohm)}};
  const double nan = std::numeric_limits<double>::quiet_NaN();
  if (std::isfinite(p.params.rsh_ohm)) model["rsh_ohm"] = estimate(p.params.rsh_ohm, nan);
  if (std::isfinite(p.cj0_f)) model["cj0_f"] = estimate(p.cj0_f, nan);
  if (std::isfinite(p.vj_v)) model["vj_v"] = estimate(p.vj_v, nan);
  if (std::isfinite(p.m)) model["m"] = estimate(p.m, nan);
  if (std::isfinite(p.tt_s)) model["tt_s"] = estimate(p.tt_s, p.tt_se_s);
  Json doc{{"format", model_document_format},
           {"version", model_document_version},
           {"part", part},
           {"temp_k", p.temp_k},
           {"model", model},
           {"temperature_law",
            {{"eg_ev", p.law.eg_ev}, {"xti", p.law.xti}, {"trs1_per_k", p.law.trs1_per_k}, {"trs2_per_k2", p.law.trs2_per_k2}}}};
  if (p.pin) {
    doc["part_type"] = "pin";
    doc["pin"] = {{"n", p.pin->law.n}, {"tau_s", p.pin->law.tau_s}, {"r0_ohm", p.pin->law.r0_ohm},
                  {"k_ohm_a_x", p.pin->law.k_ohm_a_x}, {"x", p.pin->law.x}};
    if (p.pin->ct_f > 0) doc["pin"]["ct_f"] = p.pin->ct_f;
    if (std::isfinite(p.pin->rp_ohm)) doc["pin"]["rp_ohm"] = p.pin->rp_ohm;
  }
  if (std::isfinite(p.rms_residual)) doc["fit"] = {{"rms_residual", p.rms_residual}, {"points_used", p.points_used}};
  if (!p.covariance_names.empty())
    doc["covariance"] = {{"parameters", p.covariance_names}, {"matrix", p.covariance}, {"source", p.covariance_source}};
  return doc.dump(2) + "\n";
}

std::optional<PartModel> parse_model_document(const std::string& text, std::string* why) {
  try {
    const Json doc = parse_json_limited(text, "model document");
    if (!doc.is_object()) throw Bad("document must be a JSON object");
    if (doc.value("format", std::string()) != model_document_format)
      throw Bad(std::string("format must be \"") + model_document_format + "\"");
    const int version = doc.contains("version") && doc.at("version").is_number_integer() ? doc.at("version").get<int>() : 0;
    if (version != model_document_version && version != 1)
      throw Bad("version must be " + std::to_string(model_document_version) + " (or 1, the previous one)");
    PartModel p;
    if (doc.contains("part")) {
      const Json& part = doc.at("part");
      if (!part.is_object()) throw Bad("part must be an object");
      p.part_label = string_at(part, "label", "part");
      p.lot = string_at(part, "lot", "part");
      p.run_id = string_at(part, "run_id", "part");
    }
    // Version 1 named the temperature temperature_k; from version 2 it is temp_k as everywhere else.
    const char* const temp_key = version == 1 ? "temperature_k" : "temp_k";
    if (version != 1 && !doc.contains("temp_k") && doc.contains("temperature_k"))
      throw Bad("temperature_k is version 1's name: a version " + std::to_string(version) + " document says temp_k");
    p.temp_k = number_at(doc, temp_key, "document");
    if (!(p.temp_k > 0.0)) throw Bad(std::string(temp_key) + " must be positive (kelvin)");
    if (!doc.contains("model") || !doc.at("model").is_object()) throw Bad("model is missing");
    const Json& model = doc.at("model");
    read_estimate(model, "is_a", true, p.params.is_a, &p.is_se_a);
    read_estimate(model, "n", true, p.params.n, &p.n_se);
    read_estimate(model, "rs_ohm", true, p.params.rs_ohm, &p.rs_se_ohm);
    read_estimate(model, "rsh_ohm", false, p.params.rsh_ohm, nullptr);
    read_estimate(model, "cj0_f", false, p.cj0_f, nullptr);
    read_estimate(model, "vj_v", false, p.vj_v, nullptr);
    read_estimate(model, "m", false, p.m, nullptr);
    read_estimate(model, "tt_s", false, p.tt_s, &p.tt_se_s);
    if (std::isfinite(p.tt_s) && !(p.tt_s >= 0.0)) throw Bad("model.tt_s.value must not be negative (seconds)");
    if (!(p.params.is_a > 0.0)) throw Bad("model.is_a.value must be positive");
    if (!(p.params.n > 0.0)) throw Bad("model.n.value must be positive");
    if (!(p.params.rs_ohm >= 0.0)) throw Bad("model.rs_ohm.value must not be negative");
    if (doc.contains("temperature_law")) {
      const Json& law = doc.at("temperature_law");
      if (!law.is_object()) throw Bad("temperature_law must be an object {\"eg_ev\":..., \"xti\":...}");
      if (law.contains("eg_ev")) p.law.eg_ev = number_at(law, "eg_ev", "temperature_law");
      if (law.contains("xti")) p.law.xti = number_at(law, "xti", "temperature_law");
      if (law.contains("trs1_per_k")) p.law.trs1_per_k = number_at(law, "trs1_per_k", "temperature_law");
      if (law.contains("trs2_per_k2")) p.law.trs2_per_k2 = number_at(law, "trs2_per_k2", "temperature_law");
      if (!(p.law.eg_ev > 0.0)) throw Bad("temperature_law.eg_ev must be positive (eV)");
    }
    if (doc.contains("pin") && doc.at("pin").is_object()) {
      const Json& pin = doc.at("pin");
      PinPart pp;
      pp.law.tau_s = number_at(pin, "tau_s", "pin");
      pp.law.k_ohm_a_x = number_at(pin, "k_ohm_a_x", "pin");
      if (pin.contains("n")) pp.law.n = number_at(pin, "n", "pin");
      if (pin.contains("r0_ohm")) pp.law.r0_ohm = number_at(pin, "r0_ohm", "pin");
      if (pin.contains("x")) pp.law.x = number_at(pin, "x", "pin");
      if (pin.contains("ct_f")) pp.ct_f = number_at(pin, "ct_f", "pin");
      if (pin.contains("rp_ohm")) pp.rp_ohm = number_at(pin, "rp_ohm", "pin");
      if (!(pp.law.tau_s > 0.0) || !(pp.law.k_ohm_a_x > 0.0)) throw Bad("pin.tau_s and pin.k_ohm_a_x must be positive");
      p.pin = pp;
    }
    if (doc.contains("fit") && doc.at("fit").is_object()) {
      const Json& fit = doc.at("fit");
      if (fit.contains("rms_residual")) p.rms_residual = number_at(fit, "rms_residual", "fit");
      if (fit.contains("points_used") && fit.at("points_used").is_number_unsigned())
        p.points_used = fit.at("points_used").get<std::size_t>();
    }
    if (version != 1 && doc.contains("covariance")) read_covariance(doc.at("covariance"), model, p);
    return p;
  } catch (const Json::exception& e) {
    if (why) *why = std::string("not valid JSON: ") + e.what();
  } catch (const JsonLimitError& e) {
    if (why) *why = e.what();
  } catch (const Bad& e) {
    if (why) *why = e.what();
  }
  return std::nullopt;
}

PartModel part_model_from_fit(const FitResult& fit, std::string part_label, std::string lot, std::string run_id) {
  PartModel m;
  m.part_label = std::move(part_label);
  m.lot = std::move(lot);
  m.run_id = std::move(run_id);
  m.temp_k = fit.temp_k;
  m.params = fit.params();
  m.is_se_a = fit.is_a.std_error;
  m.n_se = fit.n.std_error;
  m.rs_se_ohm = fit.rs_ohm.std_error;
  m.rms_residual = fit.rms_residual;
  m.points_used = fit.points_used;
  // The forward fit's covariance, when it has a whole one.
  bool whole = !fit.parameter_names.empty() && fit.covariance.size() == fit.parameter_names.size();
  for (const auto& row : fit.covariance) {
    whole = whole && row.size() == fit.parameter_names.size();
    for (double x : row) whole = whole && std::isfinite(x);
  }
  if (whole) {
    m.covariance_names = fit.parameter_names;
    m.covariance = fit.covariance;
    std::string names;
    for (const auto& name : m.covariance_names) names += (names.empty() ? "" : ", ") + name;
    m.covariance_source = "forward fit: " + names;
  }
  return m;
}

}  // namespace junco::fitting
