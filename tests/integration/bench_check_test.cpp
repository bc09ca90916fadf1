// `junco bench` / bench.check against a real juncod and junco-sim: every
// instrument's address, dialect, *IDN? and one reading that changes nothing;
// a mute instrument and an unreachable bench are named with the reason in
// words, each within 2 s per instrument (the target; the check's own
// timeouts are connect 500 ms, reply 700 ms); a running job is not disturbed.
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

#include <chrono>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <thread>

using namespace junco;
using Json = nlohmann::json;
using Clock = std::chrono::steady_clock;

namespace {

// bench.check with room for a slow answer (the test client's default is 3 s).
Json check(test::BenchDaemon& b, double* took_s = nullptr) {
  const auto t0 = Clock::now();
  b.client().send_raw(Json{{"jsonrpc", "2.0"}, {"id", 7}, {"method", "bench.check"}, {"params", Json::object()}}.dump() + "\n");
  const Json reply = b.client().read_json(std::chrono::seconds(30));
  if (took_s) *took_s = std::chrono::duration<double>(Clock::now() - t0).count();
  INFO(reply.dump().substr(0, 1500));
  REQUIRE(reply.contains("result"));
  // Every answer, whatever the bench's state, is what schema/api/bench.check.json says.
  CHECK(test::schema_problem(test::api_schema("bench.check")["result"], reply["result"]) == "");
  return reply["result"];
}

const Json& by_role(const Json& result, const std::string& role) {
  for (const auto& inst : result["instruments"])
    if (inst["role"] == role) return inst;
  FAIL("no instrument " << role << " in " << result.dump());
  static const Json none;
  return none;
}

const Json* reading(const Json& inst, const std::string& name) {
  for (const auto& r : inst["readings"])
    if (r["name"] == name) return &r;
  return nullptr;
}

std::string read_file(const std::filesystem::path& path) {
  std::ifstream in(path);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

std::size_t count_of(const std::string& text, const std::string& what) {
  std::size_t n = 0;
  for (auto at = text.find(what); at != std::string::npos; at = text.find(what, at + 1)) ++n;
  return n;
}

}  // namespace

TEST_CASE("junco bench shows each instrument, a mute one and an unreachable bench in words", "[daemon][bench]") {
  test::BenchDaemon b("bench-check", {"--settle-ms", "0"});
  const std::vector<std::string> roles{"source", "meter", "scanner", "siggen", "levelmeter"};

  SECTION("every instrument answers") {
    double took = 0;
    const Json r = check(b, &took);
    CHECK(r["checked"] == true);
    CHECK(r["held_by_job"].is_null());
    CHECK(r["bench_open"] == true);
    for (const auto& role : roles) {
      const Json& inst = by_role(r, role);
      INFO(inst.dump());
      CHECK(inst["address"] == b.sim().endpoint(role));
      CHECK(inst["problem"].is_null());
      CHECK(inst["identity"]["manufacturer"] == "junco-sim");
      CHECK(inst["elapsed_s"].get<double>() < 2.0);
      for (const auto& reading : inst["readings"]) CHECK_FALSE(reading.contains("error"));
    }
    // The readings are the instruments' own: compared with the sim's state.
    const Json state = b.sim().control("state?");
    const Json& source = by_role(r, "source");
    REQUIRE(reading(source, "output state"));
    CHECK((*reading(source, "output state"))["text"] == "0");  // idle bench: output off
    CHECK((*reading(source, "voltage readback"))["unit"] == "V");
    CHECK(std::fabs((*reading(source, "voltage readback"))["value"].get<double>()) < 1e-3);
    REQUIRE(reading(by_role(r, "meter"), "dc voltage"));
    CHECK((*reading(by_role(r, "scanner"), "channel state"))["text"] == "(@)");  // every relay open
    CHECK((*reading(by_role(r, "siggen"), "output state"))["text"] == "0");
    CHECK((*reading(by_role(r, "levelmeter"), "level channel 1"))["unit"] == "vrms");
    CHECK_FALSE(state["source"]["output_on"].get<bool>());  // nothing was switched on
    CHECK_FALSE(state["siggen"]["output_on"].get<bool>());
    WARN("bench.check, 5 instruments answering: " << took << " s");

    // The CLI prints the same, one block per instrument.
    const auto cli = b.junco({"bench"});
    INFO(cli.out << cli.err);
    CHECK(cli.status == 0);
    for (const auto& role : roles) CHECK(cli.out.find(b.sim().endpoint(role)) != std::string::npos);
    CHECK(cli.out.find("*IDN?:            junco-sim,") != std::string::npos);
    CHECK(cli.out.find("channel state:    (@)") != std::string::npos);
    CHECK(cli.out.find("bench:     open") != std::string::npos);

    // juncod logged each identity it found at open, once: the check's
    // reopen of the same instruments does not repeat it.
    const std::string log = read_file(b.dir() / "juncod.log");
    for (const auto& role : roles) CHECK(count_of(log, "bench: " + role + " is junco-sim,") == 1);
  }

  SECTION("a mute instrument is named, within 2 s, and the bench reopens once it answers") {
    b.sim().control("fault scanner silent");
    double took = 0;
    const Json r = check(b, &took);
    const Json& scanner = by_role(r, "scanner");
    INFO(r.dump(2));
    REQUIRE(scanner["problem"].is_string());
    CHECK_THAT(scanner["problem"].get<std::string>(), Catch::StartsWith("does not answer"));
    CHECK(scanner["identity"].is_null());
    CHECK(scanner["elapsed_s"].get<double>() < 2.0);
    CHECK(scanner["elapsed_s"].get<double>() >= 0.6);  // it did wait the 700 ms reply timeout
    for (const auto& role : {"source", "meter", "siggen", "levelmeter"}) CHECK(by_role(r, role)["problem"].is_null());
    CHECK(r["bench_open"] == false);
    CHECK_THAT(r["bench_problem"].get<std::string>(), Catch::Contains("scanner: does not answer"));
    WARN("bench.check with a mute scanner: scanner " << scanner["elapsed_s"].get<double>() << " s, whole check " << took << " s");
    CHECK(took < 2.0 * 5);

    const auto cli = b.junco({"bench"});
    CHECK(cli.status == 1);
    CHECK(cli.out.find("NOT OPEN:         does not answer") != std::string::npos);
    // daemon.status says the same while no job runs.
    CHECK_THAT(b.result("daemon.status", Json::object())["bench_problem"].get<std::string>(), Catch::Contains("scanner"));

    b.sim().control("fault scanner clear");
    const Json again = check(b);
    CHECK(by_role(again, "scanner")["problem"].is_null());
    CHECK(again["bench_open"] == true);
    CHECK(again["bench_problem"].is_null());
  }

  SECTION("an unreachable bench: every instrument says so, quickly") {
    b.sim().control("quit");
    std::this_thread::sleep_for(std::chrono::milliseconds(200));
    double took = 0;
    const Json r = check(b, &took);
    INFO(r.dump(2));
    for (const auto& role : roles) {
      const Json& inst = by_role(r, role);
      REQUIRE(inst["problem"].is_string());
      CHECK_THAT(inst["problem"].get<std::string>(), Catch::StartsWith("cannot be reached"));
      CHECK(inst["elapsed_s"].get<double>() < 2.0);
    }
    WARN("bench.check, bench unreachable: " << took << " s");
    CHECK(took < 2.0 * 5);
  }
}

TEST_CASE("junco bench does not disturb a running job", "[daemon][bench]") {
  test::BenchDaemonOptions o;
  o.roles = {"source", "meter", "scanner"};
  test::BenchDaemon b("bench-check-job", {"--settle-ms", "0"}, o);
  const Json plan{{"lot", "WREN-0912"},
                  {"parts", {{{"slot", 1}, {"label", "WR-01"}}, {{"slot", 2}, {"label", "WR-02"}}}},
                  {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-5}, {"stop", 0.01}, {"count", 40}, {"settle_s", 0.03}}}};
  const long job = b.result("job.submit", {{"plan", plan}})["job_id"];
  for (int i = 0; i < 200 && b.result("job.get", {{"job_id", job}})["state"] != "running"; ++i)
    std::this_thread::sleep_for(std::chrono::milliseconds(20));
  REQUIRE(b.result("job.get", {{"job_id", job}})["state"] == "running");
  double took = 0;
  const Json r = check(b, &took);
  CHECK(r["checked"] == false);
  CHECK(r["held_by_job"] == job);
  CHECK(by_role(r, "source")["identity"]["manufacturer"] == "junco-sim");  // known from open
  CHECK(by_role(r, "source")["readings"].empty());
  CHECK(took < 0.5);
  const auto cli = b.junco({"bench"});
  CHECK(cli.status == 0);
  CHECK(cli.out.find("job " + std::to_string(job) + " holds the bench") != std::string::npos);
  // The job runs to its end with every reading.
  for (int i = 0; i < 600 && b.result("job.get", {{"job_id", job}})["state"] == "running"; ++i)
    std::this_thread::sleep_for(std::chrono::milliseconds(50));
  const Json j = b.result("job.get", {{"job_id", job}});
  CHECK(j["state"] == "done");
  CHECK(j["points_done"] == j["points_total"]);
}
