// junco export: offline exports from JSON model documents. One document
// gives that part; several give the lot's nominal (median of each parameter;
// see fitting/lot_stats.hpp) — and `stats` prints the lot statistics.
// `touchstone` writes the part's two-port at one bias (formats/touchstone.hpp).
#include "formats/touchstone.hpp"
#include "formats/lot_nominal.hpp"
#include "fitting/lot_stats.hpp"
#include "formats/model_document.hpp"
#include "formats/spice_card.hpp"
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "units/si_text.hpp"

#include <cstdio>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

namespace junco::cli {
namespace {

using namespace junco::fitting;

const char* const description =
    "Offline exports from JSON model documents (junco fit --model-out, junco show PART --export json).\n\n"
    "FORMAT: spice  a .model NAME D(IS=.. N=.. RS=.. [CJO VJ M] TNOM=degC) card with a comment\n"
    "               header (part, lot, run, temperature, standard errors)\n"
    "        json   the model document again (normalised; schema/model/part-model.schema.json)\n"
    "        touchstone  a Touchstone 1.1 .s2p file: S-parameters (RI, Z0 ohm) of the diode mounted in series\n"
    "               (or --mount shunt) at one bias over --freq, from RS, rd at the bias, Cj(V) and TT of the\n"
    "               model, plus the package's --ls and --cp when known (docs/touchstone.md)\n"
    "        stats  per lot mean, std dev, range, median, MAD of IS, N, RS, and Vf, rd at 1 mA and\n"
    "               10 mA; outliers by modified z-score > 3.5 on median/MAD; matched sets by Vf\n"
    "One MODEL gives that part. Several give the lot nominal: median IS (in log), N, RS, and CJO, VJ, M\n"
    "of the parts that have them.\n"
    "Without --out the result goes to stdout.\n";

const char* const footer =
    "exit status: 0 ok; 1 cannot write the output; 2 bad command line or input.\n"
    "examples:\n"
    "  junco export spice wr03.json --name WR03 --out wr03.lib\n"
    "  junco export stats wr*.json --match-current 1mA --match-tol 2mV\n"
    "  junco export touchstone wr03.json --bias 10mA --freq 1MHz:1GHz:101log -o wr03-10mA.s2p\n"
    "  junco export touchstone wr03.json --bias -5V --mount shunt --ls 1.2nH --cp 0.15pF -o wr03-off.s2p\n";

struct Options {
  std::string format, name, out_path;
  std::string bias_text, freq_text = "1MHz:1GHz:101log", mount = "series";
  double z0_ohm = 50.0, ls_h = 0.0, cp_f = 0.0;
  std::vector<std::string> files;
  LotStatsOptions lot;
  int set_size = 2;
};
Options g_opt;  // bound by define(); one command per process
const std::vector<std::string> formats{"spice", "json", "touchstone", "stats"};

void define(CLI::App& app) {
  Options& o = g_opt;
  app.description(description);
  app.footer(footer);
  app.add_option("FORMAT", o.format, "spice, json, touchstone or stats")->required()->check(CLI::IsMember(formats).description(""));
  app.add_option("MODEL", o.files, "model documents (JSON)")->type_name("FILE...");
  app.add_option("--name", o.name, "the .model name (spice; default from the part label)");
  app.add_option("-o,--out", o.out_path, "write to FILE instead of standard output")->type_name("FILE");
  app.add_option("--bias", o.bias_text, "touchstone: a forward current (10mA) or a reverse voltage, negative (-5V)")->type_name("BIAS");
  app.add_option("--freq", o.freq_text, "touchstone: START:STOP:Nlog, START:STOP:Nlin or F1,F2,... (default 1MHz:1GHz:101log)")->type_name("LIST");
  app.add_option("--mount", o.mount, "touchstone: series (between the ports, default) or shunt (to ground)")->check(CLI::IsMember({"series", "shunt"}).description(""))->type_name("KIND");
  add_si_option(app, "--z0", o.z0_ohm, "ohm", "touchstone: reference impedance of both ports", "50");
  add_si_option(app, "--ls", o.ls_h, "H", "touchstone: package series inductance (0: not known)", "0");
  add_si_option(app, "--cp", o.cp_f, "F", "touchstone: package capacitance across the leads (0: not known)", "0");
  add_si_option(app, "--match-current", o.lot.match_current_a, "A", "stats: current at which Vf is matched", "10mA");
  add_si_option(app, "--match-tol", o.lot.match_tolerance_v, "V", "stats: Vf tolerance of a matched set", "2mV");
  app.add_option("--set-size", o.set_size, "stats: parts per matched set (2..64; default 2)")->check(CLI::Range(2, 64).description(""))->type_name("N");
}

bool read_file(const std::string& path, std::string& out) {
  std::ifstream f(path);
  if (!f) return false;
  std::stringstream ss;
  ss << f.rdbuf();
  out = ss.str();
  return true;
}

int run() {
  Options& opt = g_opt;
  const std::string& format = opt.format;
  std::string& name = opt.name;
  const std::string& out_path = opt.out_path;
  LotStatsOptions& lot_opt = opt.lot;
  lot_opt.set_size = static_cast<std::size_t>(opt.set_size);
  if (!(lot_opt.match_current_a > 0) || !(lot_opt.match_tolerance_v > 0)) {
    std::fprintf(stderr, "junco export: --match-current and --match-tol must be > 0\n");
    return exit_usage;
  }
  std::vector<PartModel> parts;
  for (const auto& a : opt.files) {
    std::string text, why;
    if (!read_file(a, text)) {
      std::fprintf(stderr, "junco export: cannot read '%s'\n", a.c_str());
      return exit_usage;
    }
    auto p = parse_model_document(text, &why);
    if (!p) {
      std::fprintf(stderr, "junco export: %s: %s\n", a.c_str(), why.c_str());
      return exit_usage;
    }
    parts.push_back(*p);
  }
  if (parts.empty()) {
    std::fprintf(stderr, "junco export: no model document given\n");
    return exit_usage;
  }
  std::vector<LotPart> lot_parts;
  for (const auto& p : parts) lot_parts.push_back(lot_part_from_model(p));
  std::string result;
  if (format == "stats") {
    for (const auto& s : lot_statistics(lot_parts, lot_opt)) {
      result += "lot " + s.lot + " (" + std::to_string(s.labels.size()) + " parts)\n";
      char line[256];
      std::snprintf(line, sizeof line, "  %-16s %12s %12s %12s %12s %12s %12s  outliers\n", "quantity", "mean",
                    "std dev", "min", "max", "median", "MAD");
      result += line;
      for (const auto& q : s.quantities) {
        std::snprintf(line, sizeof line, "  %-16s %12.5g %12.5g %12.5g %12.5g %12.5g %12.5g ", q.name.c_str(), q.mean,
                      q.std_dev, q.min, q.max, q.median, q.mad);
        result += line;
        for (const auto& o : q.outliers) result += " " + o;
        result += "\n";
      }
      result += "  matched sets (Vf at " + junco::units::format_si(lot_opt.match_current_a, "A") + " within " +
                junco::units::format_si(lot_opt.match_tolerance_v, "V") + "):";
      if (s.matched.empty()) result += " none";
      for (const auto& m : s.matched) {
        result += "\n   ";
        for (const auto& l : m.labels) result += " " + l;
      }
      result += "\n";
    }
  } else {
    PartModel chosen = parts.front();
    if (parts.size() > 1) {
      // The same nominal as juncod's lot.export (formats/lot_nominal.hpp).
      chosen = lot_nominal_model(parts.front().lot, lot_parts);
      for (const auto& p : parts)
        if (p.lot != parts.front().lot) {
          std::fprintf(stderr, "junco export: warning: documents from several lots; nominal of all, named after %s\n", parts.front().lot.c_str());
          break;
        }
    }
    if (format == "touchstone") {
      std::string why;
      const auto bias = parse_bias_state(opt.bias_text, &why);
      if (opt.bias_text.empty()) why = "touchstone needs --bias (e.g. --bias 10mA or --bias -5V)";
      const auto freqs = bias ? parse_frequency_list(opt.freq_text, &why) : std::nullopt;
      if (!bias || !freqs) {
        std::fprintf(stderr, "junco export: %s\n", why.c_str());
        return exit_usage;
      }
      TouchstoneRequest req;
      req.bias = *bias;
      req.freqs_hz = *freqs;
      req.mount = opt.mount == "shunt" ? SwitchKind::shunt : SwitchKind::series;
      req.z0_ohm = opt.z0_ohm;
      req.package = {opt.ls_h, opt.cp_f};
      if (const std::string problem = touchstone_request_problem(chosen, req); !problem.empty()) {
        std::fprintf(stderr, "junco export: %s\n", problem.c_str());
        return exit_usage;
      }
      result = touchstone_s2p(chosen, req);
    } else {
      result = format == "spice" ? spice_model_card(chosen, name) : model_document_json(chosen);
    }
  }
  if (out_path.empty()) {
    std::fputs(result.c_str(), stdout);
  } else {
    std::ofstream f(out_path);
    f << result;
    if (!f) {
      std::fprintf(stderr, "junco export: cannot write '%s'\n", out_path.c_str());
      return exit_failure;
    }
  }
  return exit_ok;
}

Command export_command() {
  Command c;
  c.name = "export";
  c.summary = "SPICE card, JSON model, Touchstone two-port or lot statistics from model documents";
  c.define = define;
  c.first_word_noun = "format";
  c.first_words = formats;
  c.run_parsed = run;
  return c;
}

const bool registered = register_command(export_command());

}  // namespace
}  // namespace junco::cli
