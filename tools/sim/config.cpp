#include "tools/sim/config.hpp"

#include "formats/json_limits.hpp"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <fstream>
#include <sstream>
#include <stdexcept>

namespace junco::sim {

const std::map<std::string, std::vector<std::string>>& known_families() {
  static const std::map<std::string, std::vector<std::string>> f{
      {"source", {"scpi-source", "psu-compact", "scpi99"}},
      {"meter", {"scpi-dmm", "dmm-prefixed", "scpi99"}},
      {"scanner", {"scpi-switch", "relay-bank", "scpi99"}},
      {"siggen", {"scpi-gen", "gen-channel", "gen-vpp"}},
      {"levelmeter", {"scpi-acv", "scope-meas", "acv-dbm"}},
      {"chamber", {"scpi-chamber"}},
      {"vectormeter", {"scpi-vvm"}}};
  return f;
}

void check_role(const std::string& role) {
  if (std::find(all_roles.begin(), all_roles.end(), role) == all_roles.end())
    throw std::invalid_argument("unknown role '" + role + "' (source, meter, scanner, siggen, levelmeter, chamber, vectormeter)");
}

namespace {

using nlohmann::json;

double positive(const json& j, const std::string& key) {
  const double v = j.get<double>();
  if (!(v > 0)) throw std::invalid_argument("config: " + key + " must be > 0");
  return v;
}
double non_negative(const json& j, const std::string& key) {
  const double v = j.get<double>();
  if (!(v >= 0)) throw std::invalid_argument("config: " + key + " must be >= 0");
  return v;
}

template <class F>
void each_key(const json& obj, const std::string& where, F&& f) {
  if (!obj.is_object()) throw std::invalid_argument("config: " + where + " must be an object");
  for (auto it = obj.begin(); it != obj.end(); ++it) {
    if (!f(it.key(), it.value())) throw std::invalid_argument("config: unknown key " + where + "." + it.key());
  }
}

void apply_part(PartParams& p, const json& j, const std::string& where) {
  each_key(j, where, [&](const std::string& k, const json& v) {
    const std::string key = where + "." + k;
    if (k == "is_a") p.is_a = positive(v, key);
    else if (k == "n") p.n = positive(v, key);
    else if (k == "rs_ohm") p.rs_ohm = non_negative(v, key);
    else if (k == "cj0_f") p.cj0_f = non_negative(v, key);
    else if (k == "vj_v") p.vj_v = positive(v, key);
    else if (k == "m") p.m = std::clamp(non_negative(v, key), 0.0, 0.9);
    else if (k == "fc") p.fc = std::clamp(non_negative(v, key), 0.0, 0.95);
    else if (k == "tt_s") p.tt_s = non_negative(v, key);
    else if (k == "eg_ev") p.eg_ev = positive(v, key);
    else if (k == "xti") p.xti = v.get<double>();
    else if (k == "trs1_per_k") p.trs1_per_k = v.get<double>();
    else if (k == "trs2_per_k2") p.trs2_per_k2 = v.get<double>();
    else if (k == "type") {
      const std::string t = v.is_string() ? v.get<std::string>() : "";
      if (t != "junction" && t != "pin") throw std::invalid_argument("config: " + key + " must be \"junction\" or \"pin\"");
      p.pin = t == "pin";
    }
    else if (k == "i_region_width_m") p.i_region_width_m = positive(v, key);
    else if (k == "mobility_sum_m2_per_v_s") p.mobility_sum_m2_per_v_s = positive(v, key);
    else if (k == "pin_r_max_ohm") p.pin_r_max_ohm = positive(v, key);
    else return false;
    return true;
  });
}

}  // namespace

namespace {

// Config keys renamed to the names the daemon's config uses (docs/names.md):
// the old spelling is read as the new one, with a warning naming it.
const std::map<std::string, std::string>& renamed_fixture_keys() {
  static const std::map<std::string, std::string> m{
      {"rb_ohm", "bias_resistor_ohm"}, {"return_ohm", "dc_return_ohm"}, {"rg_ohm", "source_ohm"}, {"rl_ohm", "load_ohm"}};
  return m;
}

void warn_renamed(std::vector<std::string>* warnings, const std::string& old_key, const std::string& new_key) {
  if (warnings) warnings->push_back("config key " + old_key + " is now spelled " + new_key + " (the old spelling still works for now)");
}

}  // namespace

void apply_config_json(SimConfig& cfg, const std::string& json_text, std::vector<std::string>* warnings) {
  json doc;
  try {
    doc = junco::parse_json_limited(json_text, "config");
  } catch (const junco::JsonLimitError& e) {
    throw std::invalid_argument(std::string("config: ") + e.what());
  } catch (const json::exception& e) {
    throw std::invalid_argument(std::string("config: not valid JSON: ") + e.what());
  }
  try {
    each_key(doc, "config", [&](const std::string& k, const json& v) {
      if (k == "seed") cfg.seed = v.get<std::uint64_t>();
      else if (k == "slots") cfg.slots = v.get<int>();
      else if (k == "settle_s") cfg.settle_s = non_negative(v, k);
      else if (k == "ambient_k") cfg.ambient_k = positive(v, k);
      else if (k == "error_queue_depth") cfg.error_queue_depth = std::max(1, v.get<int>());
      else if (k == "thermal") {
        each_key(v, k, [&](const std::string& t, const json& tv) {
          if (t == "theta_k_per_w") cfg.theta_k_per_w = non_negative(tv, "thermal." + t);
          else if (t == "tau_s") cfg.thermal_tau_s = positive(tv, "thermal." + t);
          else return false;
          return true;
        });
      } else if (k == "chamber") {
        each_key(v, k, [&](const std::string& t, const json& tv) {
          const std::string key = "chamber." + t;
          auto& ch = cfg.chamber;
          if (t == "tau_s") ch.tau_s = positive(tv, key);
          else if (t == "drift_k") ch.drift_k = non_negative(tv, key);
          else if (t == "drift_period_s") ch.drift_period_s = positive(tv, key);
          else if (t == "min_c") ch.min_c = tv.get<double>();
          else if (t == "max_c") ch.max_c = tv.get<double>();
          else if (t == "readback_noise_k") ch.readback_noise_k = non_negative(tv, key);
          else return false;
          return true;
        });
        if (!(cfg.chamber.min_c < cfg.chamber.max_c)) throw std::invalid_argument("config: chamber.min_c must be below chamber.max_c");
      } else if (k == "fixture") {
        for (const auto& [old_key, new_key] : renamed_fixture_keys())
          if (v.is_object() && v.contains(old_key) && v.contains(new_key))
            throw std::invalid_argument("config: give fixture." + new_key + " only (fixture." + old_key + " is its old name)");
        each_key(v, k, [&](const std::string& given, const json& fv) {
          std::string f = given;
          if (const auto r = renamed_fixture_keys().find(given); r != renamed_fixture_keys().end()) {
            warn_renamed(warnings, "fixture." + given, "fixture." + r->second);
            f = r->second;
          }
          const std::string key = "fixture." + f;
          auto& fx = cfg.fixture;
          if (f == "bias_resistor_ohm") fx.rb_ohm = positive(fv, key);
          else if (f == "bias_choke") fx.bias_choke = fv.get<bool>();
          else if (f == "return") {
            const auto s = fv.get<std::string>();
            if (s == "inductor") fx.return_kind = ReturnKind::inductor;
            else if (s == "resistor") fx.return_kind = ReturnKind::resistor;
            else throw std::invalid_argument("config: fixture.return must be \"inductor\" or \"resistor\"");
          } else if (f == "dc_return_ohm") fx.return_ohm = positive(fv, key);
          else if (f == "source_ohm") fx.source_ohm = positive(fv, key);
          else if (f == "load_ohm") fx.load_ohm = positive(fv, key);
          else if (f == "package_ls_h") fx.package_ls_h = non_negative(fv, key);
          else if (f == "package_cp_f") fx.package_cp_f = non_negative(fv, key);
          else if (f == "stray_c_f") fx.stray_c_f = non_negative(fv, key);
          else if (f == "slot_ls_h") fx.slot_ls_h = non_negative(fv, key);
          else if (f == "steps_per_period") fx.steps_per_period = std::clamp(fv.get<int>(), 32, 8192);
          else return false;
          return true;
        });
      } else if (k == "nominal") {
        apply_part(cfg.nominal, v, "nominal");
      } else if (k == "spread") {
        each_key(v, k, [&](const std::string& s, const json& sv) {
          const std::string key = "spread." + s;
          if (s == "is_ln_sigma") cfg.spread.is_ln_sigma = non_negative(sv, key);
          else if (s == "n_sigma") cfg.spread.n_sigma = non_negative(sv, key);
          else if (s == "rs_rel_sigma") cfg.spread.rs_rel_sigma = non_negative(sv, key);
          else if (s == "cj0_rel_sigma") cfg.spread.cj0_rel_sigma = non_negative(sv, key);
          else return false;
          return true;
        });
      } else if (k == "outliers") {
        for (const auto& o : v) {
          Outlier out;
          each_key(o, "outliers[]", [&](const std::string& f, const json& fv) {
            if (f == "slot") out.slot = fv.get<int>();
            else if (f == "is_a") out.is_a = positive(fv, "outliers[].is_a");
            else if (f == "n") out.n = positive(fv, "outliers[].n");
            else if (f == "rs_ohm") out.rs_ohm = non_negative(fv, "outliers[].rs_ohm");
            else if (f == "cj0_f") out.cj0_f = non_negative(fv, "outliers[].cj0_f");
            else if (f == "type") {
              const std::string t = fv.is_string() ? fv.get<std::string>() : "";
              if (t != "junction" && t != "pin") throw std::invalid_argument("config: outliers[].type must be \"junction\" or \"pin\"");
              out.pin = t == "pin";
            }
            else return false;
            return true;
          });
          cfg.outliers.push_back(out);
        }
      } else if (k == "empty_slots") {
        for (const auto& s : v) cfg.empty_slots.insert(s.get<int>());
      } else if (k == "short_slots") {
        for (const auto& s : v) {
          cfg.short_slots.insert(s.get<int>());
          cfg.empty_slots.insert(s.get<int>());  // no part: DC and level readings see an open slot
        }
      } else if (k == "source") {
        each_key(v, k, [&](const std::string& s, const json& sv) {
          if (s == "v_min_v") cfg.source.v_min_v = sv.get<double>();
          else if (s == "v_max_v") cfg.source.v_max_v = sv.get<double>();
          else if (s == "i_limit_min_a") cfg.source.i_limit_min_a = positive(sv, "source." + s);
          else if (s == "i_limit_max_a") cfg.source.i_limit_max_a = positive(sv, "source." + s);
          else return false;
          return true;
        });
      } else if (k == "dialects" || k == "families") {
        if (k == "families") {
          if (doc.contains("dialects")) throw std::invalid_argument("config: give dialects only (families is its old name)");
          warn_renamed(warnings, "families", "dialects");
        }
        each_key(v, k, [&](const std::string& role, const json& fv) {
          check_role(role);
          cfg.families[role] = fv.get<std::string>();
          return true;
        });
      } else {
        return false;
      }
      return true;
    });
  } catch (const json::exception& e) {
    throw std::invalid_argument(std::string("config: wrong type: ") + e.what());
  }
}

FaultSpec parse_fault_spec(const std::string& text) {
  FaultSpec f;
  const auto c1 = text.find(':');
  if (c1 == std::string::npos) throw std::invalid_argument("--fault wants ROLE:MODE[:ARG], got '" + text + "'");
  f.role = text.substr(0, c1);
  check_role(f.role);
  const auto c2 = text.find(':', c1 + 1);
  f.mode = text.substr(c1 + 1, c2 == std::string::npos ? std::string::npos : c2 - c1 - 1);
  if (c2 != std::string::npos) f.arg = text.substr(c2 + 1);
  static const std::set<std::string> modes{"drop-after", "late", "garble", "error", "silent", "clear"};
  if (!modes.count(f.mode)) throw std::invalid_argument("--fault: unknown mode '" + f.mode + "'");
  if (f.mode == "error") {
    // ARG is CODE:TEXT on the command line (CODE TEXT on the control endpoint).
    const auto c3 = f.arg.find(':');
    if (c3 != std::string::npos) f.arg[c3] = ' ';
  }
  return f;
}

void apply_family(SimConfig& cfg, const std::string& role_eq_name) {
  const auto eq = role_eq_name.find('=');
  if (eq == std::string::npos) throw std::invalid_argument("--dialect wants ROLE=NAME, got '" + role_eq_name + "'");
  const std::string role = role_eq_name.substr(0, eq), fam = role_eq_name.substr(eq + 1);
  check_role(role);
  const auto& allowed = known_families().at(role);
  if (std::find(allowed.begin(), allowed.end(), fam) == allowed.end())
    throw std::invalid_argument("--dialect: '" + fam + "' is not a " + role + " dialect");
  cfg.families[role] = fam;
}

void check_families(const SimConfig& cfg) {
  for (const auto& [role, fam] : cfg.families) {
    const auto& allowed = known_families().at(role);
    if (std::find(allowed.begin(), allowed.end(), fam) == allowed.end())
      throw std::invalid_argument("dialect '" + fam + "' is not a " + role + " dialect");
  }
}

std::string help_reference() {
  return R"(Config keys (JSON object; SI units; defaults in brackets):
  seed [1], slots [8], settle_s [0.002], ambient_k [300.15] (also TNOM),
  error_queue_depth [16]
  thermal.theta_k_per_w [400]   junction-to-ambient thermal resistance
  thermal.tau_s [0.05]          junction thermal time constant
  chamber.tau_s [60]            chamber air time constant toward its set point
  chamber.drift_k [0]           slow sinusoidal drift of the air (amplitude, K)
  chamber.drift_period_s [600]  period of that drift
  chamber.{min_c [-70], max_c [180]}  set points the chamber accepts
  chamber.readback_noise_k [0.005]    readback noise (resolution 0.01 C)
  fixture.bias_resistor_ohm [100]  bias resistor Rb
  fixture.bias_choke [true]     choke in series with Rb (Rb open at AC)
  fixture.return ["inductor"]   DC return: "inductor" (0 ohm DC, open AC)
                                or "resistor" (fixture.dc_return_ohm [1000])
  fixture.source_ohm [50]       generator source resistance Rg
  fixture.load_ohm [50]         load RL
  (the former names rb_ohm, return_ohm, rg_ohm, rl_ohm still work, with a warning)
  fixture.steps_per_period [256] time steps of the AC solve
  fixture.{package_ls_h [0], package_cp_f [0]}  every part's package: series L,
                                C across the leads (vector meter only)
  fixture.stray_c_f [0]         stray C across the slot (vector meter only)
  fixture.slot_ls_h [0]         slot series trace inductance (vector meter only)
  nominal.{is_a [2.5e-9], n [1.85], rs_ohm [0.7], cj0_f [2e-12], vj_v [0.65],
           m [0.4], fc [0.5], tt_s [0], eg_ev [1.11], xti [3],
           trs1_per_k [0], trs2_per_k2 [0]}
  nominal.type ["junction"]     "pin": a PIN part; tt_s is then its carrier
                                lifetime tau and the I-region adds
                                R_I = W^2/((mun + mup)*Q), Q = tau*Id:
  nominal.{i_region_width_m [30e-6], mobility_sum_m2_per_v_s [0.183],
           pin_r_max_ohm [1e4]}  (W, mun + mup, the cap of R_I)
  spread.{is_ln_sigma [0.25], n_sigma [0.02], rs_rel_sigma [0.08],
          cj0_rel_sigma [0.08]}
  outliers [[]]                 e.g. [{"slot":3,"rs_ohm":4.0}] (is_a, n, rs_ohm, cj0_f, type)
  empty_slots [[]]              slots with no part (open circuit)
  short_slots [[]]              slots with a zero-ohm link (vector meter's short
                                standard; DC and level readings see them open)
  source.{v_min_v [-30], v_max_v [30], i_limit_min_a [1e-4], i_limit_max_a [0.5]}
  dialects.{ROLE: NAME}         the command set (dialect) each role speaks
                                (the former key families still works, with a warning)

Physics: bias supply -> Rb -> anode; cathode -> DC return; generator EMF
(sine, Vpp or Vrms as set; the EMF before Rg) -> Rg -> DC block -> anode;
cathode -> DC block -> RL. Level channel 1 = generator terminal voltage
after Rg (fixture input), channel 2 = voltage across RL. DC point exact
(Lambert W); AC levels from a periodic time-domain solve with the SPICE
C-V law; self-heating raises the junction temperature (IS(T), RS(T):
the SPICE law of fitting/temperature.hpp). The chamber's air (set point at
power-up: ambient_k) is the ambient of every part.

Control endpoint (one line in, one JSON line out):
  state?                        instrument settings and the part's true
                                operating point {"v","i_a","temp_k"}
  lot?                          true parameters of each slot's part, with
                                EG, XTI, TRS1, TRS2, TNOM and the thermal
                                resistance theta_k_per_w
  chamber?                      the chamber's true air temperature, set
                                point, ramp rate and drift
  outputs?                      every on/off switch of the supply and the
                                generator, t_ns on CLOCK_MONOTONIC, with
                                now_ns and the present state
  fault ROLE drop-after N       answer N more commands, then close the
                                connection on the next (serial: drop that
                                line unanswered); one shot
  fault ROLE late MS            answer the next query MS milliseconds late
  fault ROLE garble N           corrupt the next N replies (never into a
                                different valid number)
  fault ROLE error CODE TEXT    push CODE,"TEXT" into the error queue
  fault ROLE silent             stop answering (commands still read)
  fault ROLE clear              remove all faults on ROLE
  quit                          exit (replies {"ok":true} first)
)";
}

}  // namespace junco::sim
