// Multi-temperature characterisation end to end: juncod drives junco-sim's
// chamber (drivers/dialects/scpi-chamber.json over real TCP) through a plan
// with temps_k, soaks at each set point, measures the parts, logs the
// chamber's readback with every run and fits each part's temperature law.
// The simulator's truth (`lot?`: EG, XTI, TRS1, TNOM, Rth; `chamber?`: the
// air) is what the results are checked against. Sources: the SPICE diode
// temperature law (ngspice manual, "Diode model", temperature effects;
// docs/references.md §2) that the simulator's parts follow; the issue's
// target (EG within 0.02 eV from a 3-temperature run, and within 3 standard
// errors). The make-safe choice (chamber to safety.chamber_idle_k whenever
// no job runs) is docs/daemon-core.md's, "Temperature chamber".
#include "tests/support/bench_daemon.hpp"
#include "tests/support/cli_run.hpp"

#include <catch2/catch.hpp>

#include <csignal>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <set>
#include <thread>

using junco::test::BenchDaemon;
using junco::test::BenchDaemonOptions;
using Json = nlohmann::json;
using Clock = std::chrono::steady_clock;

namespace {

constexpr double kIdleK = 298.15;

// A sim config file in a scratch directory (kept until the test ends).
std::string sim_config(const std::string& tag, const Json& config) {
  const auto path = junco::test::scratch_dir(tag) / "sim.json";
  std::filesystem::create_directories(path.parent_path());
  std::ofstream(path) << config.dump();
  return path.string();
}

BenchDaemonOptions chamber_bench(double max_soak_s) {
  BenchDaemonOptions o;
  o.roles = {"source", "meter", "scanner", "siggen", "levelmeter", "chamber"};
  o.safety["chamber_min_k"] = 223.15;
  o.safety["chamber_max_k"] = 398.15;
  o.safety["max_soak_s"] = max_soak_s;
  o.safety["chamber_idle_k"] = kIdleK;
  return o;
}

// Waits until the simulator's chamber set point is `k` (or the time is up).
bool wait_setpoint(BenchDaemon& b, double k, std::chrono::seconds limit) {
  const auto until = Clock::now() + limit;
  while (Clock::now() < until) {
    if (std::fabs(b.sim().control("chamber?")["setpoint_k"].get<double>() - k) < 1e-6) return true;
    std::this_thread::sleep_for(std::chrono::milliseconds(50));
  }
  return false;
}

std::string wait_state(BenchDaemon& b, long job, const std::set<std::string>& states, std::chrono::seconds limit) {
  const auto until = Clock::now() + limit;
  std::string s;
  while (Clock::now() < until) {
    s = b.result("job.get", {{"job_id", job}})["state"];
    if (states.count(s)) return s;
    std::this_thread::sleep_for(std::chrono::milliseconds(50));
  }
  return s;
}

Json hot_plan(double hold_s) {
  return {{"lot", "WREN-0912"},
          {"parts", {{{"slot", 1}, {"label", "KS-01"}}}},
          {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-5}, {"stop", 1e-3}, {"count", 5}, {"settle_s", 0}}},
          {"temps_k", {358.15}},
          {"soak", {{"tolerance_k", 0.1}, {"hold_s", hold_s}}}};
}

}  // namespace

TEST_CASE("a 3-temperature run recovers the simulator's EG, logs the ambient per run and carries EG/XTI/TRS into the card",
          "[chamber][daemon]") {
  // Chamber τ 1 s with a 0.03 K drift; the parts heat at 400 K/W (τ 5 ms,
  // 30 ms settling per step) and have TRS1 = 0.004 /K.
  const std::string cfg = sim_config("chamber-sim", {{"chamber", {{"tau_s", 1.0}, {"drift_k", 0.03}, {"drift_period_s", 120}}},
                                                     {"thermal", {{"theta_k_per_w", 400}, {"tau_s", 0.005}}},
                                                     {"nominal", {{"trs1_per_k", 0.004}}}});
  BenchDaemonOptions options = chamber_bench(60);
  options.extra = {{"accuracy", {{"level_db", 0.005}}}};
  BenchDaemon b("chamber", {"--settle-ms", "0", "--config", cfg}, options);
  const Json plan{{"lot", "WREN-0912"},
                  {"parts", {{{"slot", 1}, {"label", "KS-01"}}, {{"slot", 2}, {"label", "KS-02"}}}},
                  {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-6}, {"stop", 0.05}, {"count", 30}, {"settle_s", 0.03}}},
                  {"ac", {{"freqs_hz", {1e6}}, {"amplitude", 0.005}, {"unit", "vrms"}, {"settle_s", 0}}},
                  {"temps_k", {253.15, 300.15, 358.15}},
                  {"soak", {{"tolerance_k", 0.1}, {"hold_s", 1.0}}}};

  // The dry run counts the soaks: ramps at the assumed 2 K/min (no rate limit
  // in this bench, plan.hpp kAssumedChamberRateKPerMin) from the idle set
  // point through the three, plus the hold times.
  const Json dry = b.result("plan.check", {{"plan", plan}});
  const double ramps_k = std::fabs(253.15 - kIdleK) + (300.15 - 253.15) + (358.15 - 300.15);
  CHECK(dry["temperatures"] == 3);
  CHECK(dry["soak_s"].get<double>() == Approx(ramps_k / 2.0 * 60.0 + 3 * 1.0));
  CHECK(dry["duration_s"].get<double>() > dry["soak_s"].get<double>());
  CHECK(dry["points_total"] == 3 * 2 * 30 * 2);

  const long job = b.run_plan(plan, std::chrono::seconds(180));
  const Json truth = b.sim().control("lot?")["parts"];
  // After the job the chamber is back at its idle set point (make-safe choice).
  CHECK(b.sim().control("chamber?")["setpoint_k"].get<double>() == Approx(kIdleK));

  for (long part = 1; part <= 2; ++part) {
    const Json& t = truth[static_cast<std::size_t>(part - 1)];
    // Every run carries its set point and the chamber's readbacks.
    const auto runs = b.result("part.fit", {{"part_id", part}})["temperature_law"]["runs"];
    REQUIRE(runs.size() == 3);
    for (std::size_t k = 0; k < runs.size(); ++k) {
      const Json run = b.result("part.readings", {{"part_id", part}, {"run_id", runs[k]}})["run"];
      INFO(run.dump());
      CHECK(run["job_id"] == job);
      CHECK(run["temp_index"] == static_cast<long>(k));
      CHECK(run["setpoint_k"].get<double>() == plan["temps_k"][k].get<double>());
      // Soaked within 0.1 K; the drift adds at most 0.03 K, the readback 0.01 K resolution.
      CHECK(std::fabs(run["ambient_k"].get<double>() - run["setpoint_k"].get<double>()) < 0.15);
      CHECK(std::fabs(run["ambient_end_k"].get<double>() - run["setpoint_k"].get<double>()) < 0.15);
      CHECK(run["temp_k"].get<double>() == Approx(0.5 * (run["ambient_k"].get<double>() + run["ambient_end_k"].get<double>())));
    }
    const Json fit = b.result("part.fit", {{"part_id", part}});
    const Json& law = fit["temperature_law"];
    const double eg = law["eg_ev"]["value"], eg_se = law["eg_ev"]["std_error"], eg_true = t["eg_ev"];
    INFO("part " << part << ": " << law.dump());
    REQUIRE(law["status"] == "ok");
    // The issue's target: EG within 0.02 eV and within 3 standard errors.
    CHECK(std::fabs(eg - eg_true) < 0.02);
    CHECK(std::fabs(eg - eg_true) < 3 * eg_se);
    // XTI: held at 3 (SPICE default = the simulator's) or fitted near it.
    if (law["xti"]["held"].get<bool>()) CHECK(law["xti"]["value"].get<double>() == t["xti"].get<double>());
    else CHECK(std::fabs(law["xti"]["value"].get<double>() - t["xti"].get<double>()) < 3 * law["xti"]["std_error"].get<double>());
    // EG and XTI are nearly collinear over 105 K (docs/fitting.md).
    CHECK(std::fabs(law["corr_eg_xti"].get<double>()) > 0.95);

    // The SPICE card carries the fitted EG and, when resolved, TRS1.
    const std::string card = b.result("part.export", {{"part_id", part}, {"format", "spice"}})["content"];
    INFO(card);
    char eg_text[32];
    std::snprintf(eg_text, sizeof eg_text, "EG=%.6g", eg);
    CHECK(card.find(eg_text) != std::string::npos);
    CHECK(card.find("TNOM=") != std::string::npos);
    CHECK(card.find("from 3 temperatures") != std::string::npos);
    // With AC readings the runs' Rs is the isothermal one (electro-thermal
    // fit), so TRS1 is resolved: the simulator's, within 3 standard errors.
    const Json& trs = law["trs1_per_k"];
    CHECK(trs["resolved"].get<bool>());
    CHECK(std::fabs(trs["value"].get<double>() - t["trs1_per_k"].get<double>()) < 3 * trs["std_error"].get<double>());
    if (trs["resolved"].get<bool>()) CHECK(card.find("TRS1=") != std::string::npos);
  }
}

TEST_CASE("the chamber goes to its idle set point when a job is cancelled mid-soak and when juncod stops", "[chamber][daemon][safety]") {
  // τ 100 s: the chamber is still far from 85 °C when the job is stopped.
  const std::string cfg = sim_config("chamber-slow", {{"chamber", {{"tau_s", 100.0}}}});
  BenchDaemon b("chamber-stop", {"--settle-ms", "0", "--config", cfg}, chamber_bench(60));

  long job = b.result("job.submit", {{"plan", hot_plan(5)}})["job_id"];
  REQUIRE(wait_setpoint(b, 358.15, std::chrono::seconds(10)));
  b.result("job.cancel", {{"job_id", job}});
  CHECK(wait_state(b, job, {"cancelled"}, std::chrono::seconds(10)) == "cancelled");
  CHECK(wait_setpoint(b, kIdleK, std::chrono::seconds(5)));

  job = b.result("job.submit", {{"plan", hot_plan(5)}})["job_id"];
  REQUIRE(wait_setpoint(b, 358.15, std::chrono::seconds(10)));
  const auto stopped_at = Clock::now();
  CHECK(b.daemon().stop() == 0);
  CHECK(wait_setpoint(b, kIdleK, std::chrono::seconds(1)));
  INFO("stopped in " << std::chrono::duration<double>(Clock::now() - stopped_at).count() << " s");
}

TEST_CASE("a chamber that does not settle within max_soak_s pauses the job with the reason, chamber parked",
          "[chamber][daemon][safety]") {
  const std::string cfg = sim_config("chamber-stuck", {{"chamber", {{"tau_s", 1000.0}}}});
  BenchDaemon b("chamber-stuck", {"--settle-ms", "0", "--config", cfg}, chamber_bench(2));
  const long job = b.result("job.submit", {{"plan", hot_plan(1)}})["job_id"];
  CHECK(wait_state(b, job, {"paused", "failed"}, std::chrono::seconds(15)) == "paused");
  const Json j = b.result("job.get", {{"job_id", job}});
  INFO(j.dump());
  CHECK(j["error"].get<std::string>().find("chamber did not settle at 358.15 K") != std::string::npos);
  CHECK(j["error"].get<std::string>().find("max_soak_s = 2 s") != std::string::npos);
  CHECK(wait_setpoint(b, kIdleK, std::chrono::seconds(2)));
}

TEST_CASE("plans with temps_k are checked against the chamber limits", "[chamber][daemon][plan]") {
  const std::string cfg = sim_config("chamber-plan", Json::object());
  BenchDaemon b("chamber-plan", {"--settle-ms", "0", "--config", cfg}, chamber_bench(60));
  Json plan = hot_plan(1);
  plan["temps_k"] = {253.15, 400.0};
  Json r = b.client().request("plan.check", {{"plan", plan}});
  INFO(r.dump());
  CHECK(r["error"]["data"]["limit"] == "chamber_max_k");
  CHECK(r["error"]["message"].get<std::string>().find("plan.temps_k 400 K is outside safety limits chamber_min_k..chamber_max_k = 223.15..398.15 K") !=
        std::string::npos);
  plan["temps_k"] = {253.15};
  plan["temp_k"] = 300.0;
  r = b.client().request("plan.check", {{"plan", plan}});
  CHECK(r["error"]["message"].get<std::string>().find("plan.temp_k cannot be given with temps_k") != std::string::npos);
  plan.erase("temp_k");
  plan["soak"]["hold_s"] = 60;
  r = b.client().request("plan.check", {{"plan", plan}});
  CHECK(r["error"]["data"]["limit"] == "max_soak_s");
}

TEST_CASE("--check-config: a chamber needs its safety limits and a ramp limit needs set_rate", "[chamber][check-config]") {
  junco::test::ScratchDir dir("junco-chamber-check");
  std::filesystem::create_directory(dir.path / "data");
  const std::string kelvin_dialect = dir.file("k-chamber.json");
  std::ofstream(kelvin_dialect) << R"({"dialect":"k-chamber","role":"chamber","temperature_unit":"K","operations":{
      "set_temperature":{"commands":["SP {t}"]},"measure_temperature":{"query":"PV?","reply":{"type":"number"}}}})";
  Json c{{"bench",
          {{"source", {{"address", "tcp:127.0.0.1:5025"}, {"dialect", "scpi-source"}}},
           {"meter", {{"address", "tcp:127.0.0.1:5026"}, {"dialect", "scpi-dmm"}}},
           {"scanner", {{"address", "tcp:127.0.0.1:5027"}, {"dialect", "scpi-switch"}}},
           {"chamber", {{"address", "tcp:127.0.0.1:5028"}, {"dialect", kelvin_dialect}}}}},
         {"fixture", {{"bias_resistor_ohm", 100}, {"slots", 8}}},
         {"safety", {{"max_supply_v", 10}, {"current_limit_a", 0.05}, {"max_power_w", 0.1}, {"max_reverse_v", 5}, {"max_job_s", 3600},
                     {"chamber_max_k", 398.15}, {"chamber_max_rate_k_per_min", 5}}},
         {"paths", {{"database", dir.file("data/junco.db")}, {"socket", dir.file("run/juncod.sock")}}}};
  const auto path = dir.path / "bench.jsonc";
  std::ofstream(path) << c.dump(2);
  const auto r = junco::test::run_shell(std::string(JUNCO_BIN_DIR) + "/juncod --config '" + path.string() + "' --check-config");
  INFO(r.out);
  CHECK(r.status != 0);
  CHECK(r.out.find("/safety/chamber_min_k: missing (required with a chamber in /bench)") != std::string::npos);
  CHECK(r.out.find("/safety/max_soak_s: missing (required with a chamber in /bench)") != std::string::npos);
  CHECK(r.out.find("/bench/chamber/dialect: " + kelvin_dialect + " has no set_rate, but safety.chamber_max_rate_k_per_min is set") !=
        std::string::npos);

  // With the limits and the ramp limit gone, the same bench passes.
  c["safety"]["chamber_min_k"] = 223.15;
  c["safety"]["max_soak_s"] = 3600;
  c["safety"].erase("chamber_max_rate_k_per_min");
  std::ofstream(path) << c.dump(2);
  const auto ok = junco::test::run_shell(std::string(JUNCO_BIN_DIR) + "/juncod --config '" + path.string() + "' --check-config");
  INFO(ok.out);
  CHECK(ok.status == 0);
}
