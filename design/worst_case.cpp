#include "design/worst_case.hpp"

#include <cmath>
#include <limits>

namespace junco::fitting {

namespace {

using Json = nlohmann::json;

bool takes(const DesignCalculator& c, const std::string& key) {
  for (const auto& s : c.inputs)
    if (s.key == key) return true;
  return false;
}

// The value an input has in this run: given, else the table's default.
std::optional<double> input_value(const DesignCalculator& c, const Json& inputs, const std::string& key) {
  if (inputs.is_object() && inputs.contains(key) && inputs[key].is_number()) return inputs[key].get<double>();
  for (const auto& s : c.inputs)
    if (s.key == key && s.fallback) return *s.fallback;
  return std::nullopt;
}

// Every vertex of the tolerance box, as input overrides.
std::vector<Json> corner_list(const DesignCalculator& c, const Json& inputs, const WorstCaseCorners& w) {
  std::vector<Json> out{Json::object()};
  const auto expand = [&out](const std::string& key, const std::vector<double>& values) {
    std::vector<Json> next;
    for (const auto& corner : out)
      for (double v : values) {
        Json k = corner;
        k[key] = v;
        next.push_back(std::move(k));
      }
    out = std::move(next);
  };
  if (!w.temps_k.empty()) expand("temp_k", w.temps_k);
  if (w.supply_tol > 0 && takes(c, "supply_v"))
    if (const auto v = input_value(c, inputs, "supply_v"); v && std::isfinite(*v) && *v > 0)
      expand("supply_v", {*v * (1 - w.supply_tol), *v * (1 + w.supply_tol)});
  if (w.resistor_tol > 0)
    for (const auto& key : worst_case_resistor_keys())
      if (takes(c, key))
        if (const auto v = input_value(c, inputs, key); v && std::isfinite(*v) && *v > 0)
          expand(key, {*v * (1 - w.resistor_tol), *v * (1 + w.resistor_tol)});
  return out;
}

}  // namespace

const std::vector<std::string>& worst_case_resistor_keys() {
  static const std::vector<std::string> keys{"bias_resistor_ohm", "dc_return_ohm"};
  return keys;
}

Json design_worst_case(const std::string& calculator, const std::vector<DesignPart>& parts, const Json& inputs,
                       const WorstCaseCorners& w) {
  const DesignCalculator* calc = find_design_calculator(calculator);
  if (!calc) {
    run_design(calculator, nullptr, inputs);  // throws the one "unknown calculator" error
    return nullptr;
  }
  if (!calc->needs_part && !calc->takes_part) throw DesignInputError("calculator", "the " + calculator + " calculator needs no part: nothing varies over a lot");
  for (const char* key : {"supply_tol", "resistor_tol"}) {
    const double t = std::string(key) == "supply_tol" ? w.supply_tol : w.resistor_tol;
    if (!(t >= 0 && t <= 0.5)) throw DesignInputError(key, std::string(key) + ": must be a ratio in [0, 0.5] (0.05 is 5 %)");
  }
  for (double t : w.temps_k)
    if (!(t > 0 && std::isfinite(t))) throw DesignInputError("temps_k", "temps_k: every temperature must be > 0 K");
  if (parts.empty()) throw DesignInputError("lot", "the lot has no fitted part");
  const auto corners = corner_list(*calc, inputs, w);

  struct Extreme {
    double value = std::numeric_limits<double>::quiet_NaN();
    std::size_t part = 0;
    Json corner;
  };
  std::vector<std::string> keys;
  Json lines = Json::array();
  std::vector<Extreme> lo, hi;
  Json not_achievable = Json::array(), failures = Json::array();
  long not_achievable_count = 0, evaluations = 0;
  for (std::size_t p = 0; p < parts.size(); ++p) {
    DesignPart part = parts[p];
    part.cov = {};  // the lot's spread is the parts themselves: no propagation per part
    for (const auto& corner : corners) {
      Json in = inputs.is_object() ? inputs : Json::object();
      for (const auto& [k, v] : corner.items()) in[k] = v;
      const Json a = run_design(calculator, &part, in);
      ++evaluations;
      if (!a["achievable"].get<bool>()) {
        if (++not_achievable_count <= 20)
          not_achievable.push_back({{"part", part.label}, {"part_index", p}, {"corner", corner}, {"reason", a["reason"]}});
        continue;
      }
      for (const auto& f : a["failures"])
        if (failures.size() < 20) failures.push_back({{"part", part.label}, {"part_index", p}, {"corner", corner}, {"failure", f}});
      for (const auto& l : a["result"]) {
        if (!l["value"].is_number()) continue;
        const std::string key = l["key"].get<std::string>();
        std::size_t j = 0;
        while (j < keys.size() && keys[j] != key) ++j;
        if (j == keys.size()) {
          keys.push_back(key);
          lines.push_back({{"key", key}, {"label", l["label"]}, {"unit", l["unit"]}});
          lo.emplace_back();
          hi.emplace_back();
        }
        const double v = l["value"].get<double>();
        if (!(v >= lo[j].value)) lo[j] = {v, p, corner};  // NaN start: the first value sets both
        if (!(v <= hi[j].value)) hi[j] = {v, p, corner};
      }
    }
  }
  const auto extreme = [&parts](const Extreme& e) {
    return Json{{"value", e.value}, {"part", parts[e.part].label}, {"part_index", e.part}, {"corner", e.corner}};
  };
  for (std::size_t j = 0; j < keys.size(); ++j) {
    lines[j]["min"] = extreme(lo[j]);
    lines[j]["max"] = extreme(hi[j]);
  }
  Json corner_keys = Json::array();
  for (const auto& [k, v] : corners.front().items()) corner_keys.push_back(k);
  return {{"calculator", calculator},
          {"parts", parts.size()},
          {"corners", corners.size()},
          {"corner_inputs", corner_keys},
          {"evaluations", evaluations},
          {"result", lines},
          {"not_achievable", not_achievable},
          {"not_achievable_count", not_achievable_count},
          {"failures", failures}};
}

}  // namespace junco::fitting
