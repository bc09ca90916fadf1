// Benchmark (not a test): juncod's own cost per point and its query
// throughput. Prints figures; docs/daemon-api.md records them.
//
//   bench_daemon_throughput [--points-per-part N] [--query-s S]
//
// 1. Points/s of a job on junco-sim answering instantly (--settle-ms 0,
//    settle_s 0): driver round trips over TCP + a durable commit per point.
//    Compared with a bare SQLite loop (one INSERT + COMMIT per row, the
//    store's pragmas: WAL, synchronous=FULL) on the same disk.
// 2. part.fit queries/s from 8 concurrent clients while a job runs, with
//    the p50/p99 latency.
#include "tests/integration/daemon_api_test_support.hpp"
#include "tests/support/sim_process.hpp"

#include <sqlite3.h>

#include <algorithm>
#include <cstdio>
#include <fstream>

using namespace junco;
namespace fs = std::filesystem;
using Clock = std::chrono::steady_clock;

namespace {

double seconds_since(Clock::time_point t0) { return std::chrono::duration<double>(Clock::now() - t0).count(); }

double bare_sqlite_rows_per_s(const fs::path& file, int rows) {
  sqlite3* db = nullptr;
  sqlite3_open(file.c_str(), &db);
  sqlite3_exec(db, "PRAGMA journal_mode=WAL; PRAGMA synchronous=FULL;"
                   "CREATE TABLE t(run INTEGER, seq INTEGER, v REAL, i REAL, t REAL)", nullptr, nullptr, nullptr);
  sqlite3_stmt* st = nullptr;
  sqlite3_prepare_v2(db, "INSERT INTO t VALUES (?,?,?,?,?)", -1, &st, nullptr);
  const auto t0 = Clock::now();
  for (int k = 0; k < rows; ++k) {
    sqlite3_exec(db, "BEGIN", nullptr, nullptr, nullptr);
    sqlite3_bind_int(st, 1, 1);
    sqlite3_bind_int(st, 2, k);
    sqlite3_bind_double(st, 3, 0.6 + 1e-4 * k);
    sqlite3_bind_double(st, 4, 1e-3);
    sqlite3_bind_double(st, 5, k * 0.01);
    sqlite3_step(st);
    sqlite3_reset(st);
    sqlite3_exec(db, "COMMIT", nullptr, nullptr, nullptr);
  }
  const double s = seconds_since(t0);
  sqlite3_finalize(st);
  sqlite3_close(db);
  return rows / s;
}

daemon::Json plan(const std::string& lot, int count) {
  daemon::Json p{{"lot", lot},
                 {"parts", daemon::Json::array()},
                 {"sweep", {{"mode", "voltage"}, {"spacing", "linear"}, {"start", 0.0}, {"stop", 2.0}, {"count", count}, {"settle_s", 0.0}}}};
  for (int i = 1; i <= 8; ++i) p["parts"].push_back({{"slot", i}, {"label", lot + "-" + std::to_string(i)}});
  return p;
}

long wait_done(cli::RpcClient& c, long job) {
  for (;;) {
    const auto j = c.request("job.get", {{"job_id", job}})["result"];
    const std::string s = j["state"];
    if (s == "done" || s == "failed" || s == "cancelled" || s == "interrupted") return j["points_done"];
    std::this_thread::sleep_for(std::chrono::milliseconds(5));
  }
}

}  // namespace

int main(int argc, char** argv) {
  int per_part = 200;
  double query_s = 3.0;
  for (int i = 1; i + 1 < argc; i += 2) {
    const std::string a = argv[i];
    if (a == "--points-per-part") per_part = std::stoi(argv[i + 1]);
    else if (a == "--query-s") query_s = std::stod(argv[i + 1]);
  }
  const auto dir = test::scratch_dir("bench");
  test::SimProcess sim({"--settle-ms", "0"});
  daemon::Json bench = daemon::Json::object();
  for (const char* role : {"source", "meter", "scanner"}) bench[role] = {{"address", sim.endpoint(role)}, {"dialect", sim.family(role)}};
  const auto sock = (dir / "run" / "juncod.sock").string();
  std::ofstream(dir / "bench.jsonc") << daemon::Json{
      {"bench", bench},
      {"fixture", {{"bias_resistor_ohm", 100.0}, {"slots", 8}}},
      {"safety", {{"max_supply_v", 10.0}, {"current_limit_a", 0.05}, {"max_power_w", 0.25}, {"max_reverse_v", 5.0}, {"max_job_s", 3600.0}}},
      {"paths", {{"database", (dir / "junco.db").string()}, {"socket", sock}}}}
                                                .dump();
  test::ChildOptions o;
  o.stderr_path = (dir / "juncod.log").string();
  test::ChildProcess juncod({std::string(JUNCO_BIN_DIR) + "/juncod", "--config", (dir / "bench.jsonc").string(), "--log-level", "warn", "--no-supervisor"}, o);
  for (int i = 0; i < 400 && !fs::exists(sock); ++i) std::this_thread::sleep_for(std::chrono::milliseconds(25));
  cli::RpcClient c(sock);

  // 1. Points per second through the whole daemon, between two runs of the
  // bare SQLite loop (the disk's fsync time moves by 10x within minutes; the
  // overhead is taken against the faster of the two, so it is not understated).
  const double sqlite_before = bare_sqlite_rows_per_s(dir / "bare-before.db", 1000);
  const auto t0 = Clock::now();
  const long job = c.request("job.submit", {{"plan", plan("BENCH", per_part)}})["result"]["job_id"];
  const long points = wait_done(c, job);
  const double job_s = seconds_since(t0);
  const double sqlite_after = bare_sqlite_rows_per_s(dir / "bare.db", 1000);
  const double sqlite_rows = std::max(sqlite_before, sqlite_after);
  std::printf("job: %ld points in %.2f s = %.0f points/s = %.3f ms/point (includes 8 fits, scanner switching)\n", points, job_s,
              points / job_s, 1e3 * job_s / points);
  std::printf("bare SQLite insert+commit (WAL, synchronous=FULL), same disk, before / after the job: %.3f / %.3f ms/row\n",
              1e3 / sqlite_before, 1e3 / sqlite_after);
  std::printf("daemon overhead beyond the faster commit: %.3f ms/point (job / commit = %.2f)\n", 1e3 * job_s / points - 1e3 / sqlite_rows,
              (job_s / points) * sqlite_rows);

  // 2. Queries from 8 clients while a job runs.
  const long busy_job = c.request("job.submit", {{"plan", plan("BUSY", 5000)}})["result"]["job_id"];
  std::atomic<bool> stop{false};
  std::vector<std::vector<double>> latencies(8);
  std::vector<std::thread> clients;
  for (int t = 0; t < 8; ++t)
    clients.emplace_back([&, t] {
      cli::RpcClient q(sock);
      int id = 0;
      while (!stop) {
        const auto q0 = Clock::now();
        const auto r = q.request("part.fit", {{"part_id", 1 + (id % 8)}}, ++id);
        latencies[t].push_back(seconds_since(q0));
        if (!r.contains("result")) std::fprintf(stderr, "query failed: %s\n", r.dump().c_str());
      }
    });
  std::this_thread::sleep_for(std::chrono::duration<double>(query_s));
  stop = true;
  for (auto& th : clients) th.join();
  std::vector<double> all;
  for (auto& l : latencies) all.insert(all.end(), l.begin(), l.end());
  std::sort(all.begin(), all.end());
  const auto busy = c.request("job.get", {{"job_id", busy_job}})["result"];
  std::printf("part.fit from 8 clients during a job: %zu queries in %.1f s = %.0f queries/s; latency p50 %.3f ms, p99 %.3f ms, max %.3f ms"
              " (job meanwhile at %ld points, state %s)\n",
              all.size(), query_s, all.size() / query_s, 1e3 * all[all.size() / 2], 1e3 * all[all.size() * 99 / 100], 1e3 * all.back(),
              busy["points_done"].get<long>(), busy["state"].get<std::string>().c_str());
  c.request("job.cancel", {{"job_id", busy_job}});
  juncod.stop();
  fs::remove_all(dir);
  return 0;
}
