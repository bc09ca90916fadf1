// junco design: the design calculators of fitting/design_calculators.hpp on
// the command line. Options and help come from the calculator table; the part
// comes from a model document, explicit values, or a stored part that juncod
// computes on (part.design), and the answer is printed the same either way.
#include "fitting/design_calculators.hpp"
#include "fitting/design_units.hpp"
#include "fitting/model_document.hpp"
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <map>
#include <sstream>
#include <string>
#include <vector>

namespace junco::cli {
namespace {

using namespace junco::fitting;

const char* const part_help =
    "part (one of):\n"
    "  --part PART [--lot NAME] [--socket PATH]\n"
    "                      a stored part (id or label); juncod computes with its latest fit\n"
    "  --model FILE        JSON model document (junco show PART --export json, junco export)\n"
    "  --is A --n N --rs OHM   explicit parameters, e.g. --is 2.5n --n 1.8 --rs 0.6\n"
    "and, for any of them:\n"
    "  --cj F --vj V --m M     junction capacitance law (overrides the part's)\n"
    "  --tt S              transit time TT: diffusion charge TT*Id (overrides the part's)\n"
    "  --temp-c DEGC       junction temperature (default: the fit's, else 27 degC); IS and RS\n"
    "                      follow the SPICE law from the fit's temperature (TNOM):\n"
    "                      IS(T) = IS*(T/TNOM)^(XTI/N)*exp((T/TNOM-1)*EG/(N*Vt(T))),\n"
    "                      RS(T) = RS*(1 + TRS1*(T-TNOM))\n"
    "  --eg EV --xti X --trs1 PER_K   the law's EG (default 1.11), XTI (3), TRS1 (0)\n"
    "  --json              print the answer as JSON (the part.design result)\n"
    "a stored part's answer carries the standard uncertainty of every result (+-, from\n"
    "the fit's covariance by the GUM law of propagation); explicit parameters have none.\n"
    "lot worst case (instead of a part):\n"
    "  --lot NAME --worst-case   every fitted part of the lot (juncod): least and greatest\n"
    "                      result and the part and corner that set it\n"
    "  --temps-c LIST      junction temperatures as corners, e.g. -40,85 (degC)\n"
    "  --supply-tol PCT    supply tolerance, e.g. 5% (corners at supply -+ 5 %)\n"
    "  --resistor-tol PCT  bias resistor tolerance (rbias, rreturn), e.g. 1%\n"
    "values take engineering suffixes: 10mA, 1k, 2.2pF, 100MHz (m = milli, M = mega)\n";

// Units as a user reads them.
std::string shown_unit(const std::string& unit) { return unit == "Ohm" ? "ohm" : unit; }

std::string option_help(const DesignInputSpec& s) {
  std::string t = "  --" + s.option;
  if (!s.choices.empty()) {
    std::string list;
    for (const auto& c : s.choices) list += (list.empty() ? "" : "|") + c;
    t += " " + list;
  } else {
    t += " " + (s.unit.empty() ? std::string("NUMBER") : shown_unit(s.unit));
  }
  t.resize(std::max<std::size_t>(t.size() + 1, 26), ' ');
  t += s.label;
  if (!s.choices.empty()) t += " (default " + s.choices.front() + ")";
  else if (s.fallback && std::isfinite(*s.fallback)) t += " (default " + format_engineering(*s.fallback, shown_unit(s.unit), 3) + ")";
  else if (s.fallback) t += " (default " + s.infinite_text + ")";
  else if (!s.optional) t += " (required)";
  return t + "\n";
}

std::string calculator_help(const DesignCalculator& c) {
  std::string t = "usage: junco design " + c.name + " [options]\n\n" + c.synopsis + "\n\noptions:\n";
  for (const auto& s : c.inputs) t += option_help(s);
  return t + "\n" + (c.needs_part ? std::string(part_help) : std::string("no part needed\n"));
}

std::string usage() {
  std::string u =
      "usage: junco design CALCULATOR [options]\n\n"
      "Calculators for a diode switch, using a fitted part. Each prints the part and every\n"
      "input it assumed, defaults included. Defaults: Rg = RL = 50 ohm, 10 MHz, no series\n"
      "inductance, the fit's temperature.\n\ncalculators (junco design CALCULATOR --help for the options):\n";
  for (const auto& c : design_calculators()) u += "  " + c.name + "\n      " + c.synopsis + "\n";
  u += "\n";
  u += part_help;
  u += "\nexamples:\n"
       "  junco design bias-r --part WR-03 --supply 5 --current 10mA\n"
       "  junco design loss --is 1e-14 --n 1 --rs 1 --current 10mA --switch series\n"
       "  junco design isolation --model wr03.json --cj 0.3pF --freq 1GHz --reverse 5V\n"
       "  junco design distortion --part WR-03 --current 10mA --amplitude 0.1V --freq 100MHz --tt 5ns --json\n"
       "  junco design bias-r --lot WREN-0912 --worst-case --supply 5 --current 10mA --supply-tol 5% --temps-c -40,85\n"
       "exit: 0 ok, 1 not achievable, over a power limit or daemon error, 2 bad input\n";
  return u;
}

// The command line of one calculator, split into the part source and the inputs.
struct Request {
  std::string socket;
  std::optional<std::string> part, lot, model;
  std::map<std::string, std::string> explicit_part;  // is, n, rs
  nlohmann::json inputs = nlohmann::json::object();
  bool json = false;
};

const DesignInputSpec* spec_by_option(const DesignCalculator& c, const std::string& option) {
  for (const auto& s : c.inputs)
    if (s.option == option) return &s;
  if (c.needs_part)
    for (const auto& s : design_part_inputs())
      if (s.option == option) return &s;
  return nullptr;
}

double parse_value(const std::string& option, const std::string& text, const std::string& unit) {
  std::string why;
  const auto v = parse_engineering(text, unit, &why);
  if (!v) throw std::invalid_argument("--" + option + ": " + why);
  return *v;
}

Request parse_request(const DesignCalculator& c, std::vector<std::string> args) {
  Request r;
  r.socket = take_socket_option(args);
  r.json = take_flag(args, "--json");
  for (std::size_t k = 0; k < args.size(); ++k) {
    const std::string& a = args[k];
    if (a.rfind("--", 0) != 0) throw std::invalid_argument("unexpected argument '" + a + "'");
    const std::string option = a.substr(2);
    if (k + 1 >= args.size()) throw std::invalid_argument(a + " needs a value");
    const std::string value = args[++k];
    const bool part_option = option == "part" || option == "lot" || option == "model" || option == "is" || option == "n" || option == "rs";
    if (part_option && !c.needs_part) throw std::invalid_argument("the " + c.name + " calculator needs no part (" + a + ")");
    if (option == "part") r.part = value;
    else if (option == "lot") r.lot = value;
    else if (option == "model") r.model = value;
    else if (option == "is" || option == "n" || option == "rs") r.explicit_part[option] = value;
    else if (option == "temp-c" && c.needs_part) r.inputs["temp_k"] = kelvin_from_celsius(parse_value(option, value, "C"));
    else if (const auto* s = spec_by_option(c, option)) {
      if (s->choices.empty()) r.inputs[s->key] = parse_value(option, value, s->unit);
      else r.inputs[s->key] = value;
    } else {
      throw std::invalid_argument("unknown option " + a + " for " + c.name);
    }
  }
  if (!c.needs_part) return r;
  const int sources = (r.part ? 1 : 0) + (r.model ? 1 : 0) + (r.explicit_part.empty() ? 0 : 1);
  if (sources == 0) throw std::invalid_argument("which part? give --part PART, --model FILE or --is/--n/--rs");
  if (sources > 1) throw std::invalid_argument("give one part: --part, --model or --is/--n/--rs, not several");
  if (r.lot && !r.part) throw std::invalid_argument("--lot goes with --part");
  return r;
}

DesignPart local_part(const Request& r) {
  DesignPart p;
  if (r.model) {
    std::ifstream f(*r.model);
    if (!f) throw std::invalid_argument("cannot read model document '" + *r.model + "'");
    std::stringstream ss;
    ss << f.rdbuf();
    std::string why;
    const auto m = parse_model_document(ss.str(), &why);
    if (!m) throw std::invalid_argument(*r.model + ": " + why);
    p.label = m->part_label + (m->lot.empty() ? std::string() : " (lot " + m->lot + ")");
    p.dc = m->params;
    p.temp_k = m->temp_k;
    p.law = m->law;
    if (std::isfinite(m->cj0_f)) p.cap.cj0_f = m->cj0_f;
    if (std::isfinite(m->vj_v)) p.cap.vj_v = m->vj_v;
    if (std::isfinite(m->m)) p.cap.m = m->m;
    if (std::isfinite(m->tt_s)) p.tt_s = m->tt_s;
    // Its standard errors come without their correlation (Is and N at 0.99+),
    // and alone they would overstate every uncertainty: none is given.
    p.cov.source = "a model document has standard errors but not their correlation; use --part for the uncertainty";
    return p;
  }
  for (const char* key : {"is", "n", "rs"})
    if (!r.explicit_part.count(key)) throw std::invalid_argument(std::string("--") + key + " is required with explicit parameters");
  p.dc.is_a = parse_value("is", r.explicit_part.at("is"), "A");
  p.dc.n = parse_value("n", r.explicit_part.at("n"), "");
  p.dc.rs_ohm = parse_value("rs", r.explicit_part.at("rs"), "Ohm");
  return p;
}

std::string shown_value(const nlohmann::json& line, int digits) {
  if (line.contains("text")) return line["text"].get<std::string>();
  if (!line["value"].is_number()) return "not determined";
  const double v = line["value"].get<double>();
  const std::string unit = line.value("unit", "");
  char buf[64];
  if (unit == "dB" || unit == "dBc") std::snprintf(buf, sizeof buf, "%.4f %s", v, unit.c_str());
  else if (unit == "%" || unit.empty()) std::snprintf(buf, sizeof buf, "%.6g%s%s", v, unit.empty() ? "" : " ", unit.c_str());
  else return format_engineering(v, shown_unit(unit), digits);
  return buf;
}

// " ± u" after a result (standard uncertainty, same unit), or why there is none.
std::string shown_uncertainty(const nlohmann::json& line) {
  if (!line.contains("std_error") || !line["value"].is_number()) return "";
  if (!line["std_error"].is_number()) return "  +- not determined";
  nlohmann::json u = line;
  u["value"] = line["std_error"];
  std::string t = "  +- " + shown_value(u, 2);
  if (line.value("nonlinear", false)) t += " (nonlinear: indicative)";
  return t;
}

void print_answer(const nlohmann::json& a) {
  if (a.contains("part")) {
    const auto& p = a["part"];
    std::printf("part      %s: IS=%.4g A  N=%.4g  RS=%.4g ohm", p.value("label", "?").c_str(), p["is_a"].get<double>(),
                p["n"].get<double>(), p["rs_ohm"].get<double>());
    if (p["cj0_f"].is_number())
      std::printf("  CJO=%s VJ=%.3g V M=%.3g", format_engineering(p["cj0_f"].get<double>(), "F").c_str(), p["vj_v"].get<double>(),
                  p["m"].get<double>());
    if (p.value("tt_s", 0.0) > 0) std::printf("  TT=%s", format_engineering(p["tt_s"].get<double>(), "s").c_str());
    std::printf("  at %.2f degC\n", p["temp_k"].get<double>() - zero_celsius_k);
    // The calculators computed at the junction temperature (SPICE law from the part's).
    if (a.contains("junction") && a["junction"]["temp_k"].get<double>() != p["temp_k"].get<double>()) {
      const auto& j = a["junction"];
      std::printf("junction  at %.2f degC: IS=%.4g A  RS=%.4g ohm  (EG=%.4g eV XTI=%.4g", j["temp_k"].get<double>() - zero_celsius_k,
                  j["is_a"].get<double>(), j["rs_ohm"].get<double>(), p.value("eg_ev", 0.0), p.value("xti", 0.0));
      if (p.value("trs1_per_k", 0.0) != 0.0) std::printf(" TRS1=%.4g/K", p.value("trs1_per_k", 0.0));
      std::printf(")\n");
    }
  }
  for (const auto& l : a["assumed"]) std::printf("assumed   %-16s %s\n", l["label"].get<std::string>().c_str(), shown_value(l, 4).c_str());
  std::size_t width = 0;
  for (const auto& l : a["result"]) width = std::max(width, l["label"].get<std::string>().size());
  for (const auto& l : a["result"])
    std::printf("%-*s  %s%s\n", static_cast<int>(width), l["label"].get<std::string>().c_str(), shown_value(l, 6).c_str(),
                shown_uncertainty(l).c_str());
  if (a.contains("uncertainty") && a["uncertainty"].value("method", "") == "none")
    std::printf("uncertainty: %s\n", a["uncertainty"].value("note", "none").c_str());
  else if (a.contains("uncertainty") && a["uncertainty"].contains("note"))
    std::printf("uncertainty: %s\n", a["uncertainty"]["note"].get<std::string>().c_str());
  for (const auto& w : a["warnings"]) std::printf("warning: %s\n", w.get<std::string>().c_str());
}

// A DesignInputError names the JSON key; on the command line, say the option.
std::string as_option_message(const DesignCalculator& c, const DesignInputError& e) {
  std::string message = e.what();
  for (const auto* list : {&c.inputs, &design_part_inputs()})
    for (const auto& s : *list)
      if (s.key == e.field() && message.rfind(s.key + ":", 0) == 0) return "--" + s.option + message.substr(s.key.size());
  return message;
}

int run_calculator(const DesignCalculator& c, const std::vector<std::string>& args) {
  return guarded("design " + c.name, [&] {
    const Request r = parse_request(c, args);
    nlohmann::json answer;
    if (r.part) {
      RpcClient client(r.socket);
      const long part_id = resolve_part(client, *r.part, r.lot);
      try {
        answer = client.call("part.design", {{"part_id", part_id}, {"calculator", c.name}, {"inputs", r.inputs}});
      } catch (const RpcError& e) {  // juncod names inputs.KEY; say the option instead
        const std::string field = e.data().is_object() ? e.data().value("field", "") : "";
        const std::string prefix = "inputs.";
        if (field.rfind(prefix, 0) != 0) throw;
        const std::string message = e.what();
        throw std::invalid_argument(as_option_message(
            c, DesignInputError(field.substr(prefix.size()), message.rfind(prefix, 0) == 0 ? message.substr(prefix.size()) : message)));
      }
    } else {
      try {
        const DesignPart part = c.needs_part ? local_part(r) : DesignPart{};
        answer = run_design(c.name, c.needs_part ? &part : nullptr, r.inputs);
      } catch (const DesignInputError& e) {
        throw std::invalid_argument(as_option_message(c, e));
      }
    }
    if (r.json) std::printf("%s\n", answer.dump(2).c_str());
    else print_answer(answer);
    if (!answer.value("achievable", true)) {
      std::fprintf(stderr, "junco design %s: not achievable: %s\n", c.name.c_str(), answer.value("reason", "").c_str());
      return exit_failure;
    }
    for (const auto& f : answer["failures"]) std::fprintf(stderr, "FAIL: %s\n", f.get<std::string>().c_str());
    return answer["failures"].empty() ? exit_ok : exit_failure;
  });
}

// junco design CALC --lot NAME --worst-case [--temps-c LIST] [--supply-tol PCT]
// [--resistor-tol PCT] [calculator options] [--json] [--socket PATH]: lot.design.
double parse_tolerance(const std::string& option, const std::string& text) {
  std::string t = text;
  const bool percent = !t.empty() && t.back() == '%';
  if (percent) t.pop_back();
  const double v = parse_value(option, t, "");
  const double ratio = percent ? v / 100.0 : v;
  if (!(ratio >= 0 && ratio <= 0.5))
    throw std::invalid_argument("--" + option + ": must be 0..50 % (e.g. 5% or 0.05), got '" + text + "'");
  return ratio;
}

void print_worst_case(const nlohmann::json& a) {
  std::string varying;
  for (const auto& k : a["corner_inputs"]) varying += (varying.empty() ? "" : ", ") + k.get<std::string>();
  std::printf("worst case of %s over lot %s: %d parts x %d corners%s, %d runs\n", a["calculator"].get<std::string>().c_str(),
              a["lot"].get<std::string>().c_str(), a["parts"].get<int>(), a["corners"].get<int>(),
              varying.empty() ? "" : (" (" + varying + ")").c_str(), a["evaluations"].get<int>());
  const auto corner_text = [](const nlohmann::json& c) {
    std::string t;
    for (const auto& [k, v] : c.items()) {
      const double x = v.get<double>();
      const std::string one = k == "temp_k" ? format_engineering(x - zero_celsius_k, "degC", 4)
                              : k == "supply_v" ? format_engineering(x, "V", 4)
                                                : format_engineering(x, "ohm", 4);
      t += (t.empty() ? "" : ", ") + k + " " + one;
    }
    return t.empty() ? std::string() : " at " + t;
  };
  for (const auto& l : a["result"]) {
    for (const char* end : {"min", "max"}) {
      nlohmann::json v = l;
      v["value"] = l[end]["value"];
      std::printf("%-40s %s %-14s %s%s\n", l["label"].get<std::string>().c_str(), end, shown_value(v, 6).c_str(),
                  l[end]["part"].get<std::string>().c_str(), corner_text(l[end]["corner"]).c_str());
    }
  }
  if (a["not_achievable_count"].get<long>() > 0)
    std::printf("not achievable in %ld runs (first: %s)\n", a["not_achievable_count"].get<long>(),
                a["not_achievable"][0].value("part", "?").c_str());
  for (const auto& f : a["failures"]) std::printf("FAIL: %s: %s\n", f["part"].get<std::string>().c_str(), f["failure"].get<std::string>().c_str());
  for (const auto& l : a["left_out"])
    std::printf("left out: %s (%s)\n", l["label"].get<std::string>().c_str(), l["reason"].get<std::string>().c_str());
}

int run_worst_case(const DesignCalculator& c, std::vector<std::string> args) {
  return guarded("design " + c.name + " --worst-case", [&] {
    const std::string socket = take_socket_option(args);
    const bool json = take_flag(args, "--json");
    take_flag(args, "--worst-case");
    nlohmann::json params{{"calculator", c.name}, {"inputs", nlohmann::json::object()}};
    for (std::size_t k = 0; k < args.size(); ++k) {
      const std::string& a = args[k];
      if (a.rfind("--", 0) != 0) throw std::invalid_argument("unexpected argument '" + a + "'");
      if (k + 1 >= args.size()) throw std::invalid_argument(a + " needs a value");
      const std::string option = a.substr(2), value = args[++k];
      if (option == "lot") params["lot"] = value;
      else if (option == "supply-tol") params["supply_tol"] = parse_tolerance(option, value);
      else if (option == "resistor-tol") params["resistor_tol"] = parse_tolerance(option, value);
      else if (option == "temps-c") {
        params["temps_k"] = nlohmann::json::array();
        std::stringstream list(value);
        for (std::string item; std::getline(list, item, ',');)
          params["temps_k"].push_back(kelvin_from_celsius(parse_value(option, item, "C")));
      } else if (option == "temp-c") params["inputs"]["temp_k"] = kelvin_from_celsius(parse_value(option, value, "C"));
      else if (option == "part" || option == "model" || option == "is" || option == "n" || option == "rs")
        throw std::invalid_argument("--worst-case takes a lot (--lot NAME), not " + a);
      else if (const auto* s = spec_by_option(c, option)) {
        if (s->choices.empty()) params["inputs"][s->key] = parse_value(option, value, s->unit);
        else params["inputs"][s->key] = value;
      } else {
        throw std::invalid_argument("unknown option " + a + " for " + c.name + " --worst-case");
      }
    }
    if (!params.contains("lot")) throw std::invalid_argument("--worst-case needs --lot NAME");
    RpcClient client(socket);
    nlohmann::json answer;
    try {
      answer = client.call("lot.design", params);
    } catch (const RpcError& e) {  // juncod names inputs.KEY; say the option instead
      const std::string field = e.data().is_object() ? e.data().value("field", "") : "";
      const std::string prefix = "inputs.";
      if (field.rfind(prefix, 0) != 0) throw;
      const std::string message = e.what();
      throw std::invalid_argument(as_option_message(
          c, DesignInputError(field.substr(prefix.size()), message.rfind(prefix, 0) == 0 ? message.substr(prefix.size()) : message)));
    }
    if (json) std::printf("%s\n", answer.dump(2).c_str());
    else print_worst_case(answer);
    return answer["result"].empty() ? exit_failure : exit_ok;
  });
}

int run(const std::vector<std::string>& args) {
  if (args.empty()) {
    std::fprintf(stderr, "junco design: which calculator? (junco design --help)\n");
    return exit_usage;
  }
  const DesignCalculator* c = find_design_calculator(args[0]);
  if (!c) {
    std::fprintf(stderr, "junco design: unknown calculator '%s' (junco design --help)\n", args[0].c_str());
    return exit_usage;
  }
  const std::vector<std::string> rest(args.begin() + 1, args.end());
  if (std::find(rest.begin(), rest.end(), "--help") != rest.end()) {
    std::printf("%s", calculator_help(*c).c_str());
    return exit_ok;
  }
  if (std::find(rest.begin(), rest.end(), "--worst-case") != rest.end()) return run_worst_case(*c, rest);
  return run_calculator(*c, rest);
}

const bool registered = register_command(
    {"design", "design calculators using a fitted part (bias, loss, distortion, isolation, power)", usage(), run, true, {}, {},
     {{"--temp", "--temp-c"}}});  // one name for temperature in °C across commands (docs/names.md)

}  // namespace
}  // namespace junco::cli
