// Helpers for the fault and crash campaigns: a real junco-sim plus a real
// juncod (restartable, killable) on a scratch directory, a JSON-RPC client
// that survives daemon restarts, and read-only checks of the SQLite file the
// daemon wrote (integrity, contiguity, plausibility against the sim's truth).
//
//   junco::test::CampaignBench b("faults", 17);
//   b.start_daemon();
//   auto job = b.rpc("job.submit", {{"plan", plan}});
//   b.kill9();                      // SIGKILL, reaped
//   auto report = junco::test::check_database(b.db_path(), b.truth(), 100.0);
#pragma once

#include "tests/integration/daemon_api_test_support.hpp"
#include "tests/support/sim_process.hpp"

#include <sqlite3.h>

#include <cmath>
#include <fstream>
#include <map>
#include <memory>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

namespace junco::test {

using Json = nlohmann::json;

// The fixture of every campaign bench: junco-sim's default 100 Ω bias
// resistor and inductor DC return (docs/sim.md).
inline constexpr double kCampaignRbOhm = 100.0;

class CampaignBench {
 public:
  // reply_timeout_ms / max_retries per instrument: short, so a silent
  // instrument pauses the job in about a second.
  CampaignBench(const std::string& tag, int seed, int reply_timeout_ms = 150, int max_retries = 1,
                double current_limit_a = 0.05)
      : dir_(scratch_dir(tag)),
        sim_({"--seed", std::to_string(seed), "--settle-ms", "0", "--config",
              std::string(JUNCO_SOURCE_DIR) + "/tools/sim/no-heating.json"}) {
    Json bench = Json::object();
    for (const char* role : {"source", "meter", "scanner"})
      bench[role] = {{"address", sim_.endpoint(role)}, {"dialect", sim_.family(role)},
                     {"reply_timeout_ms", reply_timeout_ms}, {"max_retries", max_retries}};
    config_ = {{"bench", bench},
               {"fixture", {{"bias_resistor_ohm", kCampaignRbOhm}, {"slots", 8}}},
               {"safety", {{"max_supply_v", 10.0}, {"current_limit_a", current_limit_a}, {"max_power_w", 0.25},
                           {"max_reverse_v", 5.0}, {"max_job_s", 600.0}}},
               {"paths", {{"database", db_path().string()}, {"socket", socket_path()}}}};
    write_config();
  }
  ~CampaignBench() {
    daemon_.reset();
    std::filesystem::remove_all(dir_);
  }

  const std::filesystem::path& dir() const { return dir_; }
  std::filesystem::path db_path() const { return config_.is_null() ? dir_ / "junco.db" : std::filesystem::path(config_["paths"]["database"].get<std::string>()); }
  std::string socket_path() const { return (dir_ / "run" / "juncod.sock").string(); }
  std::filesystem::path config_path() const { return dir_ / "bench.jsonc"; }
  SimProcess& sim() { return sim_; }
  Json& config() { return config_; }
  void write_config() { std::ofstream(config_path()) << "// campaign bench\n" << config_.dump(2); }

  // Log of the n-th daemon start (0-based); the last one by default.
  std::filesystem::path log_path(int n = -1) const { return dir_ / ("juncod-" + std::to_string(n < 0 ? starts_ - 1 : n) + ".log"); }
  int starts() const { return starts_; }
  std::string log_text(int n = -1) const {
    std::ifstream in(log_path(n));
    std::stringstream s;
    s << in.rdbuf();
    return s.str();
  }

  // Starts juncod (optionally behind a wrapper argv such as unshare) and
  // waits until its socket answers. Returns false if it exited instead.
  // --no-supervisor: the campaigns kill the process that holds the database
  // and the instruments, with nothing to turn the outputs off for it; the
  // supervisor is exercised by campaign_supervise_test.
  bool start_daemon(std::vector<std::string> wrapper = {}, std::chrono::milliseconds limit = std::chrono::seconds(10)) {
    client_.reset();
    daemon_.reset();
    ChildOptions o;
    o.stderr_path = log_path(starts_++).string();
    o.stop_grace = std::chrono::milliseconds(5000);
    std::vector<std::string> argv = std::move(wrapper);
    argv.insert(argv.end(), {std::string(JUNCO_BIN_DIR) + "/juncod", "--config", config_path().string(), "--no-supervisor"});
    daemon_ = std::make_unique<ChildProcess>(argv, o);
    const auto until = std::chrono::steady_clock::now() + limit;
    while (std::chrono::steady_clock::now() < until) {
      if (!daemon_->running()) return false;
      try {
        client_ = std::make_unique<cli::RpcClient>(socket_path());
        return true;
      } catch (const std::exception&) {
        std::this_thread::sleep_for(std::chrono::milliseconds(10));
      }
    }
    return false;
  }
  ChildProcess* daemon() { return daemon_.get(); }

  // SIGKILL and reap: the daemon gets no chance to turn anything off.
  void kill9() {
    client_.reset();
    if (daemon_) {
      daemon_->signal(SIGKILL);
      daemon_->wait(std::chrono::seconds(5));
    }
    daemon_.reset();
  }

  // One request on the persistent connection; the whole reply.
  Json call(const std::string& method, Json params = Json::object()) {
    if (!client_) client_ = std::make_unique<cli::RpcClient>(socket_path());
    return client_->request(method, std::move(params), ++next_id_);
  }
  // The result, or throws with the error message.
  Json rpc(const std::string& method, Json params = Json::object()) {
    Json r = call(method, std::move(params));
    if (!r.contains("result")) throw std::runtime_error(method + ": " + r.dump());
    return r["result"];
  }

  // True parameters per slot, from the simulator (`lot?`).
  Json truth() { return sim_.control("lot?")["parts"]; }
  bool source_on() { return sim_.control("state?")["source"]["output_on"].get<bool>(); }
  int scanner_slot() { return sim_.control("state?")["scanner"]["slot"].get<int>(); }
  void clear_faults() {
    for (const char* role : {"source", "meter", "scanner"}) sim_.control(std::string("fault ") + role + " clear");
  }

 private:
  std::filesystem::path dir_;
  SimProcess sim_;
  Json config_;
  std::unique_ptr<ChildProcess> daemon_;
  std::unique_ptr<cli::RpcClient> client_;
  int starts_ = 0;
  int next_id_ = 0;
};

// --- the database, read directly (read-only) ---------------------------------

struct DbReport {
  std::string integrity;  // "ok" or SQLite's first complaint
  long runs = 0;
  long points = 0;
  long gaps = 0;        // seq values missing below a run's highest seq
  long duplicates = 0;  // (run_id, seq) pairs stored more than once
  long implausible = 0;
  long points_done_mismatch = 0;  // jobs whose points_done != stored points
  std::vector<std::string> problems;  // first few, for INFO
  std::map<long, long> points_per_job;
};

inline void note(DbReport& r, const std::string& what) {
  if (r.problems.size() < 12) r.problems.push_back(what);
}

// One DC reading checked against the simulator's true part in that slot
// (θ = 0, so the junction is at ambient 300.15 K, docs/sim.md):
//  - the supply sits across Rb and the part (Kirchhoff's voltage law;
//    junction supply_v = v + i·Rb exactly in the sim, within readback noise);
//  - the Shockley equation with series resistance,
//    v = n·Vt·ln(i/Is + 1) + i·Rs (docs/references.md §1), where the current is
//    large enough for the 0.2 µA readback noise not to dominate.
// Current-limited points (flag 1) only need i ≈ the limit. Returns "" or why not.
inline std::string implausible_dc(double supply_v, double v, double i_a, int flags, const Json& part, double rb_ohm,
                                  double limit_a) {
  if (!std::isfinite(v) || !std::isfinite(i_a)) return "v or i_a missing";
  if (v < -0.01 || v > 1.2 || i_a < -1e-5 || i_a > 0.2) return "outside any physical range for this fixture";
  if (flags & 1) {
    // In compliance: the supply is a current source at the limit (docs/sim.md).
    return std::fabs(i_a - limit_a) <= 0.01 * limit_a + 1e-6 ? "" : "current-limited point away from the limit";
  }
  // Tolerances: readback noise 20 µV / 0.2 µA (docs/sim.md) at 6σ, our choice.
  if (std::fabs(supply_v - (v + i_a * rb_ohm)) > 0.5e-3 + rb_ohm * 1.2e-6) return "supply_v != v + i·Rb";
  if (i_a > 50e-6) {
    constexpr double k_b = 1.380649e-23, q = 1.602176634e-19;  // CODATA 2018 exact (SI)
    const double vt = k_b * 300.15 / q;
    const double is = part["is_a"], n = part["n"], rs = part["rs_ohm"];
    const double v_model = n * vt * std::log(i_a / is + 1.0) + i_a * rs;
    const double tol = n * vt * 6 * 0.2e-6 / i_a + 0.5e-3;
    if (std::fabs(v - v_model) > tol) return "Shockley v(i) off by " + std::to_string((v - v_model) * 1e3) + " mV";
  }
  return "";
}

inline DbReport check_database(const std::filesystem::path& file, const Json& truth, double rb_ohm, double limit_a) {
  DbReport r;
  sqlite3* db = nullptr;
  if (sqlite3_open_v2(file.c_str(), &db, SQLITE_OPEN_READONLY, nullptr) != SQLITE_OK) {
    r.integrity = std::string("cannot open: ") + (db ? sqlite3_errmsg(db) : "?");
    sqlite3_close(db);
    return r;
  }
  sqlite3_busy_timeout(db, 5000);
  auto each = [&](const char* sql, const std::function<void(sqlite3_stmt*)>& row) {
    sqlite3_stmt* st = nullptr;
    if (sqlite3_prepare_v2(db, sql, -1, &st, nullptr) != SQLITE_OK) {
      note(r, std::string("prepare: ") + sqlite3_errmsg(db));
      return;
    }
    int rc;
    while ((rc = sqlite3_step(st)) == SQLITE_ROW) row(st);
    if (rc != SQLITE_DONE) note(r, std::string("step: ") + sqlite3_errmsg(db));
    sqlite3_finalize(st);
  };
  auto real = [](sqlite3_stmt* st, int c) { return sqlite3_column_type(st, c) == SQLITE_NULL ? NAN : sqlite3_column_double(st, c); };
  each("PRAGMA integrity_check", [&](sqlite3_stmt* st) {
    const std::string line = reinterpret_cast<const char*>(sqlite3_column_text(st, 0));
    r.integrity = r.integrity.empty() ? line : r.integrity + "; " + line;
  });
  each("SELECT run_id, seq, COUNT(*) FROM points GROUP BY run_id, seq HAVING COUNT(*) > 1",
       [&](sqlite3_stmt* st) { r.duplicates += sqlite3_column_int64(st, 2) - 1; });
  each("SELECT run_id, COUNT(DISTINCT seq), MIN(seq), MAX(seq) FROM points GROUP BY run_id", [&](sqlite3_stmt* st) {
    ++r.runs;
    const long n = sqlite3_column_int64(st, 1), lo = sqlite3_column_int64(st, 2), hi = sqlite3_column_int64(st, 3);
    if (lo != 0 || hi + 1 != n) {
      r.gaps += hi + 1 - n + lo;
      note(r, "run " + std::to_string(sqlite3_column_int64(st, 0)) + ": seq not 0.." + std::to_string(n - 1));
    }
  });
  each("SELECT p.id, r.slot, p.kind, p.supply_v, p.v, p.i_a, p.flags FROM points p JOIN runs r ON r.id = p.run_id",
       [&](sqlite3_stmt* st) {
         ++r.points;
         const int slot = sqlite3_column_int(st, 1);
         const std::string kind = reinterpret_cast<const char*>(sqlite3_column_text(st, 2));
         if (kind != "dc") return;
         const std::string why = implausible_dc(real(st, 3), real(st, 4), real(st, 5), sqlite3_column_int(st, 6),
                                                truth.at(slot - 1), rb_ohm, limit_a);
         if (!why.empty()) {
           ++r.implausible;
           note(r, "point " + std::to_string(sqlite3_column_int64(st, 0)) + " (slot " + std::to_string(slot) + ", v " +
                       std::to_string(real(st, 4)) + ", i " + std::to_string(real(st, 5)) + "): " + why);
         }
       });
  each("SELECT j.id, j.points_done, (SELECT COUNT(*) FROM points p JOIN runs r ON r.id = p.run_id WHERE r.job_id = j.id) FROM jobs j",
       [&](sqlite3_stmt* st) {
         const long id = sqlite3_column_int64(st, 0), done = sqlite3_column_int64(st, 1), stored = sqlite3_column_int64(st, 2);
         r.points_per_job[id] = stored;
         if (done != stored) {
           ++r.points_done_mismatch;
           note(r, "job " + std::to_string(id) + ": points_done " + std::to_string(done) + " but " + std::to_string(stored) + " stored");
         }
       });
  sqlite3_close(db);
  return r;
}

// Points a finished run should hold: every step, or up to and including the
// first current-limited one (the executor stops going up there, docs/daemon-core.md).
inline long points_lost(const std::filesystem::path& file, long steps_per_run) {
  sqlite3* db = nullptr;
  long lost = 0;
  if (sqlite3_open_v2(file.c_str(), &db, SQLITE_OPEN_READONLY, nullptr) != SQLITE_OK) return -1;
  sqlite3_stmt* st = nullptr;
  sqlite3_prepare_v2(db,
                     "SELECT r.id, COUNT(p.id), MIN(CASE WHEN p.flags & 1 THEN p.seq END) FROM runs r "
                     "JOIN jobs j ON j.id = r.job_id LEFT JOIN points p ON p.run_id = r.id WHERE j.state = 'done' GROUP BY r.id",
                     -1, &st, nullptr);
  while (sqlite3_step(st) == SQLITE_ROW) {
    const long stored = sqlite3_column_int64(st, 1);
    const long expected = sqlite3_column_type(st, 2) == SQLITE_NULL ? steps_per_run : sqlite3_column_int64(st, 2) + 1;
    lost += std::max(0L, expected - stored);
  }
  sqlite3_finalize(st);
  sqlite3_close(db);
  return lost;
}

// Committed points, of one job or all (read-only; safe while the daemon is dead or alive, WAL).
inline long committed_points(const std::filesystem::path& file, long job_id = 0) {
  sqlite3* db = nullptr;
  long n = -1;
  if (sqlite3_open_v2(file.c_str(), &db, SQLITE_OPEN_READONLY, nullptr) == SQLITE_OK) {
    sqlite3_busy_timeout(db, 5000);
    sqlite3_stmt* st = nullptr;
    const char* sql = "SELECT COUNT(*) FROM points p JOIN runs r ON r.id = p.run_id WHERE ?1 = 0 OR r.job_id = ?1";
    if (sqlite3_prepare_v2(db, sql, -1, &st, nullptr) == SQLITE_OK && sqlite3_bind_int64(st, 1, job_id) == SQLITE_OK &&
        sqlite3_step(st) == SQLITE_ROW)
      n = sqlite3_column_int64(st, 0);
    sqlite3_finalize(st);
  }
  sqlite3_close(db);
  return n;
}

// A small voltage sweep over `parts` slots (first slot `first_slot`), no AC.
inline Json campaign_plan(const std::string& lot, int first_slot, int parts, int count, double stop_v = 2.5,
                          std::optional<double> compliance_a = std::nullopt) {
  Json p{{"lot", lot},
         {"parts", Json::array()},
         {"sweep", {{"mode", "voltage"}, {"spacing", "linear"}, {"start", 0.4}, {"stop", stop_v}, {"count", count}, {"settle_s", 0.0}}}};
  if (compliance_a) p["sweep"]["compliance_a"] = *compliance_a;
  for (int k = 0; k < parts; ++k) {
    const int slot = first_slot + k;
    p["parts"].push_back({{"slot", slot}, {"label", lot + "-S" + std::to_string(slot)}});
  }
  return p;
}

}  // namespace junco::test
