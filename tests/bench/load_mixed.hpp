// The mixed-query load run behind bench_load_mixed and the short ctest
// integration.abuse_load_test: a real juncod + junco-sim bench, an unloaded
// baseline job, then the same plan again while N clients issue mixed queries
// (daemon.status, lot.list, part.list, part.fit, part.readings, job.get).
// Reports throughput and latency per method and compares the loaded job with
// the baseline: same reading count per part, contiguous sequence numbers,
// duration within a tolerance.
#pragma once

#include "tests/integration/abuse_bench_support.hpp"

#include <atomic>
#include <cstdio>
#include <map>
#include <mutex>
#include <random>

namespace junco::test {

struct LoadOptions {
  double seconds = 60;      // how long the clients query
  int clients = 16;
  int parts = 8;
  double settle_s = 0.02;   // per point; the job is sized to last about `seconds`
};

struct MethodStats {
  std::vector<double> latency_s;
  long errors = 0;
};

struct JobRun {
  long job_id = 0;
  std::string state;
  long points_done = 0;
  double duration_s = 0;
  std::map<std::string, std::size_t> readings_per_part;  // label → count
  bool contiguous = true;  // every part's seq 0..n-1, no gap, no duplicate
};

struct LoadReport {
  double query_s = 0;
  std::map<std::string, MethodStats> methods;
  JobRun baseline, loaded;
  std::string problems;  // empty: readings unaffected
};

inline const std::vector<std::string>& load_methods() {
  static const std::vector<std::string> m{"daemon.status", "lot.list", "part.list", "part.fit", "part.readings", "job.get"};
  return m;
}

// Runs the plan to its end, timing it from submit to the final state.
inline JobRun run_job(LiveBench& b, cli::RpcClient& c, const Json& plan) {
  JobRun r;
  const auto t0 = std::chrono::steady_clock::now();
  r.job_id = b.submit(c, plan);
  for (;;) {
    const auto j = c.request("job.get", {{"job_id", r.job_id}})["result"];
    r.state = j.value("state", "");
    r.points_done = j.value("points_done", 0L);
    if (r.state == "done" || r.state == "failed" || r.state == "cancelled" || r.state == "interrupted") break;
    if (std::chrono::steady_clock::now() - t0 > std::chrono::minutes(30)) throw std::runtime_error("job never finished");
    std::this_thread::sleep_for(std::chrono::milliseconds(10));
  }
  r.duration_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  const auto listed = c.request("part.list", {{"lot", plan["lot"]}});  // named: the loop must not iterate a temporary's member
  for (const auto& p : listed["result"]["parts"]) {
    const auto pts = c.request("part.readings", {{"part_id", p["part_id"]}})["result"]["points"];
    r.readings_per_part[p["label"].get<std::string>().substr(plan["lot"].get<std::string>().size())] = pts.size();
    for (std::size_t k = 0; k < pts.size(); ++k)
      if (pts[k]["seq"].get<long>() != static_cast<long>(k)) r.contiguous = false;
  }
  return r;
}

class LoadClients {
 public:
  LoadClients(const std::string& socket, int n, std::vector<long> part_ids, std::string lot, long job_id)
      : part_ids_(std::move(part_ids)), lot_(std::move(lot)), job_id_(job_id) {
    for (int i = 0; i < n; ++i) threads_.emplace_back([this, socket, i] { run(socket, i); });
  }
  ~LoadClients() { stop(); }
  void set_job(long id) { job_id_ = id; }
  void stop() {
    stop_ = true;
    for (auto& t : threads_)
      if (t.joinable()) t.join();
  }
  std::map<std::string, MethodStats> stats() {
    std::lock_guard lock(mutex_);
    return stats_;
  }

 private:
  void run(const std::string& socket, int seed) {
    std::mt19937 rng(static_cast<unsigned>(seed) + 1);
    std::map<std::string, MethodStats> mine;
    cli::RpcClient c(socket);
    int id = 0;
    while (!stop_) {
      const auto& method = load_methods()[rng() % load_methods().size()];
      Json params = Json::object();
      const long part = part_ids_[rng() % part_ids_.size()];
      if (method == "part.list") params = {{"lot", lot_}};
      else if (method == "part.fit" || method == "part.readings") params = {{"part_id", part}};
      else if (method == "job.get") params = {{"job_id", job_id_.load()}};
      const auto t0 = std::chrono::steady_clock::now();
      const auto reply = c.request(method, params, ++id);
      auto& s = mine[method];
      s.latency_s.push_back(std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count());
      if (!reply.contains("result") || reply["id"] != id) ++s.errors;
    }
    std::lock_guard lock(mutex_);
    for (auto& [m, s] : mine) {
      auto& all = stats_[m];
      all.latency_s.insert(all.latency_s.end(), s.latency_s.begin(), s.latency_s.end());
      all.errors += s.errors;
    }
  }

  std::vector<long> part_ids_;
  std::string lot_;
  std::atomic<long> job_id_;
  std::atomic<bool> stop_{false};
  std::mutex mutex_;
  std::map<std::string, MethodStats> stats_;
  std::vector<std::thread> threads_;
};

// Sized so one job lasts about `seconds` (settle dominates each point).
inline Json load_plan(const std::string& lot, const LoadOptions& o) {
  const double per_point_s = o.settle_s + 0.035;  // measured: ~35 ms of instrument traffic and commit per point
  const int count = std::max(5, static_cast<int>(o.seconds / (per_point_s * o.parts)));
  return sweep_plan(lot, o.parts, count, o.settle_s);
}

inline LoadReport run_load(const LoadOptions& o, LiveBench& b) {
  LoadReport rep;
  cli::RpcClient c(b.socket());
  // Baseline: the plan alone, nothing else asking.
  rep.baseline = run_job(b, c, load_plan("BASE-", o));
  std::vector<long> part_ids;
  const auto listed = c.request("part.list", {{"lot", "BASE-"}});
  for (const auto& p : listed["result"]["parts"]) part_ids.push_back(p["part_id"]);
  if (part_ids.empty()) throw std::runtime_error("baseline job left no parts: " + listed.dump().substr(0, 300));

  // Loaded: the same plan while the clients query for `seconds`.
  LoadClients clients(b.socket(), o.clients, part_ids, "BASE-", rep.baseline.job_id);
  const auto q0 = std::chrono::steady_clock::now();
  std::thread stopper([&] {
    std::this_thread::sleep_for(std::chrono::duration<double>(o.seconds));
    clients.stop();
  });
  rep.loaded = run_job(b, c, load_plan("LOAD-", o));
  stopper.join();
  rep.query_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - q0).count();
  rep.methods = clients.stats();

  auto problem = [&](const std::string& p) { rep.problems += (rep.problems.empty() ? "" : "; ") + p; };
  if (rep.baseline.state != "done") problem("baseline job ended " + rep.baseline.state);
  if (rep.loaded.state != "done") problem("loaded job ended " + rep.loaded.state);
  if (rep.loaded.points_done != rep.baseline.points_done)
    problem("points " + std::to_string(rep.loaded.points_done) + " under load vs " + std::to_string(rep.baseline.points_done));
  if (rep.loaded.readings_per_part != rep.baseline.readings_per_part) problem("readings per part differ from the baseline");
  if (!rep.loaded.contiguous || !rep.baseline.contiguous) problem("a part's sequence numbers have a gap or duplicate");
  for (const auto& [m, s] : rep.methods)
    if (s.errors) problem(std::to_string(s.errors) + " error replies to " + m);
  return rep;
}

inline void print_report(const LoadReport& r, const LoadOptions& o, std::FILE* out = stdout) {
  std::fprintf(out, "load: %d clients, %.1f s of queries, job %d parts x %ld points (settle %.3f s)\n", o.clients, r.query_s, o.parts,
               r.baseline.points_done / std::max(1, o.parts), o.settle_s);
  std::fprintf(out, "%-14s %9s %9s %9s %9s %9s %7s\n", "method", "queries", "per_s", "p50_ms", "p99_ms", "max_ms", "errors");
  long total = 0;
  for (const auto& m : load_methods()) {
    const auto it = r.methods.find(m);
    if (it == r.methods.end()) continue;
    const auto& s = it->second;
    total += static_cast<long>(s.latency_s.size());
    std::fprintf(out, "%-14s %9zu %9.0f %9.2f %9.2f %9.2f %7ld\n", m.c_str(), s.latency_s.size(),
                 static_cast<double>(s.latency_s.size()) / r.query_s, 1e3 * percentile(s.latency_s, 0.5),
                 1e3 * percentile(s.latency_s, 0.99), 1e3 * percentile(s.latency_s, 1.0), s.errors);
  }
  std::fprintf(out, "%-14s %9ld %9.0f\n", "all", total, static_cast<double>(total) / r.query_s);
  std::fprintf(out, "job baseline: %ld points in %.2f s; under load: %ld points in %.2f s (ratio %.3f)\n", r.baseline.points_done,
               r.baseline.duration_s, r.loaded.points_done, r.loaded.duration_s, r.loaded.duration_s / r.baseline.duration_s);
  std::fprintf(out, "readings: %s\n", r.problems.empty() ? "unaffected (same count per part, contiguous seq)" : r.problems.c_str());
}

}  // namespace junco::test
