// Vector readings in a juncod plan (plan.vector), end to end: juncod a real
// process on a Unix socket, junco-sim over real TCP with a vector meter and
// a part in a 0.15 pF / 1.2 nH package, in a slot with its own stray C and
// trace inductance, and an open (slot 7) and a short (slot 8) standard. The
// plan reads the transfer at every reverse bias from 10 MHz to 1 GHz; the
// fit removes the run's open and short, fits Ls and Cp, removes them and
// fits Cj(V). part.fit must give the sim's package and law back within a few
// of its own standard errors, the readings must survive a restart, a bench
// without a vector meter must refuse the plan naming the role, and a vector
// meter that fails mid-job must leave the supply and the generator off.
//
// The truth is the sim's configured part and package (docs/sim.md); the
// sim's transfer is checked against ngspice .ac in
// tests/reference/sim_vector_ngspice_test.cpp. The open-short correction is
// on-wafer practice (Koolen et al., 1991; docs/references.md §10, from
// memory). "Within 4 standard errors" is ours (no source): a fitted value
// more than 4 σ from the truth is a bias or an error estimate too small.
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <fstream>
#include <map>
#include <unistd.h>

using namespace junco;
using Json = nlohmann::json;

namespace {

constexpr double truth_cj0_f = 2e-12, truth_vj_v = 0.7, truth_m = 0.5, truth_ls_h = 1.2e-9, truth_cp_f = 0.15e-12;

std::string sim_config() {
  const std::string path = "/tmp/junco-vector-daemon-sim-" + std::to_string(getpid()) + ".json";
  std::ofstream(path) << R"({"nominal": {"cj0_f": 2e-12, "vj_v": 0.7, "m": 0.5, "rs_ohm": 0.7},
    "spread": {"is_ln_sigma": 0, "n_sigma": 0, "rs_rel_sigma": 0, "cj0_rel_sigma": 0},
    "fixture": {"package_ls_h": 1.2e-9, "package_cp_f": 0.15e-12, "stray_c_f": 0.05e-12, "slot_ls_h": 2e-9},
    "empty_slots": [7], "short_slots": [8], "thermal": {"theta_k_per_w": 0}})";
  return path;
}

test::BenchDaemonOptions options(bool with_vector_meter) {
  test::BenchDaemonOptions o;
  if (with_vector_meter) o.roles.push_back("vectormeter");
  o.safety = {{"max_supply_v", 10.0}, {"current_limit_a", 0.05}, {"max_power_w", 0.1}, {"max_reverse_v", 10.0}, {"max_job_s", 600.0}};
  return o;
}

Json vector_plan() {
  std::vector<double> freqs;
  for (double f = 10e6; f <= 1.0001e9; f *= std::pow(10.0, 0.25)) freqs.push_back(f);  // 9 frequencies, 10 MHz … 1 GHz
  return {{"lot", "WREN-0912"},
          {"parts", {{{"slot", 1}, {"label", "KES-V1"}}}},
          {"sweep", {{"mode", "voltage"}, {"start", 0.3}, {"stop", 1.0}, {"count", 8}, {"settle_s", 0}}},
          {"reverse_v", {0.5, 1, 2, 3, 5, 8, 10}},
          {"vector", {{"freqs_hz", freqs}, {"amplitude", 0.05}, {"unit", "vpp"}, {"settle_s", 0},
                      {"standards", {{"open_slot", 7}, {"short_slot", 8}}}}}};
}

// The supply's and the generator's outputs and the scanner, as the sim has them.
void check_bench_safe(test::SimProcess& sim) {
  const Json st = sim.control("state?");
  INFO("sim state " << st.dump());
  CHECK(st["source"]["output_on"] == false);
  CHECK(st["source"]["voltage_v"].get<double>() == 0.0);
  CHECK(st["siggen"]["output_on"] == false);
  CHECK(st["scanner"]["slot"].get<int>() == 0);
}

std::map<long, std::pair<double, double>> vector_readings(const Json& readings) {
  std::map<long, std::pair<double, double>> out;
  for (const auto& p : readings["points"]) {
    const std::string kind = p["kind"];
    if (kind == "reverse_vector" || kind == "vector_open" || kind == "vector_short") {
      REQUIRE(p["ratio"].is_number());
      REQUIRE(p["phase_deg"].is_number());
      out[p["seq"].get<long>()] = {p["ratio"].get<double>(), p["phase_deg"].get<double>()};
    } else {
      CHECK(p["ratio"].is_null());
    }
  }
  return out;
}

}  // namespace

TEST_CASE("a plan with vector readings recovers the package and the C-V law, keeps its readings over a restart", "[daemon][vector]") {
  const std::string config = sim_config();
  test::BenchDaemon b("vector", {"--settle-ms", "0", "--seed", "23", "--config", config}, options(true));
  std::remove(config.c_str());
  const long job = b.run_plan(vector_plan());
  check_bench_safe(b.sim());

  const Json fit = b.result("part.fit", {{"part_id", 1}});
  INFO("package " << fit["package"].dump());
  CHECK(test::schema_problem(test::api_schema("part.fit")["result"], fit) == "");
  REQUIRE(fit["package"].is_object());
  const Json& pkg = fit["package"];
  REQUIRE(pkg["ok"] == true);
  CHECK(pkg["deembedded"] == true);
  CHECK(pkg["readings"] == 63);   // 7 biases × 9 frequencies
  CHECK(pkg["standards"] == 18);  // open and short × 9 frequencies
  const auto val = [](const Json& e) { return e["value"].get<double>(); };
  const auto se = [](const Json& e) { return e["std_error"].get<double>(); };
  WARN("package: Ls " << val(pkg["ls_h"]) << " +- " << se(pkg["ls_h"]) << " H (sim " << truth_ls_h << "), Cp " << val(pkg["cp_f"]) << " +- "
                      << se(pkg["cp_f"]) << " F (sim " << truth_cp_f << "), rms " << pkg["rms_relative"] << "; law: CJO "
                      << val(fit["cj0_f"]) << " +- " << se(fit["cj0_f"]) << " (sim " << truth_cj0_f << "), VJ " << val(fit["vj_v"]) << " +- "
                      << se(fit["vj_v"]) << " (sim " << truth_vj_v << "), M " << val(fit["m"]) << " +- " << se(fit["m"]) << " (sim "
                      << truth_m << ")");
  const auto within = [&](const Json& e, double truth) {
    INFO("value " << val(e) << " std_error " << se(e) << " truth " << truth);
    CHECK(se(e) > 0);
    CHECK(std::abs(val(e) - truth) < 4 * se(e));
  };
  within(pkg["ls_h"], truth_ls_h);
  within(pkg["cp_f"], truth_cp_f);
  within(fit["cj0_f"], truth_cj0_f);
  within(fit["vj_v"], truth_vj_v);
  within(fit["m"], truth_m);
  // And near the truth in absolute terms (the errors are not merely large).
  CHECK(val(pkg["ls_h"]) == Approx(truth_ls_h).epsilon(0.05));
  CHECK(val(pkg["cp_f"]) == Approx(truth_cp_f).epsilon(0.05));
  CHECK(val(fit["vj_v"]) == Approx(truth_vj_v).margin(0.05));
  CHECK(val(fit["m"]) == Approx(truth_m).margin(0.03));
  // The law served is the vector one (its report says so).
  CHECK(fit["detail"]["junction_cap"]["message"].get<std::string>().find("vector readings") != std::string::npos);

  const Json before = b.result("part.readings", {{"part_id", 1}});
  CHECK(test::schema_problem(test::api_schema("part.readings")["result"], before) == "");
  const auto vec_before = vector_readings(before);
  CHECK(vec_before.size() == 63 + 18);
  CHECK(b.result("job.get", {{"job_id", job}})["points_done"] == before["points"].size());

  b.restart();  // a clean stop and a new juncod on the same database
  const Json after = b.result("part.readings", {{"part_id", 1}});
  CHECK(vector_readings(after) == vec_before);  // ratio and phase as read, bit for bit
  const Json fit_after = b.result("part.fit", {{"part_id", 1}});
  CHECK(fit_after["package"] == pkg);
  check_bench_safe(b.sim());
}

TEST_CASE("a plan asking for vector readings on a bench without a vector meter is refused at submit, naming the role", "[daemon][vector]") {
  test::BenchDaemon b("vector-none", {"--settle-ms", "0"}, options(false));
  const Json reply = b.client().request("job.submit", {{"plan", vector_plan()}});
  INFO(reply.dump());
  REQUIRE(reply.contains("error"));
  CHECK(reply["error"]["code"] == -32002);
  const std::string message = reply["error"]["message"];
  CHECK(message.find("vectormeter") != std::string::npos);
  CHECK(message.find("plan.vector") != std::string::npos);
  CHECK(b.result("job.list", Json::object())["jobs"].empty());
}

TEST_CASE("a vector meter that fails mid-job pauses the job with the supply and the generator off", "[daemon][vector][faults]") {
  const std::string config = sim_config();
  test::BenchDaemon b("vector-fault", {"--settle-ms", "0", "--config", config}, options(true));
  std::remove(config.c_str());
  // Every reply of the vector meter garbled: its first reading fails after
  // its retries. Without standards that reading is at the first reverse
  // bias, the supply's output on.
  REQUIRE(b.sim().control("fault vectormeter garble 100000")["ok"] == true);
  Json plan = vector_plan();
  plan["vector"].erase("standards");
  const long job = b.result("job.submit", {{"plan", plan}})["job_id"];
  std::string state;
  Json j;
  for (int i = 0; i < 1200 && state != "paused"; ++i) {
    std::this_thread::sleep_for(std::chrono::milliseconds(50));
    j = b.result("job.get", {{"job_id", job}});
    state = j["state"];
    REQUIRE(state != "done");
  }
  INFO(j.dump());
  REQUIRE(state == "paused");
  CHECK(j["error"].get<std::string>().find("vectormeter") != std::string::npos);
  check_bench_safe(b.sim());
  // Nothing of the failed reading was stored: the part's readings are the
  // forward sweep and the first reverse point.
  const Json readings = b.result("part.readings", {{"part_id", 1}});
  CHECK(readings["points"].size() == 9);
  REQUIRE(b.sim().control("fault vectormeter clear")["ok"] == true);
}
