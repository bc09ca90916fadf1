// junco lots: the lots the daemon has measured; with a lot name, that lot's
// statistics (lot.stats) or its nominal part as a model (lot.export).
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <cmath>
#include <cstdio>
#include <fstream>

namespace junco::cli {
namespace {

const char* const usage = R"(usage: junco lots [--socket PATH] [--json]
       junco lots LOT [--at CURRENTS] [--match-current A] [--match-tol V] [--set-size N] [--json]
       junco lots LOT --export spice|json [--out FILE]

Without LOT: lists the lots in juncod's database: id, name, number of parts,
when the lot was first seen. `junco parts --lot NAME` lists a lot's parts.

With LOT: the spread of the lot's fitted parts — mean, standard deviation,
range, median and MAD of Is, n, Rs and of Vf and rd at the chosen currents;
outliers (modified z-score over 3.5; Is in log); matched sets (parts whose Vf
at the match current agree within the tolerance); and the lot nominal
(median of each parameter). Parts without a usable fit are listed apart.

options:
  --at CURRENTS        currents for Vf and rd (default 1mA,10mA)
  --match-current A    current at which Vf is matched (default 10mA)
  --match-tol V        Vf tolerance of a matched set (default 2mV)
  --set-size N         parts per matched set (default 2: pairs)
  --export FORMAT      the lot nominal as a SPICE .model card (spice) or a model
                       document for junco design --model (json)
  --out FILE           with --export: write to FILE instead of standard output
  --socket PATH        juncod's socket (see junco status --help)
  --json               print the lot.list / lot.stats result as JSON

examples:
  junco lots WREN-0912 --at 1mA,5mA --match-tol 1mV
  junco lots WREN-0912 --export spice --out wren0912_nom.lib

exit status: 0 shown; 1 unknown lot, no fitted parts, or daemon error; 2 bad options.)";

double num(const Json& j) { return j.is_number() ? j.get<double>() : std::nan(""); }

// "vf_v@0.001A" → "Vf @ 1 mA"; units for the table.
std::pair<std::string, std::string> describe(const std::string& name) {
  const auto at = name.find('@');
  const std::string base = name.substr(0, at);
  std::string where;
  if (at != std::string::npos) where = " @ " + format_si(std::stod(name.substr(at + 1)), "A", 3);
  if (base == "is_a") return {"Is", "A"};
  if (base == "n") return {"n", ""};
  if (base == "rs_ohm") return {"Rs", "Ω"};
  if (base == "vf_v") return {"Vf" + where, "V"};
  if (base == "rd_ohm") return {"rd" + where, "Ω"};
  if (base == "cj0_f") return {"CJO", "F"};
  if (base == "vj_v") return {"VJ", "V"};
  if (base == "m") return {"M", ""};
  return {name, ""};
}

std::string shown(double v, const std::string& unit) {
  if (!std::isfinite(v)) return "—";
  if (!unit.empty()) return format_si(v, unit, 4);
  char t[32];
  std::snprintf(t, sizeof t, "%.4f", v);
  return t;
}


void print_stats(const Json& r) {
  std::printf("lot %s: %zu fitted parts\n", r["lot"].get<std::string>().c_str(), r["parts"].size());
  for (const auto& l : r["left_out"]) std::printf("  left out %s: %s\n", l["label"].get<std::string>().c_str(), l["reason"].get<std::string>().c_str());
  std::printf("\n  %s%s%s%s%s%s%s outliers\n", pad_columns("quantity", 16).c_str(), pad_columns("mean", 13).c_str(), pad_columns("std dev", 13).c_str(),
              pad_columns("min", 13).c_str(), pad_columns("max", 13).c_str(), pad_columns("median", 13).c_str(), pad_columns("MAD", 13).c_str());
  for (const auto& q : r["quantities"]) {
    const auto [label, unit] = describe(q["name"].get<std::string>());
    std::string line = pad_columns(label, 16);
    for (const char* k : {"mean", "std_dev", "min", "max", "median", "mad"}) line += pad_columns(shown(num(q[k]), unit), 13);
    for (const auto& o : q["outliers"]) line += " " + o.get<std::string>();
    std::printf("  %s\n", line.c_str());
  }
  std::printf("\n  matched sets of %ld (Vf at %s within %s):", r["set_size"].get<long>(), format_si(num(r["match_current_a"]), "A", 3).c_str(),
              format_si(num(r["match_tolerance_v"]), "V", 3).c_str());
  if (r["matched"].empty()) std::printf(" none");
  for (const auto& m : r["matched"]) {
    std::printf("\n   ");
    for (const auto& l : m["labels"]) std::printf(" %s", l.get<std::string>().c_str());
    std::printf("  (spread %s)", format_si(num(m["spread_v"]), "V", 3).c_str());
  }
  const Json& nom = r["nominal"];
  std::string law;  // the capacitance law, when some parts were read off
  if (nom.contains("cj0_f") && nom["cj0_f"].is_number()) {
    char text[96];
    std::snprintf(text, sizeof text, ", CJO = %s, VJ = %s, M = %.3f", format_si(num(nom["cj0_f"]), "F").c_str(),
                  format_si(num(nom["vj_v"]), "V").c_str(), num(nom["m"]));
    law = text;
  }
  std::printf("\n\n  nominal (median): Is = %s, n = %.4f, Rs = %s%s   (junco lots %s --export spice)\n", format_si(num(nom["is_a"]), "A").c_str(),
              num(nom["n"]), format_si(num(nom["rs_ohm"]), "Ω").c_str(), law.c_str(), r["lot"].get<std::string>().c_str());
}

int list_lots(RpcClient& client, bool json) {
  const Json r = client.call("lot.list");
  if (json) {
    std::printf("%s\n", r.dump(2).c_str());
    return exit_ok;
  }
  const Json lots = r.value("lots", Json::array());
  if (lots.empty()) {
    std::printf("no lots yet (submit a plan: junco submit PLAN.jsonc)\n");
    return exit_ok;
  }
  std::printf("%6s  %-24s  %6s  %s\n", "lot", "name", "parts", "created");
  for (const auto& l : lots)
    std::printf("%6ld  %-24s  %6ld  %s\n", l.value("lot_id", 0L), l.value("name", "").c_str(), l.value("parts", 0L),
                l.value("created_at", "").c_str());
  return exit_ok;
}

int run(std::vector<std::string> args) {
  return guarded("lots", [&] {
    const auto socket = take_socket_option(args);
    const bool json = take_flag(args, "--json");
    const auto at = take_option(args, "--at");
    const auto match_current = take_option(args, "--match-current");
    const auto match_tol = take_option(args, "--match-tol");
    const auto set_size = take_option(args, "--set-size");
    const auto export_format = take_option(args, "--export");
    const auto out_path = take_option(args, "--out");
    if (out_path && !export_format) throw std::invalid_argument("--out goes with --export FORMAT");
    if (args.size() > 1) throw std::invalid_argument("unexpected argument '" + args[1] + "'");
    if (args.empty()) {
      if (at || match_current || match_tol || set_size || export_format) throw std::invalid_argument("these options need a LOT");
      RpcClient client(socket);
      return list_lots(client, json);
    }
    Json params{{"lot", args[0]}};
    if (export_format) {
      RpcClient client(socket);
      const Json r = client.call("lot.export", Json{{"lot", args[0]}, {"format", *export_format}});
      write_document(r.value("content", ""), out_path);
      for (const auto& l : r.value("left_out", Json::array()))
        std::fprintf(stderr, "junco lots: the nominal leaves out %s (%s)\n", l["label"].get<std::string>().c_str(), l["reason"].get<std::string>().c_str());
      return exit_ok;
    }
    if (at) params["currents_a"] = parse_quantity_list(*at, "A");
    if (match_current) params["match_current_a"] = parse_quantity(*match_current, "A");
    if (match_tol) params["match_tolerance_v"] = parse_quantity(*match_tol, "V");
    if (set_size) {  // the daemon checks the range (2..64) and says so
      if (set_size->empty() || set_size->find_first_not_of("0123456789") != std::string::npos || set_size->size() > 6)
        throw std::invalid_argument("--set-size must be a whole number of parts (2..64), not '" + *set_size + "'");
      params["set_size"] = std::stol(*set_size);
    }
    RpcClient client(socket);
    const Json r = client.call("lot.stats", params);
    if (json) std::printf("%s\n", r.dump(2).c_str());
    else print_stats(r);
    return exit_ok;
  });
}

const bool registered = register_command({"lots", "list measured lots; a lot's statistics, matched sets and nominal", usage, run});

}  // namespace
}  // namespace junco::cli
