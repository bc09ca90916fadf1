// junco design: calculators that use a fitted part. Each prints its answer
// and every input it assumed. The part comes from --model FILE (a JSON model
// document) or from --is/--n/--rs (and --cj/--vj/--m); the calculators take
// a DesignPart struct, so a part fetched from the daemon can be added later.
#include "fitting/design_bias.hpp"
#include "fitting/design_distortion.hpp"
#include "fitting/design_switch.hpp"
#include "fitting/design_units.hpp"
#include "fitting/model_document.hpp"
#include "fitting/transfer.hpp"
#include "tools/junco/command.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <map>
#include <sstream>
#include <stdexcept>
#include <string>
#include <vector>

namespace junco::cli {
namespace {

using namespace junco::fitting;

struct UsageError : std::runtime_error {
  using std::runtime_error::runtime_error;
};

// --key value pairs; every key must be known to the subcommand.
class Options {
 public:
  Options(const std::vector<std::string>& args, std::size_t first) {
    for (std::size_t k = first; k < args.size(); ++k) {
      const std::string& a = args[k];
      if (a.rfind("--", 0) != 0) throw UsageError("unexpected argument '" + a + "'");
      if (k + 1 >= args.size()) throw UsageError(a + " needs a value");
      values_[a.substr(2)] = args[++k];
    }
  }
  bool has(const std::string& key) const { return values_.count(key) != 0; }
  double get(const std::string& key, const char* unit) {
    used_.push_back(key);
    const auto it = values_.find(key);
    if (it == values_.end()) throw UsageError("--" + key + " is required");
    std::string why;
    const auto v = parse_engineering(it->second, unit, &why);
    if (!v) throw UsageError("--" + key + ": " + why);
    return *v;
  }
  double get(const std::string& key, const char* unit, double fallback) { return has(key) ? get(key, unit) : (used_.push_back(key), fallback); }
  std::string text(const std::string& key, const std::string& fallback) {
    used_.push_back(key);
    const auto it = values_.find(key);
    return it == values_.end() ? fallback : it->second;
  }
  void reject_unknown() const {
    for (const auto& [k, v] : values_) {
      bool known = false;
      for (const auto& u : used_) known = known || u == k;
      if (!known) throw UsageError("unknown option --" + k);
    }
  }

 private:
  std::map<std::string, std::string> values_;
  std::vector<std::string> used_;
};

struct DesignPart {
  std::string label = "(command line)";
  DiodeParams dc;
  double temp_k = 300.15;
  JunctionCap cap;  // cj0_f = 0: unknown
};

DesignPart read_part(Options& o) {
  DesignPart p;
  if (o.has("model")) {
    const std::string path = o.text("model", "");
    std::ifstream f(path);
    if (!f) throw UsageError("cannot read model document '" + path + "'");
    std::stringstream ss;
    ss << f.rdbuf();
    std::string why;
    const auto m = parse_model_document(ss.str(), &why);
    if (!m) throw UsageError(path + ": " + why);
    p.label = m->part_label + " (lot " + m->lot + ")";
    p.dc = m->params;
    p.temp_k = m->temp_k;
    if (std::isfinite(m->cj0_f)) p.cap.cj0_f = m->cj0_f;
    if (std::isfinite(m->vj_v)) p.cap.vj_v = m->vj_v;
    if (std::isfinite(m->m)) p.cap.m = m->m;
  } else {
    p.dc.is_a = o.get("is", "A");
    p.dc.n = o.get("n", "");
    p.dc.rs_ohm = o.get("rs", "Ohm");
  }
  // Command-line values override the document's.
  if (o.has("cj")) p.cap.cj0_f = o.get("cj", "F");
  if (o.has("vj")) p.cap.vj_v = o.get("vj", "V");
  if (o.has("m")) p.cap.m = o.get("m", "");
  if (o.has("temp")) p.temp_k = kelvin_from_celsius(o.get("temp", "C"));
  o.text("model", "");
  if (!(p.dc.is_a > 0 && p.dc.n > 0 && p.dc.rs_ohm >= 0)) throw UsageError("need Is > 0, n > 0, Rs >= 0");
  return p;
}

std::string eng(double v, const char* unit) { return format_engineering(v, unit); }

void print_part(const DesignPart& p) {
  std::printf("part      %s: IS=%.4g A  N=%.4g  RS=%.4g ohm", p.label.c_str(), p.dc.is_a, p.dc.n, p.dc.rs_ohm);
  if (p.cap.cj0_f > 0) std::printf("  CJO=%s VJ=%.3g V M=%.3g", eng(p.cap.cj0_f, "F").c_str(), p.cap.vj_v, p.cap.m);
  std::printf("  at %.2f degC\n", p.temp_k - zero_celsius_k);
}

void print_in(const char* name, const std::string& value) { std::printf("assumed   %-14s %s\n", name, value.c_str()); }

SwitchKind read_kind(Options& o) {
  const std::string k = o.text("switch", "series");
  if (k == "series") return SwitchKind::series;
  if (k == "shunt") return SwitchKind::shunt;
  throw UsageError("--switch must be series or shunt, got '" + k + "'");
}

int op(Options& o) {
  const auto p = read_part(o);
  const double vs = o.get("supply", "V"), rb = o.get("rbias", "Ohm"), rr = o.get("rreturn", "Ohm", 0.0);
  o.reject_unknown();
  print_part(p);
  print_in("supply", eng(vs, "V"));
  print_in("bias resistor", eng(rb, "Ohm"));
  print_in("DC return", eng(rr, "Ohm"));
  const auto r = operating_point(p.dc, vs, rb, rr, p.temp_k);
  std::printf("bias current   %s\ndiode voltage  %s\nresistor drop  %s\nrd (small-sig) %s\n", eng(r.i_a, "A").c_str(),
              eng(r.vd_v, "V").c_str(), eng(r.v_rb_v, "V").c_str(), eng(r.rd_ohm, "Ohm").c_str());
  return exit_ok;
}

int bias_r(Options& o) {
  const auto p = read_part(o);
  const double vs = o.get("supply", "V"), i = o.get("current", "A"), rr = o.get("rreturn", "Ohm", 0.0);
  o.reject_unknown();
  print_part(p);
  print_in("supply", eng(vs, "V"));
  print_in("target current", eng(i, "A"));
  print_in("DC return", eng(rr, "Ohm"));
  std::string why;
  const auto r = bias_resistor_ohm(p.dc, vs, i, rr, p.temp_k, &why);
  if (!r) {
    std::fprintf(stderr, "junco design bias-r: %s\n", why.c_str());
    return exit_failure;
  }
  std::printf("bias resistor  %s (%.6g ohm)\ndiode voltage  %s\n", eng(*r, "Ohm").c_str(), *r,
              eng(diode_voltage_v(p.dc, i, p.temp_k), "V").c_str());
  return exit_ok;
}

struct Circuit {
  double rg, rl, freq, ls;
};
Circuit read_circuit(Options& o) {
  Circuit c{o.get("rg", "Ohm", 50), o.get("rl", "Ohm", 50), o.get("freq", "Hz", 10e6), o.get("ls", "H", 0.0)};
  print_in("source Rg", eng(c.rg, "Ohm"));
  print_in("load RL", eng(c.rl, "Ohm"));
  print_in("frequency", eng(c.freq, "Hz"));
  print_in("series L", eng(c.ls, "H"));
  return c;
}

int loss(Options& o) {
  const auto p = read_part(o);
  const SwitchKind kind = read_kind(o);
  const double i = o.get("current", "A");
  print_part(p);
  print_in("switch", to_string(kind));
  print_in("bias current", eng(i, "A"));
  const auto c = read_circuit(o);
  o.reject_unknown();
  const double db = on_state_loss_db(kind, p.dc, i, c.rg, c.rl, c.freq, {c.ls, 0.0}, p.temp_k);
  std::printf("%s  %.4f dB (biased %s switch)\n", kind == SwitchKind::series ? "insertion loss" : "isolation     ", db,
              to_string(kind));
  return exit_ok;
}

int bias_for_loss(Options& o) {
  const auto p = read_part(o);
  const SwitchKind kind = read_kind(o);
  const double target = o.get("target", "dB");
  const bool have_supply = o.has("supply");
  const double vs = have_supply ? o.get("supply", "V") : 0.0;
  print_part(p);
  print_in("switch", to_string(kind));
  print_in(kind == SwitchKind::series ? "target IL" : "target isol.", std::to_string(target) + " dB");
  const auto c = read_circuit(o);
  o.reject_unknown();
  std::string why;
  const auto i = bias_for_loss_a(kind, p.dc, target, c.rg, c.rl, c.freq, {c.ls, 0.0}, p.temp_k, &why);
  if (!i) {
    std::fprintf(stderr, "junco design bias-for-loss: %s\n", why.c_str());
    return exit_failure;
  }
  std::printf("bias current   %s (%.6g A)\n", eng(*i, "A").c_str(), *i);
  if (have_supply) {
    print_in("supply", eng(vs, "V"));
    const auto r = bias_resistor_ohm(p.dc, vs, *i, 0.0, p.temp_k, &why);
    if (!r) {
      std::fprintf(stderr, "junco design bias-for-loss: %s\n", why.c_str());
      return exit_failure;
    }
    std::printf("bias resistor  %s (or less)\n", eng(*r, "Ohm").c_str());
  }
  return exit_ok;
}

int headroom(Options& o) {
  const double vpk = o.get("amplitude", "V"), rl = o.get("rl", "Ohm", 50), rr = o.get("rreturn", "Ohm", no_shunt_ohm);
  const double floor_a = o.get("floor", "A", 0.0);
  o.reject_unknown();
  print_in("load peak", eng(vpk, "V"));
  print_in("load RL", eng(rl, "Ohm"));
  print_in("DC return", std::isfinite(rr) ? eng(rr, "Ohm") : "choke (no AC shunt)");
  print_in("trough floor", eng(floor_a, "A"));
  const auto h = drive_headroom(vpk, rl, rr, floor_a);
  std::printf("signal peak    %s through the diode\nminimum bias   %s (series switch stays forward-biased)\n",
              eng(h.signal_peak_a, "A").c_str(), eng(h.min_bias_a, "A").c_str());
  return exit_ok;
}

DistortionInput read_distortion(Options& o, const DesignPart& p) {
  DistortionInput in;
  in.part = p.dc;
  in.temp_k = p.temp_k;
  in.source_peak_v = o.get("amplitude", "V");
  in.rg_ohm = o.get("rg", "Ohm", 50);
  in.rl_ohm = o.get("rl", "Ohm", 50);
  print_in("EMF peak", eng(in.source_peak_v, "V"));
  print_in("source Rg", eng(in.rg_ohm, "Ohm"));
  print_in("load RL", eng(in.rl_ohm, "Ohm"));
  return in;
}

void print_harmonics(const DistortionResult& r) {
  std::printf("load fundamental %s peak\nHD2 %.2f dBc  HD3 %.2f dBc\nTHD %.4g %% (%.2f dB)\n",
              eng(r.load_peak_v, "V").c_str(), r.load.dbc[2], r.load.dbc[3], 100 * r.load.thd, r.load.thd_db());
  std::printf("diode current  %s .. %s over the period\n", eng(r.min_current_a, "A").c_str(),
              eng(r.max_current_a, "A").c_str());
  if (r.min_current_a <= 0) std::printf("warning: the diode turns off in the trough (clipping); raise the bias\n");
}

int distortion(Options& o) {
  const auto p = read_part(o);
  print_part(p);
  auto in = read_distortion(o, p);
  in.bias_i_a = o.get("current", "A");
  o.reject_unknown();
  print_in("bias current", eng(in.bias_i_a, "A"));
  print_harmonics(solve_distortion(in));
  return exit_ok;
}

int bias_for_thd(Options& o) {
  const auto p = read_part(o);
  print_part(p);
  auto in = read_distortion(o, p);
  const double target_pct = o.get("target", "%");
  o.reject_unknown();
  print_in("target THD", std::to_string(target_pct) + " %");
  std::string why;
  const auto i = bias_for_thd_a(in, target_pct / 100.0, &why);
  if (!i) {
    std::fprintf(stderr, "junco design bias-for-thd: %s\n", why.c_str());
    return exit_failure;
  }
  in.bias_i_a = *i;
  std::printf("least bias     %s\n", eng(*i, "A").c_str());
  print_harmonics(solve_distortion(in));
  return exit_ok;
}

int isolation(Options& o) {
  const auto p = read_part(o);
  const SwitchKind kind = read_kind(o);
  const double vr = o.get("reverse", "V", 0.0), rr = o.get("rr", "Ohm", 0.0);
  print_part(p);
  if (!(p.cap.cj0_f > 0)) throw UsageError("isolation needs the junction capacitance: --cj or cj0_f in the model");
  print_in("switch", to_string(kind));
  print_in("reverse bias", eng(vr, "V"));
  print_in("off resistance", eng(rr, "Ohm"));
  const auto c = read_circuit(o);
  o.reject_unknown();
  const double cj = junction_capacitance_f(p.cap, -vr);
  const auto z = off_impedance(cj, c.freq, {c.ls, rr});
  const double db = switch_loss_db(kind, z, c.rg, c.rl);
  std::printf("Cj at -%s    %s\n", eng(vr, "V").c_str(), eng(cj, "F").c_str());
  std::printf("%s  %.4f dB (unbiased %s switch)\n", kind == SwitchKind::series ? "isolation     " : "insertion loss", db,
              to_string(kind));
  return exit_ok;
}

int power(Options& o) {
  const auto p = read_part(o);
  const double vs = o.get("supply", "V"), rb = o.get("rbias", "Ohm");
  const double ipk = o.get("signal-peak", "A", 0.0);
  PowerLimits lim{o.get("max-diode", "W", 0.0), o.get("max-resistor", "W", 0.0), 0.8};
  o.reject_unknown();
  print_part(p);
  print_in("supply", eng(vs, "V"));
  print_in("bias resistor", eng(rb, "Ohm"));
  print_in("signal peak", eng(ipk, "A"));
  print_in("diode limit", lim.diode_max_w > 0 ? eng(lim.diode_max_w, "W") : "not given");
  print_in("resistor limit", lim.resistor_max_w > 0 ? eng(lim.resistor_max_w, "W") : "not given");
  const auto op = operating_point(p.dc, vs, rb, 0.0, p.temp_k);
  const auto c = check_power(op, rb, ipk, lim);
  std::printf("bias current   %s\ndiode power    %s\nresistor power %s\n", eng(op.i_a, "A").c_str(),
              eng(c.diode_w, "W").c_str(), eng(c.resistor_w, "W").c_str());
  for (const auto& w : c.warnings) std::printf("warning: %s\n", w.c_str());
  for (const auto& f : c.failures) std::fprintf(stderr, "FAIL: %s\n", f.c_str());
  return c.ok() ? exit_ok : exit_failure;
}

const char* const part_help =
    "part (one of):\n"
    "  --model FILE        JSON model document (junco export json, or the daemon's part.export)\n"
    "  --is A --n N --rs OHM   explicit parameters, e.g. --is 2.5n --n 1.8 --rs 0.6\n"
    "  --cj F --vj V --m M     junction capacitance law (override the document's)\n"
    "  --temp DEGC         junction temperature (default: the model's, else 27 degC)\n"
    "values take engineering suffixes: 10mA, 1k, 2.2pF, 100MHz (m = milli, M = mega)\n";

struct Sub {
  const char* name;
  const char* synopsis;
  int (*run)(Options&);
};
const Sub subs[] = {
    {"op", "operating point: --supply V --rbias OHM [--rreturn OHM] -> bias current, diode voltage (exact, Lambert W)", op},
    {"bias-r", "bias resistor: --supply V --current A [--rreturn OHM] -> Rb = (Vs - Vd)/I - Rr", bias_r},
    {"loss", "biased-state loss: --current A [--switch series|shunt] [--rg --rl --freq --ls] -> IL (series) or isolation (shunt)", loss},
    {"bias-for-loss", "bias for a target: --target DB [--switch series|shunt] [--supply V] -> bias current (and resistor)", bias_for_loss},
    {"headroom", "drive headroom: --amplitude V(load peak) [--rl --rreturn --floor A] -> least bias that keeps the diode on", headroom},
    {"distortion", "harmonics: --current A --amplitude V(EMF peak) [--rg --rl] -> HD2, HD3, THD (time-domain solve)", distortion},
    {"bias-for-thd", "least bias for a THD: --target PCT --amplitude V [--rg --rl]", bias_for_thd},
    {"isolation", "off state: [--switch series|shunt] [--reverse V] [--rr OHM] [--freq --ls --rg --rl] -> isolation from Cj(V)", isolation},
    {"power", "dissipation: --supply V --rbias OHM [--signal-peak A] [--max-diode W] [--max-resistor W] -> warn/fail", power},
};

std::string usage() {
  std::string u =
      "usage: junco design SUBCOMMAND [options]\n\n"
      "Calculators for a diode switch, using a fitted part. Each prints the inputs it assumed.\n"
      "Defaults: Rg = RL = 50 ohm, 10 MHz, no series inductance, 27 degC.\n\nsubcommands:\n";
  for (const auto& s : subs) u += std::string("  ") + s.name + "\n      " + s.synopsis + "\n";
  u += "\n";
  u += part_help;
  u += "\nexamples:\n  junco design bias-r --model K7-014.json --supply 5 --current 10mA\n"
       "  junco design loss --is 1e-14 --n 1 --rs 1 --current 10mA --switch series\n"
       "  junco design isolation --model K7-014.json --cj 0.3pF --freq 1GHz --reverse 5V\n"
       "  junco design distortion --model K7-014.json --current 10mA --amplitude 0.1V\n"
       "exit: 0 ok, 1 not achievable or over a power limit, 2 bad input\n";
  return u;
}

int run(const std::vector<std::string>& args) {
  if (args.empty()) {
    std::fprintf(stderr, "junco design: which calculator? (junco design --help)\n");
    return exit_usage;
  }
  for (const auto& s : subs) {
    if (args[0] != s.name) continue;
    if (std::find(args.begin(), args.end(), "--help") != args.end()) {
      std::printf("usage: junco design %s [options]\n\n%s\n\n%s", s.name, s.synopsis, part_help);
      return exit_ok;
    }
    try {
      Options o(args, 1);
      return s.run(o);
    } catch (const UsageError& e) {
      std::fprintf(stderr, "junco design %s: %s\n", s.name, e.what());
      return exit_usage;
    }
  }
  std::fprintf(stderr, "junco design: unknown calculator '%s' (junco design --help)\n", args[0].c_str());
  return exit_usage;
}

const bool registered = register_command(
    {"design", "design calculators using a fitted part (bias, loss, distortion, isolation, power)", usage(), run, true});

}  // namespace
}  // namespace junco::cli
