// Fuzz entry: design/calculators.hpp run_design, the code behind
// juncod's part.design and design.run (inputs from any client) and `junco
// design`. The bytes are JSON: {"calculator": NAME, "part": {is_a, n, rs_ohm,
// temp_k, cj0_f, ...}, "inputs": {...}} (comments allowed); the part is read
// by design_part_from_json, as design.run reads it. Only DesignInputError may
// escape, and one about the part names a part.KEY field. The answer's part
// reads back as the same part.
// Invariants on an answer: every input the calculator has is echoed in
// "assumed"; a target that cannot be met says why; the answer serialises;
// and for the operating point, Kirchhoff's voltage law: I·(Rb + Rr) + Vd = Vs
// with 0 <= I and 0 <= Vd <= Vs (relative 1e-6).
#include "tests/fuzz/entries.hpp"

#include "design/calculators.hpp"

#include <cmath>

namespace junco::fuzz {

void design(std::string_view data) {
  using Json = nlohmann::json;
  const Json j = Json::parse(data.begin(), data.end(), nullptr, /*allow_exceptions=*/false, /*ignore_comments=*/true);
  if (j.is_discarded() || !j.is_object()) return;
  const std::string name = j.contains("calculator") && j["calculator"].is_string() ? j["calculator"].get<std::string>() : "op";
  fitting::DesignPart part;
  part.dc = {2.5e-9, 1.85, 0.7};  // an invented part, unless the input gives one
  if (j.contains("part")) {
    try {
      part = fitting::design_part_from_json(j["part"]);  // as juncod's design.run reads it
    } catch (const fitting::DesignInputError& e) {
      require(e.field().rfind("part", 0) == 0, std::string("a bad part named another field: ") + e.what());
      return;
    }
  }
  const Json inputs = j.contains("inputs") ? j["inputs"] : Json::object();
  Json a;
  try {
    a = fitting::run_design(name, &part, inputs);
  } catch (const fitting::DesignInputError&) {
    return;
  }
  const auto* calc = fitting::find_design_calculator(name);
  require(calc != nullptr, "an unknown calculator answered");
  require(a["assumed"].size() == calc->inputs.size(), "the answer does not echo every input of " + name);
  if (!a["achievable"].get<bool>()) require(!a["reason"].get<std::string>().empty(), name + ": not achievable without a reason");
  if (name == "op") {
    const auto value = [&](const Json& lines, const char* key) {
      for (const auto& l : lines)
        if (l["key"] == key) return l["value"].is_number() ? l["value"].get<double>() : std::nan("");
      return std::nan("");
    };
    const double vs = value(a["assumed"], "supply_v"), r = value(a["assumed"], "bias_resistor_ohm") + value(a["assumed"], "dc_return_ohm");
    const double i = value(a["result"], "bias_current_a"), vd = value(a["result"], "diode_voltage_v");
    if (std::isfinite(i) && std::isfinite(vd) && std::isfinite(r * i)) {
      require(i >= 0 && vd >= 0 && vd <= vs * (1 + 1e-6), "op: a bias current or diode voltage outside 0..supply");
      require(std::abs(i * r + vd - vs) <= 1e-6 * vs + 1e-12, "op: I·(Rb + Rr) + Vd differs from the supply");
    }
  }
  if (a.contains("part")) {  // the answer's part reads back as the same part (design.run's promise)
    try {
      require(fitting::design_part_json(fitting::design_part_from_json(a["part"])) == a["part"], "the answer's part reads back differently");
    } catch (const fitting::DesignInputError& e) {
      require(false, std::string("the answer's part does not read back: ") + e.what());
    }
  }
  (void)a.dump();
}

}  // namespace junco::fuzz
