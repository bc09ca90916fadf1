#include "fitting/design_calculators.hpp"

#include "fitting/design_bias.hpp"
#include "fitting/design_distortion.hpp"
#include "fitting/transfer.hpp"

#include <cmath>
#include <functional>
#include <limits>
#include <map>
#include <numbers>

namespace junco::fitting {

namespace {

using Json = nlohmann::json;
constexpr double inf = std::numeric_limits<double>::infinity();

DesignInputSpec required(std::string key, std::string option, std::string unit, std::string label, InputRange range) {
  return {std::move(key), std::move(option), std::move(unit), std::move(label), std::nullopt, false, range, {}, {}};
}
DesignInputSpec with_default(std::string key, std::string option, std::string unit, std::string label, double fallback,
                             InputRange range, std::string infinite_text = {}) {
  return {std::move(key), std::move(option), std::move(unit), std::move(label), fallback, false, range, {}, std::move(infinite_text)};
}
DesignInputSpec optional_input(std::string key, std::string option, std::string unit, std::string label, InputRange range) {
  return {std::move(key), std::move(option), std::move(unit), std::move(label), std::nullopt, true, range, {}, {}};
}
DesignInputSpec switch_input() { return {"switch", "switch", "", "switch", std::nullopt, false, InputRange::any, {"series", "shunt"}, {}}; }

// Circuit values shared by the AC calculators.
std::vector<DesignInputSpec> circuit_inputs(bool with_freq) {
  std::vector<DesignInputSpec> v{with_default("rg_ohm", "rg", "Ohm", "source Rg", 50.0, InputRange::positive),
                                 with_default("rl_ohm", "rl", "Ohm", "load RL", 50.0, InputRange::positive)};
  if (with_freq) {
    v.push_back(with_default("freq_hz", "freq", "Hz", "frequency", 10e6, InputRange::positive));
    v.push_back(with_default("ls_h", "ls", "H", "series L", 0.0, InputRange::non_negative));
  }
  return v;
}

// The distortion calculators' own: the signal frequency (it matters with
// stored charge) and the topology.
std::vector<DesignInputSpec> distortion_inputs() {
  return {with_default("freq_hz", "freq", "Hz", "frequency", 10e6, InputRange::positive), switch_input()};
}

std::vector<DesignInputSpec> join(std::vector<DesignInputSpec> a, const std::vector<DesignInputSpec>& b) {
  a.insert(a.end(), b.begin(), b.end());
  return a;
}

// What an iterative calculator's nominal run leaves for its perturbed runs
// (the uncertainty's evaluations) to start from: a perturbed answer lies near
// the nominal one. NaN: nothing.
struct SolveHint {
  double u = std::numeric_limits<double>::quiet_NaN();         // distortion: the blocks' offset
  double offset_v = std::numeric_limits<double>::quiet_NaN();  // distortion: the start's offset
  double slope = std::numeric_limits<double>::quiet_NaN();     // bias-for-thd: d ln THD / d ln I at the answer
};

// What one run of a calculator sees: the checked inputs, and the answer it builds.
class Run {
 public:
  Run(const DesignCalculator& calc, const DesignPart* part, const Json& inputs) : calc_(calc), part_(part) {
    if (!inputs.is_null() && !inputs.is_object())
      throw DesignInputError("inputs", std::string("inputs must be an object, not ") + inputs.type_name());
    std::vector<const DesignInputSpec*> specs;
    for (const auto& s : calc.inputs) specs.push_back(&s);
    if (calc.needs_part)
      for (const auto& s : design_part_inputs()) specs.push_back(&s);
    if (inputs.is_object())
      for (const auto& [key, value] : inputs.items()) {
        (void)value;
        bool known = false;
        for (const auto* s : specs) known = known || s->key == key;
        if (!known) throw DesignInputError(key, key + ": not an input of the " + calc.name + " calculator");
      }
    for (const auto* s : specs) read(*s, inputs);
    answer_["calculator"] = calc.name;
    answer_["assumed"] = Json::array();
    answer_["result"] = Json::array();
    answer_["achievable"] = true;
    answer_["reason"] = "";
    answer_["warnings"] = Json::array();
    answer_["failures"] = Json::array();
    if (calc.needs_part) {
      if (!part_) throw DesignInputError("part", "the " + calc.name + " calculator needs a part");
      part_copy_ = *part_;
      if (has("cj0_f")) part_copy_.cap.cj0_f = number("cj0_f");
      if (has("vj_v")) part_copy_.cap.vj_v = number("vj_v");
      if (has("m")) part_copy_.cap.m = number("m");
      if (has("tt_s")) part_copy_.tt_s = number("tt_s");
      if (has("eg_ev")) part_copy_.law.eg_ev = number("eg_ev");
      if (has("xti")) part_copy_.law.xti = number("xti");
      if (has("trs1_per_k")) part_copy_.law.trs1_per_k = number("trs1_per_k");
      if (!(part_copy_.dc.is_a > 0 && part_copy_.dc.n > 0 && part_copy_.dc.rs_ohm >= 0))
        throw DesignInputError("part", "the part needs Is > 0, n > 0 and Rs >= 0");
      answer_["part"] = design_part_json(part_copy_);
      // The calculators compute at the junction temperature: the part's
      // parameters moved there by the SPICE law (the same one a simulator
      // applies to the exported card).
      const double junction_k = has("temp_k") ? number("temp_k") : part_copy_.temp_k;
      part_copy_.dc = diode_at_temperature(part_copy_.dc, part_copy_.temp_k, junction_k, part_copy_.law);
      if (part_copy_.cap.cj0_f > 0) {
        const auto d = depletion_at_temperature(part_copy_.cap.cj0_f, part_copy_.cap.vj_v, part_copy_.cap.m, part_copy_.temp_k, junction_k);
        part_copy_.cap.cj0_f = d.cj0_f;
        part_copy_.cap.vj_v = d.vj_v;
      }
      if (!(part_copy_.dc.rs_ohm >= 0))
        throw DesignInputError("temp_k", "temp_k: TRS makes RS negative at " + std::to_string(junction_k) + " K");
      part_copy_.temp_k = junction_k;
      answer_["junction"] = {{"temp_k", junction_k}, {"is_a", part_copy_.dc.is_a}, {"n", part_copy_.dc.n}, {"rs_ohm", part_copy_.dc.rs_ohm}};
      if (part_copy_.cap.cj0_f > 0) {
        answer_["junction"]["cj0_f"] = part_copy_.cap.cj0_f;
        answer_["junction"]["vj_v"] = part_copy_.cap.vj_v;
      }
      answer_["junction"]["tt_s"] = part_copy_.tt_s;
    }
  }

  const DesignPart& part() const { return part_copy_; }
  bool has(const std::string& key) const { return numbers_.count(key) != 0; }
  double number(const std::string& key) const { return numbers_.at(key); }
  const std::string& text(const std::string& key) const { return texts_.at(key); }
  SwitchKind kind() const { return text("switch") == "series" ? SwitchKind::series : SwitchKind::shunt; }

  // Echoes an input into "assumed" (in the table's order when called in order).
  void assumed(const std::string& key) {
    const DesignInputSpec* spec = nullptr;
    for (const auto& s : calc_.inputs) spec = s.key == key ? &s : spec;
    for (const auto& s : design_part_inputs()) spec = s.key == key ? &s : spec;
    Json line{{"key", key}, {"label", spec->label}, {"unit", spec->unit}};
    if (!spec->choices.empty()) {
      line["value"] = nullptr;
      line["text"] = text(key);
    } else if (!has(key)) {
      line["value"] = nullptr;
      line["text"] = "not given";
    } else if (!std::isfinite(number(key))) {
      line["value"] = nullptr;
      line["text"] = spec->infinite_text;
    } else {
      line["value"] = number(key);
    }
    answer_["assumed"].push_back(std::move(line));
  }
  void assume_all() {
    for (const auto& s : calc_.inputs) assumed(s.key);
    if (!calc_.needs_part) return;
    for (const char* key : {"temp_k", "eg_ev", "xti", "trs1_per_k", "tt_s"})
      if (has(key)) assumed(key);
  }
  void result(const std::string& key, const std::string& label, double value, const std::string& unit) {
    answer_["result"].push_back({{"key", key}, {"label", label}, {"unit", unit}, {"value", std::isfinite(value) ? Json(value) : Json(nullptr)}});
  }
  void not_achievable(const std::string& why) {
    answer_["achievable"] = false;
    answer_["reason"] = why;
  }
  // The nominal answer's value of a result line, when this run is one of the
  // uncertainty's perturbed evaluations (NaN otherwise): an iterative
  // calculator starts its search there, as the perturbed answer lies near it.
  void set_nominal(const Json* nominal) { nominal_ = nominal; }
  // The nominal run writes the hint (writes = true), the perturbed ones read it.
  void set_hint(SolveHint* hint, bool writes) {
    hint_ = hint;
    hint_writes_ = writes;
  }
  SolveHint read_hint() const { return hint_ && !hint_writes_ ? *hint_ : SolveHint{}; }
  void write_hint(const SolveHint& h) {
    if (hint_ && hint_writes_) *hint_ = h;
  }
  double nominal_value(const std::string& key) const {
    if (nominal_)
      for (const auto& l : (*nominal_)["result"])
        if (l["key"] == key && l["value"].is_number()) return l["value"].get<double>();
    return std::numeric_limits<double>::quiet_NaN();
  }
  void warn(const std::string& w) { answer_["warnings"].push_back(w); }
  void fail(const std::string& f) { answer_["failures"].push_back(f); }
  Json take() { return std::move(answer_); }

 private:
  void read(const DesignInputSpec& s, const Json& inputs) {
    const bool given = inputs.is_object() && inputs.contains(s.key) && !inputs.at(s.key).is_null();
    if (!s.choices.empty()) {
      std::string t = s.choices.front();
      if (given) {
        const Json& v = inputs.at(s.key);
        if (!v.is_string()) throw DesignInputError(s.key, s.key + ": must be a string");
        t = v.get<std::string>();
        bool ok = false;
        std::string list;
        for (const auto& c : s.choices) {
          ok = ok || c == t;
          list += (list.empty() ? "" : " or ") + c;
        }
        if (!ok) throw DesignInputError(s.key, s.key + ": must be " + list + ", got '" + t + "'");
      }
      texts_[s.key] = t;
      return;
    }
    if (!given) {
      if (s.fallback) numbers_[s.key] = *s.fallback;
      else if (!s.optional) throw DesignInputError(s.key, s.key + ": missing (required by the " + calc_.name + " calculator)");
      return;
    }
    const Json& v = inputs.at(s.key);
    if (!v.is_number()) throw DesignInputError(s.key, s.key + ": must be a number, not " + std::string(v.type_name()));
    const double x = v.get<double>();
    if (!std::isfinite(x)) throw DesignInputError(s.key, s.key + ": must be finite");
    if (s.range == InputRange::positive && !(x > 0)) throw DesignInputError(s.key, s.key + ": must be > 0");
    if (s.range == InputRange::non_negative && !(x >= 0)) throw DesignInputError(s.key, s.key + ": must be >= 0");
    numbers_[s.key] = x;
  }

  const DesignCalculator& calc_;
  const DesignPart* part_;
  DesignPart part_copy_;
  std::map<std::string, double> numbers_;
  std::map<std::string, std::string> texts_;
  Json answer_;
  const Json* nominal_ = nullptr;
  SolveHint* hint_ = nullptr;
  bool hint_writes_ = false;
};

// ---- the calculators --------------------------------------------------------

void op(Run& r) {
  r.assume_all();
  const auto& p = r.part();
  const auto o = operating_point(p.dc, r.number("supply_v"), r.number("rbias_ohm"), r.number("rreturn_ohm"), p.temp_k);
  r.result("bias_current_a", "bias current", o.i_a, "A");
  r.result("diode_voltage_v", "diode voltage", o.vd_v, "V");
  r.result("resistor_drop_v", "resistor drop", o.v_rb_v, "V");
  r.result("rd_ohm", "rd (small-sig)", o.rd_ohm, "Ohm");
}

void bias_r(Run& r) {
  r.assume_all();
  const auto& p = r.part();
  std::string why;
  const auto rb = bias_resistor_ohm(p.dc, r.number("supply_v"), r.number("current_a"), r.number("rreturn_ohm"), p.temp_k, &why);
  if (!rb) return r.not_achievable(why);
  r.result("bias_resistor_ohm", "bias resistor", *rb, "Ohm");
  r.result("diode_voltage_v", "diode voltage", diode_voltage_v(p.dc, r.number("current_a"), p.temp_k), "V");
}

Parasitics series_l(const Run& r) { return {r.number("ls_h"), 0.0}; }

void loss(Run& r) {
  r.assume_all();
  const auto& p = r.part();
  const double db = on_state_loss_db(r.kind(), p.dc, p.charge(), r.number("current_a"), r.number("rg_ohm"),
                                     r.number("rl_ohm"), r.number("freq_hz"), series_l(r), p.temp_k);
  if (r.kind() == SwitchKind::series) r.result("loss_db", "insertion loss (biased series switch)", db, "dB");
  else r.result("loss_db", "isolation (biased shunt switch)", db, "dB");
  if (p.charge().any()) {
    const double w = 2.0 * std::numbers::pi * r.number("freq_hz");
    const auto y = junction_admittance_s(p.dc, p.charge(), r.number("current_a"), r.number("freq_hz"), p.temp_k);
    r.result("junction_c_f", "junction C at the bias (Cj(V) + TT*gd)", y.imag() / w, "F");
  }
}

void bias_for_loss(Run& r) {
  r.assume_all();
  const auto& p = r.part();
  std::string why;
  const auto i = bias_for_loss_a(r.kind(), p.dc, p.charge(), r.number("target_db"), r.number("rg_ohm"),
                                 r.number("rl_ohm"), r.number("freq_hz"), series_l(r), p.temp_k, &why);
  if (!i) return r.not_achievable(why);
  r.result("bias_current_a", "bias current", *i, "A");
  if (!r.has("supply_v")) return;
  const auto rb = bias_resistor_ohm(p.dc, r.number("supply_v"), *i, 0.0, p.temp_k, &why);
  if (!rb) return r.not_achievable(why);
  r.result("bias_resistor_ohm", "bias resistor (or less)", *rb, "Ohm");
}

void headroom(Run& r) {
  r.assume_all();
  const auto h = drive_headroom(r.number("amplitude_v"), r.number("rl_ohm"), r.number("rreturn_ohm"), r.number("floor_a"));
  r.result("signal_peak_a", "signal peak through the diode", h.signal_peak_a, "A");
  r.result("min_bias_a", "minimum bias (series switch stays forward-biased)", h.min_bias_a, "A");
}

DistortionInput distortion_input(const Run& r) {
  DistortionInput in;
  in.part = r.part().dc;
  in.temp_k = r.part().temp_k;
  in.charge = r.part().charge();
  in.kind = r.kind();
  in.freq_hz = r.number("freq_hz");
  in.source_peak_v = r.number("amplitude_v");
  in.rg_ohm = r.number("rg_ohm");
  in.rl_ohm = r.number("rl_ohm");
  return in;
}

void harmonics(Run& r, const DistortionResult& d) {
  r.result("load_peak_v", "load fundamental (peak)", d.load_peak_v, "V");
  r.result("hd2_dbc", "HD2", d.load.dbc[2], "dBc");
  r.result("hd3_dbc", "HD3", d.load.dbc[3], "dBc");
  r.result("thd_pct", "THD", 100 * d.load.thd, "%");
  r.result("thd_db", "THD", d.load.thd_db(), "dB");
  r.result("min_current_a", "diode current, trough", d.min_current_a, "A");
  r.result("max_current_a", "diode current, crest", d.max_current_a, "A");
  if (d.min_junction_current_a <= 0) r.warn("the diode turns off in the trough (clipping); raise the bias");
  else if (d.min_current_a < 0)
    r.warn("the diode current reverses in the trough while stored charge keeps the junction on (not clipping)");
}

void distortion(Run& r) {
  r.assume_all();
  auto in = distortion_input(r);
  in.bias_i_a = r.number("current_a");
  const SolveHint h = r.read_hint();
  in.start_u = h.u;
  in.start_offset_v = h.offset_v;
  const auto d = solve_distortion(in);
  r.write_hint({d.block_offset_v, d.periods > 0 ? d.start_offset_v : std::numeric_limits<double>::quiet_NaN(), h.slope});
  harmonics(r, d);
}

void bias_for_thd(Run& r) {
  r.assume_all();
  auto in = distortion_input(r);
  std::string why;
  // One search that also hands back the distortion at the answer; started at
  // the nominal answer in the uncertainty's perturbed evaluations.
  const SolveHint h = r.read_hint();
  in.start_u = h.u;
  in.start_offset_v = h.offset_v;
  const auto i = solve_bias_for_thd(in, r.number("target_pct") / 100.0, &why, r.nominal_value("least_bias_a"), h.slope);
  if (!i) return r.not_achievable(why);
  r.write_hint({i->at.block_offset_v, i->at.periods > 0 ? i->at.start_offset_v : std::numeric_limits<double>::quiet_NaN(), i->slope});
  r.result("least_bias_a", "least bias", i->bias_a, "A");
  harmonics(r, i->at);
}

void isolation(Run& r) {
  const auto& p = r.part();
  if (!(p.cap.cj0_f > 0))
    throw DesignInputError("cj0_f", "isolation needs the junction capacitance: give cj0_f (--cj), or a model that has it");
  r.assume_all();
  const double cj = junction_capacitance_f(p.cap, -r.number("reverse_v"));
  const auto z = diode_off_impedance(p.dc, p.charge(), r.number("reverse_v"), r.number("freq_hz"),
                                     {r.number("ls_h"), r.number("rr_ohm")}, p.temp_k);
  const double db = switch_loss_db(r.kind(), z, r.number("rg_ohm"), r.number("rl_ohm"));
  r.result("cj_f", "Cj at the reverse bias", cj, "F");
  if (r.kind() == SwitchKind::series) r.result("isolation_db", "isolation (unbiased series switch)", db, "dB");
  else r.result("isolation_db", "insertion loss (unbiased shunt switch)", db, "dB");
}

void power(Run& r) {
  r.assume_all();
  const auto& p = r.part();
  const double rb = r.number("rbias_ohm");
  const auto o = operating_point(p.dc, r.number("supply_v"), rb, 0.0, p.temp_k);
  const PowerLimits lim{r.has("max_diode_w") ? r.number("max_diode_w") : 0.0, r.has("max_resistor_w") ? r.number("max_resistor_w") : 0.0, 0.8};
  const auto c = check_power(o, rb, r.number("signal_peak_a"), lim);
  r.result("bias_current_a", "bias current", o.i_a, "A");
  r.result("diode_power_w", "diode power", c.diode_w, "W");
  r.result("resistor_power_w", "resistor power", c.resistor_w, "W");
  for (const auto& w : c.warnings) r.warn(w);
  for (const auto& f : c.failures) r.fail(f);
}

}  // namespace

const std::vector<DesignInputSpec>& design_part_inputs() {
  static const std::vector<DesignInputSpec> v{
      optional_input("cj0_f", "cj", "F", "zero-bias Cj", InputRange::positive),
      optional_input("vj_v", "vj", "V", "junction potential VJ", InputRange::positive),
      optional_input("m", "m", "", "grading coefficient M", InputRange::positive),
      optional_input("tt_s", "tt", "s", "transit time TT", InputRange::non_negative),
      optional_input("temp_k", "temp", "K", "junction T", InputRange::positive),
      optional_input("eg_ev", "eg", "eV", "EG", InputRange::positive),
      optional_input("xti", "xti", "", "XTI", InputRange::any),
      optional_input("trs1_per_k", "trs1", "", "TRS1 (1/K)", InputRange::any)};
  return v;
}

namespace {

// The calculators: one row each, its description and its body.
struct CalculatorRow {
  DesignCalculator calculator;
  void (*body)(Run&);
};

const std::vector<CalculatorRow>& calculator_rows() {
  using R = InputRange;
  static const std::vector<CalculatorRow> table{
      {{"op", "operating point: supply and bias resistor -> bias current and diode voltage (exact, Lambert W)", true,
       {required("supply_v", "supply", "V", "supply", R::positive), required("rbias_ohm", "rbias", "Ohm", "bias resistor", R::non_negative),
        with_default("rreturn_ohm", "rreturn", "Ohm", "DC return", 0.0, R::non_negative)}}, op},
      {{"bias-r", "bias resistor for a target current: Rb = (Vs - Vd(I))/I - Rr", true,
       {required("supply_v", "supply", "V", "supply", R::positive), required("current_a", "current", "A", "target current", R::positive),
        with_default("rreturn_ohm", "rreturn", "Ohm", "DC return", 0.0, R::non_negative)}}, bias_r},
      {{"loss", "biased-state loss at a bias current and frequency (RS, rd, Cj(V), TT): insertion loss (series) or isolation (shunt)", true,
       join({switch_input(), required("current_a", "current", "A", "bias current", R::positive)}, circuit_inputs(true))}, loss},
      {{"bias-for-loss", "bias current (and resistor, given a supply) for a target biased-state loss", true,
       join({switch_input(), required("target_db", "target", "dB", "target loss", R::positive),
             optional_input("supply_v", "supply", "V", "supply", R::positive)},
            circuit_inputs(true))}, bias_for_loss},
      {{"headroom", "least bias that keeps a series switch conducting over the signal swing", false,
       {required("amplitude_v", "amplitude", "V", "load peak", R::positive),
        with_default("rl_ohm", "rl", "Ohm", "load RL", 50.0, R::positive),
        with_default("rreturn_ohm", "rreturn", "Ohm", "DC return", inf, R::positive, "choke (no AC shunt)"),
        with_default("floor_a", "floor", "A", "trough floor", 0.0, R::non_negative)}}, headroom},
      {{"distortion",
       "HD2, HD3 and THD at a bias, amplitude and frequency (periodic steady state of the circuit with the SPICE junction: "
       "exponential diode, RS, Cj(V), TT)",
       true,
       join(join({required("current_a", "current", "A", "bias current", R::positive),
                  required("amplitude_v", "amplitude", "V", "EMF peak", R::positive)},
                 circuit_inputs(false)),
            distortion_inputs())}, distortion},
      {{"bias-for-thd", "least bias for a target THD at an amplitude and frequency", true,
       join(join({required("target_pct", "target", "%", "target THD", R::positive), required("amplitude_v", "amplitude", "V", "EMF peak", R::positive)},
                 circuit_inputs(false)),
            distortion_inputs())}, bias_for_thd},
      {{"isolation", "off state at a reverse bias and frequency (RS, Cj(V)): isolation (series) or insertion loss (shunt)", true,
       join({switch_input(), with_default("reverse_v", "reverse", "V", "reverse bias", 0.0, R::non_negative),
             with_default("rr_ohm", "rr", "Ohm", "off resistance", 0.0, R::non_negative)},
            circuit_inputs(true))}, isolation},
      {{"power", "dissipation in the part and the bias resistor, against limits (warn at 80 %, fail above)", true,
       {required("supply_v", "supply", "V", "supply", R::positive), required("rbias_ohm", "rbias", "Ohm", "bias resistor", R::non_negative),
        with_default("signal_peak_a", "signal-peak", "A", "signal peak", 0.0, R::non_negative),
        optional_input("max_diode_w", "max-diode", "W", "diode limit", R::positive),
        optional_input("max_resistor_w", "max-resistor", "W", "resistor limit", R::positive)}}, power},
  };
  return table;
}

}  // namespace

const std::vector<DesignCalculator>& design_calculators() {
  static const std::vector<DesignCalculator> calculators = [] {
    std::vector<DesignCalculator> out;
    for (const auto& row : calculator_rows()) out.push_back(row.calculator);
    return out;
  }();
  return calculators;
}

const DesignCalculator* find_design_calculator(const std::string& name) {
  for (const auto& c : design_calculators())
    if (c.name == name) return &c;
  return nullptr;
}

Json design_part_json(const DesignPart& p) {
  Json j{{"label", p.label}, {"is_a", p.dc.is_a}, {"n", p.dc.n}, {"rs_ohm", p.dc.rs_ohm}, {"temp_k", p.temp_k},
         {"eg_ev", p.law.eg_ev}, {"xti", p.law.xti}, {"trs1_per_k", p.law.trs1_per_k}, {"trs2_per_k2", p.law.trs2_per_k2}};
  if (p.cap.cj0_f > 0) {
    j["cj0_f"] = p.cap.cj0_f;
    j["vj_v"] = p.cap.vj_v;
    j["m"] = p.cap.m;
  } else {
    j["cj0_f"] = nullptr;
  }
  j["tt_s"] = p.tt_s;
  return j;
}

DesignPart design_part_from_json(const Json& j) {
  if (!j.is_object()) throw DesignInputError("part", std::string("part must be an object, not ") + j.type_name());
  static const std::map<std::string, InputRange> numbers{{"is_a", InputRange::positive},  {"n", InputRange::positive},
                                                         {"rs_ohm", InputRange::non_negative}, {"temp_k", InputRange::positive},
                                                         {"cj0_f", InputRange::non_negative}, {"vj_v", InputRange::positive},
                                                         {"m", InputRange::positive}, {"tt_s", InputRange::non_negative},
                                                         {"eg_ev", InputRange::positive},
                                                         {"xti", InputRange::any}, {"trs1_per_k", InputRange::any},
                                                         {"trs2_per_k2", InputRange::any}};
  for (const auto& [key, value] : j.items()) {
    if (key == "label") {
      if (!value.is_string()) throw DesignInputError("part.label", "part.label: must be a string");
      continue;
    }
    const auto it = numbers.find(key);
    if (it == numbers.end())
      throw DesignInputError("part." + key, "part." + key +
                                                ": not a part parameter (is_a, n, rs_ohm, temp_k, cj0_f, vj_v, m, tt_s, eg_ev, xti, "
                                                "trs1_per_k, trs2_per_k2, label)");
    if (key == "cj0_f" && value.is_null()) continue;
    const bool positive = it->second == InputRange::positive, any = it->second == InputRange::any;
    const char* need = any ? ": must be a finite number" : positive ? ": must be a number > 0" : ": must be a number >= 0";
    if (!value.is_number() || !std::isfinite(value.get<double>()) ||
        (!any && (value.get<double>() < 0 || (positive && value.get<double>() == 0))))
      throw DesignInputError("part." + key, "part." + key + need);
  }
  for (const char* key : {"is_a", "n", "rs_ohm"})
    if (!j.contains(key)) throw DesignInputError(std::string("part.") + key, std::string("part.") + key + ": missing (required)");
  DesignPart p;
  p.label = j.value("label", p.label);
  p.dc.is_a = j["is_a"].get<double>();
  p.dc.n = j["n"].get<double>();
  p.dc.rs_ohm = j["rs_ohm"].get<double>();
  if (j.contains("temp_k")) p.temp_k = j["temp_k"].get<double>();
  if (j.contains("cj0_f") && j["cj0_f"].is_number()) p.cap.cj0_f = j["cj0_f"].get<double>();
  if (j.contains("vj_v")) p.cap.vj_v = j["vj_v"].get<double>();
  if (j.contains("m")) p.cap.m = j["m"].get<double>();
  if (j.contains("tt_s")) p.tt_s = j["tt_s"].get<double>();
  if (j.contains("eg_ev")) p.law.eg_ev = j["eg_ev"].get<double>();
  if (j.contains("xti")) p.law.xti = j["xti"].get<double>();
  if (j.contains("trs1_per_k")) p.law.trs1_per_k = j["trs1_per_k"].get<double>();
  if (j.contains("trs2_per_k2")) p.law.trs2_per_k2 = j["trs2_per_k2"].get<double>();
  return p;
}

namespace {

const CalculatorRow& calculator_row(const std::string& calculator) {
  for (const auto& row : calculator_rows())
    if (row.calculator.name == calculator) return row;
  std::string names;
  for (const auto& c : design_calculators()) names += (names.empty() ? "" : ", ") + c.name;
  throw DesignInputError("calculator", "unknown calculator '" + calculator + "' (one of: " + names + ")");
}

double& parameter_ref(DesignPart& p, const std::string& name) {
  if (name == "is_a") return p.dc.is_a;
  if (name == "n") return p.dc.n;
  if (name == "rs_ohm") return p.dc.rs_ohm;
  if (name == "rsh_ohm") return p.dc.rsh_ohm;
  if (name == "cj0_f") return p.cap.cj0_f;
  if (name == "vj_v") return p.cap.vj_v;
  if (name == "m") return p.cap.m;
  if (name == "tt_s") return p.tt_s;
  throw DesignInputError("part", "no covariance parameter '" + name + "' (is_a, n, rs_ohm, rsh_ohm, cj0_f, vj_v, m, tt_s)");
}

// Where a perturbed parameter set still is a part (the step rule halves a step that leaves it).
bool valid_parameters(const std::vector<std::string>& names, const std::vector<double>& x) {
  for (std::size_t i = 0; i < names.size(); ++i) {
    const bool non_negative = names[i] == "rs_ohm" || names[i] == "tt_s" || names[i] == "cj0_f";
    if (!(non_negative ? x[i] >= 0 : x[i] > 0)) return false;
  }
  return true;
}

// std_error on every result line by the law of propagation (design_uncertainty.hpp).
DesignFunction design_function_hinted(const std::string& calculator, const DesignPart& part, const Json& inputs,
                                      const std::vector<std::string>& result_keys, const Json& nominal, SolveHint hint);

void add_uncertainty(const std::string& calculator, const DesignPart& part, const Json& inputs, Json& answer, const SolveHint& hint) {
  if (part.cov.empty()) {
    answer["uncertainty"] = {{"method", "none"},
                             {"note", "no uncertainty (" + (part.cov.source.empty() ? std::string("explicit parameters") : part.cov.source) + ")"}};
    return;
  }
  Json& lines = answer["result"];
  std::vector<std::string> keys;
  std::vector<double> y0;
  for (const auto& l : lines) {
    keys.push_back(l["key"].get<std::string>());
    y0.push_back(l["value"].is_number() ? l["value"].get<double>() : std::numeric_limits<double>::quiet_NaN());
  }
  std::vector<double> x0;
  for (const auto& name : part.cov.names) x0.push_back(design_part_parameter(part, name));
  const auto f = design_function_hinted(calculator, part, inputs, keys, answer, hint);
  const auto names = part.cov.names;
  const auto prop = propagate_gum(f, x0, y0, part.cov, [&names](const std::vector<double>& x) { return valid_parameters(names, x); });
  bool any_missing = false, any_nonlinear = false;
  for (std::size_t j = 0; j < keys.size(); ++j) {
    if (!std::isfinite(y0[j])) continue;
    const auto& lp = prop.lines[j];
    lines[j]["std_error"] = std::isfinite(lp.std_error) ? Json(lp.std_error) : Json(nullptr);
    any_missing = any_missing || !std::isfinite(lp.std_error);
    if (lp.nonlinear) {
      lines[j]["nonlinear"] = true;
      any_nonlinear = true;
    }
  }
  Json u{{"method", "GUM law of propagation (JCGM 100:2008 5.1.2, 5.2.2): central differences of the calculator at one standard "
                    "deviation along each principal axis of the covariance"},
         {"parameters", part.cov.names},
         {"source", part.cov.source},
         {"evaluations", prop.evaluations}};
  std::string note;
  if (any_missing)
    note = "std_error null: the answer does not exist everywhere within one standard deviation of the parameters "
           "(the target is only just achievable)";
  if (any_nonlinear)
    note += std::string(note.empty() ? "" : "; ") +
            "nonlinear: the second-order term is above 10 % of std_error, the linear law is indicative only (a Monte Carlo "
            "over the covariance, JCGM 101, gives the better figure)";
  if (!note.empty()) u["note"] = note;
  answer["uncertainty"] = u;
}

}  // namespace

double design_part_parameter(const DesignPart& part, const std::string& name) {
  return parameter_ref(const_cast<DesignPart&>(part), name);
}

DesignFunction design_function(const std::string& calculator, const DesignPart& part, const Json& inputs,
                               const std::vector<std::string>& result_keys, const Json& nominal) {
  return design_function_hinted(calculator, part, inputs, result_keys, nominal, {});
}

namespace {

DesignFunction design_function_hinted(const std::string& calculator, const DesignPart& part, const Json& inputs,
                                      const std::vector<std::string>& result_keys, const Json& nominal, SolveHint hint) {
  const CalculatorRow& row = calculator_row(calculator);
  DesignPart base = part;
  const std::vector<std::string> names = part.cov.names;
  base.cov = {};
  return [&row, base, names, inputs, result_keys, nominal, hint](const std::vector<double>& x) mutable {
    std::vector<double> y(result_keys.size(), std::numeric_limits<double>::quiet_NaN());
    DesignPart p = base;
    for (std::size_t i = 0; i < names.size() && i < x.size(); ++i) parameter_ref(p, names[i]) = x[i];
    try {
      Run run(row.calculator, &p, inputs);
      if (nominal.is_object()) run.set_nominal(&nominal);
      run.set_hint(&hint, false);
      row.body(run);
      const Json a = run.take();
      if (!a["achievable"].get<bool>()) return y;
      for (const auto& l : a["result"])
        for (std::size_t j = 0; j < result_keys.size(); ++j)
          if (l["key"] == result_keys[j] && l["value"].is_number()) y[j] = l["value"].get<double>();
    } catch (const DesignInputError&) {  // e.g. TRS takes RS below zero there: no value
    }
    return y;
  };
}

}  // namespace

Json run_design(const std::string& calculator, const DesignPart* part, const Json& inputs) {
  const CalculatorRow& row = calculator_row(calculator);
  Run run(row.calculator, part, inputs);
  SolveHint hint;
  run.set_hint(&hint, true);
  row.body(run);
  Json answer = run.take();
  if (row.calculator.needs_part && answer["achievable"].get<bool>()) add_uncertainty(calculator, *part, inputs, answer, hint);
  return answer;
}

}  // namespace junco::fitting
