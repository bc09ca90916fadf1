#include "daemon/plan.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>
#include <set>
#include <sstream>

namespace junco::daemon {

namespace {

[[noreturn]] void bad(const std::string& field, const std::string& problem) { throw BadInput(field, problem); }
// limit: the bench's limit the plan breaks; field: the plan's value that breaks it.
[[noreturn]] void refuse(const std::string& message, const std::string& limit = "", const std::string& field = "") {
  throw PlanRefused(message, limit, field);
}

std::string num(double x) {
  std::ostringstream os;
  os << x;
  return os.str();
}

const Json& need(const Json& obj, const std::string& key, const std::string& field) {
  if (!obj.contains(key)) bad(field + "." + key, "missing (required)");
  return obj.at(key);
}

double number(const Json& v, const std::string& field) {
  if (!v.is_number()) bad(field, std::string("must be a number, not ") + v.type_name());
  const double x = v.get<double>();
  if (!std::isfinite(x)) bad(field, "must be finite");
  return x;
}

int integer(const Json& v, const std::string& field) {
  if (!v.is_number_integer()) bad(field, std::string("must be an integer, not ") + v.type_name());
  const auto x = v.get<long long>();
  if (x < -1000000000LL || x > 1000000000LL) bad(field, "out of range");
  return static_cast<int>(x);
}

std::string text(const Json& v, const std::string& field) {
  if (!v.is_string()) bad(field, std::string("must be a string, not ") + v.type_name());
  return v.get<std::string>();
}

void only_keys(const Json& obj, const std::string& field, std::initializer_list<const char*> keys) {
  if (!obj.is_object()) bad(field, std::string("must be an object, not ") + obj.type_name());
  std::set<std::string> known(keys.begin(), keys.end());
  for (const auto& [k, v] : obj.items()) {
    (void)v;
    if (!known.count(k)) bad(field + "." + k, "unknown field");
  }
}

SweepSpec parse_sweep(const Json& s) {
  const std::string f = "plan.sweep";
  only_keys(s, f, {"mode", "spacing", "start", "stop", "count", "settle_s", "average", "compliance_a"});
  SweepSpec out;
  const std::string mode = text(need(s, "mode", f), f + ".mode");
  if (mode == "voltage") out.mode = SweepMode::voltage;
  else if (mode == "current") out.mode = SweepMode::current;
  else bad(f + ".mode", "must be \"voltage\" or \"current\", got \"" + mode + "\"");
  const std::string spacing = s.contains("spacing") ? text(s["spacing"], f + ".spacing") : "linear";
  if (spacing == "linear") out.spacing = Spacing::linear;
  else if (spacing == "log") out.spacing = Spacing::log;
  else bad(f + ".spacing", "must be \"linear\" or \"log\", got \"" + spacing + "\"");
  out.start = number(need(s, "start", f), f + ".start");
  out.stop = number(need(s, "stop", f), f + ".stop");
  out.count = integer(need(s, "count", f), f + ".count");
  if (s.contains("settle_s")) out.settle_s = number(s["settle_s"], f + ".settle_s");
  if (s.contains("average")) out.average = integer(s["average"], f + ".average");
  if (s.contains("compliance_a")) out.compliance_a = number(s["compliance_a"], f + ".compliance_a");
  return out;
}

AcSpec parse_ac(const Json& a) {
  const std::string f = "plan.ac";
  only_keys(a, f, {"freqs_hz", "amplitude", "unit", "settle_s", "off_state"});
  AcSpec out;
  const Json& freqs = need(a, "freqs_hz", f);
  if (!freqs.is_array()) bad(f + ".freqs_hz", std::string("must be an array, not ") + freqs.type_name());
  for (std::size_t i = 0; i < freqs.size(); ++i) out.freqs_hz.push_back(number(freqs[i], f + ".freqs_hz[" + std::to_string(i) + "]"));
  out.amplitude = number(need(a, "amplitude", f), f + ".amplitude");
  const std::string unit = a.contains("unit") ? text(a["unit"], f + ".unit") : "vrms";
  if (unit == "vrms") out.unit = drivers::LevelUnit::vrms;
  else if (unit == "vpp") out.unit = drivers::LevelUnit::vpp;
  else bad(f + ".unit", "must be \"vrms\" or \"vpp\", got \"" + unit + "\"");
  if (a.contains("settle_s")) out.settle_s = number(a["settle_s"], f + ".settle_s");
  if (a.contains("off_state") && !a["off_state"].is_null()) {
    const Json& o = a["off_state"];
    const std::string g = f + ".off_state";
    if (!o.is_object()) bad(g, std::string("must be an object ({} for the forward readings' frequencies and amplitude), not ") + o.type_name());
    only_keys(o, g, {"freqs_hz", "amplitude"});
    AcSpec::OffState off{out.freqs_hz, out.amplitude};
    if (o.contains("freqs_hz")) {
      const Json& fo = o["freqs_hz"];
      if (!fo.is_array()) bad(g + ".freqs_hz", std::string("must be an array, not ") + fo.type_name());
      off.freqs_hz.clear();
      for (std::size_t i = 0; i < fo.size(); ++i) off.freqs_hz.push_back(number(fo[i], g + ".freqs_hz[" + std::to_string(i) + "]"));
    }
    if (o.contains("amplitude")) off.amplitude = number(o["amplitude"], g + ".amplitude");
    out.off_state = off;
  }
  return out;
}

VectorSpec parse_vector(const Json& v) {
  const std::string f = "plan.vector";
  only_keys(v, f, {"freqs_hz", "amplitude", "unit", "settle_s", "standards", "forward_i_a"});
  VectorSpec out;
  const Json& freqs = need(v, "freqs_hz", f);
  if (!freqs.is_array()) bad(f + ".freqs_hz", std::string("must be an array, not ") + freqs.type_name());
  for (std::size_t i = 0; i < freqs.size(); ++i) out.freqs_hz.push_back(number(freqs[i], f + ".freqs_hz[" + std::to_string(i) + "]"));
  out.amplitude = number(need(v, "amplitude", f), f + ".amplitude");
  const std::string unit = v.contains("unit") ? text(v["unit"], f + ".unit") : "vpp";
  if (unit == "vrms") out.unit = drivers::LevelUnit::vrms;
  else if (unit == "vpp") out.unit = drivers::LevelUnit::vpp;
  else bad(f + ".unit", "must be \"vrms\" or \"vpp\", got \"" + unit + "\"");
  if (v.contains("settle_s")) out.settle_s = number(v["settle_s"], f + ".settle_s");
  if (v.contains("standards") && !v["standards"].is_null()) {
    const std::string g = f + ".standards";
    only_keys(v["standards"], g, {"open_slot", "short_slot"});
    out.open_slot = integer(need(v["standards"], "open_slot", g), g + ".open_slot");
    out.short_slot = integer(need(v["standards"], "short_slot", g), g + ".short_slot");
  }
  if (v.contains("forward_i_a") && !v["forward_i_a"].is_null()) {
    const Json& fi = v["forward_i_a"];
    if (!fi.is_array()) bad(f + ".forward_i_a", std::string("must be an array of currents in A, not ") + fi.type_name());
    for (std::size_t i = 0; i < fi.size(); ++i) out.forward_i_a.push_back(number(fi[i], f + ".forward_i_a[" + std::to_string(i) + "]"));
  }
  return out;
}

HeatingSpec parse_heating(const Json& h) {
  const std::string f = "plan.heating";
  only_keys(h, f, {"pulse", "dwell", "down_sweep"});
  HeatingSpec out;
  if (h.contains("pulse") && !h["pulse"].is_null()) {
    const std::string g = f + ".pulse";
    only_keys(h["pulse"], g, {"from", "on_s", "off_s"});
    HeatingSpec::Pulse p;
    if (h["pulse"].contains("from")) p.from = number(h["pulse"]["from"], g + ".from");
    if (h["pulse"].contains("on_s")) p.on_s = number(h["pulse"]["on_s"], g + ".on_s");
    if (h["pulse"].contains("off_s")) p.off_s = number(h["pulse"]["off_s"], g + ".off_s");
    out.pulse = p;
  }
  if (h.contains("dwell") && !h["dwell"].is_null()) {
    const std::string g = f + ".dwell";
    only_keys(h["dwell"], g, {"short_s", "long_s"});
    out.dwell = HeatingSpec::Dwell{number(need(h["dwell"], "short_s", g), g + ".short_s"), number(need(h["dwell"], "long_s", g), g + ".long_s")};
  }
  if (h.contains("down_sweep")) {
    if (!h["down_sweep"].is_boolean()) bad(f + ".down_sweep", std::string("must be a boolean, not ") + h["down_sweep"].type_name());
    out.down_sweep = h["down_sweep"].get<bool>();
  }
  return out;
}

// The k-th set value of the sweep (as sweep_values computes it, without the
// vector: the counts below run before a plan's size is checked).
double step_value(const SweepSpec& s, int k) {
  if (s.count == 1 || k == 0) return s.start;
  if (k == s.count - 1) return s.stop;
  const double lo = std::min(s.start, s.stop), hi = std::max(s.start, s.stop);
  const double f = static_cast<double>(k) / (s.count - 1);
  const double x = s.spacing == Spacing::linear ? s.start + f * (s.stop - s.start)
                                                : std::exp(std::log(s.start) + f * (std::log(s.stop) - std::log(s.start)));
  return std::clamp(x, lo, hi);
}

bool is_pulsed(const Plan& p, double value) { return p.heating.pulse && value >= pulse_from(p); }

}  // namespace

const char* to_string(Series series) {
  switch (series) {
    case Series::up: return "up";
    case Series::dwell: return "dwell";
    case Series::down: return "down";
  }
  return "?";
}

double pulse_from(const Plan& p) {
  if (!p.heating.pulse) return std::numeric_limits<double>::infinity();
  if (p.heating.pulse->from > 0) return p.heating.pulse->from;
  return std::max(p.sweep.start, p.sweep.stop) / 10.0;  // the top decade
}

double pulsed_steps(const Plan& p) {
  if (!p.heating.pulse || p.sweep.count < 1) return 0;
  const int n = std::min(p.sweep.count, 1000001);  // beyond it the plan is refused anyway
  double pulsed = 0;
  for (int k = 0; k < n; ++k) pulsed += is_pulsed(p, step_value(p.sweep, k)) ? 1.0 : 0.0;
  return pulsed;
}

const char* to_string(Step::Kind kind) {
  switch (kind) {
    case Step::Kind::dc: return "dc";
    case Step::Kind::ac: return "ac";
    case Step::Kind::reverse: return "reverse";
    case Step::Kind::reverse_ac: return "reverse_ac";
    case Step::Kind::reverse_vector: return "reverse_vector";
    case Step::Kind::vector_open: return "vector_open";
    case Step::Kind::vector_short: return "vector_short";
    case Step::Kind::forward_vector: return "forward_vector";
  }
  return "?";
}

bool is_vector(Step::Kind kind) {
  return kind == Step::Kind::reverse_vector || kind == Step::Kind::vector_open || kind == Step::Kind::vector_short ||
         kind == Step::Kind::forward_vector;
}

bool is_reverse(Step::Kind kind) {
  return kind == Step::Kind::reverse || kind == Step::Kind::reverse_ac || (is_vector(kind) && kind != Step::Kind::forward_vector);
}

bool uses_siggen(Step::Kind kind) { return kind == Step::Kind::ac || kind == Step::Kind::reverse_ac || is_vector(kind); }

Plan parse_plan(const Json& j) {
  only_keys(j, "plan", {"lot", "parts", "sweep", "ac", "vector", "reverse_v", "heating", "resume", "temp_k", "vf_max_v", "temps_k", "soak", "part_type"});
  Plan p;
  p.lot = text(need(j, "lot", "plan"), "plan.lot");
  const Json& parts = need(j, "parts", "plan");
  if (!parts.is_array()) bad("plan.parts", std::string("must be an array, not ") + parts.type_name());
  for (std::size_t i = 0; i < parts.size(); ++i) {
    const std::string f = "plan.parts[" + std::to_string(i) + "]";
    only_keys(parts[i], f, {"slot", "label"});
    p.parts.push_back({integer(need(parts[i], "slot", f), f + ".slot"), text(need(parts[i], "label", f), f + ".label")});
  }
  p.sweep = parse_sweep(need(j, "sweep", "plan"));
  if (j.contains("ac") && !j["ac"].is_null()) p.ac = parse_ac(j["ac"]);
  if (j.contains("vector") && !j["vector"].is_null()) p.vector = parse_vector(j["vector"]);
  if (j.contains("reverse_v")) {
    const Json& r = j["reverse_v"];
    if (!r.is_array()) bad("plan.reverse_v", std::string("must be an array, not ") + r.type_name());
    for (std::size_t i = 0; i < r.size(); ++i) p.reverse_v.push_back(std::fabs(number(r[i], "plan.reverse_v[" + std::to_string(i) + "]")));
  }
  if (j.contains("heating") && !j["heating"].is_null()) p.heating = parse_heating(j["heating"]);
  if (j.contains("resume")) {
    if (!j["resume"].is_boolean()) bad("plan.resume", std::string("must be a boolean, not ") + j["resume"].type_name());
    p.resume = j["resume"].get<bool>();
  }
  if (j.contains("temp_k")) {
    p.temp_k = number(j["temp_k"], "plan.temp_k");
    p.temp_k_given = true;
  }
  if (j.contains("temps_k")) {
    const Json& t = j["temps_k"];
    if (!t.is_array()) bad("plan.temps_k", std::string("must be an array of kelvin, not ") + t.type_name());
    for (std::size_t i = 0; i < t.size(); ++i) p.temps_k.push_back(number(t[i], "plan.temps_k[" + std::to_string(i) + "]"));
  }
  if (j.contains("soak")) {
    const Json& s = j["soak"];
    only_keys(s, "plan.soak", {"tolerance_k", "hold_s"});
    if (s.contains("tolerance_k")) p.soak.tolerance_k = number(s["tolerance_k"], "plan.soak.tolerance_k");
    if (s.contains("hold_s")) p.soak.hold_s = number(s["hold_s"], "plan.soak.hold_s");
  }
  if (j.contains("vf_max_v")) p.vf_max_v = number(j["vf_max_v"], "plan.vf_max_v");
  if (j.contains("part_type")) {
    p.part_type = text(j["part_type"], "plan.part_type");
    if (p.part_type != "junction" && p.part_type != "pin") bad("plan.part_type", "must be \"junction\" or \"pin\", not \"" + p.part_type + "\"");
  }
  return p;
}

double steps_per_part(const Plan& p) {
  const double n_ac = p.ac ? static_cast<double>(p.ac->freqs_hz.size()) : 0.0;
  const double n_off = p.ac && p.ac->off_state ? static_cast<double>(p.ac->off_state->freqs_hz.size()) : 0.0;
  const double count = static_cast<double>(p.sweep.count), pulsed = pulsed_steps(p);
  // No AC readings at a pulsed step (they need the bias held); two dwell
  // readings there instead when asked; the sweep down repeats every step.
  const double forward = count + (count - pulsed) * n_ac + (p.heating.dwell ? 2.0 * pulsed : 0.0) + (p.heating.down_sweep ? count : 0.0);
  const double n_vec = p.vector ? static_cast<double>(p.vector->freqs_hz.size()) : 0.0;
  const double standards = p.vector && p.vector->standards() ? 2.0 * n_vec : 0.0;
  const double forward_vector = p.vector ? static_cast<double>(p.vector->forward_i_a.size()) * n_vec : 0.0;
  return forward + static_cast<double>(p.reverse_v.size()) * (1.0 + n_off + n_vec) + standards + forward_vector;
}

int temperature_count(const Plan& p) { return p.temps_k.empty() ? 1 : static_cast<int>(p.temps_k.size()); }

double points_per_job(const Plan& p) {
  return steps_per_part(p) * static_cast<double>(p.parts.size()) * static_cast<double>(temperature_count(p));
}

double soak_s(const Plan& p, const Config& c, bool with_ramps) {
  if (p.temps_k.empty()) return 0.0;
  double total = p.soak.hold_s * static_cast<double>(p.temps_k.size());
  if (!with_ramps) return total;
  const double rate = c.safety.chamber_max_rate_k_per_min > 0 ? c.safety.chamber_max_rate_k_per_min : kAssumedChamberRateKPerMin;
  double from = c.safety.chamber_idle_k;
  for (double t : p.temps_k) {
    total += std::fabs(t - from) / rate * 60.0;
    from = t;
  }
  return total;
}

double plan_memory_bytes(const Plan& p) { return steps_per_part(p) * (static_cast<double>(sizeof(Step)) + kReadingBytes); }

namespace {

// A count as digits ("160800000"), not "1.608e+08".
std::string count_text(double n) {
  if (!(n < 1e15)) return num(n);
  char text[32];
  std::snprintf(text, sizeof text, "%.0f", n);
  return text;
}

// The size caps, by arithmetic on the plan as parsed: a plan of 100000 steps
// × 200 frequencies × 8 parts is refused here in microseconds, before
// expand_steps would allocate its 20 million steps.
void check_plan_size(const Plan& p, const JobLimits& lim) {
  const double points = points_per_job(p);
  if (points > static_cast<double>(lim.max_points_per_job))
    refuse("plan takes " + count_text(points) + " readings (" + count_text(steps_per_part(p)) + " per part × " + std::to_string(p.parts.size()) +
               " parts" + (p.temps_k.empty() ? std::string() : " × " + std::to_string(p.temps_k.size()) + " temperatures") +
               "), over limits.max_points_per_job = " + std::to_string(lim.max_points_per_job),
           "max_points_per_job");
  const double bytes = plan_memory_bytes(p);
  if (bytes > lim.max_plan_memory_bytes)
    refuse("plan needs about " + num(std::ceil(bytes / 1048576.0)) + " MiB to run (" + count_text(steps_per_part(p)) +
               " steps per part), over limits.max_plan_memory_bytes = " + num(lim.max_plan_memory_bytes) + " bytes",
           "max_plan_memory_bytes");
}

}  // namespace

namespace {

void check_heating(const Plan& p) {
  const HeatingSpec& h = p.heating;
  if (h.pulse) {
    const auto& u = *h.pulse;
    if (u.from < 0) refuse("heating.pulse.from " + num(u.from) + " must be > 0 (or 0 for the top decade)");
    if (u.from == 0 && p.sweep.mode == SweepMode::voltage)
      refuse("heating.pulse.from must be given (in V) for a sweep by voltage: the top decade of current is not known before the sweep");
    if (u.on_s < 0 || u.on_s > 10) refuse("heating.pulse.on_s " + num(u.on_s) + " s must be in 0..10");
    if (u.off_s < 0 || u.off_s > 3600) refuse("heating.pulse.off_s " + num(u.off_s) + " s must be in 0..3600");
    if (pulsed_steps(p) < 1)
      refuse("heating.pulse.from " + num(pulse_from(p)) + " is above every step of the sweep: no step would be pulsed");
  }
  if (h.dwell) {
    const auto& d = *h.dwell;
    if (!h.pulse) refuse("heating.dwell needs heating.pulse: each dwell pair is read in one pulse from cold");
    if (!(d.short_s > h.pulse->on_s && d.short_s < d.long_s && d.long_s <= 60))
      refuse("heating.dwell short_s " + num(d.short_s) + " s and long_s " + num(d.long_s) +
             " s must satisfy pulse.on_s < short_s < long_s <= 60 s (the pulse's first reading is the cold reference)");
  }
}

// A forward current the supply will be asked to hold (a current sweep's
// highest step, each plan.vector.forward_i_a): within current_limit_a and
// the plan's compliance, at most max_power_w in the part at vf_max_v, and no
// more than max_supply_v across the fixture's DC resistance even with no drop
// across the part. `what` names the value in the message ("sweep stop").
void check_forward_current(double i, const std::string& what, const std::string& field, const Plan& p, const Config& c) {
  const SafetyLimits& lim = c.safety;
  if (i > lim.current_limit_a)
    refuse(what + " " + num(i) + " A exceeds safety limit current_limit_a = " + num(lim.current_limit_a) + " A", "current_limit_a", field);
  const double i_lim = compliance_a(p, c);
  if (i > i_lim) refuse(what + " " + num(i) + " A exceeds the plan's compliance_a = " + num(i_lim) + " A", "", field);
  const double p_max = p.vf_max_v * i;
  if (p_max > lim.max_power_w)
    refuse(what + " " + num(i) + " A may put " + num(p_max) + " W in the part (vf_max_v " + num(p.vf_max_v) + " V × " + num(i) +
               " A), exceeding safety limit max_power_w = " + num(lim.max_power_w) + " W",
           "max_power_w", field);
  const double r_total = c.fixture.bias_resistor_ohm + c.fixture.dc_return_ohm;
  if (i * r_total > lim.max_supply_v)
    refuse(what + " " + num(i) + " A needs at least " + num(i * r_total) + " V across " + num(r_total) +
               " Ω, exceeding safety limit max_supply_v = " + num(lim.max_supply_v) + " V",
           "max_supply_v", field);
}

// plan.vector.forward_i_a: every current within the same limits as a
// current sweep's highest step (compliance, current_limit_a, max_power_w at
// vf_max_v, max_supply_v across the fixture's DC resistance), and the
// signal's peak current through the slot (at most amplitude peak over
// source + load) below the smallest of them: beyond it the junction would
// switch off on the signal's troughs, and the reading would be no
// small-signal impedance (physics, no source needed).
void check_forward_vector(const Plan& p, const Config& c) {
  const VectorSpec& v = *p.vector;
  if (v.forward_i_a.empty()) return;
  if (v.forward_i_a.size() > 100) refuse("plan.vector.forward_i_a lists " + std::to_string(v.forward_i_a.size()) + " currents, at most 100");
  for (std::size_t k = 0; k < v.forward_i_a.size(); ++k) {
    const double i = v.forward_i_a[k];
    const std::string field = "plan.vector.forward_i_a[" + std::to_string(k) + "]";
    if (!(i > 0)) refuse(field + " " + num(i) + " A must be > 0 (reverse biases go in reverse_v)", "", field);
    check_forward_current(i, field, field, p, c);
  }
  const double peak_v = v.unit == drivers::LevelUnit::vrms ? v.amplitude * std::sqrt(2.0) : v.amplitude / 2.0;
  const double signal_a = peak_v / std::max(1.0, c.fixture.source_ohm + c.fixture.load_ohm);
  const double least_a = *std::min_element(v.forward_i_a.begin(), v.forward_i_a.end());
  if (signal_a >= least_a)
    refuse("plan.vector amplitude peak " + num(peak_v) + " V drives up to " + num(signal_a) + " A through the slot, not below the smallest forward_i_a " +
               num(least_a) + " A: the part would switch off on the signal's troughs",
           "", "plan.vector.forward_i_a");
}

// plan.vector: the roles it needs (named, so a bench without them says
// which is missing), its frequencies and amplitude, the reverse biases it
// reads at, and the standards' slots.
void check_vector(const Plan& p, const Config& c) {
  if (!p.vector) return;
  const VectorSpec& v = *p.vector;
  if (!c.instrument("vectormeter"))
    refuse("plan.vector needs a vectormeter in the bench config (bench.vectormeter): this bench has no instrument that reads complex transfer",
           "", "plan.vector");
  if (!c.instrument("siggen")) refuse("plan.vector needs a siggen in the bench config (bench.siggen): the transfer is read at its frequency", "", "plan.vector");
  if (v.freqs_hz.empty()) refuse("plan.vector.freqs_hz must list at least one frequency");
  for (double f : v.freqs_hz)
    if (f <= 0 || f > 1e10) refuse("plan.vector frequency " + num(f) + " Hz must be in (0, 1e10]");
  if (v.amplitude <= 0 || v.amplitude > c.safety.max_supply_v)
    refuse("plan.vector amplitude " + num(v.amplitude) + " must be > 0 and not above max_supply_v = " + num(c.safety.max_supply_v) + " V");
  if (v.settle_s < 0 || v.settle_s > 3600) refuse("plan.vector settle_s " + num(v.settle_s) + " s must be in 0..3600");
  if (p.reverse_v.empty()) refuse("plan.vector needs reverse_v: the reverse biases to read the transfer at");
  // As for the off-state levels: the signal must not carry the junction
  // into conduction on its peaks (common practice, no source).
  const double peak_v = v.unit == drivers::LevelUnit::vrms ? v.amplitude * std::sqrt(2.0) : v.amplitude / 2.0;
  const double least_v = *std::min_element(p.reverse_v.begin(), p.reverse_v.end());
  if (peak_v > least_v + 0.1)
    refuse("plan.vector amplitude peak " + num(peak_v) + " V is above the smallest reverse bias " + num(least_v) +
           " V + 0.1 V: the junction would conduct on the signal peaks of the vector readings");
  if ((v.open_slot > 0) != (v.short_slot > 0) || v.open_slot < 0 || v.short_slot < 0)
    refuse("plan.vector.standards needs both open_slot and short_slot (fixture slots from 1)");
  if (v.standards()) {
    for (int s : {v.open_slot, v.short_slot}) {
      if (s > c.fixture.slots)
        refuse("plan.vector.standards slot " + std::to_string(s) + " is not on the fixture (slots 1.." + std::to_string(c.fixture.slots) + ")");
      for (const auto& part : p.parts)
        if (part.slot == s) refuse("plan.vector.standards slot " + std::to_string(s) + " holds part \"" + part.label + "\": a standard's slot holds no part");
    }
    if (v.open_slot == v.short_slot) refuse("plan.vector.standards open_slot and short_slot are both " + std::to_string(v.open_slot));
  }
  check_forward_vector(p, c);
}

}  // namespace

double compliance_a(const Plan& plan, const Config& c) {
  return plan.sweep.compliance_a > 0 ? plan.sweep.compliance_a : c.safety.current_limit_a;
}

void check_plan(const Plan& p, const Config& c) {
  const SafetyLimits& lim = c.safety;
  const SweepSpec& s = p.sweep;
  // Shape first: these are malformed plans rather than unsafe ones.
  if (p.lot.empty()) refuse("plan.lot must not be empty");
  if (p.parts.empty()) refuse("plan.parts must name at least one part");
  std::set<int> slots;
  std::set<std::string> labels;
  for (const auto& part : p.parts) {
    if (part.slot < 1 || part.slot > c.fixture.slots)
      refuse("slot " + std::to_string(part.slot) + " is not on the fixture (slots 1.." + std::to_string(c.fixture.slots) + ")");
    if (part.label.empty()) refuse("part in slot " + std::to_string(part.slot) + " has an empty label");
    if (!slots.insert(part.slot).second) refuse("slot " + std::to_string(part.slot) + " is named twice");
    if (!labels.insert(part.label).second) refuse("part label \"" + part.label + "\" is named twice");
  }
  if (s.count < 1 || s.count > 100000) refuse("sweep count " + std::to_string(s.count) + " must be in 1..100000");
  check_plan_size(p, c.limits);
  if (s.settle_s < 0 || s.settle_s > 3600) refuse("sweep settle_s " + num(s.settle_s) + " s must be in 0..3600");
  if (s.average < 1 || s.average > 1000) refuse("sweep average " + std::to_string(s.average) + " must be in 1..1000");
  if (s.compliance_a < 0) refuse("sweep compliance_a " + num(s.compliance_a) + " A must be > 0");
  if (p.temp_k < 1 || p.temp_k > 700) refuse("temp_k " + num(p.temp_k) + " K must be in 1..700");
  if (!p.temps_k.empty()) {
    if (!c.instrument("chamber")) refuse("plan.temps_k needs a chamber in the bench config (bench.chamber)");
    if (p.temp_k_given) refuse("plan.temp_k cannot be given with temps_k: each run's ambient is the chamber's readback");
    if (p.temps_k.size() > 50) refuse("plan.temps_k lists " + std::to_string(p.temps_k.size()) + " temperatures, at most 50");
    for (double t : p.temps_k)
      if (t < lim.chamber_min_k || t > lim.chamber_max_k)
        refuse("plan.temps_k " + num(t) + " K is outside safety limits chamber_min_k..chamber_max_k = " + num(lim.chamber_min_k) + ".." +
                   num(lim.chamber_max_k) + " K",
               t < lim.chamber_min_k ? "chamber_min_k" : "chamber_max_k");
    if (!(p.soak.tolerance_k > 0 && p.soak.tolerance_k <= 20)) refuse("plan.soak.tolerance_k " + num(p.soak.tolerance_k) + " K must be in (0, 20]");
    if (!(p.soak.hold_s >= 0 && p.soak.hold_s < lim.max_soak_s))
      refuse("plan.soak.hold_s " + num(p.soak.hold_s) + " s must be in 0..safety limit max_soak_s = " + num(lim.max_soak_s) + " s (exclusive)",
             "max_soak_s");
  }
  if (p.vf_max_v <= 0 || p.vf_max_v > lim.max_supply_v) refuse("vf_max_v " + num(p.vf_max_v) + " V must be in (0, max_supply_v]");
  const char* unit = s.mode == SweepMode::voltage ? "V" : "A";
  const double lo = std::min(s.start, s.stop), hi = std::max(s.start, s.stop);
  if (s.mode == SweepMode::voltage ? lo < 0 : lo <= 0)
    refuse(std::string("sweep start/stop must be ") + (s.mode == SweepMode::voltage ? ">= 0 V (reverse bias goes in reverse_v)" : "> 0 A"));
  if (s.spacing == Spacing::log && lo <= 0) refuse(std::string("log spacing needs start and stop > 0 ") + unit);
  const std::string hi_name = hi == s.stop ? "stop" : "start";
  const std::string hi_field = "plan.sweep." + hi_name;

  const double i_lim = compliance_a(p, c);
  if (i_lim > lim.current_limit_a)
    refuse("sweep compliance_a " + num(i_lim) + " A exceeds safety limit current_limit_a = " + num(lim.current_limit_a) + " A",
           "current_limit_a", "plan.sweep.compliance_a");
  const double r_total = c.fixture.bias_resistor_ohm + c.fixture.dc_return_ohm;
  if (s.mode == SweepMode::voltage) {
    if (hi > lim.max_supply_v)
      refuse("sweep " + hi_name + " " + num(hi) + " V exceeds safety limit max_supply_v = " + num(lim.max_supply_v) + " V", "max_supply_v", hi_field);
    // The part's current is at most the compliance and at most V/R; its
    // voltage at most the supply and (assumed) vf_max_v.
    const double i_max = r_total > 0 ? std::min(i_lim, hi / r_total) : i_lim;
    const double p_max = std::min(hi, p.vf_max_v) * i_max;
    if (p_max > lim.max_power_w)
      refuse("sweep " + hi_name + " " + num(hi) + " V may put " + num(p_max) + " W in the part (vf_max_v " + num(p.vf_max_v) + " V × " +
                 num(i_max) + " A), exceeding safety limit max_power_w = " + num(lim.max_power_w) + " W",
             "max_power_w", hi_field);
  } else {
    check_forward_current(hi, "sweep " + hi_name, hi_field, p, c);
  }
  for (double r : p.reverse_v) {
    if (r > lim.max_reverse_v)
      refuse("reverse_v " + num(r) + " V exceeds safety limit max_reverse_v = " + num(lim.max_reverse_v) + " V", "max_reverse_v", "plan.reverse_v");
    if (r > lim.max_supply_v)
      refuse("reverse_v " + num(r) + " V exceeds safety limit max_supply_v = " + num(lim.max_supply_v) + " V", "max_supply_v", "plan.reverse_v");
  }
  if (p.ac) {
    if (!c.instrument("siggen") || !c.instrument("levelmeter")) refuse("plan.ac needs a siggen and a levelmeter in the bench config");
    if (p.ac->freqs_hz.empty()) refuse("plan.ac.freqs_hz must list at least one frequency");
    for (double f : p.ac->freqs_hz)
      if (f <= 0 || f > 1e10) refuse("plan.ac frequency " + num(f) + " Hz must be in (0, 1e10]");
    if (p.ac->amplitude <= 0 || p.ac->amplitude > lim.max_supply_v)
      refuse("plan.ac amplitude " + num(p.ac->amplitude) + " must be > 0 and not above max_supply_v = " + num(lim.max_supply_v) + " V");
    if (p.ac->settle_s < 0 || p.ac->settle_s > 3600) refuse("plan.ac settle_s " + num(p.ac->settle_s) + " s must be in 0..3600");
    if (const auto& off = p.ac->off_state) {
      if (p.reverse_v.empty()) refuse("plan.ac.off_state needs reverse_v: the reverse biases to read the levels at");
      if (off->freqs_hz.empty()) refuse("plan.ac.off_state.freqs_hz must list at least one frequency");
      for (double f : off->freqs_hz)
        if (f <= 0 || f > 1e10) refuse("plan.ac.off_state frequency " + num(f) + " Hz must be in (0, 1e10]");
      if (off->amplitude <= 0 || off->amplitude > lim.max_supply_v)
        refuse("plan.ac.off_state amplitude " + num(off->amplitude) + " must be > 0 and not above max_supply_v = " +
               num(lim.max_supply_v) + " V");
      // The signal must not carry the junction into conduction on its peaks:
      // peak at most the smallest reverse bias + 0.1 V (common practice, no source).
      const double peak_v = p.ac->unit == drivers::LevelUnit::vrms ? off->amplitude * std::sqrt(2.0) : off->amplitude / 2.0;
      const double least_v = *std::min_element(p.reverse_v.begin(), p.reverse_v.end());
      if (peak_v > least_v + 0.1)
        refuse("plan.ac.off_state amplitude peak " + num(peak_v) + " V is above the smallest reverse bias " + num(least_v) +
               " V + 0.1 V: the junction would conduct on the signal peaks of the off-state readings");
    }
  }
  check_heating(p);
  check_vector(p, c);
  const double t = min_duration_s(p);
  if (t > lim.max_job_s)
    refuse("estimated duration " + num(t) + " s exceeds safety limit max_job_s = " + num(lim.max_job_s) + " s", "max_job_s");
}

std::vector<double> sweep_values(const SweepSpec& s) {
  std::vector<double> out;
  if (s.count == 1) return {s.start};
  // exp(log(x)) may round above x (10 → 10.000000000000002), i.e. above the
  // limit check_plan compared start/stop with: keep every step inside them.
  const double lo = std::min(s.start, s.stop), hi = std::max(s.start, s.stop);
  for (int k = 0; k < s.count; ++k) {
    const double f = static_cast<double>(k) / (s.count - 1);
    const double x = s.spacing == Spacing::linear ? s.start + f * (s.stop - s.start)
                                                  : std::exp(std::log(s.start) + f * (std::log(s.stop) - std::log(s.start)));
    out.push_back(std::clamp(x, lo, hi));
  }
  out.front() = s.start;  // exact end points
  out.back() = s.stop;
  return out;
}

std::vector<Step> expand_steps(const Plan& plan) {
  std::vector<Step> steps;
  // The fixture's standards first: with the supply off, before the part's
  // slot carries any bias.
  if (plan.vector && plan.vector->standards()) {
    for (double f : plan.vector->freqs_hz) steps.push_back({Step::Kind::vector_open, 0, 0.0, f});
    for (double f : plan.vector->freqs_hz) steps.push_back({Step::Kind::vector_short, 0, 0.0, f});
  }
  const auto values = sweep_values(plan.sweep);
  const int n = static_cast<int>(values.size());
  for (int k = 0; k < n; ++k) {
    const bool pulsed = is_pulsed(plan, values[k]);
    steps.push_back({Step::Kind::dc, k, values[k], 0, Series::up, pulsed, 0});
    if (pulsed && plan.heating.dwell) {
      steps.push_back({Step::Kind::dc, k, values[k], 0, Series::dwell, true, plan.heating.dwell->short_s});
      steps.push_back({Step::Kind::dc, k, values[k], 0, Series::dwell, true, plan.heating.dwell->long_s});
    }
    if (plan.ac && !pulsed)
      for (double f : plan.ac->freqs_hz) steps.push_back({Step::Kind::ac, k, values[k], f});
  }
  if (plan.heating.down_sweep)
    for (int k = n - 1; k >= 0; --k) steps.push_back({Step::Kind::dc, k, values[k], 0, Series::down, is_pulsed(plan, values[k]), 0});
  // The forward vector readings after the sweep, before the part is
  // reverse biased: each current set once, every frequency read at it.
  if (plan.vector)
    for (std::size_t k = 0; k < plan.vector->forward_i_a.size(); ++k)
      for (double f : plan.vector->freqs_hz)
        steps.push_back({Step::Kind::forward_vector, static_cast<int>(k), plan.vector->forward_i_a[k], f});
  for (std::size_t k = 0; k < plan.reverse_v.size(); ++k) {
    const int index = static_cast<int>(k);
    steps.push_back({Step::Kind::reverse, index, -plan.reverse_v[k], 0});
    if (plan.ac && plan.ac->off_state)
      for (double f : plan.ac->off_state->freqs_hz) steps.push_back({Step::Kind::reverse_ac, index, -plan.reverse_v[k], f});
    if (plan.vector)
      for (double f : plan.vector->freqs_hz) steps.push_back({Step::Kind::reverse_vector, index, -plan.reverse_v[k], f});
  }
  return steps;
}

double min_duration_s(const Plan& p) {
  const double n_ac = p.ac ? static_cast<double>(p.ac->freqs_hz.size()) : 0.0;
  const double n_off = p.ac && p.ac->off_state ? static_cast<double>(p.ac->off_state->freqs_hz.size()) : 0.0;
  const double count = p.sweep.count, pulsed = pulsed_steps(p), ac_s = p.ac ? p.ac->settle_s : 0.0;
  const double n_vec = p.vector ? static_cast<double>(p.vector->freqs_hz.size()) : 0.0;
  const double vector_s =
      p.vector ? n_vec * p.vector->settle_s * (static_cast<double>(p.reverse_v.size()) + (p.vector->standards() ? 2.0 : 0.0)) +
                     static_cast<double>(p.vector->forward_i_a.size()) * (p.sweep.settle_s + n_vec * p.vector->settle_s)
               : 0.0;
  // A pulsed step waits off_s, then on_s (or long_s with the dwells) in
  // place of settle_s, and takes no AC readings.
  const double pulse_s =
      p.heating.pulse ? p.heating.pulse->off_s + std::max(p.heating.pulse->on_s, p.heating.dwell ? p.heating.dwell->long_s : 0.0) : 0.0;
  const double down_s = p.heating.down_sweep ? (count - pulsed) * p.sweep.settle_s + pulsed * (p.heating.pulse ? p.heating.pulse->off_s + p.heating.pulse->on_s : 0.0) : 0.0;
  const double per_part = (count - pulsed) * (p.sweep.settle_s + n_ac * ac_s) + pulsed * pulse_s + down_s +
                          static_cast<double>(p.reverse_v.size()) * (p.sweep.settle_s + n_off * ac_s) + vector_s;
  const double hold_s = p.temps_k.empty() ? 0.0 : p.soak.hold_s * static_cast<double>(p.temps_k.size());
  return per_part * static_cast<double>(p.parts.size()) * static_cast<double>(temperature_count(p)) + hold_s;
}

Json to_json(const Plan& p) {
  Json parts = Json::array();
  for (const auto& part : p.parts) parts.push_back({{"slot", part.slot}, {"label", part.label}});
  Json j{{"lot", p.lot},
         {"parts", parts},
         {"sweep",
          {{"mode", p.sweep.mode == SweepMode::voltage ? "voltage" : "current"},
           {"spacing", p.sweep.spacing == Spacing::linear ? "linear" : "log"},
           {"start", p.sweep.start},
           {"stop", p.sweep.stop},
           {"count", p.sweep.count},
           {"settle_s", p.sweep.settle_s},
           {"average", p.sweep.average}}},
         {"reverse_v", p.reverse_v},
         {"resume", p.resume},
         {"vf_max_v", p.vf_max_v},
         {"part_type", p.part_type}};
  if (p.temps_k.empty()) {
    j["temp_k"] = p.temp_k;
  } else {
    j["temps_k"] = p.temps_k;
    j["soak"] = {{"tolerance_k", p.soak.tolerance_k}, {"hold_s", p.soak.hold_s}};
  }
  if (p.sweep.compliance_a > 0) j["sweep"]["compliance_a"] = p.sweep.compliance_a;
  if (p.ac)
    j["ac"] = {{"freqs_hz", p.ac->freqs_hz},
               {"amplitude", p.ac->amplitude},
               {"unit", p.ac->unit == drivers::LevelUnit::vrms ? "vrms" : "vpp"},
               {"settle_s", p.ac->settle_s}};
  if (p.heating.pulse || p.heating.dwell || p.heating.down_sweep) {
    Json h{{"down_sweep", p.heating.down_sweep}};
    if (p.heating.pulse) h["pulse"] = {{"from", p.heating.pulse->from}, {"on_s", p.heating.pulse->on_s}, {"off_s", p.heating.pulse->off_s}};
    if (p.heating.dwell) h["dwell"] = {{"short_s", p.heating.dwell->short_s}, {"long_s", p.heating.dwell->long_s}};
    j["heating"] = h;
  }
  if (p.vector) {
    j["vector"] = {{"freqs_hz", p.vector->freqs_hz},
                   {"amplitude", p.vector->amplitude},
                   {"unit", p.vector->unit == drivers::LevelUnit::vrms ? "vrms" : "vpp"},
                   {"settle_s", p.vector->settle_s}};
    if (p.vector->standards()) j["vector"]["standards"] = {{"open_slot", p.vector->open_slot}, {"short_slot", p.vector->short_slot}};
    if (!p.vector->forward_i_a.empty()) j["vector"]["forward_i_a"] = p.vector->forward_i_a;
  }
  if (p.ac && p.ac->off_state) j["ac"]["off_state"] = {{"freqs_hz", p.ac->off_state->freqs_hz}, {"amplitude", p.ac->off_state->amplitude}};
  return j;
}

}  // namespace junco::daemon
