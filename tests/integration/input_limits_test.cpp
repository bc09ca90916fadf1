// ctest: RUN_SERIAL (time and RSS bounds on oversized input)
// Depth, size and plan limits on every JSON input, checked on real processes
// (issue 10): juncod on its real Unix socket with a real junco-sim bench,
// the junco CLI as a program, juncod --check-config and junco-sim --config
// on real files.
//
// What the limits guard against: before them, a request whose params nested
// ~90 000 levels deep (a 200 KB line, under the 1 MiB line limit) made juncod
// overflow a worker thread's stack while copying params, whatever the method;
// a plan of 100000 steps × 200 frequencies × 8 parts took 850 MB; junco
// submit of a line over 1 MiB waited 30 s for a reply juncod had already sent
// (an error with id null).
//
// JSON-RPC 2.0 rules checked here are from the specification
// (https://www.jsonrpc.org/specification): §4.1 a notification is never
// answered; §5 an error whose request id cannot be read has id null.
#include "tests/integration/abuse_bench_support.hpp"
#include "tests/support/cli_run.hpp"

#include <catch2/catch.hpp>

#include <chrono>
#include <cstdio>
#include <sys/wait.h>

using namespace junco;
using junco::test::Json;
using junco::test::LiveBench;
using junco::cli::RpcClient;
namespace fs = std::filesystem;

namespace {

std::string nested(std::size_t levels) { return std::string(levels, '[') + std::string(levels, ']'); }
constexpr std::size_t kDeep = 100000;  // 10^5 levels, a 200 KB line

using test::run_shell;

Json parse(const std::optional<std::string>& line) {
  REQUIRE(line);
  return Json::parse(*line);
}

}  // namespace

TEST_CASE("params nested 10^5 deep, in any request, are refused or ignored and juncod stays up mid-job", "[limits]") {
  LiveBench b("limits-deep");
  b.start_daemon();
  RpcClient c(b.socket());
  // A job running while the deep requests arrive: they must not touch it.
  const long job = b.submit(c, test::sweep_plan("WREN-0912", 2, 40, 0.005));

  // A known method, a request with an id after the deep part, an unknown method.
  c.send_raw(R"({"jsonrpc":"2.0","method":"job.submit","params":{"plan":)" + nested(kDeep) + R"(},"id":"deep-1"})" "\n");
  auto r = parse(c.read_line());
  CHECK(r["id"] == "deep-1");
  CHECK(r["error"]["code"] == -32602);
  CHECK(r["error"]["message"] == "invalid params: params nested deeper than 64 levels");
  c.send_raw(R"({"jsonrpc":"2.0","id":2,"method":"no.such.method","params":)" + nested(kDeep) + "}\n");
  r = parse(c.read_line());
  CHECK(r["id"] == 2);
  CHECK(r["error"]["message"] == "invalid params: params nested deeper than 64 levels");

  // Notifications: never answered (§4.1) — deep, positional or scalar params.
  // The next line read must be the reply to the request sent after them.
  c.send_raw(R"({"jsonrpc":"2.0","method":"job.cancel","params":{"job_id":)" + nested(kDeep) + "}}\n");
  c.send_raw(R"({"jsonrpc":"2.0","method":"no.such.method","params":)" + nested(kDeep) + "}\n");
  c.send_raw(R"({"jsonrpc":"2.0","method":"job.get","params":[1,2]})" "\n");
  c.send_raw(R"({"jsonrpc":"2.0","method":"job.get","params":5})" "\n");
  c.send_raw(R"({"jsonrpc":"2.0","method":"job.get","params":{"job_id":"x"}})" "\n");
  c.send_raw(R"({"jsonrpc":"2.0","id":3,"method":"daemon.status"})" "\n");
  r = parse(c.read_line());
  CHECK(r["id"] == 3);
  CHECK(r.contains("result"));

  // A batch: the deep element is refused alone, the deep notification left out.
  c.send_raw(R"([{"jsonrpc":"2.0","id":4,"method":"daemon.status"},)"
             R"({"jsonrpc":"2.0","id":5,"method":"job.get","params":{"job_id":)" + nested(kDeep) + R"(}},)"
             R"({"jsonrpc":"2.0","method":"job.get","params":)" + nested(kDeep) + "}]\n");
  r = parse(c.read_line());
  REQUIRE(r.is_array());
  REQUIRE(r.size() == 2);
  CHECK(r[0]["id"] == 4);
  CHECK(r[0].contains("result"));
  CHECK(r[1]["id"] == 5);
  CHECK(r[1]["error"]["code"] == -32602);
  // A deep id cannot be read: refused with id null.
  c.send_raw(R"({"jsonrpc":"2.0","method":"daemon.status","id":)" + nested(kDeep) + "}\n");
  r = parse(c.read_line());
  CHECK(r["id"].is_null());
  CHECK(r["error"]["code"] == -32600);

  // The daemon is up, the job finished normally, a new client is served.
  REQUIRE(b.daemon->running());
  const Json final_job = LiveBench::wait_final(c, job, std::chrono::seconds(120));
  CHECK(final_job["state"] == "done");
  RpcClient fresh(b.socket());
  CHECK(fresh.request("daemon.status", Json::object()).contains("result"));
  CHECK(b.log_text().find("internal error") == std::string::npos);
}

TEST_CASE("junco submit shows juncod's error for a plan line over 1 MiB at once", "[limits][cli]") {
  LiveBench b("limits-line");
  b.start_daemon();
  // A 1.2 MB label: the request line is over juncod's 1 MiB line limit.
  Json plan = test::sweep_plan("WREN-0912", 1, 5, 0.0);
  plan["parts"][0]["label"] = std::string(1200000, 'k');
  const auto file = b.dir / "huge-plan.json";
  std::ofstream(file) << plan.dump();
  const auto t0 = std::chrono::steady_clock::now();
  const auto r = test::run_junco("submit " + file.string() + " --socket " + b.socket());
  const double took_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  INFO(r.out);
  CHECK(r.status == 1);
  CHECK_THAT(r.out, Catch::Contains("junco submit: juncod: invalid request: line longer than 1048576 bytes"));
  CHECK_THAT(r.out, !Catch::Contains("no reply"));
  // Before: the client's 30 s timeout. Now: one round trip (bound generous for a loaded CI machine).
  CHECK(took_s < 10.0);
  REQUIRE(b.daemon->running());
}

TEST_CASE("plans over the job limits are refused at job.submit, at once, naming the limit", "[limits][cli]") {
  LiveBench b("limits-plan");
  b.start_daemon();
  const long rss_before_kib = test::rss_kib(b.daemon_pid());
  // Issue 10's plan: count 100000 × 200 frequencies × 8 parts, settle 0.
  Json plan = test::sweep_plan("WREN-0912", 8, 100000, 0.0);
  plan["ac"] = {{"freqs_hz", Json::array()}, {"amplitude", 0.05}, {"settle_s", 0.0}};
  for (int k = 0; k < 200; ++k) plan["ac"]["freqs_hz"].push_back(1e6 + 1e4 * k);
  const auto file = b.dir / "big-plan.json";
  std::ofstream(file) << plan.dump(2);
  const auto t0 = std::chrono::steady_clock::now();
  const auto r = test::run_junco("submit " + file.string() + " --socket " + b.socket());
  const double took_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  INFO(r.out);
  CHECK(r.status == 2);
  CHECK_THAT(r.out, Catch::Contains("juncod: plan takes 160800000 readings (20100000 per part × 8 parts), over "
                                    "limits.max_points_per_job = 1000000"));
  CHECK(took_s < 5.0);
  // Nothing was expanded: the daemon's memory did not grow by the 480 MB the
  // 20 million steps would take (bound: 50 MB, far below).
  const long rss_after_kib = test::rss_kib(b.daemon_pid());
  CHECK(rss_after_kib - rss_before_kib < 50 * 1024);
  RpcClient c(b.socket());
  CHECK(c.request("job.list", Json::object())["result"]["jobs"].empty());
  // Clients can see the limits in force (the defaults here: the config has no `limits`).
  const Json limits = c.request("bench.describe", Json::object())["result"]["limits"];
  CHECK(limits["max_points_per_job"] == 1000000);
  CHECK(limits["max_plan_memory_bytes"] == 67108864.0);
  REQUIRE(b.daemon->running());
}

TEST_CASE("plan, config, dialect and sim config files nested 10^5 deep are refused by name", "[limits][cli]") {
  test::ScratchDir dir("junco-limits-files");
  // junco submit: refused before connecting (no daemon needed).
  std::ofstream(dir.file("deep-plan.json")) << R"({"lot":"WREN-0912","parts":)" << nested(kDeep) << "}";
  auto r = test::run_junco("submit " + dir.file("deep-plan.json") + " --socket " + dir.file("none.sock"));
  INFO(r.out);
  CHECK(r.status == 2);
  CHECK_THAT(r.out, Catch::Contains(dir.file("deep-plan.json") + ": plan nested deeper than 64 levels"));

  // juncod --check-config on a deep config.
  std::ofstream(dir.file("deep.jsonc")) << R"({"bench":)" << nested(kDeep) << "}";
  r = run_shell(std::string(JUNCO_BIN_DIR) + "/juncod --config " + dir.file("deep.jsonc") + " --check-config");
  INFO(r.out);
  CHECK(r.status == 2);
  CHECK_THAT(r.out, Catch::Contains("juncod: " + dir.file("deep.jsonc") + ": /: the config nested deeper than 64 levels"));

  // A config whose dialect file is deep: named by its file.
  std::ofstream(dir.file("deep-dialect.json")) << R"({"dialect":"x","role":"source","operations":)" << nested(kDeep) << "}";
  const Json config{{"bench",
                     {{"source", {{"address", "tcp:127.0.0.1:1"}, {"dialect", dir.file("deep-dialect.json")}}},
                      {"meter", {{"address", "tcp:127.0.0.1:1"}, {"dialect", "scpi-dmm"}}},
                      {"scanner", {{"address", "tcp:127.0.0.1:1"}, {"dialect", "scpi-switch"}}}}},
                    {"fixture", {{"bias_resistor_ohm", 100.0}, {"slots", 8}}},
                    {"safety", {{"max_supply_v", 10.0}, {"current_limit_a", 0.05}, {"max_power_w", 0.1}, {"max_reverse_v", 5.0}, {"max_job_s", 600.0}}},
                    {"paths", {{"database", dir.file("junco.db")}, {"socket", dir.file("juncod.sock")}}}};
  std::ofstream(dir.file("bench.jsonc")) << config.dump(2);
  // --check-config does not open dialects; juncod opens them with the bench at
  // start, refuses the deep one by name, and stays up (jobs wait for a bench).
  test::ChildOptions o;
  o.stderr_path = dir.file("juncod.log");
  test::ChildProcess daemon({std::string(JUNCO_BIN_DIR) + "/juncod", "--config", dir.file("bench.jsonc")}, o);
  const std::string expected = dir.file("deep-dialect.json") + ": dialect file nested deeper than 64 levels";
  bool logged = false;
  for (int i = 0; i < 200 && !logged && daemon.running(); ++i) {
    logged = test::slurp(dir.file("juncod.log")).find(expected) != std::string::npos;
    if (!logged) std::this_thread::sleep_for(std::chrono::milliseconds(50));
  }
  INFO(test::slurp(dir.file("juncod.log")));
  CHECK(logged);
  CHECK(daemon.running());

  // junco-sim --config.
  std::ofstream(dir.file("deep-sim.json")) << R"({"fixture":)" << nested(kDeep) << "}";
  r = run_shell(std::string(JUNCO_BIN_DIR) + "/junco-sim --config " + dir.file("deep-sim.json"));
  INFO(r.out);
  CHECK(r.status != 0);
  CHECK_THAT(r.out, Catch::Contains("config: config nested deeper than 64 levels"));
}
