// The design calculators as one table. Each calculator names its inputs
// (SI units, defaults, allowed range), runs on a DesignPart and answers with
// named, labelled values. `junco design` builds its options and help from
// this table and the daemon's part.design method validates its params with
// it, so the command line and the socket take the same inputs and give the
// same answers.
//
// Inputs and answers are JSON documents (schema/api/part.design.json):
//   inputs  {"supply_v": 5, "bias_resistor_ohm": 390, "switch": "series", ...}
//   answer  {"calculator", "part", "assumed": [line...], "result": [line...],
//            "achievable", "reason", "warnings", "failures"}
//   line    {"key", "label", "unit", "value"} (+ "text" for a choice, or for
//            a value with no number such as "choke (no AC shunt)")
//   result lines of a part with a covariance also carry "std_error" (null:
//   not determined) and "nonlinear": true where the linear law is not to be
//   trusted to 10 %; the answer's "uncertainty" says how (or why there is none).
// Every input the calculator used appears in "assumed", defaults included.
#pragma once

#include "fitting/diode.hpp"
#include "design/switch.hpp"
#include "fitting/pin_diode.hpp"
#include "design/uncertainty.hpp"
#include "fitting/temperature.hpp"

#include <nlohmann/json.hpp>

#include <optional>
#include <utility>
#include <stdexcept>
#include <string>
#include <vector>

namespace junco::fitting {

// The part a calculator works on: a fit (from a model document, the store or
// explicit values) and, when known, its junction capacitance law. dc holds at
// temp_k (the fit's temperature, SPICE TNOM); a calculator asked for another
// junction temperature (input temp_k) moves Is and RS there by law
// (temperature.hpp) before it computes.
struct DesignPart {
  std::string label = "(explicit parameters)";
  DiodeParams dc;
  double temp_k = 300.15;  // temperature at which dc holds (TNOM)
  TemperatureLaw law;      // EG, XTI (SPICE defaults unless given), TRS1/TRS2
  JunctionCap cap;  // cj0_f = 0: unknown
  double tt_s = 0.0;  // transit time TT (diffusion charge TT·Id); 0 = none or unknown
  JunctionCharge charge() const { return {cap, tt_s}; }
  // A PIN part: loss uses its law Z(ω) = R0 + rd/(1 + jωτ) + R_I·(1 + jωτ − x)/(1 + jωτ)
  // and isolation CT ∥ Rp (fitting/pin_diode.hpp) in place of rd, Cj(V), TT.
  std::optional<PinPart> pin;
  // The parameters' covariance (design_uncertainty.hpp), at temp_k. With it
  // every result line carries std_error; empty (explicit parameters, or a
  // source with none): the answer says why (cov.source, default "explicit
  // parameters").
  ParameterCovariance cov;
};

enum class InputRange { any, positive, non_negative };

struct DesignInputSpec {
  std::string key;     // JSON key, SI unit in the name ("supply_v")
  std::string option;  // command-line option without the dashes ("supply")
  std::string unit;    // "V", "A", "Ohm", "Hz", "H", "W", "F", "dB", "%", "" (none)
  std::string label;   // as printed ("supply")
  std::optional<double> fallback;      // nullopt and !optional: required
  bool optional = false;               // may be absent, with no default (the calculator decides)
  InputRange range = InputRange::any;
  std::vector<std::string> choices;    // non-empty: a text choice, choices[0] the default
  std::string infinite_text;           // how an infinite fallback reads ("choke (no AC shunt)")
};

struct DesignCalculator {
  std::string name;      // "op", "bias-r", ...
  std::string synopsis;  // one line for --help
  bool needs_part = true;
  std::vector<DesignInputSpec> inputs;  // the part overrides (part_inputs()) come on top when needs_part
  // needs_part false, and yet a part may be given: the calculator answers
  // without one and refines its answer with it (headroom: the stored charge
  // TT or a PIN part's lifetime τ). The part overrides come on top; without a
  // part only tt_s and tau_s of them are taken.
  bool takes_part = false;
  bool uses_part(bool given) const { return needs_part || (takes_part && given); }
};

// A bad or missing input, naming it (field = the JSON key).
class DesignInputError : public std::invalid_argument {
 public:
  DesignInputError(std::string field, const std::string& message)
      : std::invalid_argument(message), field_(std::move(field)) {}
  const std::string& field() const { return field_; }

 private:
  std::string field_;
};

const std::vector<DesignCalculator>& design_calculators();
const DesignCalculator* find_design_calculator(const std::string& name);

// Inputs every part-based calculator also takes: they override the part's
// stored charge (cj0_f, vj_v, m, tt_s) and temperature law (eg_ev, xti,
// trs1_per_k), and set the junction temperature (temp_k; default the part's).
const std::vector<DesignInputSpec>& design_part_inputs();

// Runs a calculator. part may be null only for calculators that do not need
// one. Throws DesignInputError for an unknown calculator or input, a missing
// required one, a value of the wrong type or outside its range. A target that
// cannot be met is not an error: achievable = false and reason say why.
// Inputs given by an old name (rbias_ohm, rg_ohm) are read as the new one with a
// warning in the answer (design_renamed_inputs: {old, new}).
nlohmann::json run_design(const std::string& calculator, const DesignPart* part, const nlohmann::json& inputs);
const std::vector<std::pair<std::string, std::string>>& design_renamed_inputs();

// A calculator as a function of the part's covariance parameters (in
// part.cov.names' order; one value per result line of the nominal answer,
// keys result_keys; NaN where a line has none), for the propagation and the
// Monte Carlo check (design_uncertainty.hpp). nominal: the answer at the
// part's own values, when known; iterative calculators (bias-for-thd) start
// their search at its result there (a perturbed answer lies near it).
DesignFunction design_function(const std::string& calculator, const DesignPart& part, const nlohmann::json& inputs,
                               const std::vector<std::string>& result_keys, const nlohmann::json& nominal = nullptr);
// The part's value of a covariance parameter (is_a, n, rs_ohm, rsh_ohm,
// cj0_f, vj_v, m, tt_s); throws DesignInputError for another name.
double design_part_parameter(const DesignPart& part, const std::string& name);

// The part as the answer reports it (SPICE names, SI units): its parameters
// at its own temp_k, with the temperature law (eg_ev, xti, trs1_per_k,
// trs2_per_k2). The answer's "junction" object holds what the calculator
// computed with: {temp_k, is_a, n, rs_ohm} at the junction temperature.
nlohmann::json design_part_json(const DesignPart& part);

// The inverse, for a part given by value (the socket's design.run): is_a > 0,
// n > 0 and rs_ohm >= 0 required; label, temp_k > 0, cj0_f >= 0 (or null:
// unknown), vj_v > 0, m > 0, tt_s >= 0, eg_ev > 0, xti, trs1_per_k, trs2_per_k2
// optional (as the inputs' overrides). So an answer's "part" reads back
// as the same part. Throws DesignInputError naming "part.KEY".
DesignPart design_part_from_json(const nlohmann::json& part);

}  // namespace junco::fitting
