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
    "with --eg (default 1.11), --xti (3), --trs1 (0).\n";

const char* const values_text = "Values take engineering suffixes: 10mA, 1k, 2.2pF, 100MHz (m = milli, M = mega).\n";

const char* const design_footer =
    "examples:\n"
    "  junco design bias-r --part WR-03 --supply 5 --current 10mA\n"
    "  junco design loss --is 1e-14 --n 1 --rs 1 --current 10mA --switch series\n"
    "  junco design isolation --model wr03.json --cj 0.3pF --freq 1GHz --reverse 5V\n"
    "  junco design distortion --part WR-03 --current 10mA --amplitude 0.1V --freq 100MHz --tt 5ns --json\n"
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
  std::string unknown;  // a first word that is no calculator
  bool json = false;
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
  sub->footer((c.needs_part ? std::string(part_text) : std::string("No part needed.\n")) + values_text + "\n" + design_footer);
  for (const auto& s : c.inputs) add_input_option(*sub, s);
  if (c.needs_part) {
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
  }
  add_socket_option(*sub, g_given.socket);
  sub->add_flag("--json", g_given.json, "print the answer as JSON (the part.design result)");
  sub->callback([&c] { g_given.calculator = &c; });
}

void define(CLI::App& app) {
  app.description(
      "Calculators for a diode switch, using a fitted part. Each prints the part and every\n"
      "input it assumed, defaults included. Defaults: Rg = RL = 50 ohm, 10 MHz, no series\n"
      "inductance, the fit's temperature.\n\n" + std::string(part_text) + values_text);
  app.footer(design_footer);
  // Not a calculator's name: kept to say so, naming the calculators.
  app.require_subcommand(0, 1);
  app.add_option("CALCULATOR", g_given.unknown, "")->group("");
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
    p.pin = m->pin;
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
    std::printf("%-*s  %s\n", static_cast<int>(width), l["label"].get<std::string>().c_str(), shown_value(l, 6).c_str());
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

int run() {
  if (g_given.calculator) return run_calculator(*g_given.calculator);
  std::string names;
  for (const auto& c : design_calculators()) names += (names.empty() ? "" : ", ") + c.name;
  if (g_given.unknown.empty()) std::fprintf(stderr, "junco design: which calculator? (%s; see junco design --help)\n", names.c_str());
  else std::fprintf(stderr, "junco design: unknown calculator '%s' (%s; see junco design --help)\n", g_given.unknown.c_str(), names.c_str());
  return exit_usage;
}

Command make_command() {
  Command c;
  c.name = "design";
  c.summary = "design calculators using a fitted part (bias, loss, distortion, isolation, power)";
  c.define = define;
  c.run_parsed = run;
  // Old spellings keep working with a warning (docs/names.md): one name for
  // temperature in °C across commands, and the fixture resistors' names.
  c.renamed = {{"--temp", "--temp-c"}, {"--rbias", "--bias-resistor"}, {"--rreturn", "--dc-return"}};
  return c;
}

const bool registered = register_command(make_command());

}  // namespace
}  // namespace junco::cli
