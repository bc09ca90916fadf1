// junco design: the design calculators of design/calculators.hpp on
// the command line. Options and help come from the calculator table; the part
// comes from a model document, explicit values, or a stored part that juncod
// computes on (part.design), and the answer is printed the same either way.
#include "design/calculators.hpp"
#include "units/si_text.hpp"
#include "formats/model_document.hpp"
#include "tools/junco/cli_options.hpp"
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

const char* const part_text =
    "The part, one of: --part PART (a stored part, id or label; juncod computes with its latest\n"
    "fit), --model FILE (a JSON model document: junco show PART --export json, junco export), or\n"
    "--is --n --rs (explicit parameters, e.g. --is 2.5n --n 1.8 --rs 0.6). --cj --vj --m --tt\n"
    "override the part's charge. --temp-c sets the junction temperature (default: the fit's,\n"
    "else 27 degC); IS and RS follow the SPICE law from the fit's temperature (TNOM):\n"
    "  IS(T) = IS*(T/TNOM)^(XTI/N)*exp((T/TNOM-1)*EG/(N*Vt(T))),  RS(T) = RS*(1 + TRS1*(T-TNOM))\n"
    "with --eg (default 1.11), --xti (3), --trs1 (0).\n"
    "A stored part's answer carries the standard uncertainty of every result (+-, from the\n"
    "fit's covariance by the GUM law of propagation); explicit parameters have none.\n"
    "Lot worst case (instead of a part): --lot NAME --worst-case runs the calculator on every\n"
    "fitted part of the lot (juncod) and gives the least and greatest result and the part and\n"
    "corner that set it; corners from --temps-c LIST (degC, e.g. -40,85), --supply-tol PCT\n"
    "(e.g. 5%) and --resistor-tol PCT (bias and DC-return resistors, e.g. 1%).\n";

const char* const values_text = "Values take engineering suffixes: 10mA, 1k, 2.2pF, 100MHz (m = milli, M = mega).\n";

const char* const design_footer =
    "examples:\n"
    "  junco design bias-r --part WR-03 --supply 5 --current 10mA\n"
    "  junco design loss --is 1e-14 --n 1 --rs 1 --current 10mA --switch series\n"
    "  junco design isolation --model wr03.json --cj 0.3pF --freq 1GHz --reverse 5V\n"
    "  junco design distortion --part WR-03 --current 10mA --amplitude 0.1V --freq 100MHz --tt 5ns --json\n"
    "  junco design bias-r --lot WREN-0912 --worst-case --supply 5 --current 10mA --supply-tol 5% --temps-c -40,85\n"
    "exit: 0 ok, 1 not achievable, over a power limit or daemon error, 2 bad input";

// Units as a user reads them.
std::string shown_unit(const std::string& unit) { return unit == "Ohm" ? "ohm" : unit; }

// The command line of one calculator, split into the part source and the inputs.
struct Request {
  std::string socket;
  std::optional<std::string> part, lot, model;
  std::map<std::string, std::string> explicit_part;  // is, n, rs
  nlohmann::json inputs = nlohmann::json::object();
  bool json = false;
};

// What the command line gave, as text; checked and converted after parsing
// (parse_request), so every error names the option.
struct Given {
  const DesignCalculator* calculator = nullptr;
  std::string socket;
  std::map<std::string, std::string> part_source;  // part, lot, model, is, n, rs
  std::map<std::string, std::string> inputs;       // JSON key -> text
  std::optional<std::string> temp_c;
  bool json = false;
  bool worst_case = false;  // --lot NAME --worst-case: lot.design
  std::optional<std::string> temps_c, supply_tol, resistor_tol;
};
Given g_given;  // bound by define(); one command per process

// "--supply V", its help the table's label and its default or "(required)".
void add_input_option(CLI::App& sub, const DesignInputSpec& s) {
  std::string help = s.label;
  if (!s.choices.empty()) help += " (default " + s.choices.front() + ")";
  else if (s.fallback && std::isfinite(*s.fallback)) help += " (default " + junco::units::format_si(*s.fallback, shown_unit(s.unit), 3) + ")";
  else if (s.fallback) help += " (default " + s.infinite_text + ")";
  else if (!s.optional) help += " (required)";
  const std::string key = s.key;
  auto* o = sub.add_option_function<std::string>("--" + s.option, [key](const std::string& v) { g_given.inputs[key] = v; }, help);
  if (!s.choices.empty()) {
    std::string list;
    for (const auto& c : s.choices) list += (list.empty() ? "" : "|") + c;
    o->check(CLI::IsMember(s.choices).description(""))->type_name(list);
  } else {
    o->type_name(s.unit.empty() ? std::string("NUMBER") : shown_unit(s.unit));
  }
}

void add_text(CLI::App& sub, const std::string& name, const std::string& metavar, const std::string& help) {
  sub.add_option_function<std::string>("--" + name, [name](const std::string& v) { g_given.part_source[name] = v; }, help)
      ->type_name(metavar);
}

// One subcommand per row of the calculator table: a row added there is an
// option set and a help page here, with no change to this file.
void define_calculator(CLI::App& app, const DesignCalculator& c) {
  auto* sub = app.add_subcommand(c.name, c.synopsis)->group("calculators (junco design CALCULATOR --help for the options)");
  sub->get_formatter()->column_width(30);
  sub->get_formatter()->label("OPTIONS", "options");
  sub->get_formatter()->label("REQUIRED", "required");
  const std::string part_help = c.needs_part   ? std::string(part_text)
                                : c.takes_part ? "No part needed; with one (or --tt/--tau alone) the answer uses its stored charge.\n" +
                                                     std::string(part_text)
                                               : std::string("No part needed.\n");
  sub->footer(part_help + values_text + "\n" + design_footer);
  for (const auto& s : c.inputs) add_input_option(*sub, s);
  if (c.needs_part || c.takes_part) {
    add_text(*sub, "part", "PART", "a stored part (id or label); juncod computes with its latest fit");
    add_text(*sub, "lot", "NAME", "the lot of a --part given by label");
    add_text(*sub, "model", "FILE", "JSON model document (junco show PART --export json, junco export)");
    add_text(*sub, "is", "A", "explicit saturation current IS (with --n and --rs)");
    add_text(*sub, "n", "N", "explicit emission coefficient N");
    add_text(*sub, "rs", "OHM", "explicit series resistance RS");
    for (const auto& s : design_part_inputs())
      if (s.key != "temp_k") add_input_option(*sub, s);  // temperature: in degC, below
    sub->add_option_function<std::string>("--temp-c", [](const std::string& v) { g_given.temp_c = v; },
                                          "junction temperature in degC (default: the fit's, else 27 degC)")
        ->type_name("DEGC");
    sub->add_flag("--worst-case", g_given.worst_case,
                  "with --lot NAME: least and greatest result over every fitted part of the lot and the corners");
    sub->add_option_function<std::string>("--temps-c", [](const std::string& v) { g_given.temps_c = v; },
                                          "worst case: junction temperatures as corners, e.g. -40,85 (degC)")
        ->type_name("LIST");
    sub->add_option_function<std::string>("--supply-tol", [](const std::string& v) { g_given.supply_tol = v; },
                                          "worst case: supply tolerance, e.g. 5% (corners at supply -+ 5 %)")
        ->type_name("PCT");
    sub->add_option_function<std::string>("--resistor-tol", [](const std::string& v) { g_given.resistor_tol = v; },
                                          "worst case: bias and DC-return resistor tolerance, e.g. 1%")
        ->type_name("PCT");
  }
  add_socket_option(*sub, g_given.socket);
  sub->add_flag("--json", g_given.json, "print the answer as JSON (the part.design result)");
  sub->callback([&c] { g_given.calculator = &c; });
}

void define(CLI::App& app) {
  app.description(
      "Calculators for a diode switch, using a fitted part. Each prints the part and every\n"
      "input it assumed, defaults included. Defaults: source = load = 50 ohm, 10 MHz, no series\n"
      "inductance, the fit's temperature.\n\n" + std::string(part_text) + values_text);
  app.footer(design_footer);
  // No calculator: run() names them; a word that is none: main's first-word
  // check (Command::first_word_noun) does.
  app.require_subcommand(0, 1);
  for (const auto& c : design_calculators()) define_calculator(app, c);
}

double parse_value(const std::string& option, const std::string& text, const std::string& unit) {
  std::string why;
  const auto v = units::parse_si(text, unit, &why);
  if (!v) throw std::invalid_argument("--" + option + ": " + why);
  return *v;
}

const DesignInputSpec* spec_by_key(const DesignCalculator& c, const std::string& key) {
  for (const auto* list : {&c.inputs, &design_part_inputs()})
    for (const auto& s : *list)
      if (s.key == key) return &s;
  return nullptr;
}

Request parse_request(const DesignCalculator& c, const Given& g) {
  Request r;
  r.socket = socket_path(g.socket);
  r.json = g.json;
  for (const auto& [name, value] : g.part_source) {
    if (name == "part") r.part = value;
    else if (name == "lot") r.lot = value;
    else if (name == "model") r.model = value;
    else r.explicit_part[name] = value;
  }
  if (g.temp_c) r.inputs["temp_k"] = kelvin_from_celsius(parse_value("temp-c", *g.temp_c, "C"));
  for (const auto& [key, value] : g.inputs) {
    const auto* s = spec_by_key(c, key);
    if (s->choices.empty()) r.inputs[key] = parse_value(s->option, value, s->unit);
    else r.inputs[key] = value;
  }
  if (!c.needs_part && !c.takes_part) return r;
  const int sources = (r.part ? 1 : 0) + (r.model ? 1 : 0) + (r.explicit_part.empty() ? 0 : 1);
  if (sources == 0 && r.lot) throw std::invalid_argument("--lot goes with --part");
  if (sources == 0 && c.takes_part) return r;
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
    p.pin = m->pin;
    // The document's covariance (version 2, formats/model_document.hpp) is the
    // one juncod propagates for the stored part: the same std_error here.
    // Standard errors alone (version 1) come without their correlation (Is
    // and N at 0.99+) and would overstate every uncertainty: none is given.
    if (m->covariance_names.empty()) {
      p.cov.source = "the model document carries no covariance (version 1, or a fit without one); use --part for the uncertainty";
    } else {
      p.cov.names = m->covariance_names;
      p.cov.matrix = m->covariance;
      p.cov.source = m->covariance_source.empty() ? *r.model : m->covariance_source;
    }
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
  else return units::format_si(v, shown_unit(unit), digits);
  return buf;
}

// " +- u" after a result (standard uncertainty, same unit), or why there is none.
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
      std::printf("  CJO=%s VJ=%.3g V M=%.3g", units::format_si(p["cj0_f"].get<double>(), "F").c_str(), p["vj_v"].get<double>(),
                  p["m"].get<double>());
    if (p.value("tt_s", 0.0) > 0) std::printf("  TT=%s", units::format_si(p["tt_s"].get<double>(), "s").c_str());
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
  if (a.contains("uncertainty") && a["uncertainty"].contains("note"))
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

int run_calculator(const DesignCalculator& c) {
  return guarded("design " + c.name, [&] {
    const Request r = parse_request(c, g_given);
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
        const bool with_part = c.needs_part || (c.takes_part && (r.model || !r.explicit_part.empty()));
        const DesignPart part = with_part ? local_part(r) : DesignPart{};
        answer = run_design(c.name, with_part ? &part : nullptr, r.inputs);
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
      const std::string one = k == "temp_k" ? units::format_si(x - zero_celsius_k, "degC", 4)
                              : k == "supply_v" ? units::format_si(x, "V", 4)
                                                : units::format_si(x, "ohm", 4);
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

int run_worst_case(const DesignCalculator& c, const Given& g) {
  return guarded("design " + c.name + " --worst-case", [&] {
    for (const char* name : {"part", "model", "is", "n", "rs"})
      if (g.part_source.count(name)) throw std::invalid_argument(std::string("--worst-case takes a lot (--lot NAME), not --") + name);
    if (!g.part_source.count("lot")) throw std::invalid_argument("--worst-case needs --lot NAME");
    nlohmann::json params{{"calculator", c.name}, {"lot", g.part_source.at("lot")}, {"inputs", nlohmann::json::object()}};
    if (g.supply_tol) params["supply_tol"] = parse_tolerance("supply-tol", *g.supply_tol);
    if (g.resistor_tol) params["resistor_tol"] = parse_tolerance("resistor-tol", *g.resistor_tol);
    if (g.temps_c) {
      params["temps_k"] = nlohmann::json::array();
      std::stringstream list(*g.temps_c);
      for (std::string item; std::getline(list, item, ',');)
        params["temps_k"].push_back(kelvin_from_celsius(parse_value("temps-c", item, "C")));
    }
    if (g.temp_c) params["inputs"]["temp_k"] = kelvin_from_celsius(parse_value("temp-c", *g.temp_c, "C"));
    for (const auto& [key, value] : g.inputs) {
      const auto* s = spec_by_key(c, key);
      if (s->choices.empty()) params["inputs"][key] = parse_value(s->option, value, s->unit);
      else params["inputs"][key] = value;
    }
    RpcClient client(socket_path(g.socket));
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
    if (g.json) std::printf("%s\n", answer.dump(2).c_str());
    else print_worst_case(answer);
    return answer["result"].empty() ? exit_failure : exit_ok;
  });
}

int run() {
  if (g_given.calculator && g_given.worst_case) return run_worst_case(*g_given.calculator, g_given);
  if (g_given.calculator && (g_given.temps_c || g_given.supply_tol || g_given.resistor_tol))
    return guarded("design " + g_given.calculator->name, []() -> int {
      throw std::invalid_argument("--temps-c, --supply-tol and --resistor-tol go with --lot NAME --worst-case");
    });
  if (g_given.calculator) return run_calculator(*g_given.calculator);
  std::string names;
  for (const auto& c : design_calculators()) names += (names.empty() ? "" : ", ") + c.name;
  std::fprintf(stderr, "junco design: which calculator? (%s; see junco design --help)\n", names.c_str());
  return exit_usage;
}

Command make_command() {
  Command c;
  c.name = "design";
  c.summary = "design calculators using a fitted part (bias, loss, distortion, isolation, power)";
  c.define = define;
  c.first_word_noun = "calculator";
  c.run_parsed = run;
  // Old spellings keep working with a warning (docs/names.md): one name for
  // temperature in °C across commands, and the fixture resistors' names.
  c.renamed = {{"--temp", "--temp-c"}, {"--rbias", "--bias-resistor"}, {"--rreturn", "--dc-return"},
               {"--rg", "--source"}, {"--rl", "--load"}};
  return c;
}

const bool registered = register_command(make_command());

}  // namespace
}  // namespace junco::cli
