// A real bench for the abuse, security and load programs: junco-sim and
// juncod as child processes, a real Unix socket, a real SQLite file in a
// scratch directory. Plus the small probes those programs need: the daemon's
// VmRSS and CPU time from /proc, a latency recorder, plan builders.
//
//   junco::test::LiveBench b("abuse");            // sim started, config written
//   b.start_daemon();                              // waits until the socket answers
//   cli::RpcClient c(b.socket());                    // raw JSON-RPC lines
//   long kb = junco::test::rss_kib(b.daemon->pid());
//
// Catch-free, so tests/bench programs can use it too: failures throw.
#pragma once

#include "tests/integration/daemon_api_test_support.hpp"
#include "tests/support/sim_process.hpp"

#include <algorithm>
#include <chrono>
#include <filesystem>
#include <fstream>
#include <functional>
#include <memory>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

namespace junco::test {

// VmRSS of a process in KiB (from /proc/PID/status); -1 when unreadable.
inline long rss_kib(pid_t pid) {
  std::ifstream in("/proc/" + std::to_string(pid) + "/status");
  std::string line;
  while (std::getline(in, line))
    if (line.rfind("VmRSS:", 0) == 0) return std::stol(line.substr(6));
  return -1;
}

// User + system CPU time of a process in seconds (/proc/PID/stat fields 14, 15).
inline double cpu_s(pid_t pid) {
  std::ifstream in("/proc/" + std::to_string(pid) + "/stat");
  std::string all((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  const auto close_paren = all.rfind(')');  // the command name may contain spaces
  if (close_paren == std::string::npos) return -1;
  std::istringstream rest(all.substr(close_paren + 2));
  std::string field;
  long long utime = 0, stime = 0;
  for (int i = 3; i <= 15 && rest >> field; ++i) {
    if (i == 14) utime = std::stoll(field);
    if (i == 15) stime = std::stoll(field);
  }
  return static_cast<double>(utime + stime) / static_cast<double>(::sysconf(_SC_CLK_TCK));
}

// Count of open file descriptors of a process.
inline long open_fds(pid_t pid) {
  long n = 0;
  std::error_code ec;
  for (auto it = std::filesystem::directory_iterator("/proc/" + std::to_string(pid) + "/fd", ec);
       !ec && it != std::filesystem::directory_iterator(); it.increment(ec))
    ++n;
  return ec ? -1 : n;
}

inline Json sweep_plan(const std::string& lot, int parts, int count, double settle_s) {
  Json p{{"lot", lot},
         {"parts", Json::array()},
         {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-6}, {"stop", 0.02}, {"count", count}, {"settle_s", settle_s}}}};
  for (int i = 1; i <= parts; ++i) p["parts"].push_back({{"slot", i}, {"label", lot + "-" + std::to_string(i)}});
  return p;
}

// Sorted-sample percentile (nearest rank); 0 for no samples.
inline double percentile(std::vector<double> samples, double q) {
  if (samples.empty()) return 0;
  std::sort(samples.begin(), samples.end());
  const auto rank = static_cast<std::size_t>(q * static_cast<double>(samples.size() - 1) + 0.5);
  return samples[std::min(rank, samples.size() - 1)];
}

struct LiveBenchOptions {
  std::vector<std::string> sim_args{"--settle-ms", "0"};
  std::string socket_group;               // paths.socket_group; empty: the daemon's group
  std::vector<std::string> daemon_prefix;  // e.g. {"/usr/bin/prlimit", "--nofile=128:128", "--"}
  std::string log_level = "info";
};

class LiveBench {
 public:
  explicit LiveBench(const std::string& tag, LiveBenchOptions options = {})
      : options_(std::move(options)), dir(scratch_dir(tag)), sim(options_.sim_args) {
    Json bench = Json::object();
    for (const char* role : {"source", "meter", "scanner"}) bench[role] = {{"address", sim.endpoint(role)}, {"dialect", sim.family(role)}};
    Json paths{{"database", (dir / "junco.db").string()}, {"socket", socket()}};
    if (!options_.socket_group.empty()) paths["socket_group"] = options_.socket_group;
    const Json config{{"bench", bench},
                      {"fixture", {{"bias_resistor_ohm", 100.0}, {"slots", 8}}},
                      {"safety", {{"max_supply_v", 10.0}, {"current_limit_a", 0.05}, {"max_power_w", 0.1}, {"max_reverse_v", 5.0}, {"max_job_s", 600.0}}},
                      {"paths", paths}};
    std::ofstream(dir / "bench.jsonc") << "// abuse/security/load test bench\n" << config.dump(2);
  }
  ~LiveBench() {
    daemon.reset();
    std::error_code ec;
    std::filesystem::remove_all(dir, ec);
  }
  LiveBench(const LiveBench&) = delete;
  LiveBench& operator=(const LiveBench&) = delete;

  std::string socket() const { return (dir / "run" / "juncod.sock").string(); }
  std::string log_path() const { return (dir / "juncod.log").string(); }
  std::string log_text() const {
    std::ifstream in(log_path());
    return std::string((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  }
  pid_t daemon_pid() const { return daemon ? daemon->pid() : -1; }

  // Starts juncod and waits until its socket answers; throws otherwise.
  void start_daemon() {
    ChildOptions o;
    o.stderr_path = log_path();
    std::vector<std::string> argv = options_.daemon_prefix;
    // --no-supervisor: the tests measure (memory, fds, sockets) and limit
    // (prlimit) the process that serves the socket.
    for (const auto& a : {std::string(JUNCO_BIN_DIR) + "/juncod", std::string("--config"), (dir / "bench.jsonc").string(),
                          std::string("--log-level"), options_.log_level, std::string("--no-supervisor")})
      argv.push_back(a);
    daemon = std::make_unique<ChildProcess>(argv, o);
    for (int i = 0; i < 400; ++i) {
      if (!daemon->running()) throw std::runtime_error("juncod exited at start; log: " + log_text());
      try {
        cli::RpcClient probe(socket());
        return;
      } catch (const std::exception&) {
        std::this_thread::sleep_for(std::chrono::milliseconds(25));
      }
    }
    throw std::runtime_error("juncod did not open its socket");
  }

  // Submits a plan and returns the job id; throws on an error reply.
  long submit(cli::RpcClient& c, const Json& plan) {
    const auto r = c.request("job.submit", {{"plan", plan}});
    if (!r.contains("result")) throw std::runtime_error("job.submit refused: " + r.dump());
    return r["result"]["job_id"];
  }

  // Polls job.get until a final state; returns the job; throws on timeout.
  static Json wait_final(cli::RpcClient& c, long job, std::chrono::seconds limit) {
    const auto until = std::chrono::steady_clock::now() + limit;
    while (std::chrono::steady_clock::now() < until) {
      const auto j = c.request("job.get", {{"job_id", job}})["result"];
      const std::string s = j.value("state", "");
      if (s == "done" || s == "failed" || s == "cancelled" || s == "interrupted") return j;
      std::this_thread::sleep_for(std::chrono::milliseconds(50));
    }
    throw std::runtime_error("job " + std::to_string(job) + " did not finish in time");
  }

 private:
  LiveBenchOptions options_;

 public:
  std::filesystem::path dir;
  SimProcess sim;
  std::unique_ptr<ChildProcess> daemon;
};

}  // namespace junco::test
