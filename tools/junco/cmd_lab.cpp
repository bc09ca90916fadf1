// junco lab: reads the lab database (PostgreSQL) directly, through the
// stable views of schema/pg (junco.lot_benches, junco.part_fits), as any
// team tool would: no juncod involved, read-only access is enough.
#include "lab/pg.hpp"
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <nlohmann/json.hpp>

#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <optional>
#include <stdexcept>

namespace junco::cli {
namespace {

using Json = nlohmann::json;

const char* const description = R"(Reads the lab database that the benches publish to (docs/lab.md).
The same lot name measured on two benches is two measurements: each row
names its bench.
)";
const char* const footer = R"(exit status: 0 done; 1 the lab could not be read; 2 bad command line.

examples:
  junco lab lots --db "service=junco-lab"
  junco lab parts WREN-0912 --bench bench-a
  junco lab stats WREN-0912)";

const char* const db_help =
    "a libpq connection string (default: $JUNCO_LAB, else libpq's own defaults: PGHOST, PGDATABASE, PGSERVICE ...). "
    "Give the password the libpq way (~/.pgpass, PGPASSFILE, a service file); a read-only user (granted junco_reader) "
    "is enough";

struct Options {
  std::string what;  // lots, parts, stats
  std::string lot, bench, db;
  bool json = false;
};
Options g_opt;  // bound by define(); one command per process

// --db and --json are taken before the lab command (junco lab --json lots)
// as well as after it, as the command line always has.
void add_common(CLI::App& app) {
  app.add_option("--db", g_opt.db, db_help)->type_name("CONNINFO");
  app.add_flag("--json", g_opt.json, "print the rows as JSON");
}

void define(CLI::App& app) {
  app.description(description);
  app.footer(footer);
  add_common(app);
  app.require_subcommand(1, 1);
  auto* lots = app.add_subcommand("lots", "every lot, per bench that measured it: parts, parts with a fit");
  auto* parts = app.add_subcommand("parts", "the latest fit of each part of LOT, on every bench (Is, n, Rs, CJO, VJ, M, status) "
                                            "from the view junco.part_fits");
  auto* stats = app.add_subcommand("stats", "the spread of LOT's converged fits, per bench and over all benches: count, mean, "
                                            "standard deviation, min and max of n and Rs, and of log10(Is) (Is shown as its "
                                            "geometric mean)");
  for (auto* sub : {lots, parts, stats}) {
    sub->get_formatter()->column_width(30);
    sub->get_formatter()->label("OPTIONS", "options");
    sub->get_formatter()->label("REQUIRED", "required");
    sub->group("lab commands");
    sub->footer(footer);
    add_common(*sub);
    sub->callback([sub] { g_opt.what = sub->get_name(); });
  }
  for (auto* sub : {parts, stats}) sub->add_option("LOT", g_opt.lot, "the lot")->required()->type_name("");
  parts->add_option("--bench", g_opt.bench, "only this bench")->type_name("NAME");
}

Json rows_json(const lab::PgResult& r) {
  Json out = Json::array();
  for (int i = 0; i < r.rows(); ++i) {
    Json row = Json::object();
    for (int c = 0; c < r.cols(); ++c) row[r.name(c)] = r.null(i, c) ? Json(nullptr) : Json(std::string(r.text(i, c)));
    out.push_back(row);
  }
  return out;
}

std::string si(const lab::PgResult& r, int row, int col, const char* unit, int digits = 4) {
  if (r.null(row, col)) return "-";
  return format_si(r.number(row, col), unit, digits);
}

int lots(lab::PgConnection& db, bool json) {
  const auto r = db.exec("SELECT lot, bench, parts, fitted, created_at FROM junco.lot_benches ORDER BY lot, bench");
  if (json) {
    std::printf("%s\n", rows_json(r).dump(2).c_str());
    return exit_ok;
  }
  std::printf("%-20s %-16s %6s %6s  %s\n", "lot", "bench", "parts", "fitted", "first seen");
  for (int i = 0; i < r.rows(); ++i)
    std::printf("%-20s %-16s %6s %6s  %s\n", std::string(r.text(i, 0)).c_str(), std::string(r.text(i, 1)).c_str(),
                std::string(r.text(i, 2)).c_str(), std::string(r.text(i, 3)).c_str(), std::string(r.text(i, 4)).c_str());
  if (r.rows() == 0) std::printf("(no lots in the lab yet)\n");
  return exit_ok;
}

int parts(lab::PgConnection& db, const std::string& lot, const std::optional<std::string>& bench, bool json) {
  const auto r = db.exec(
      "SELECT bench, label, part_id, fit_id, status, is_a, n, rs_ohm, cj0_f, vj_v, m, temp_k, fitted_at"
      " FROM junco.part_fits WHERE lot = $1 AND ($2::text IS NULL OR bench = $2) ORDER BY bench, label",
      {lot, bench});
  if (json) {
    std::printf("%s\n", rows_json(r).dump(2).c_str());
    return exit_ok;
  }
  if (r.rows() == 0) throw std::runtime_error("no fitted parts of lot \"" + lot + "\" in the lab" + (bench ? " from bench " + *bench : ""));
  std::printf("%-14s %-12s %6s  %-14s %-11s %-7s %-11s %-11s %-9s %-6s\n", "bench", "label", "part", "status", "Is", "n", "Rs",
              "CJO", "VJ", "M");
  for (int i = 0; i < r.rows(); ++i) {
    char n[32] = "-", m[32] = "-";
    if (!r.null(i, 6)) std::snprintf(n, sizeof n, "%.4f", r.number(i, 6));
    if (!r.null(i, 10)) std::snprintf(m, sizeof m, "%.3f", r.number(i, 10));
    std::printf("%-14s %-12s %6s  %-14s %s %-7s %s %s %s %-6s\n", std::string(r.text(i, 0)).c_str(), std::string(r.text(i, 1)).c_str(),
                std::string(r.text(i, 2)).c_str(), std::string(r.text(i, 4)).c_str(), pad_columns(si(r, i, 5, "A"), 11).c_str(), n,
                pad_columns(si(r, i, 7, "Ω"), 11).c_str(), pad_columns(si(r, i, 8, "F"), 11).c_str(),
                pad_columns(si(r, i, 9, "V"), 9).c_str(), m);
  }
  return exit_ok;
}

int stats(lab::PgConnection& db, const std::string& lot, bool json) {
  // GROUPING SETS: one row per bench, then one over every bench (bench NULL).
  const auto r = db.exec(
      "SELECT bench, count(*) AS parts,"
      " avg(n) AS n_mean, stddev_samp(n) AS n_sd, min(n) AS n_min, max(n) AS n_max,"
      " avg(rs_ohm) AS rs_ohm_mean, stddev_samp(rs_ohm) AS rs_ohm_sd, min(rs_ohm) AS rs_ohm_min, max(rs_ohm) AS rs_ohm_max,"
      " power(10, avg(log(is_a))) AS is_a_geomean, stddev_samp(log(is_a)) AS log10_is_a_sd,"
      " min(is_a) AS is_a_min, max(is_a) AS is_a_max"
      " FROM junco.part_fits WHERE lot = $1 AND status = 'converged' AND is_a > 0"
      " GROUP BY GROUPING SETS ((bench), ()) ORDER BY bench NULLS LAST",
      {lot});
  if (json) {
    std::printf("%s\n", rows_json(r).dump(2).c_str());
    return exit_ok;
  }
  if (r.rows() == 0) throw std::runtime_error("no converged fits of lot \"" + lot + "\" in the lab");
  std::printf("lot %s: converged fits per bench and over all benches\n", lot.c_str());
  std::printf("%-14s %5s  %-22s %-28s %-30s\n", "bench", "parts", "n mean ± sd", "Rs mean ± sd", "Is geo-mean (log10 sd)");
  for (int i = 0; i < r.rows(); ++i) {
    const std::string bench = r.null(i, 0) ? "(all benches)" : std::string(r.text(i, 0));
    char n[64], rs[96], is[96];
    std::snprintf(n, sizeof n, "%.4f ± %.4f", r.number(i, 2), r.null(i, 3) ? 0.0 : r.number(i, 3));
    std::snprintf(rs, sizeof rs, "%s ± %s", format_si(r.number(i, 6), "Ω").c_str(),
                  r.null(i, 7) ? "-" : format_si(r.number(i, 7), "Ω", 2).c_str());
    std::snprintf(is, sizeof is, "%s (%.3f)", format_si(r.number(i, 10), "A").c_str(), r.null(i, 11) ? 0.0 : r.number(i, 11));
    std::printf("%-14s %5s  %s %s %s\n", bench.c_str(), std::string(r.text(i, 1)).c_str(), pad_columns(n, 22).c_str(),
                pad_columns(rs, 28).c_str(), is);
  }
  return exit_ok;
}

std::string conninfo() {
  if (!g_opt.db.empty()) return g_opt.db;
  if (const char* env = std::getenv("JUNCO_LAB"); env && *env) return env;
  return "";
}

int run() {
  return guarded("lab", [&] {
    const std::string info = conninfo();
    if (const std::string bad = lab::conninfo_problem(info); !bad.empty() && bad.rfind("must not", 0) != 0)
      throw std::invalid_argument("--db: " + bad);
    lab::PgConnection db(info, 5, "junco lab");
    if (lab::lab_schema_version(db) == 0)
      throw std::runtime_error("lab database " + lab::describe_conninfo(info) + ": no junco schema (no bench has published yet)");
    if (g_opt.what == "lots") return lots(db, g_opt.json);
    if (g_opt.what == "parts")
      return parts(db, g_opt.lot, g_opt.bench.empty() ? std::nullopt : std::optional<std::string>(g_opt.bench), g_opt.json);
    return stats(db, g_opt.lot, g_opt.json);
  });
}

Command make_command() {
  Command c;
  c.name = "lab";
  c.summary = "read the lab database: lots, parts, spread across benches";
  c.define = define;
  c.first_word_noun = "lab command";
  c.run_parsed = run;
  return c;
}

const bool registered = register_command(make_command());

}  // namespace
}  // namespace junco::cli
