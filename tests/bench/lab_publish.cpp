// Benchmark (not a test): publishing to the lab database and reading it.
// Prints figures; docs/lab.md records them. Starts its own throw-away
// PostgreSQL (tests/support/pg_cluster.hpp), junco-sim and juncod.
//
//   bench_lab_publish [--points-per-part N] [--backlog N] [--lab-parts N] [--lab-readings N]
//
// 1. Live: a job at 0 settle time (junco-sim --settle-ms 0, settle_s 0) on a
//    bench publishing to a local server; readings/s of the job, the largest
//    publishing lag and backlog seen in daemon.status (polled every 20 ms),
//    and how long after the job's end the lab has everything.
// 2. Backlog: --backlog readings committed while the lab was down (written
//    straight into the bench's SQLite file with juncod stopped, so the outbox
//    triggers queue them as juncod would), then juncod started with the lab
//    up: time until the outbox is empty.
// 3. Query: --lab-readings readings and --lab-parts parts (each with a fit)
//    generated in PostgreSQL on 4 benches; the time of SELECT * FROM
//    junco.part_fits WHERE lot = ... (one lot of 100 parts), median and max
//    of 50, and of the lot_benches listing (`junco lab lots`).
#include "lab/pg.hpp"
#include "tests/integration/daemon_api_test_support.hpp"
#include "tests/support/pg_cluster.hpp"
#include "tests/support/sim_process.hpp"

#include <sqlite3.h>

#include <algorithm>
#include <cstdio>
#include <fstream>

using namespace junco;
namespace fs = std::filesystem;
using Clock = std::chrono::steady_clock;
using Json = nlohmann::json;

namespace {

double seconds_since(Clock::time_point t0) { return std::chrono::duration<double>(Clock::now() - t0).count(); }

Json plan(const std::string& lot, int count) {
  Json p{{"lot", lot},
         {"parts", Json::array()},
         {"sweep", {{"mode", "voltage"}, {"spacing", "linear"}, {"start", 0.3}, {"stop", 3.0}, {"count", count}, {"settle_s", 0.0}}}};
  for (int i = 1; i <= 8; ++i) p["parts"].push_back({{"slot", i}, {"label", lot + "-" + std::to_string(i)}});
  return p;
}

struct Juncod {
  Juncod(const fs::path& dir, const std::string& tag) : sock((dir / "run" / "juncod.sock").string()) {
    test::ChildOptions o;
    o.stderr_path = (dir / ("juncod-" + tag + ".log")).string();
    fs::remove(sock);
    proc = std::make_unique<test::ChildProcess>(
        std::vector<std::string>{std::string(JUNCO_BIN_DIR) + "/juncod", "--config", (dir / "bench.jsonc").string(), "--log-level", "warn"}, o);
    for (int i = 0; i < 400 && !fs::exists(sock); ++i) std::this_thread::sleep_for(std::chrono::milliseconds(25));
    client = std::make_unique<cli::RpcClient>(sock);
  }
  Json lab() { return client->request("daemon.status", Json::object())["result"]["lab"]; }
  std::string sock;
  std::unique_ptr<test::ChildProcess> proc;
  std::unique_ptr<cli::RpcClient> client;
};

void sql(sqlite3* db, const std::string& s) {
  char* err = nullptr;
  if (sqlite3_exec(db, s.c_str(), nullptr, nullptr, &err) != SQLITE_OK) {
    std::fprintf(stderr, "sqlite: %s\n", err ? err : "?");
    std::exit(1);
  }
}

}  // namespace

int main(int argc, char** argv) {
  int per_part = 500;
  long backlog = 100000;
  long lab_parts = 10000;
  long lab_readings = 1000000;
  for (int i = 1; i + 1 < argc; i += 2) {
    const std::string a = argv[i];
    if (a == "--points-per-part") per_part = std::stoi(argv[i + 1]);
    else if (a == "--backlog") backlog = std::stol(argv[i + 1]);
    else if (a == "--lab-parts") lab_parts = std::stol(argv[i + 1]);
    else if (a == "--lab-readings") lab_readings = std::stol(argv[i + 1]);
  }
  test::PgCluster pg("bench");
  const auto dir = test::scratch_dir("lab-bench");
  test::SimProcess sim({"--settle-ms", "0", "--config", std::string(JUNCO_SOURCE_DIR) + "/tools/sim/no-heating.json"});
  Json bench = Json::object();
  for (const char* role : {"source", "meter", "scanner"}) bench[role] = {{"address", sim.endpoint(role)}, {"dialect", sim.family(role)}};
  std::ofstream(dir / "bench.jsonc") << Json{
      {"bench", bench},
      {"fixture", {{"bias_resistor_ohm", 100.0}, {"slots", 8}}},
      {"safety", {{"max_supply_v", 10.0}, {"current_limit_a", 0.05}, {"max_power_w", 0.25}, {"max_reverse_v", 5.0}, {"max_job_s", 3600.0}}},
      {"paths", {{"database", (dir / "junco.db").string()}, {"socket", (dir / "run" / "juncod.sock").string()}}},
      {"lab", {{"database", pg.conninfo()}, {"bench", "bench-1"}}}}
                                                .dump();

  // 1. Live publishing during a job.
  {
    Juncod d(dir, "live");
    while (d.lab()["connected"] != true) std::this_thread::sleep_for(std::chrono::milliseconds(20));
    const auto t0 = Clock::now();
    const long job = d.client->request("job.submit", {{"plan", plan("WREN-0912", per_part)}})["result"]["job_id"];
    double max_lag_s = 0;
    long max_backlog = 0;
    long points = 0;
    for (;;) {
      const Json j = d.client->request("job.get", {{"job_id", job}})["result"];
      const Json lab = d.lab();
      // A status without the publisher's figures (an error reply under load) is no sample.
      if (lab.is_object() && lab.contains("lag_s") && lab.contains("backlog_rows")) {
        max_lag_s = std::max(max_lag_s, lab["lag_s"].get<double>());
        max_backlog = std::max(max_backlog, lab["backlog_rows"].get<long>());
      } else {
        std::fprintf(stderr, "daemon.status without lab figures: %s\n", lab.dump().c_str());
      }
      if (j["state"] != "running" && j["state"] != "queued") {
        points = j["points_done"];
        break;
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(20));
    }
    const double job_s = seconds_since(t0);
    const auto t1 = Clock::now();
    while (d.lab()["backlog_rows"] != 0) std::this_thread::sleep_for(std::chrono::milliseconds(5));
    const double tail_s = seconds_since(t1);
    std::printf("live: job of %ld readings in %.2f s = %.0f readings/s at 0 settle; publishing lag max %.3f s, backlog max %ld rows;"
                " lab complete %.3f s after the job ended\n",
                points, job_s, points / job_s, max_lag_s, max_backlog, tail_s);
    d.proc->stop();
  }

  // 2. A backlog of `backlog` readings after an outage.
  {
    pg.stop();
    sqlite3* db = nullptr;
    sqlite3_open((dir / "junco.db").c_str(), &db);
    const auto g0 = Clock::now();
    sql(db, "BEGIN");
    sql(db, "INSERT INTO lots(name, created_at) VALUES ('WREN-0913', strftime('%Y-%m-%dT%H:%M:%fZ','now'))");
    sql(db, "INSERT INTO parts(lot_id, label, slot, created_at) SELECT id, 'K24B-B1', 1, created_at FROM lots WHERE name = 'WREN-0913'");
    sql(db, "INSERT INTO jobs(plan, state, points_total, points_done, submitted_at, updated_at)"
            " VALUES ('{}', 'done', " + std::to_string(backlog) + ", " + std::to_string(backlog) +
                ", strftime('%Y-%m-%dT%H:%M:%fZ','now'), strftime('%Y-%m-%dT%H:%M:%fZ','now'))");
    sql(db, "INSERT INTO runs(job_id, part_id, slot, fixture, state, started_at) SELECT (SELECT MAX(id) FROM jobs), id, 1, '{}',"
            " 'done', created_at FROM parts WHERE label = 'K24B-B1'");
    sql(db, "WITH RECURSIVE k(x) AS (SELECT 0 UNION ALL SELECT x + 1 FROM k WHERE x + 1 < " + std::to_string(backlog) +
                ") INSERT INTO points(run_id, seq, kind, set_value, set_unit, supply_v, v, i_a, t_s, flags)"
                " SELECT (SELECT MAX(id) FROM runs), x, 'dc', 0.3 + x * 1e-5, 'V', 0.3 + x * 1e-5, 0.25 + x * 1e-6, 1e-6 * (x + 1),"
                " 2e9 + x * 0.001, 0 FROM k");
    sql(db, "COMMIT");
    sqlite3_close(db);
    std::printf("backlog: %ld readings written to the bench store in %.2f s while the lab was down\n", backlog, seconds_since(g0));
    pg.start();
    const auto t0 = Clock::now();
    Juncod d(dir, "backlog");
    // While juncod starts, daemon.status answers at once without the publisher's figures
    // (docs/daemon-core.md, "Start-up order"): wait for them.
    Json first = d.lab();
    while (!first.contains("backlog_rows")) {
      std::this_thread::sleep_for(std::chrono::milliseconds(5));
      first = d.lab();
    }
    const long queued = first["backlog_rows"];
    while (d.lab()["backlog_rows"] != 0) std::this_thread::sleep_for(std::chrono::milliseconds(20));
    const double drain_s = seconds_since(t0);
    lab::PgConnection lab(pg.conninfo());
    const long in_lab = lab.exec("SELECT count(*) FROM junco.readings").integer(0, 0);
    std::printf("backlog: %ld outbox rows drained in %.2f s (juncod start included) = %.0f rows/s; lab now holds %ld readings\n", queued,
                drain_s, queued / drain_s, in_lab);
    d.proc->stop();
  }

  // 3. Query time at lab scale.
  {
    lab::PgConnection lab(pg.conninfo());
    const long parts_per_bench = lab_parts / 4;
    const long readings_per_part = lab_readings / lab_parts;
    const auto g0 = Clock::now();
    lab.exec("BEGIN");
    lab.exec("INSERT INTO junco.benches(bench, store_id) SELECT 'gen-' || b, 'generated-' || b FROM generate_series(1, 4) b");
    // 100 parts per lot; lot names shared across benches (a reel split over benches).
    lab.exec("INSERT INTO junco.lots(bench, id, name, created_at) SELECT 'gen-' || b, l, 'GEN-' || l, now()"
             " FROM generate_series(1, 4) b, generate_series(1, " + std::to_string(parts_per_bench / 100) + ") l");
    lab.exec("INSERT INTO junco.jobs(bench, id, plan, state, points_done, points_total, submitted_at, updated_at)"
             " SELECT 'gen-' || b, 1, '{}', 'done', 0, 0, now(), now() FROM generate_series(1, 4) b");
    lab.exec("INSERT INTO junco.parts(bench, id, lot_id, label, slot, created_at) SELECT 'gen-' || b, p, 1 + (p - 1) / 100,"
             " 'K24B-' || p, 1, now() FROM generate_series(1, 4) b, generate_series(1, " + std::to_string(parts_per_bench) + ") p");
    lab.exec("INSERT INTO junco.runs(bench, id, job_id, part_id, slot, fixture, temp_k, state, started_at)"
             " SELECT bench, id, 1, id, 1, '{}', 300.15, 'done', now() FROM junco.parts WHERE bench LIKE 'gen-%'");
    lab.exec("INSERT INTO junco.readings(bench, id, run_id, seq, kind, set_value, set_unit, v, i_a, t_s, flags)"
             " SELECT r.bench, (r.id - 1) * " + std::to_string(readings_per_part) + " + s, r.id, s, 'dc', 0.3 + s * 0.01, 'V',"
             " 0.3 + s * 0.004, 1e-9 * exp(s * 0.1), 2e9 + s, 0 FROM junco.runs r, generate_series(1, " +
             std::to_string(readings_per_part) + ") s WHERE r.bench LIKE 'gen-%'");
    // Two fits per part (a refit), so part_fits must pick the latest.
    lab.exec("INSERT INTO junco.fits(bench, id, part_id, run_id, model, status, is_a, is_a_se, n, n_se, rs_ohm, rs_ohm_se, temp_k,"
             " points_used, warnings, created_at) SELECT p.bench, 2 * p.id - k, p.id, p.id, 'forward', 'converged',"
             " 2e-9 * (1 + random() * 0.1), 1e-11, 1.9 + random() * 0.05, 1e-3, 0.6 + random() * 0.05, 1e-3, 300.15, 40, '[]', now()"
             " FROM junco.parts p, generate_series(0, 1) k WHERE p.bench LIKE 'gen-%'");
    lab.exec("COMMIT");
    lab.exec("ANALYZE");
    const auto counts = lab.exec("SELECT (SELECT count(*) FROM junco.readings), (SELECT count(*) FROM junco.parts),"
                                 " (SELECT count(*) FROM junco.fits), (SELECT count(*) FROM junco.lots)");
    std::printf("query: lab generated in %.1f s: %s readings, %s parts, %s fits, %s lots (4 benches)\n", seconds_since(g0),
                std::string(counts.text(0, 0)).c_str(), std::string(counts.text(0, 1)).c_str(), std::string(counts.text(0, 2)).c_str(),
                std::string(counts.text(0, 3)).c_str());
    auto time_query = [&](const std::string& what, const std::string& q, const std::vector<lab::Param>& params) {
      std::vector<double> ms;
      int rows = 0;
      for (int k = 0; k < 50; ++k) {
        const auto t0 = Clock::now();
        rows = lab.exec(q, params).rows();
        ms.push_back(1e3 * seconds_since(t0));
      }
      std::sort(ms.begin(), ms.end());
      std::printf("query: %s: %d rows, median %.2f ms, max %.2f ms (50 runs, over the Unix socket)\n", what.c_str(), rows, ms[25], ms.back());
    };
    time_query("part_fits for one lot (GEN-7, on every bench)", "SELECT * FROM junco.part_fits WHERE lot = $1", {std::string("GEN-7")});
    time_query("part_fits for one lot on one bench", "SELECT * FROM junco.part_fits WHERE lot = $1 AND bench = $2",
               {std::string("GEN-7"), std::string("gen-2")});
    time_query("spread of one lot (junco lab stats)",
               "SELECT bench, count(*), avg(n), stddev_samp(n), avg(rs_ohm), stddev_samp(rs_ohm), power(10, avg(log(is_a)))"
               " FROM junco.part_fits WHERE lot = $1 AND status = 'converged' AND is_a > 0 GROUP BY GROUPING SETS ((bench), ())",
               {std::string("GEN-7")});
    time_query("readings of one part (part_readings)", "SELECT * FROM junco.part_readings WHERE bench = $1 AND part_id = $2",
               {std::string("gen-3"), std::string("1234")});
    time_query("every lot with its counts (junco lab lots)", "SELECT * FROM junco.lot_benches", {});
  }
  fs::remove_all(dir);
  return 0;
}
