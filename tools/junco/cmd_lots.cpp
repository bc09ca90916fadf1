// junco lots: the lots the daemon has measured; with a lot name, that lot's
// statistics (lot.stats) or its nominal part as a model (lot.export).
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"
#include "tools/junco/run_history.hpp"

#include <map>
#include <set>

#include <cmath>
#include <cstdio>
#include <fstream>

namespace junco::cli {
namespace {

const char* const description = R"(Without LOT: lists the lots in juncod's database: id, name, number of parts,
when the lot was first seen, and the jobs that measured it (a lot measured by
several jobs is marked re-measured). `junco parts --lot NAME` lists its parts.

With LOT: the spread of the lot's fitted parts — mean, standard deviation,
range, median and MAD of Is, n, Rs and of Vf and rd at the chosen currents;
outliers (modified z-score over 3.5; Is in log); matched sets (parts whose Vf
at the match current agree within the tolerance); and the lot nominal
(median of each parameter). Parts without a usable fit are listed apart.
It says which job each part's latest fit comes from, and when the statistics
mix runs of different jobs.

With LOT --export: the lot nominal as a SPICE .model card (spice) or a model
document for junco design --model (json).
)";

const char* const footer = R"(examples:
  junco lots
  junco lots WREN-0912 --at 1mA,5mA --match-tol 1mV
  junco lots WREN-0912 --export spice --out wren0912_nom.lib

exit status: 0 shown; 1 unknown lot, no fitted parts, or daemon error; 2 bad options.)";

struct Options {
  std::string lot, socket, export_format, out_path;
  std::vector<double> currents_a;
  std::optional<double> match_current_a, match_tolerance_v;
  std::string set_size;  // checked in run(): the message names the text
  bool json = false;
};
Options g_opt;  // bound by define(); one command per process

void define(CLI::App& app) {
  Options& o = g_opt;
  app.description(description);
  app.footer(footer);
  app.add_option("LOT", o.lot, "a lot's name (without it: the list of lots)")->type_name("");
  add_si_list_option(app, "--at", o.currents_a, "A", "currents for Vf and rd", "1mA,10mA");
  add_si_option(app, "--match-current", o.match_current_a, "A", "current at which Vf is matched (default 10mA)");
  add_si_option(app, "--match-tol", o.match_tolerance_v, "V", "Vf tolerance of a matched set (default 2mV)");
  app.add_option("--set-size", o.set_size, "parts per matched set, 2..64 (default 2: pairs)")->type_name("N");
  app.add_option("--export", o.export_format, "the lot nominal as a SPICE .model card or a model document")
      ->check(CLI::IsMember({"spice", "json"}).description(""))
      ->type_name("spice|json");
  app.add_option("--out", o.out_path, "with --export: write to FILE instead of standard output")->type_name("FILE");
  add_socket_option(app, o.socket);
  app.add_flag("--json", o.json, "print the lot.list / lot.stats result as JSON");
}

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

// Which run each part's latest fit (what lot.stats uses) came from, grouped
// by job: [{job_id, started_at, parts: [labels]}], and the parts measured in
// other jobs too. A re-measured lot is never shown as one run silently.
Json runs_used(RpcClient& client, const std::string& lot) {
  const auto runs = all_runs(client);
  std::map<long, Json> by_job;
  std::set<long> all_jobs;
  for (const auto& p : client.call("part.list", Json{{"lot", lot}}).value("parts", Json::array())) {
    const long part = p.value("part_id", 0L);
    for (const auto& r : runs_of_part(runs, part)) all_jobs.insert(r.job_id);
    if (!p.value("has_fit", false)) continue;
    const Json fit = client.call("part.fit", Json{{"part_id", part}});
    const long run = fit.value("run_id", Json(0)).is_number() ? fit["run_id"].get<long>() : 0;
    for (const auto& r : runs_of_part(runs, part))
      if (r.run_id == run) {
        Json& g = by_job[r.job_id];
        if (g.is_null()) g = Json{{"job_id", r.job_id}, {"started_at", r.started_at}, {"parts", Json::array()}};
        g["parts"].push_back(p.value("label", ""));
      }
  }
  Json out{{"fits_from_jobs", Json::array()}, {"jobs_measuring_lot", Json(std::vector<long>(all_jobs.begin(), all_jobs.end()))}};
  for (auto& [job, g] : by_job) out["fits_from_jobs"].push_back(g);
  return out;
}

void print_runs_used(const Json& used) {
  const Json& groups = used["fits_from_jobs"];
  const Json& jobs = used["jobs_measuring_lot"];
  if (jobs.size() <= 1 && groups.size() <= 1) {
    if (groups.size() == 1)
      std::printf("  fits from job %ld (%s)\n", groups[0]["job_id"].get<long>(), groups[0]["started_at"].get<std::string>().c_str());
    return;
  }
  std::printf("  the lot was measured by %zu jobs; each part's latest fit is used:\n", jobs.size());
  for (const auto& g : groups) {
    std::string labels;
    for (const auto& l : g["parts"]) labels += " " + l.get<std::string>();
    std::printf("    job %ld (%s): %zu part(s):%s\n", g["job_id"].get<long>(), g["started_at"].get<std::string>().c_str(), g["parts"].size(),
                labels.c_str());
  }
  if (groups.size() > 1) std::printf("  note: these statistics mix runs of different jobs\n");
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
  // Which jobs measured each lot: a lot measured twice says so here.
  std::map<long, std::string> lot_of_part;
  for (const auto& p : client.call("part.list").value("parts", Json::array())) lot_of_part[p.value("part_id", 0L)] = p.value("lot", "");
  std::map<std::string, std::set<long>> jobs_of_lot;
  for (const auto& run : all_runs(client)) jobs_of_lot[lot_of_part[run.part_id]].insert(run.job_id);
  std::printf("%6s  %-24s  %6s  %-20s  %s\n", "lot", "name", "parts", "created", "measured by");
  for (const auto& l : lots) {
    std::string jobs;
    for (long j : jobs_of_lot[l.value("name", "")]) jobs += (jobs.empty() ? "job " : ", ") + std::to_string(j);
    const auto count = jobs_of_lot[l.value("name", "")].size();
    if (count > 1) jobs = "jobs" + jobs.substr(3) + " (re-measured)";
    std::printf("%6ld  %-24s  %6ld  %-20s  %s\n", l.value("lot_id", 0L), l.value("name", "").c_str(), l.value("parts", 0L),
                l.value("created_at", "").c_str(), jobs.empty() ? "-" : jobs.c_str());
  }
  return exit_ok;
}

int run() {
  const Options& o = g_opt;
  return guarded("lots", [&] {
    const std::string socket = socket_path(o.socket);
    if (!o.out_path.empty() && o.export_format.empty()) throw std::invalid_argument("--out goes with --export FORMAT");
    const bool stats_options = !o.currents_a.empty() || o.match_current_a || o.match_tolerance_v || !o.set_size.empty();
    if (o.lot.empty()) {
      if (stats_options || !o.export_format.empty()) throw std::invalid_argument("these options need a LOT");
      RpcClient client(socket);
      return list_lots(client, o.json);
    }
    if (!o.export_format.empty()) {
      if (stats_options) throw std::invalid_argument("--export gives the nominal; --at, --match-* and --set-size go without it");
      RpcClient client(socket);
      const Json r = client.call("lot.export", Json{{"lot", o.lot}, {"format", o.export_format}});
      write_document(r.value("content", ""), o.out_path.empty() ? std::nullopt : std::optional<std::string>(o.out_path));
      for (const auto& l : r.value("left_out", Json::array()))
        std::fprintf(stderr, "junco lots: the nominal leaves out %s (%s)\n", l["label"].get<std::string>().c_str(), l["reason"].get<std::string>().c_str());
      return exit_ok;
    }
    Json params{{"lot", o.lot}};
    if (!o.currents_a.empty()) params["currents_a"] = o.currents_a;
    if (o.match_current_a) params["match_current_a"] = *o.match_current_a;
    if (o.match_tolerance_v) params["match_tolerance_v"] = *o.match_tolerance_v;
    if (!o.set_size.empty()) {  // the daemon checks the range (2..64) and says so
      if (o.set_size.find_first_not_of("0123456789") != std::string::npos || o.set_size.size() > 6)
        throw std::invalid_argument("--set-size must be a whole number of parts (2..64), not '" + o.set_size + "'");
      params["set_size"] = std::stol(o.set_size);
    }
    RpcClient client(socket);
    Json r = client.call("lot.stats", params);
    r["runs_used"] = runs_used(client, o.lot);
    if (o.json) std::printf("%s\n", r.dump(2).c_str());
    else {
      print_stats(r);
      print_runs_used(r["runs_used"]);
    }
    return exit_ok;
  });
}

Command make_command() {
  Command c;
  c.name = "lots";
  c.summary = "list measured lots; a lot's statistics, matched sets and nominal";
  c.define = define;
  c.run_parsed = run;
  return c;
}

const bool registered = register_command(make_command());

}  // namespace
}  // namespace junco::cli
