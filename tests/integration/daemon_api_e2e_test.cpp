// juncod end to end: junco-sim and juncod as real processes, a real Unix
// socket, real TCP to the simulated instruments, a real SQLite file. Runs
// jobs, follows their events, and SIGKILLs the daemon mid-job to check the
// restart: outputs off first, the job resumes, no point lost or duplicated.
#include "tests/integration/daemon_api_test_support.hpp"
#include "tests/support/sim_process.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <fstream>
#include <set>

using namespace junco;
using junco::cli::RpcClient;
namespace fs = std::filesystem;

namespace {

struct Bench {
  explicit Bench(const std::string& tag, std::vector<std::string> sim_args = {"--settle-ms", "0"})
      : dir(test::scratch_dir(tag)), sim(std::move(sim_args)) {
    daemon::Json bench = daemon::Json::object();
    for (const char* role : {"source", "meter", "scanner"}) bench[role] = {{"address", sim.endpoint(role)}, {"dialect", sim.family(role)}};
    const daemon::Json config{
        {"bench", bench},
        {"fixture", {{"bias_resistor_ohm", 100.0}, {"slots", 8}}},
        {"safety", {{"max_supply_v", 10.0}, {"current_limit_a", 0.05}, {"max_power_w", 0.1}, {"max_reverse_v", 5.0}, {"max_job_s", 600.0}}},
        {"paths", {{"database", (dir / "junco.db").string()}, {"socket", socket()}}}};
    std::ofstream(dir / "bench.jsonc") << "// e2e test bench\n" << config.dump(2);
  }
  ~Bench() { fs::remove_all(dir); }
  std::string socket() const { return (dir / "run" / "juncod.sock").string(); }

  // Starts juncod and waits until its socket answers. --no-supervisor: the
  // restart test SIGKILLs the process that holds the bench and the database
  // and checks what the next start does (supervision: campaign_supervise_test).
  std::unique_ptr<test::ChildProcess> start_daemon() {
    test::ChildOptions o;
    o.stderr_path = (dir / ("juncod-" + std::to_string(starts++) + ".log")).string();
    auto p = std::make_unique<test::ChildProcess>(
        std::vector<std::string>{std::string(JUNCO_BIN_DIR) + "/juncod", "--config", (dir / "bench.jsonc").string(),
                                 "--no-supervisor"},
        o);
    for (int i = 0; i < 400; ++i) {
      REQUIRE(p->running());
      try {
        RpcClient probe(socket());
        return p;
      } catch (const std::exception&) {
        std::this_thread::sleep_for(std::chrono::milliseconds(25));
      }
    }
    FAIL("juncod did not open its socket");
    return p;
  }

  fs::path dir;
  test::SimProcess sim;
  int starts = 0;
};

daemon::Json plan(int parts, int count, double settle_s) {
  daemon::Json p{{"lot", "E2E-LOT"},
                 {"parts", daemon::Json::array()},
                 {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-6}, {"stop", 0.02}, {"count", count}, {"settle_s", settle_s}}}};
  for (int i = 1; i <= parts; ++i) p["parts"].push_back({{"slot", i}, {"label", "E2E-" + std::to_string(i)}});
  return p;
}

// Waits (polling job.get) until the job is in a final state.
daemon::Json wait_final(RpcClient& c, long job, std::chrono::seconds limit) {
  const auto until = std::chrono::steady_clock::now() + limit;
  while (std::chrono::steady_clock::now() < until) {
    const auto j = c.request("job.get", {{"job_id", job}})["result"];
    const std::string s = j["state"];
    if (s == "done" || s == "failed" || s == "cancelled" || s == "interrupted") return j;
    std::this_thread::sleep_for(std::chrono::milliseconds(50));
  }
  FAIL("job did not finish in time");
  return {};
}

}  // namespace

TEST_CASE("a job runs end to end: events, readings, fits, figures", "[e2e]") {
  Bench b("e2e");
  auto daemon = b.start_daemon();
  RpcClient events(b.socket()), c(b.socket());
  REQUIRE(events.request("events.subscribe", {{"kinds", {"job.state", "job.progress"}}}).contains("result"));

  const auto submitted = c.request("job.submit", {{"plan", plan(2, 12, 0.0)}});
  REQUIRE(submitted.contains("result"));
  const long job = submitted["result"]["job_id"];
  CHECK(submitted["result"]["points_total"] == 24);

  // Progress notifications arrive, for our job, and end in "done".
  const auto progress_schema = test::api_schema("event.job.progress")["params"];
  const auto state_schema = test::api_schema("event.job.state")["params"];
  long last_done = -1;
  std::string state;
  for (int i = 0; i < 500 && state != "done"; ++i) {
    const auto n = events.read_json(std::chrono::seconds(10));
    REQUIRE(n["params"]["job_id"] == job);
    CHECK(test::schema_problem(n["method"] == "job.progress" ? progress_schema : state_schema, n["params"]).empty());
    if (n["method"] == "job.progress") {
      CHECK(n["params"]["points_done"].get<long>() >= last_done);
      last_done = n["params"]["points_done"];
    } else if (n["method"] == "job.state") {
      state = n["params"]["state"];
    }
  }
  CHECK(state == "done");
  CHECK(last_done == 24);

  // Every result matches its documented schema (schema/api/, docs/api.md).
  const auto conforms = [&](const std::string& method, const daemon::Json& params) {
    const auto reply = c.request(method, params);
    INFO(method << " → " << reply.dump().substr(0, 400));
    REQUIRE(reply.contains("result"));
    CHECK(test::schema_problem(test::api_schema(method)["result"], reply["result"]) == "");
    CHECK(test::schema_problem(test::api_schema(method)["params"], params) == "");
  };
  conforms("daemon.status", daemon::Json::object());
  conforms("bench.describe", daemon::Json::object());
  conforms("job.get", {{"job_id", job}});
  conforms("job.list", daemon::Json::object());
  conforms("lot.list", daemon::Json::object());
  conforms("part.list", {{"lot", "E2E-LOT"}});
  conforms("part.readings", {{"part_id", 1}});
  conforms("part.fit", {{"part_id", 1}});
  conforms("part.figures", {{"part_id", 1}, {"currents_a", {1e-3, 1e-2}}});
  conforms("part.export", {{"part_id", 1}, {"format", "spice"}});

  const auto parts = c.request("part.list", {{"lot", "E2E-LOT"}})["result"]["parts"];
  REQUIRE(parts.size() == 2);
  for (const auto& p : parts) {
    const long id = p["part_id"];
    const auto readings = c.request("part.readings", {{"part_id", id}})["result"]["points"];
    CHECK(readings.size() == 12);
    const auto fit = c.request("part.fit", {{"part_id", id}})["result"];
    REQUIRE(fit["status"] == "converged");
    const double is_a = fit["is_a"]["value"], n = fit["n"]["value"], rs = fit["rs_ohm"]["value"];
    const auto fig = c.request("part.figures", {{"part_id", id}, {"currents_a", {1e-3}}})["result"]["figures"][0];
    // Inverse of the Shockley equation with series resistance,
    // V = I·RS + N·Vt·ln(1 + I/IS) (docs/references.md §2, Banwell & Jayakumar form);
    // Vt = kT/q with the exact 2019 SI k and q (docs/references.md §1), T = 300.15 K.
    const double vt = 1.380649e-23 * 300.15 / 1.602176634e-19;
    const double vf = 1e-3 * rs + n * vt * std::log1p(1e-3 / is_a);
    CHECK(fig["vf_v"]["value"].get<double>() == Approx(vf).epsilon(1e-6));
  }
  // A refused plan names the limit and leaves nothing queued.
  auto hot = plan(1, 5, 0.0);
  hot["sweep"]["stop"] = 0.5;  // 500 mA into a 50 mA bench
  const auto refused = c.request("job.submit", {{"plan", hot}});
  CHECK(refused["error"]["code"] == static_cast<int>(daemon::RpcCode::plan_refused));
  CHECK_FALSE(refused["error"]["message"].get<std::string>().empty());
  CHECK(daemon->stop() == 0);  // SIGTERM → outputs off → exit 0
  CHECK(b.sim.control("state?")["source"]["output_on"] == false);
}

TEST_CASE("SIGKILL mid-job: restart turns outputs off, resumes, loses and duplicates nothing", "[e2e][restart]") {
  Bench b("kill", {"--settle-ms", "1"});
  auto daemon = b.start_daemon();
  long job = 0;
  long total = 0;
  {
    RpcClient c(b.socket());
    const auto r = c.request("job.submit", {{"plan", plan(3, 15, 0.04)}})["result"];
    job = r["job_id"];
    total = r["points_total"];
    // Let it get into the middle of the job.
    for (int i = 0; i < 400; ++i) {
      const auto j = c.request("job.get", {{"job_id", job}})["result"];
      if (j["points_done"].get<long>() >= total / 3) break;
      std::this_thread::sleep_for(std::chrono::milliseconds(20));
    }
  }
  daemon->signal(SIGKILL);
  REQUIRE(daemon->wait(std::chrono::seconds(5)).value_or(0) == 128 + SIGKILL);
  // A dead daemon cannot turn the supply off: it is typically still on here.
  const bool on_after_kill = b.sim.control("state?")["source"]["output_on"];
  INFO("output on right after SIGKILL: " << on_after_kill);

  daemon = b.start_daemon();
  // By the time the socket answers, the restarted daemon has turned the outputs off
  // (or, having resumed, is mid-point with the current limit programmed).
  RpcClient c(b.socket());
  const auto final_job = wait_final(c, job, std::chrono::seconds(60));
  CHECK(final_job["state"] == "done");
  CHECK(final_job["points_done"] == total);
  CHECK(b.sim.control("state?")["source"]["output_on"] == false);

  // Every part has exactly its points: sequence numbers unique and complete
  // across both daemon lives.
  const auto parts = c.request("part.list", {{"lot", "E2E-LOT"}})["result"]["parts"];
  REQUIRE(parts.size() == 3);
  std::size_t points = 0;
  for (const auto& p : parts) {
    const auto readings = c.request("part.readings", {{"part_id", p["part_id"]}})["result"]["points"];
    std::set<long> seqs;
    for (const auto& r : readings) seqs.insert(r["seq"].get<long>());
    CHECK(seqs.size() == readings.size());  // no duplicates
    CHECK(readings.size() == 15);           // none lost
    points += readings.size();
  }
  CHECK(static_cast<long>(points) == total);
  // The restarted daemon's log says what it did first.
  std::ifstream log(b.dir / "juncod-1.log");
  std::string text((std::istreambuf_iterator<char>(log)), std::istreambuf_iterator<char>());
  CHECK_THAT(text, Catch::Contains("recovered after restart"));
  // Order of the restart: the socket listens (so a client learns at once that
  // the bench is being opened; docs/daemon-core.md "Start-up order"), then
  // outputs off, then the store and the recovery.
  const auto off = text.find("every output off"), recovered = text.find("recovered after restart"), listening = text.find("listening on");
  REQUIRE(off != std::string::npos);
  REQUIRE(listening != std::string::npos);
  CHECK(off < recovered);
  CHECK(listening < off);
}
