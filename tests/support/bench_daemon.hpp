// A whole bench for a test: junco-sim (real TCP instruments), a bench
// config naming them, and juncod on a real Unix socket in a scratch
// directory. Also runs a plan to its end and runs the junco CLI.
//
//   junco::test::BenchDaemon b("design", {"--settle-ms", "0"});
//   const long job = b.run_plan(plan_json);         // waits until done
//   auto reply = b.client().request("part.fit", {{"part_id", 1}});
//   auto cli = b.junco({"show", "WR-01"});           // --socket added
#pragma once

#include "tests/integration/daemon_api_test_support.hpp"
#include "tests/support/sim_process.hpp"

#include <catch2/catch.hpp>

#include <sys/wait.h>

#include <cstdio>
#include <filesystem>
#include <fstream>
#include <map>
#include <memory>
#include <string>
#include <thread>
#include <vector>

namespace junco::test {

struct BenchDaemonOptions {
  std::vector<std::string> roles{"source", "meter", "scanner", "siggen", "levelmeter"};
  Json fixture{{"bias_resistor_ohm", 100.0}, {"slots", 8}};
  Json safety{{"max_supply_v", 10.0}, {"current_limit_a", 0.05}, {"max_power_w", 0.1}, {"max_reverse_v", 5.0}, {"max_job_s", 600.0}};
  Json extra = Json::object();  // more top-level config keys ("server", "accuracy")
  // Dialect per role when it is not named like the sim's family (a bare
  // name of a shipped dialect, or a path).
  std::map<std::string, std::string> dialects;
};

class BenchDaemon {
 public:
  BenchDaemon(const std::string& tag, std::vector<std::string> sim_args, BenchDaemonOptions options = {})
      : dir_(scratch_dir(tag)), sim_(std::move(sim_args)) {
    Json bench = Json::object();
    for (const auto& role : options.roles) {
      const auto d = options.dialects.find(role);
      bench[role] = {{"address", sim_.endpoint(role)}, {"dialect", d != options.dialects.end() ? d->second : sim_.family(role)}};
    }
    Json config{{"bench", bench},
                {"fixture", options.fixture},
                {"safety", options.safety},
                {"paths", {{"database", (dir_ / "junco.db").string()}, {"socket", socket()}}}};
    config.update(options.extra);
    std::ofstream(dir_ / "bench.jsonc") << "// test bench (tests/support/bench_daemon.hpp)\n" << config.dump(2);
    launch();
  }
  ~BenchDaemon() {
    client_.reset();
    daemon_.reset();
    std::filesystem::remove_all(dir_);
  }
  BenchDaemon(const BenchDaemon&) = delete;
  BenchDaemon& operator=(const BenchDaemon&) = delete;

  // Starts juncod again on the same config, database and sim, after the
  // old one was stopped or killed (e.g. daemon().signal(SIGKILL)).
  void restart() {
    client_.reset();
    daemon_.reset();
    launch();
  }

 private:
  void launch() {
    ChildOptions o;
    // juncod.log, then juncod.1.log ... after restarts
    o.stderr_path = (dir_ / (starts_ ? "juncod." + std::to_string(starts_) + ".log" : std::string("juncod.log"))).string();
    ++starts_;
    daemon_ = std::make_unique<ChildProcess>(
        std::vector<std::string>{std::string(JUNCO_BIN_DIR) + "/juncod", "--config", (dir_ / "bench.jsonc").string()}, o);
    for (int i = 0; i < 400 && !client_; ++i) {
      if (!daemon_->running()) FAIL("juncod exited at start; see " + o.stderr_path);
      try {
        client_ = std::make_unique<cli::RpcClient>(socket());
      } catch (const std::exception&) {
        std::this_thread::sleep_for(std::chrono::milliseconds(25));
      }
    }
    if (!client_) FAIL("juncod did not open its socket");
    // The socket listens before the bench is safe and the store open
    // (daemon/startup_gate.hpp): wait until juncod is fully up, so a test's
    // first call meets the service and not the start (a mute instrument
    // makes the start take its timeouts).
    for (int i = 0; i < 2400; ++i) {
      const Json st = client_->request("daemon.status", Json::object());
      if (st.contains("result") && st["result"].value("schema_version", 0) > 0) return;
      if (!daemon_->running()) FAIL("juncod exited at start; see " + o.stderr_path);
      std::this_thread::sleep_for(std::chrono::milliseconds(50));
    }
    FAIL("juncod did not finish starting in 120 s; see " + o.stderr_path);
  }

 public:
  std::string socket() const { return (dir_ / "run" / "juncod.sock").string(); }
  const std::filesystem::path& dir() const { return dir_; }
  SimProcess& sim() { return sim_; }
  cli::RpcClient& client() { return *client_; }
  ChildProcess& daemon() { return *daemon_; }

  // The result of a call that must succeed (the error is shown otherwise).
  Json result(const std::string& method, const Json& params) {
    const Json reply = client_->request(method, params);
    INFO(method << " " << params.dump() << " -> " << reply.dump().substr(0, 600));
    REQUIRE(reply.contains("result"));
    return reply["result"];
  }

  // Submits a plan and waits until its job is done; returns the job id.
  long run_plan(const Json& plan, std::chrono::seconds limit = std::chrono::seconds(120)) {
    const long job = result("job.submit", {{"plan", plan}})["job_id"];
    const auto until = std::chrono::steady_clock::now() + limit;
    while (std::chrono::steady_clock::now() < until) {
      const Json j = result("job.get", {{"job_id", job}});
      const std::string s = j["state"];
      if (s == "done") return job;
      if (s == "failed" || s == "cancelled" || s == "interrupted") FAIL("job " << job << " ended " << s << ": " << j.dump());
      std::this_thread::sleep_for(std::chrono::milliseconds(50));
    }
    FAIL("job " << job << " did not finish in time");
    return job;
  }

  struct Cli {
    int status = -1;
    std::string out, err;
  };
  // Runs the junco CLI against this daemon (--socket appended).
  Cli junco(std::vector<std::string> args) const {
    args.insert(args.begin(), std::string(JUNCO_BIN_DIR) + "/junco");
    args.push_back("--socket");
    args.push_back(socket());
    const auto err_path = dir_ / "cli.err";
    ChildOptions o;
    o.stderr_path = err_path.string();
    Cli r;
    ChildProcess cli(std::move(args), o);
    r.out = cli.read_all(std::chrono::minutes(5)).value_or("");
    r.status = cli.wait(std::chrono::minutes(1)).value_or(-1);
    if (cli.signalled()) r.status = -1;
    std::ifstream e(err_path);
    r.err.assign(std::istreambuf_iterator<char>(e), std::istreambuf_iterator<char>());
    return r;
  }

 private:
  std::filesystem::path dir_;
  SimProcess sim_;
  std::unique_ptr<ChildProcess> daemon_;
  std::unique_ptr<cli::RpcClient> client_;
  int starts_ = 0;
};

}  // namespace junco::test
