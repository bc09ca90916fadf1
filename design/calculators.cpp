#include "design/calculators.hpp"

#include "design/bias.hpp"
#include "design/distortion.hpp"
#include "design/network.hpp"
#include "fitting/transfer.hpp"
#include "units/si_text.hpp"

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
  std::vector<DesignInputSpec> v{with_default("source_ohm", "source", "Ohm", "source Rg", 50.0, InputRange::positive),
                                 with_default("load_ohm", "load", "Ohm", "load RL", 50.0, InputRange::positive)};
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
    if (calc.needs_part || calc.takes_part)
      for (const auto& s : design_part_inputs()) specs.push_back(&s);
    if (inputs.is_object())
      for (const auto& [key, value] : inputs.items()) {
        (void)value;
        bool known = false;
        for (const auto* s : specs) known = known || s->key == key;
        if (!known) throw DesignInputError(key, key + ": not an input of the " + calc.name + " calculator");
      }
    for (const auto* s : specs) read(*s, inputs);
    if (calc.takes_part && !part_)
      for (const auto& s : design_part_inputs())
        if (has(s.key) && s.key != "tt_s" && s.key != "tau_s")
          throw DesignInputError(s.key, s.key + ": needs a part (--part, --model or --is/--n/--rs); without one the " + calc.name +
                                            " calculator takes only tt_s (--tt) and tau_s (--tau)");
    answer_["calculator"] = calc.name;
    answer_["assumed"] = Json::array();
    answer_["result"] = Json::array();
    answer_["achievable"] = true;
    answer_["reason"] = "";
    answer_["warnings"] = Json::array();
    answer_["failures"] = Json::array();
    if (calc.uses_part(part_ != nullptr)) {
      if (!part_) throw DesignInputError("part", "the " + calc.name + " calculator needs a part");
      has_part_ = true;
      part_copy_ = *part_;
      if (has("cj0_f")) part_copy_.cap.cj0_f = number("cj0_f");
      if (has("vj_v")) part_copy_.cap.vj_v = number("vj_v");
      if (has("m")) part_copy_.cap.m = number("m");
      if (has("tt_s")) part_copy_.tt_s = number("tt_s");
      if (has("eg_ev")) part_copy_.law.eg_ev = number("eg_ev");
      if (has("xti")) part_copy_.law.xti = number("xti");
      if (has("trs1_per_k")) part_copy_.law.trs1_per_k = number("trs1_per_k");
      apply_pin_inputs();
      if (!(part_copy_.dc.is_a > 0 && part_copy_.dc.n > 0 && part_copy_.dc.rs_ohm >= 0))
        throw DesignInputError("part", "the part needs Is > 0, n > 0 and Rs >= 0");
      answer_["part"] = design_part_json(part_copy_);
      part_tnom_ = part_copy_;
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

  // The PIN inputs make (or override) the part's PIN law; a part that is not
  // a PIN part yet needs K and τ, the rest default (R0 0, x 1, N the part's).
  void apply_pin_inputs() {
    const char* keys[] = {"r0_ohm", "k_ohm_a_x", "x", "tau_s", "ct_f", "rp_ohm"};
    bool any = false;
    for (const char* k : keys) any = any || has(k);
    if (!any) return;
    if (!part_copy_.pin) {
      for (const char* k : {"k_ohm_a_x", "tau_s"})
        if (!has(k)) throw DesignInputError(k, std::string(k) + ": a PIN part needs k_ohm_a_x (--k) and tau_s (--tau)");
      PinPart pin;
      pin.law.n = part_copy_.dc.n;
      pin.law.r0_ohm = 0.0;
      part_copy_.pin = pin;
    }
    PinPart& p = *part_copy_.pin;
    if (has("r0_ohm")) p.law.r0_ohm = number("r0_ohm");
    if (has("k_ohm_a_x")) p.law.k_ohm_a_x = number("k_ohm_a_x");
    if (has("x")) p.law.x = number("x");
    if (has("tau_s")) p.law.tau_s = number("tau_s");
    if (has("ct_f")) p.ct_f = number("ct_f");
    if (has("rp_ohm")) p.rp_ohm = number("rp_ohm");
  }

  const DesignPart& part() const { return part_copy_; }
  // A part came with the run (always, for a calculator that needs one).
  bool has_part() const { return has_part_; }
  // The part at its own temperature (TNOM), the overrides applied: for a
  // calculator that finds the junction temperature itself.
  const DesignPart& part_at_tnom() const { return part_tnom_; }
  void report_junction(const DiodeParams& dc, double temp_k) {
    answer_["junction"]["temp_k"] = temp_k;
    answer_["junction"]["is_a"] = dc.is_a;
    answer_["junction"]["rs_ohm"] = dc.rs_ohm;
  }
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
    if (!calc_.needs_part && !calc_.takes_part) return;
    for (const char* key : {"temp_k", "eg_ev", "xti", "trs1_per_k", "tt_s", "r0_ohm", "k_ohm_a_x", "x", "tau_s", "ct_f", "rp_ohm"})
      if (has(key)) assumed(key);
  }
  void result(const std::string& key, const std::string& label, double value, const std::string& unit) {
    answer_["result"].push_back({{"key", key}, {"label", label}, {"unit", unit}, {"value", std::isfinite(value) ? Json(value) : Json(nullptr)}});
  }
  // A result with no number: a verdict ("pass", "FAIL") or a description.
  void result_text(const std::string& key, const std::string& label, const std::string& text) {
    answer_["result"].push_back({{"key", key}, {"label", label}, {"unit", ""}, {"value", nullptr}, {"text", text}});
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
  DesignPart part_tnom_;
  bool has_part_ = false;
  std::map<std::string, double> numbers_;
  std::map<std::string, std::string> texts_;
  Json answer_;
  const Json* nominal_ = nullptr;
  SolveHint* hint_ = nullptr;
  bool hint_writes_ = false;
};

// ---- the calculators --------------------------------------------------------

// Where a calculator gives the diode's dissipation: the junction temperature
// from the application's thermal resistance, Tj = Ta + θ·P (JESD51 θJA,
// docs/references.md §8), with P as computed at the run's junction
// temperature (junction-temp iterates the two together). No θ: no Tj.
std::vector<DesignInputSpec> thermal_inputs() {
  return {optional_input("theta_k_per_w", "theta", "K/W", "thermal resistance junction-ambient (gives tj_k; none without)", InputRange::non_negative),
          optional_input("ambient_k", "ambient", "K", "ambient, with theta", InputRange::positive)};
}
void report_tj(Run& r, double diode_w) {
  if (!r.has("theta_k_per_w")) {
    if (r.has("ambient_k")) throw DesignInputError("ambient_k", "ambient_k: goes with theta_k_per_w (--theta); without it no Tj is computed");
    return;
  }
  if (!r.has("ambient_k")) throw DesignInputError("ambient_k", "ambient_k: missing; theta_k_per_w (--theta) needs the ambient (--ambient) for tj_k");
  r.result("tj_k", "junction temperature Ta + theta*P", r.number("ambient_k") + r.number("theta_k_per_w") * diode_w, "K");
}

void op(Run& r) {
  r.assume_all();
  const auto& p = r.part();
  const auto o = operating_point(p.dc, r.number("supply_v"), r.number("bias_resistor_ohm"), r.number("dc_return_ohm"), p.temp_k);
  r.result("bias_current_a", "bias current", o.i_a, "A");
  r.result("diode_voltage_v", "diode voltage", o.vd_v, "V");
  r.result("resistor_drop_v", "resistor drop", o.v_rb_v, "V");
  r.result("rd_ohm", "rd (small-sig)", o.rd_ohm, "Ohm");
  if (r.has("theta_k_per_w")) r.result("diode_power_w", "diode power I*Vd", o.i_a * o.vd_v, "W");
  report_tj(r, o.i_a * o.vd_v);
}

void bias_r(Run& r) {
  r.assume_all();
  const auto& p = r.part();
  std::string why;
  const auto rb = bias_resistor_ohm(p.dc, r.number("supply_v"), r.number("current_a"), r.number("dc_return_ohm"), p.temp_k, &why);
  if (!rb) return r.not_achievable(why);
  r.result("bias_resistor_ohm", "bias resistor", *rb, "Ohm");
  r.result("diode_voltage_v", "diode voltage", diode_voltage_v(p.dc, r.number("current_a"), p.temp_k), "V");
}

Parasitics series_l(const Run& r) { return {r.number("ls_h"), 0.0}; }

std::optional<double> rf_emf_peak_v(const Run& r);  // below, with the network calculators

// loss and isolation with --theta/--ambient and/or a drive (amplitude_v or
// power_w): what the diode dissipates and the junction temperature from it.
// Included: the DC bias (forward: I·Vd; reverse: the leakage Is·(1 − e^(−VR/(N·Vt)))
// times VR) and, with a drive, the RF the diode absorbs, ½·|Î|²·Re Z, Î the
// small-signal current through the diode at the frequency (series L carries
// it but absorbs nothing). Not included: the rise of Tj itself moving Vd and
// Z (junction-temp iterates that), and large-signal clipping.
void report_dissipation(Run& r, double dc_w, std::complex<double> z_diode) {
  const auto emf = rf_emf_peak_v(r);
  if (!emf && !r.has("theta_k_per_w")) return report_tj(r, 0.0);  // refuses an ambient alone
  double rf_w = 0.0;
  if (emf) {
    const std::complex<double> z = z_diode + std::complex<double>(0.0, 2.0 * std::numbers::pi * r.number("freq_hz") * r.number("ls_h"));
    rf_w = 0.5 * std::norm(element_current_a(r.kind(), z, *emf, r.number("source_ohm"), r.number("load_ohm"))) * z_diode.real();
  }
  r.result("diode_power_w", "diode dissipation", dc_w + rf_w, "W");
  r.result("dc_power_w", "of which DC bias", dc_w, "W");
  if (emf) r.result("rf_power_w", "of which RF absorbed 1/2*|I|^2*Re Z", rf_w, "W");
  report_tj(r, dc_w + rf_w);
}

// A PIN part's biased loss: its law at the frequency (R_I above the knee, rd below).
void pin_loss(Run& r, const PinPart& pin) {
  const double f = r.number("freq_hz"), i = r.number("current_a");
  const std::complex<double> z = pin_on_impedance(pin.law, i, f, r.part().temp_k) + std::complex<double>(0.0, 2.0 * std::numbers::pi * f * r.number("ls_h"));
  const double db = switch_loss_db(r.kind(), z, r.number("source_ohm"), r.number("load_ohm"));
  if (r.kind() == SwitchKind::series) r.result("loss_db", "insertion loss (biased series switch)", db, "dB");
  else r.result("loss_db", "isolation (biased shunt switch)", db, "dB");
  r.result("pin_rf_resistance_ohm", "PIN RF resistance R0 + K*I^-x", pin_rf_resistance_ohm(pin.law, i), "Ohm");
  r.result("knee_freq_hz", "PIN lifetime knee 1/(2 pi tau)", pin_knee_freq_hz(pin.law.tau_s), "Hz");
  if (f < 3.0 * pin_knee_freq_hz(pin.law.tau_s)) r.warn("below 3x the lifetime's knee the PIN part is partly a junction (rd = N*Vt/I)");
  report_dissipation(r, i * diode_voltage_v(r.part().dc, i, r.part().temp_k), pin_on_impedance(pin.law, i, f, r.part().temp_k));
}

void loss(Run& r) {
  r.assume_all();
  const auto& p = r.part();
  if (p.pin) return pin_loss(r, *p.pin);
  const double db = on_state_loss_db(r.kind(), p.dc, p.charge(), r.number("current_a"), r.number("source_ohm"),
                                     r.number("load_ohm"), r.number("freq_hz"), series_l(r), p.temp_k);
  // Keyed by what the number is: a biased shunt switch's loss is its isolation.
  if (r.kind() == SwitchKind::series) r.result("loss_db", "insertion loss (biased series switch)", db, "dB");
  else r.result("isolation_db", "isolation (biased shunt switch)", db, "dB");
  if (p.charge().any()) {
    const double w = 2.0 * std::numbers::pi * r.number("freq_hz");
    const auto y = junction_admittance_s(p.dc, p.charge(), r.number("current_a"), r.number("freq_hz"), p.temp_k);
    r.result("junction_c_f", "junction C at the bias (Cj(V) + TT*gd)", y.imag() / w, "F");
  }
  const double i = r.number("current_a");
  report_dissipation(r, i * diode_voltage_v(p.dc, i, p.temp_k),
                     diode_small_signal_impedance(p.dc, p.charge(), i, r.number("freq_hz"), p.temp_k));
}

void bias_for_loss(Run& r) {
  r.assume_all();
  const auto& p = r.part();
  std::string why;
  // A PIN part: the current at which its law Z(ω) at the frequency meets the target (as pin_loss computes the loss).
  const auto pin_loss_at = [&](double i) {
    const double f = r.number("freq_hz");
    const auto z = pin_on_impedance(p.pin->law, i, f, p.temp_k) + std::complex<double>(0.0, 2.0 * std::numbers::pi * f * r.number("ls_h"));
    return switch_loss_db(r.kind(), z, r.number("source_ohm"), r.number("load_ohm"));
  };
  const auto i = p.pin ? bias_for_loss_a(r.kind(), pin_loss_at, r.number("target_db"), "R0", &why)
                       : bias_for_loss_a(r.kind(), p.dc, p.charge(), r.number("target_db"), r.number("source_ohm"),
                                         r.number("load_ohm"), r.number("freq_hz"), series_l(r), p.temp_k, &why);
  if (!i) return r.not_achievable(why);
  if (p.pin) r.result_text("law", "loss from", "PIN law R0 + K*I^-x and lifetime tau at the frequency");
  r.result("bias_current_a", "bias current", *i, "A");
  if (!r.has("supply_v")) return;
  const auto rb = bias_resistor_ohm(p.dc, r.number("supply_v"), *i, 0.0, p.temp_k, &why);
  if (!rb) return r.not_achievable(why);
  r.result("bias_resistor_ohm", "bias resistor (or less)", *rb, "Ohm");
}

// The DC rule (forward current over the whole swing) and, given a frequency
// and a lifetime (the part's TT, a PIN part's tau, or tt_s/tau_s without a
// part), the stored-charge rule (charge_headroom): the junction stays on while
// its stored charge outlasts the negative half cycle. Without both, the answer
// is the DC rule alone, as it always was.
void headroom(Run& r) {
  r.assume_all();
  const auto h = drive_headroom(r.number("amplitude_v"), r.number("load_ohm"), r.number("dc_return_ohm"), r.number("floor_a"));
  r.result("signal_peak_a", "signal peak through the diode", h.signal_peak_a, "A");
  const bool with_part = r.has_part();
  const std::optional<PinPart>& pin = r.part().pin;
  double lifetime_s = 0.0;
  std::string lifetime_name = "TT";
  if (with_part) {
    lifetime_s = pin ? pin->law.tau_s : r.part().tt_s;
    if (pin) lifetime_name = "PIN lifetime tau";
  } else if (r.has("tau_s")) {
    if (r.has("tt_s"))
      throw DesignInputError("tau_s", "tau_s and tt_s: give one lifetime, --tt (a junction diode's transit time) or --tau (a PIN part's carrier lifetime)");
    lifetime_s = r.number("tau_s");
    lifetime_name = "lifetime tau";
  } else if (r.has("tt_s")) {
    lifetime_s = r.number("tt_s");
  }
  if (!r.has("freq_hz") || !(lifetime_s > 0)) {
    r.result("min_bias_a", "minimum bias (series switch stays forward-biased)", h.min_bias_a, "A");
    if (lifetime_s > 0) r.warn("give the frequency (freq_hz, --freq) for the stored-charge rule: with " + lifetime_name + " the junction may stay on with less bias");
    else if (r.has("freq_hz")) r.warn("no stored charge known (TT, or a PIN part's tau): the DC rule holds at any frequency");
    return;
  }
  // A junction diode with Cj: of Î only the part through the diffusion
  // admittance gd·(1 + jωTT) reaches the stored charge, the rest flows in
  // Cj(Vd) (small signal at the bias). A PIN part: all of it (its forward
  // depletion capacitance is small beside the I-region's charge).
  std::function<double(double)> share;
  const double f = r.number("freq_hz");
  if (with_part && !pin && r.part().cap.cj0_f > 0) {
    const DesignPart& p = r.part();
    share = [&p, f](double i_a) {
      const JunctionCharge diffusion_only{JunctionCap{0.0, p.cap.vj_v, p.cap.m, p.cap.fc}, p.tt_s};
      return std::abs(junction_admittance_s(p.dc, diffusion_only, i_a, f, p.temp_k)) /
             std::abs(junction_admittance_s(p.dc, p.charge(), i_a, f, p.temp_k));
    };
  }
  const auto c = charge_headroom(h.signal_peak_a, f, lifetime_s, r.number("floor_a"), share);
  r.result("min_bias_a", "minimum bias (stored charge keeps the junction on)", c.min_bias_a, "A");
  r.result("dc_min_bias_a", "DC rule: forward current over the whole swing", h.min_bias_a, "A");
  r.result("charge_min_bias_a", "at-frequency rule: I > I^/sqrt(1 + (w tau)^2) + floor", c.min_bias_a, "A");
  r.result("lifetime_s", lifetime_name == "TT" ? "charge lifetime (TT)" : "charge lifetime (" + lifetime_name + ")", lifetime_s, "s");
  r.result("omega_tau", "w tau at the frequency", c.omega_tau, "");
  if (share) r.result("charge_share", "share of the signal reaching the stored charge (rest: Cj)", c.share, "");
  r.result_text("governs", "rule that governs", "at-frequency (stored charge)");
  if (c.min_bias_a < h.signal_peak_a)
    r.warn("at this bias the diode current reverses in the trough while the stored charge keeps the junction on; "
           "check the distortion there (junco design distortion)");
}

DistortionInput distortion_input(const Run& r) {
  DistortionInput in;
  in.part = r.part().dc;
  in.temp_k = r.part().temp_k;
  in.charge = r.part().charge();
  in.kind = r.kind();
  in.freq_hz = r.number("freq_hz");
  in.source_peak_v = r.number("amplitude_v");
  in.source_ohm = r.number("source_ohm");
  in.load_ohm = r.number("load_ohm");
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

// The harmonics of a PIN solve (distortion and bias-for-thd report the same lines).
void pin_harmonics(Run& r, const PinDistortion& d) {
  r.result("load_peak_v", "load fundamental (peak)", d.load_peak_v, "V");
  r.result("hd2_dbc", "HD2", d.hd2_dbc, "dBc");
  r.result("hd3_dbc", "HD3", d.hd3_dbc, "dBc");
  r.result("thd_pct", "THD", 100 * d.thd, "%");
}

// A PIN part: the junction solve does not describe it above the knee. What
// is reported is the charge criterion (docs/references.md §8): the signal's
// charge per half cycle Î/(π f) against the stored I·τ; well below 1 the
// I-region's resistance hardly moves over a cycle and distortion is small.
void pin_distortion(Run& r, const PinPart& pin, const DistortionInput& in) {
  const double i = in.bias_i_a, f = in.freq_hz;
  const std::complex<double> z = pin_on_impedance(pin.law, i, f, in.temp_k);
  const double signal_peak_a = std::abs(element_current_a(in.kind, z, in.source_peak_v, in.source_ohm, in.load_ohm));
  const double ratio = signal_peak_a / (std::numbers::pi * f) / (i * pin.law.tau_s);
  r.result("signal_peak_a", "signal current (peak)", signal_peak_a, "A");
  r.result("stored_charge_c", "stored charge I*tau", i * pin.law.tau_s, "C");
  r.result("rf_charge_ratio", "RF charge per half cycle / stored charge", ratio, "");
  // The charge-control PIN in the switch, time domain (pin_series_distortion, pin_shunt_distortion).
  const PinDistortion d = in.kind == SwitchKind::series
                              ? pin_series_distortion(pin.law, in.part.is_a, i, f, in.source_peak_v, in.source_ohm, in.load_ohm, in.temp_k)
                              : pin_shunt_distortion(pin.law, in.part.is_a, i, f, in.source_peak_v, in.source_ohm, in.load_ohm, in.temp_k);
  pin_harmonics(r, d);
  if (!d.converged) r.warn("the PIN large-signal solve did not reach a periodic state");
  if (ratio > 0.1) r.warn("the RF charge per half cycle exceeds 0.1 of the stored charge: expect distortion; raise the bias");
}

void distortion(Run& r) {
  r.assume_all();
  auto in = distortion_input(r);
  in.bias_i_a = r.number("current_a");
  if (r.part().pin) return pin_distortion(r, *r.part().pin, in);
  const SolveHint h = r.read_hint();
  in.start_u = h.u;
  in.start_offset_v = h.offset_v;
  const auto d = solve_distortion(in);
  r.write_hint({d.block_offset_v, d.periods > 0 ? d.start_offset_v : std::numeric_limits<double>::quiet_NaN(), h.slope});
  harmonics(r, d);
}

// A PIN part: the least bias meeting the target in the charge-control time-domain
// solve that distortion uses (design/distortion.hpp pin_bias_for_thd).
void pin_bias_for_thd_calc(Run& r, const PinPart& pin) {
  const auto in = distortion_input(r);
  std::string why;
  // The uncertainty's perturbed runs start at the nominal answer with its slope.
  const auto i = pin_bias_for_thd(in.kind, pin.law, in.part.is_a, r.number("target_pct") / 100.0, in.freq_hz, in.source_peak_v,
                                  in.source_ohm, in.load_ohm, in.temp_k, &why, r.nominal_value("least_bias_a"), r.read_hint().slope);
  if (!i) return r.not_achievable(why);
  r.write_hint({std::numeric_limits<double>::quiet_NaN(), std::numeric_limits<double>::quiet_NaN(), i->slope});
  r.result_text("law", "distortion from", "PIN charge-control solve (R0 + K*(Q/tau)^-x, lifetime tau)");
  r.result("least_bias_a", "least bias", i->bias_a, "A");
  pin_harmonics(r, i->at);
  r.result("stored_charge_c", "stored charge I*tau", i->bias_a * pin.law.tau_s, "C");
  if (!i->at.converged) r.warn("the PIN large-signal solve did not reach a periodic state at the answer");
}

void bias_for_thd(Run& r) {
  r.assume_all();
  if (r.part().pin) return pin_bias_for_thd_calc(r, *r.part().pin);
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

// Reverse leakage power of the off diode: Is·(1 − e^(−VR/(N·Vt)))·VR (Shockley, RS drop neglected).
double off_leakage_w(const DiodeParams& dc, double reverse_v, double temp_k) {
  return dc.is_a * -std::expm1(-reverse_v / (dc.n * thermal_voltage_v(temp_k))) * reverse_v;
}

void isolation(Run& r) {
  const auto& p = r.part();
  if (p.pin) {
    if (!(p.pin->ct_f > 0)) throw DesignInputError("ct_f", "isolation of a PIN part needs its off-state CT: give ct_f (--ct), or a model that has it");
    r.assume_all();
    const double f = r.number("freq_hz");
    const auto z = pin_off_impedance(p.pin->ct_f, p.pin->rp_ohm, f) + std::complex<double>(r.number("rr_ohm"), 2.0 * std::numbers::pi * f * r.number("ls_h"));
    const double db = switch_loss_db(r.kind(), z, r.number("source_ohm"), r.number("load_ohm"));
    r.result("ct_f", "PIN off-state CT", p.pin->ct_f, "F");
    if (r.kind() == SwitchKind::series) r.result("isolation_db", "isolation (unbiased series switch)", db, "dB");
    else r.result("loss_db", "insertion loss (unbiased shunt switch)", db, "dB");
    report_dissipation(r, off_leakage_w(p.dc, r.number("reverse_v"), p.temp_k), pin_off_impedance(p.pin->ct_f, p.pin->rp_ohm, f));
    return;
  }
  if (!(p.cap.cj0_f > 0))
    throw DesignInputError("cj0_f", "isolation needs the junction capacitance: give cj0_f (--cj), or a model that has it");
  r.assume_all();
  const double cj = junction_capacitance_f(p.cap, -r.number("reverse_v"));
  const auto z = diode_off_impedance(p.dc, p.charge(), r.number("reverse_v"), r.number("freq_hz"),
                                     {r.number("ls_h"), r.number("rr_ohm")}, p.temp_k);
  const double db = switch_loss_db(r.kind(), z, r.number("source_ohm"), r.number("load_ohm"));
  r.result("cj_f", "Cj at the reverse bias", cj, "F");
  if (r.kind() == SwitchKind::series) r.result("isolation_db", "isolation (unbiased series switch)", db, "dB");
  else r.result("loss_db", "insertion loss (unbiased shunt switch)", db, "dB");
  // The diode's own impedance absorbs; rr_ohm is the mount's (Parasitics) and is left out.
  report_dissipation(r, off_leakage_w(p.dc, r.number("reverse_v"), p.temp_k),
                     diode_off_impedance(p.dc, p.charge(), r.number("reverse_v"), r.number("freq_hz"), {}, p.temp_k));
}

void power(Run& r) {
  r.assume_all();
  const auto& p = r.part();
  const double rb = r.number("bias_resistor_ohm");
  const auto o = operating_point(p.dc, r.number("supply_v"), rb, 0.0, p.temp_k);
  const PowerLimits lim{r.has("max_diode_w") ? r.number("max_diode_w") : 0.0, r.has("max_resistor_w") ? r.number("max_resistor_w") : 0.0, 0.8};
  const auto c = check_power(o, rb, r.number("signal_peak_a"), lim);
  r.result("bias_current_a", "bias current", o.i_a, "A");
  r.result("diode_power_w", "diode power", c.diode_w, "W");
  r.result("resistor_power_w", "resistor power", c.resistor_w, "W");
  report_tj(r, c.diode_w);
  for (const auto& w : c.warnings) r.warn(w);
  for (const auto& f : c.failures) r.fail(f);
}

// ---- the switch around the diode (design_network.hpp) ------------------------

// The RF drive: amplitude_v (EMF peak) or power_w (available power), not both.
std::optional<double> rf_emf_peak_v(const Run& r) {
  if (r.has("amplitude_v") && r.has("power_w"))
    throw DesignInputError("power_w", "power_w: give the drive as amplitude_v or as power_w, not both");
  if (r.has("amplitude_v")) return r.number("amplitude_v");
  if (r.has("power_w")) return emf_peak_from_power_v(r.number("power_w"), r.number("source_ohm"));
  return std::nullopt;
}

std::vector<DesignInputSpec> rf_drive_inputs() {
  return {optional_input("amplitude_v", "amplitude", "V", "EMF peak", InputRange::non_negative),
          optional_input("power_w", "power", "W", "available RF power", InputRange::non_negative)};
}

void off_headroom_calc(Run& r) {
  const auto emf = rf_emf_peak_v(r);
  if (!emf) throw DesignInputError("amplitude_v", "off-headroom needs the RF drive: amplitude_v (EMF peak) or power_w");
  r.assume_all();
  const auto& p = r.part();
  const std::optional<double> bv = r.has("bv_v") ? std::optional<double>(r.number("bv_v")) : std::nullopt;
  const auto h = off_headroom(r.kind(), p.dc, p.charge(), r.number("reverse_v"), *emf, r.number("source_ohm"), r.number("load_ohm"),
                              r.number("freq_hz"), series_l(r), p.temp_k, bv, r.number("margin_v"), r.number("onset_a"));
  r.result("emf_peak_v", "EMF peak", *emf, "V");
  r.result("junction_peak_v", "RF peak across the off junction", h.junction_peak_v, "V");
  r.result("forward_margin_v", "reverse bias minus RF peak", h.forward_margin_v, "V");
  r.result("min_reverse_v", "least reverse bias (RF peak + margin)", h.min_reverse_v, "V");
  r.result("conduction_peak_v", "RF peak at which forward current reaches the onset", h.conduction_peak_v, "V");
  if (bv) {
    r.result("breakdown_margin_v", "BV minus (reverse bias + RF peak)", h.breakdown_margin_v, "V");
    r.result("max_reverse_v", "largest reverse bias (BV - RF peak - margin)", h.max_reverse_v, "V");
    r.result("breakdown_peak_v", "RF peak at which the reverse current reaches IBV (at -BV)", h.breakdown_peak_v, "V");
  }
  r.result_text("verdict", "off-state headroom", h.ok() ? "pass" : "FAIL");
  if (!h.forward_ok)
    r.fail("the off junction swings to within " + junco::units::format_si(h.forward_margin_v, "V") + " of forward bias (margin " +
           junco::units::format_si(r.number("margin_v"), "V") + "): raise the reverse bias to " + junco::units::format_si(h.min_reverse_v, "V"));
  if (!h.breakdown_ok)
    r.fail("reverse bias + RF peak come within " + junco::units::format_si(h.breakdown_margin_v, "V") + " of BV (margin " +
           junco::units::format_si(r.number("margin_v"), "V") + "): lower the reverse bias to " + junco::units::format_si(h.max_reverse_v, "V") +
           " or use a part with a higher BV");
  if (bv && h.min_reverse_v > h.max_reverse_v) r.not_achievable("no reverse bias fits: BV is below 2 x (RF peak + margin)");
}

void junction_temp_calc(Run& r) {
  if (r.has("temp_k"))
    throw DesignInputError("temp_k", "temp_k: junction-temp finds the junction temperature itself; give the ambient instead (ambient_k, --ambient)");
  r.assume_all();
  const auto& p = r.part_at_tnom();
  const double emf = rf_emf_peak_v(r).value_or(0.0);
  const auto at = [&](double ambient_k, double theta) {
    return junction_heating(r.kind(), p.dc, p.charge(), p.temp_k, p.law, r.number("current_a"), emf, r.number("source_ohm"),
                            r.number("load_ohm"), r.number("freq_hz"), series_l(r), ambient_k, theta);
  };
  const auto h = at(r.number("ambient_k"), r.number("theta_k_per_w"));
  if (!h.converged) return r.not_achievable("no steady junction temperature (thermal runaway at this theta and power)");
  if (emf > 0) {
    const auto& pj = r.part();
    const double w = 2.0 * std::numbers::pi * r.number("freq_hz");
    const auto z = diode_small_signal_impedance(pj.dc, pj.charge(), r.number("current_a"), r.number("freq_hz"), pj.temp_k) +
                   std::complex<double>(0.0, w * r.number("ls_h"));
    const double i_peak = std::abs(element_current_a(r.kind(), z, emf, r.number("source_ohm"), r.number("load_ohm")));
    if (i_peak > r.number("current_a"))
      r.warn("the RF peak current (" + junco::units::format_si(i_peak, "A") + ") exceeds the bias: the diode clips and the "
             "small-signal RF loss share is only an estimate");
  }
  const auto loss_at = [&](double temp_k) {
    DiodeParams dc = diode_at_temperature(p.dc, p.temp_k, temp_k, p.law);
    JunctionCharge charge = p.charge();
    if (charge.cap.cj0_f > 0) {
      const auto d = depletion_at_temperature(charge.cap.cj0_f, charge.cap.vj_v, charge.cap.m, p.temp_k, temp_k);
      charge.cap.cj0_f = d.cj0_f;
      charge.cap.vj_v = d.vj_v;
    }
    return on_state_loss_db(r.kind(), dc, charge, r.number("current_a"), r.number("source_ohm"), r.number("load_ohm"), r.number("freq_hz"),
                            series_l(r), temp_k);
  };
  r.report_junction(diode_at_temperature(p.dc, p.temp_k, h.tj_k, p.law), h.tj_k);
  r.result("tj_k", "junction temperature Ta + theta*P", h.tj_k, "K");
  r.result("diode_power_w", "diode dissipation", h.total_w(), "W");
  r.result("dc_power_w", "of which DC bias I*Vf", h.dc_w, "W");
  r.result("rf_power_w", "of which RF loss in the diode", h.rf_w, "W");
  const double ambient_db = loss_at(r.number("ambient_k")), hot_db = loss_at(h.tj_k);
  r.result("loss_ambient_db", r.kind() == SwitchKind::series ? "insertion loss at ambient" : "isolation at ambient", ambient_db, "dB");
  r.result("loss_db", r.kind() == SwitchKind::series ? "insertion loss at Tj" : "isolation at Tj", hot_db, "dB");
  r.result("loss_shift_db", "shift from ambient to Tj", hot_db - ambient_db, "dB");
}

void bias_network_calc(Run& r) {
  if (!(r.number("freq_high_hz") > r.number("freq_low_hz")))
    throw DesignInputError("freq_high_hz", "freq_high_hz: must be above freq_low_hz");
  r.assume_all();
  const auto& p = r.part();
  BiasNetwork net;
  net.supply_v = r.number("supply_v");
  net.rbias_ohm = r.number("bias_resistor_ohm");
  net.rground_ohm = r.number("rground_ohm");
  net.feed_diode = r.text("feed_diode") == "same";
  net.source_ohm = r.number("source_ohm");
  net.load_ohm = r.number("load_ohm");
  net.mount = r.kind();
  const bool on = r.text("state") == "on";
  if (!on && net.feed_diode)
    throw DesignInputError("feed_diode", "feed_diode: the off state is computed without an isolating diode (the two junctions would share "
                                         "the reverse bias by their leakage)");
  const double f_lo = r.number("freq_low_hz"), f_hi = r.number("freq_high_hz"), ratio = r.number("ratio");
  net.cblock_f = r.has("cblock_f") ? r.number("cblock_f") : block_capacitor_f(f_lo, net.source_ohm, net.load_ohm, ratio);
  net.choke_h = r.has("choke_h") ? r.number("choke_h") : choke_inductance_h(f_lo, net.source_ohm, net.load_ohm, ratio);
  net.ferrite_r_ohm = r.has("ferrite_r_ohm") ? r.number("ferrite_r_ohm") : 0.0;
  net.cbypass_f = r.has("cbypass_f") ? r.number("cbypass_f") : 0.0;
  const auto b = network_bias(net, p.dc, p.temp_k);
  r.result("cblock_f", r.has("cblock_f") ? "DC block (given)" : "DC block (|Xc| = Z0/ratio at f low)", net.cblock_f, "F");
  r.result("choke_h", r.has("choke_h") ? "choke (given)" : "choke (|XL| = ratio*Z0 at f low)", net.choke_h, "H");
  r.result("thevenin_v", "feed drive Vs*Rgnd/(Rb+Rgnd)", b.thevenin_v, "V");
  r.result("thevenin_ohm", "feed resistance Rb||Rgnd", b.thevenin_ohm, "Ohm");
  if (on) {
    r.result("bias_current_a", "diode current", b.i_a, "A");
    r.result("diode_voltage_v", "diode voltage", b.vd_v, "V");
  } else {
    r.result("reverse_v", "reverse bias of the diode (supply reversed, leakage neglected)", b.thevenin_v, "V");
  }
  // The band on a log grid (24 points a decade, both edges): the worst of
  // each. The passing state (series on, shunt off) reports insertion loss,
  // the blocking state isolation (docs/names.md): its worst is the least.
  const bool passes = on == (net.mount == SwitchKind::series);
  const double sign = passes ? 1.0 : -1.0;
  double worst_loss = -inf, worst_added = -inf, worst_leak = -inf;
  NetworkResponse lo{}, hi{};
  const int steps = std::max(2, static_cast<int>(std::ceil(24.0 * std::log10(f_hi / f_lo))));
  for (int k = 0; k <= steps; ++k) {
    const double f = f_lo * std::pow(f_hi / f_lo, static_cast<double>(k) / steps);
    const auto x = on ? network_response(net, p.dc, p.charge(), b.i_a, f, p.temp_k)
                      : network_response(net, diode_off_impedance(p.dc, p.charge(), b.thevenin_v, f, {}, p.temp_k), {}, f);
    if (k == 0) lo = x;
    if (k == steps) hi = x;
    worst_loss = std::max(worst_loss, sign * x.loss_db);
    worst_added = std::max(worst_added, sign * (x.loss_db - x.bare_loss_db));
    worst_leak = std::max(worst_leak, x.supply_leak_db);
  }
  if (passes) {
    r.result("loss_low_db", "insertion loss at f low", lo.loss_db, "dB");
    r.result("loss_high_db", "insertion loss at f high", hi.loss_db, "dB");
    r.result("max_loss_db", "insertion loss, worst in the band", worst_loss, "dB");
    r.result("added_loss_db", "added by the network, worst in the band", worst_added, "dB");
  } else {
    r.result("isolation_low_db", "isolation at f low", lo.loss_db, "dB");
    r.result("isolation_high_db", "isolation at f high", hi.loss_db, "dB");
    r.result("min_isolation_db", "isolation, worst (least) in the band", -worst_loss, "dB");
    r.result("lost_isolation_db", "isolation taken away by the network, worst in the band", worst_added, "dB");
  }
  r.result("supply_leak_db", "RF into the supply line, worst in the band", worst_leak, "dB");
  const double z0 = std::max(net.source_ohm, net.load_ohm);
  if (net.ferrite_r_ohm > 0 && net.ferrite_r_ohm < ratio * z0)
    r.warn("the ferrite's R (" + junco::units::format_si(net.ferrite_r_ohm, "ohm") + ") is below ratio x Z0: it loads the signal at high frequency");
  if (on && b.i_a <= 0) r.not_achievable("the feed drives no forward current");
}

void series_shunt_calc(Run& r) {
  r.assume_all();
  const auto& p = r.part();
  const double f = r.number("freq_hz"), w = 2.0 * std::numbers::pi * f;
  const std::complex<double> z_on =
      diode_small_signal_impedance(p.dc, p.charge(), r.number("current_a"), f, p.temp_k) + std::complex<double>(0.0, w * r.number("ls_h"));
  const auto z_off = diode_off_impedance(p.dc, p.charge(), r.number("reverse_v"), f, {r.number("ls_h"), r.number("rr_ohm")}, p.temp_k);
  const double rg = r.number("source_ohm"), rl = r.number("load_ohm");
  r.result("insertion_loss_db", "insertion loss (series on, shunt off)", series_shunt_db(z_on, z_off, rg, rl), "dB");
  r.result("isolation_db", "isolation (series off, shunt on)", series_shunt_db(z_off, z_on, rg, rl), "dB");
  r.result("series_isolation_db", "isolation of the series diode alone, for comparison", series_loss_db(z_off, rg, rl), "dB");
}

void attenuator_calc(Run& r) {
  r.assume_all();
  PinLaw law;
  law.r0_ohm = r.number("r0_ohm");
  law.k_ohm_a_x = r.number("k_ohm_a_x");
  law.x = r.number("x");
  const PadKind kind = r.text("pad") == "pi" ? PadKind::pi : PadKind::tee;
  const double z0 = r.number("z0_ohm");
  PadResistors pad;
  if (r.has("target_db")) {
    if (r.has("series_current_a") || r.has("shunt_current_a"))
      throw DesignInputError("target_db", "target_db: give a target attenuation or the two currents, not both");
    pad = matched_pad(kind, r.number("target_db"), z0);
    r.result("series_ohm", kind == PadKind::tee ? "series arms (each)" : "series element", pad.series_ohm, "Ohm");
    r.result("shunt_ohm", kind == PadKind::tee ? "shunt element" : "shunt arms (each)", pad.shunt_ohm, "Ohm");
    const auto is = pin_current_for_resistance_a(law, pad.series_ohm), ish = pin_current_for_resistance_a(law, pad.shunt_ohm);
    if (!is || !ish)
      return r.not_achievable("R(I) never falls to " + junco::units::format_si(std::min(pad.series_ohm, pad.shunt_ohm), "ohm") +
                              ": R0 = " + junco::units::format_si(law.r0_ohm, "ohm") + " is the least the PIN reaches");
    // A T has two series arms and one shunt diode, a pi one series and two shunt.
    r.result("series_current_a", kind == PadKind::tee ? "series diode current (each)" : "series diode current", *is, "A");
    r.result("shunt_current_a", kind == PadKind::tee ? "shunt diode current" : "shunt diode current (each)", *ish, "A");
  } else {
    if (!r.has("series_current_a") || !r.has("shunt_current_a"))
      throw DesignInputError("target_db", "attenuator needs target_db, or series_current_a and shunt_current_a");
    pad = {pin_resistance_ohm(law, r.number("series_current_a")), pin_resistance_ohm(law, r.number("shunt_current_a"))};
    r.result("series_ohm", "series R(I)", pad.series_ohm, "Ohm");
    r.result("shunt_ohm", "shunt R(I)", pad.shunt_ohm, "Ohm");
  }
  const auto resp = pad_response(kind, pad, z0, z0);
  r.result("pad_loss_db", "attenuation between Z0 ports (the pad's loss)", resp.loss_db, "dB");
  r.result("input_reflection", "input |reflection coefficient| (0: matched)", resp.reflection, "");
  if (resp.reflection > 1e-9) r.result("return_loss_db", "input return loss", resp.return_loss_db, "dB");
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
      optional_input("trs1_per_k", "trs1", "", "TRS1 (1/K)", InputRange::any),
      // A PIN part's law (any of them makes the part a PIN part; k and tau are then needed).
      optional_input("r0_ohm", "r0", "Ohm", "PIN R0", InputRange::non_negative),
      optional_input("k_ohm_a_x", "k", "", "PIN K (Ohm*A^x)", InputRange::positive),
      optional_input("x", "x", "", "PIN exponent x", InputRange::positive),
      optional_input("tau_s", "tau", "s", "PIN lifetime tau", InputRange::positive),
      optional_input("ct_f", "ct", "F", "PIN off CT", InputRange::positive),
      optional_input("rp_ohm", "rp", "Ohm", "PIN off Rp", InputRange::positive)};
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
       join({required("supply_v", "supply", "V", "supply", R::positive), required("bias_resistor_ohm", "bias-resistor", "Ohm", "bias resistor", R::non_negative),
             with_default("dc_return_ohm", "dc-return", "Ohm", "DC return", 0.0, R::non_negative)}, thermal_inputs())}, op},
      {{"bias-r", "bias resistor for a target current: Rb = (Vs - Vd(I))/I - Rr", true,
       {required("supply_v", "supply", "V", "supply", R::positive), required("current_a", "current", "A", "target current", R::positive),
        with_default("dc_return_ohm", "dc-return", "Ohm", "DC return", 0.0, R::non_negative)}}, bias_r},
      {{"loss", "biased-state loss at a bias current and frequency (RS, rd, Cj(V), TT): insertion loss (series) or isolation (shunt)", true,
       join(join({switch_input(), required("current_a", "current", "A", "bias current", R::positive)}, circuit_inputs(true)),
            join(thermal_inputs(), rf_drive_inputs()))}, loss},
      {{"bias-for-loss", "bias current (and resistor, given a supply) for a target biased-state loss", true,
       join({switch_input(), required("target_db", "target", "dB", "target loss", R::positive),
             optional_input("supply_v", "supply", "V", "supply", R::positive)},
            circuit_inputs(true))}, bias_for_loss},
      {{"headroom",
       "least bias that keeps a series switch conducting over the signal swing; with a frequency and stored charge "
       "(TT, a PIN part's tau) the charge-control rule I > I^/sqrt(1 + (w tau)^2)", false,
       {required("amplitude_v", "amplitude", "V", "load peak", R::positive),
        with_default("load_ohm", "load", "Ohm", "load RL", 50.0, R::positive),
        with_default("dc_return_ohm", "dc-return", "Ohm", "DC return", inf, R::positive, "choke (no AC shunt)"),
        with_default("floor_a", "floor", "A", "trough floor", 0.0, R::non_negative),
        optional_input("freq_hz", "freq", "Hz", "frequency", R::positive)},
       true}, headroom},
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
            join(circuit_inputs(true), join(thermal_inputs(), rf_drive_inputs())))}, isolation},
      {{"power", "dissipation in the part and the bias resistor, against limits (warn at 80 %, fail above)", true,
       {required("supply_v", "supply", "V", "supply", R::positive), required("bias_resistor_ohm", "bias-resistor", "Ohm", "bias resistor", R::non_negative),
        with_default("signal_peak_a", "signal-peak", "A", "signal peak", 0.0, R::non_negative),
        optional_input("max_diode_w", "max-diode", "W", "diode limit", R::positive),
        optional_input("max_resistor_w", "max-resistor", "W", "resistor limit", R::positive),
        thermal_inputs()[0], thermal_inputs()[1]}}, power},
      {{"off-headroom",
       "off-state headroom: the reverse bias must exceed the RF peak on the off junction (plus a margin) and, with BV, "
       "reverse bias + RF peak stay below BV (less the margin); pass or fail with the numbers", true,
       join(join({switch_input(), required("reverse_v", "reverse", "V", "reverse bias", R::non_negative)}, rf_drive_inputs()),
            join({optional_input("bv_v", "bv", "V", "breakdown BV", R::positive),
                  with_default("margin_v", "margin", "V", "margin", 0.5, R::non_negative),
                  with_default("onset_a", "onset", "A", "conduction onset current", 10e-6, R::positive)},
                 circuit_inputs(true)))}, off_headroom_calc},
      {{"junction-temp",
       "junction temperature from the dissipation (DC bias I*Vf + RF loss in the diode): Tj = Ta + theta*P, "
       "and the biased-state loss at Tj against ambient", true,
       join(join({switch_input(), required("current_a", "current", "A", "bias current", R::positive),
                  required("theta_k_per_w", "theta", "K/W", "thermal resistance junction-ambient", R::non_negative),
                  with_default("ambient_k", "ambient", "K", "ambient", 300.15, R::positive)},
                 rf_drive_inputs()),
            circuit_inputs(true))}, junction_temp_calc},
      {{"bias-network",
       "series or shunt switch with its bias network (DC blocks, chokes or ferrites R||L, feed and ground-return resistors, "
       "optional isolating diode) sized for a band, on or off (supply reversed): values, diode current, loss or isolation "
       "and RF into the supply", true,
       join({switch_input(), {"state", "state", "", "bias state (off: the supply reversed)", std::nullopt, false, R::any, {"on", "off"}, {}},
             required("supply_v", "supply", "V", "supply", R::positive), required("bias_resistor_ohm", "bias-resistor", "Ohm", "bias resistor", R::non_negative),
             with_default("rground_ohm", "rground", "Ohm", "ground-return resistor", inf, R::positive, "none"),
             {"feed_diode", "feed-diode", "", "isolating diode in the feed", std::nullopt, false, R::any, {"none", "same"}, {}},
             with_default("freq_low_hz", "freq-low", "Hz", "band low edge", 1e6, R::positive),
             with_default("freq_high_hz", "freq-high", "Hz", "band high edge", 1e9, R::positive),
             with_default("ratio", "ratio", "", "reactance ratio to Z0", 10.0, R::positive),
             optional_input("cblock_f", "cblock", "F", "DC block (default: sized)", R::positive),
             optional_input("choke_h", "choke", "H", "choke (default: sized)", R::positive),
             optional_input("ferrite_r_ohm", "ferrite-r", "Ohm", "ferrite R (choke as R||L)", R::positive),
             optional_input("cbypass_f", "cbypass", "F", "bypass C at the supply side (default none)", R::positive)},
            circuit_inputs(false))}, bias_network_calc},
      {{"series-shunt", "series-shunt switch: insertion loss (series on, shunt off) and isolation (series off, shunt on)", true,
       join({required("current_a", "current", "A", "bias current of the on diode", R::positive),
             with_default("reverse_v", "reverse", "V", "reverse bias of the off diode", 0.0, R::non_negative),
             with_default("rr_ohm", "rr", "Ohm", "off resistance", 0.0, R::non_negative)},
            circuit_inputs(true))}, series_shunt_calc},
      {{"attenuator",
       "PIN pi or T attenuator: bias currents for a matched attenuation, or the attenuation at given currents, "
       "with R(I) = R0 + K*I^-x", false,
       {{"pad", "pad", "", "topology", std::nullopt, false, R::any, {"pi", "tee"}, {}},
        optional_input("target_db", "target", "dB", "target attenuation", R::positive),
        optional_input("series_current_a", "series-current", "A", "series diode current", R::positive),
        optional_input("shunt_current_a", "shunt-current", "A", "shunt diode current", R::positive),
        with_default("z0_ohm", "z0", "Ohm", "port impedance Z0", 50.0, R::positive),
        required("r0_ohm", "r0", "Ohm", "PIN R0", R::non_negative),
        required("k_ohm_a_x", "k", "", "PIN K (ohm*A^x)", R::positive),
        required("x", "x", "", "PIN exponent x", R::positive)}}, attenuator_calc},
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
  if (p.pin)
    j["pin"] = {{"n", p.pin->law.n},          {"tau_s", p.pin->law.tau_s}, {"r0_ohm", p.pin->law.r0_ohm}, {"k_ohm_a_x", p.pin->law.k_ohm_a_x},
                {"x", p.pin->law.x},          {"ct_f", p.pin->ct_f},
                {"rp_ohm", std::isfinite(p.pin->rp_ohm) ? Json(p.pin->rp_ohm) : Json(nullptr)}};
  return j;
}

namespace {
// part.pin {n, tau_s, r0_ohm, k_ohm_a_x, x, ct_f, rp_ohm (null: none)}: tau_s and k_ohm_a_x required.
PinPart pin_part_from_json(const Json& j) {
  if (!j.is_object()) throw DesignInputError("part.pin", "part.pin: must be an object or null");
  PinPart p;
  const auto num = [&](const char* key, double& out, bool required) {
    if (!j.contains(key) || j[key].is_null()) {
      if (required) throw DesignInputError(std::string("part.pin.") + key, std::string("part.pin.") + key + ": missing (required)");
      return;
    }
    if (!j[key].is_number() || !(j[key].get<double>() >= 0))
      throw DesignInputError(std::string("part.pin.") + key, std::string("part.pin.") + key + ": must be a number >= 0");
    out = j[key].get<double>();
  };
  for (const auto& [key, value] : j.items()) {
    (void)value;
    if (key != "n" && key != "tau_s" && key != "r0_ohm" && key != "k_ohm_a_x" && key != "x" && key != "ct_f" && key != "rp_ohm")
      throw DesignInputError("part.pin." + key, "part.pin." + key + ": not a PIN parameter (n, tau_s, r0_ohm, k_ohm_a_x, x, ct_f, rp_ohm)");
  }
  num("tau_s", p.law.tau_s, true);
  num("k_ohm_a_x", p.law.k_ohm_a_x, true);
  num("n", p.law.n, false);
  num("r0_ohm", p.law.r0_ohm, false);
  num("x", p.law.x, false);
  num("ct_f", p.ct_f, false);
  num("rp_ohm", p.rp_ohm, false);
  return p;
}
}  // namespace

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
    if (key == "pin") continue;  // read below
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
  if (j.contains("pin") && !j["pin"].is_null()) p.pin = pin_part_from_json(j["pin"]);
  return p;
}

const std::vector<std::pair<std::string, std::string>>& design_renamed_inputs() {
  static const std::vector<std::pair<std::string, std::string>> v{{"rbias_ohm", "bias_resistor_ohm"},
                                                                  {"rreturn_ohm", "dc_return_ohm"},
                                                                  {"rg_ohm", "source_ohm"},
                                                                  {"rl_ohm", "load_ohm"}};
  return v;
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

Json run_design(const std::string& calculator, const DesignPart* part, const Json& given) {
  // Old input names still work (docs/names.md): read as the new one, with a
  // warning in the answer that names it. Both spellings at once is an error.
  Json inputs = given;
  std::vector<std::string> renamed;
  if (inputs.is_object())
    for (const auto& [old_key, new_key] : design_renamed_inputs()) {
      if (!inputs.contains(old_key)) continue;
      if (inputs.contains(new_key))
        throw DesignInputError(old_key, old_key + ": give " + new_key + " only (" + old_key + " is its old name)");
      inputs[new_key] = inputs[old_key];
      inputs.erase(old_key);
      renamed.push_back("input " + old_key + " is now spelled " + new_key + " (the old spelling still works for now)");
    }
  const CalculatorRow& row = calculator_row(calculator);
  Run run(row.calculator, part, inputs);
  SolveHint hint;
  run.set_hint(&hint, true);
  row.body(run);
  Json answer = run.take();
  if (row.calculator.uses_part(part != nullptr) && answer["achievable"].get<bool>()) add_uncertainty(calculator, *part, inputs, answer, hint);
  for (const auto& w : renamed) answer["warnings"].push_back(w);
  return answer;
}

}  // namespace junco::fitting
