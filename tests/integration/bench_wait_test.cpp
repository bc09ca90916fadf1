// Nothing waits silently: a job that cannot start says why, in status,
// submit and watch, and a paused job makes watch return with the way on.
// Real juncod, junco-sim and junco processes.
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

#include <fstream>

using namespace junco;
using Json = nlohmann::json;

namespace {

Json small_plan(const std::string& lot, double settle_s) {
  return {{"lot", lot},
          {"parts", {{{"slot", 1}, {"label", "WT-01"}}}},
          {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-5}, {"stop", 0.01}, {"count", 20}, {"settle_s", settle_s}}}};
}

}  // namespace

TEST_CASE("a job waiting for the bench says why in status, submit and watch", "[daemon][cli]") {
  test::BenchDaemonOptions o;
  o.roles = {"source", "meter", "scanner"};
  // The wrong dialect for this supply: its idn_match refuses the instrument,
  // so the bench never opens.
  o.dialects = {{"source", "psu-compact"}};
  test::BenchDaemon b("bench-wait", {"--settle-ms", "0"}, o);
  const Json status = b.result("daemon.status", Json::object());
  INFO(status.dump());
  CHECK(status["bench_open"] == false);
  REQUIRE(status["bench_problem"].is_string());
  CHECK(status["bench_problem"].get<std::string>().find("idn_match") != std::string::npos);

  std::ofstream(b.dir() / "plan.jsonc") << small_plan("WAIT-01", 0).dump();
  const auto submit = b.junco({"submit", (b.dir() / "plan.jsonc").string()});
  INFO(submit.out << submit.err);
  CHECK(submit.status == 0);
  CHECK(submit.err.find("waiting for bench: bench: cannot open: source:") != std::string::npos);
  CHECK(submit.err.find("--check-config") != std::string::npos);

  const auto st = b.junco({"status"});
  CHECK(st.out.find("not open") != std::string::npos);
  CHECK(st.out.find("does not match the dialect's idn_match") != std::string::npos);

  // watch says why the job waits (and keeps waiting: stopped by timeout).
  const std::string watch = "timeout 4 " + std::string(JUNCO_BIN_DIR) + "/junco watch 1 --socket " + b.socket() + " 2>&1";
  FILE* p = ::popen(watch.c_str(), "r");
  REQUIRE(p);
  std::string out;
  char buf[512];
  while (std::fgets(buf, sizeof buf, p)) out += buf;
  ::pclose(p);
  INFO(out);
  CHECK(out.find("waiting for bench: bench: cannot open: source:") != std::string::npos);
  CHECK(b.result("job.get", {{"job_id", 1}})["state"] == "queued");
}

TEST_CASE("watch returns on a paused job and says how to resume it", "[daemon][cli]") {
  test::BenchDaemonOptions o;
  o.roles = {"source", "meter", "scanner"};
  test::BenchDaemon b("paused-watch", {"--settle-ms", "0"}, o);
  const long job = b.result("job.submit", {{"plan", small_plan("WAIT-02", 0.5)}})["job_id"];
  b.result("job.pause", {{"job_id", job}});
  for (int i = 0; i < 200 && b.result("job.get", {{"job_id", job}})["state"] != "paused"; ++i)
    std::this_thread::sleep_for(std::chrono::milliseconds(25));
  REQUIRE(b.result("job.get", {{"job_id", job}})["state"] == "paused");
  const auto w = b.junco({"watch", std::to_string(job)});
  INFO(w.out << w.err);
  CHECK(w.status == 1);
  CHECK(w.out.find("paused: paused by request") != std::string::npos);
  CHECK(w.out.find("resume it with: junco resume " + std::to_string(job)) != std::string::npos);
}
