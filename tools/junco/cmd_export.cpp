// junco export: offline exports from JSON model documents. One document
// gives that part; several give the lot's nominal (median of each parameter;
// see fitting/lot_stats.hpp) — and `stats` prints the lot statistics.
#include "fitting/lot_nominal.hpp"
#include "fitting/lot_stats.hpp"
#include "fitting/model_document.hpp"
#include "fitting/spice_card.hpp"
#include "tools/junco/command.hpp"

#include <cstdio>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

namespace junco::cli {
namespace {

using namespace junco::fitting;

const char* const help =
    "usage: junco export FORMAT MODEL.json... [--name NAME] [--out FILE]\n"
    "       junco export stats MODEL.json... [--match-current A] [--match-tol V] [--set-size N]\n\n"
    "FORMAT: spice  a .model NAME D(IS=.. N=.. RS=.. [CJO VJ M] TNOM=degC) card with a comment\n"
    "               header (part, lot, run, temperature, standard errors)\n"
    "        json   the model document again (normalised; schema/model/part-model.schema.json)\n"
    "One MODEL gives that part. Several give the lot nominal: median IS (in log), N, RS, and CJO, VJ, M\n"
    "of the parts that have them.\n"
    "stats prints per lot mean, std dev, range, median, MAD of IS, N, RS, and Vf, rd at 1 mA and\n"
    "10 mA; outliers by modified z-score > 3.5 on median/MAD; matched sets by Vf.\n"
    "Without --out the result goes to stdout. Exit 0 ok, 2 bad input.\n";

bool read_file(const std::string& path, std::string& out) {
  std::ifstream f(path);
  if (!f) return false;
  std::stringstream ss;
  ss << f.rdbuf();
  out = ss.str();
  return true;
}

int run(const std::vector<std::string>& args) {
  if (args.empty()) {
    std::fprintf(stderr, "junco export: give a format (spice, json, stats); see junco export --help\n");
    return exit_usage;
  }
  const std::string format = args[0];
  if (format != "spice" && format != "json" && format != "stats") {
    std::fprintf(stderr, "junco export: unknown format '%s' (spice, json or stats)\n", format.c_str());
    return exit_usage;
  }
  std::string name, out_path;
  LotStatsOptions lot_opt;
  std::vector<PartModel> parts;
  for (std::size_t k = 1; k < args.size(); ++k) {
    const std::string& a = args[k];
    if (a.rfind("--", 0) == 0) {
      if (k + 1 >= args.size()) {
        std::fprintf(stderr, "junco export: %s needs a value\n", a.c_str());
        return exit_usage;
      }
      const std::string v = args[++k];
      if (a == "--name") name = v;
      else if (a == "--out") out_path = v;
      else if (a == "--match-current") lot_opt.match_current_a = std::stod(v);
      else if (a == "--match-tol") lot_opt.match_tolerance_v = std::stod(v);
      else if (a == "--set-size") lot_opt.set_size = static_cast<std::size_t>(std::stoul(v));
      else {
        std::fprintf(stderr, "junco export: unknown option %s\n", a.c_str());
        return exit_usage;
      }
      continue;
    }
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
      result += "  matched sets (Vf within " + std::to_string(lot_opt.match_tolerance_v) + " V):";
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
      // The same nominal as juncod's lot.export (fitting/lot_nominal.hpp).
      chosen = lot_nominal_model(parts.front().lot, lot_parts);
      for (const auto& p : parts)
        if (p.lot != parts.front().lot) {
          std::fprintf(stderr, "junco export: warning: documents from several lots; nominal of all, named after %s\n", parts.front().lot.c_str());
          break;
        }
    }
    result = format == "spice" ? spice_model_card(chosen, name) : model_document_json(chosen);
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

const bool registered = register_command({"export", "SPICE card, JSON model or lot statistics from model documents", help, run});

}  // namespace
}  // namespace junco::cli
