// The transit time end to end: junco-sim with a 5 ns TT (its level meter
// solves the fixture with the junction's diffusion charge, docs/sim.md),
// juncod fitting a run whose AC readings span 1 to 100 MHz, part.fit serving
// tt_s, and part.design computing with it.
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <fstream>
#include <unistd.h>

using namespace junco;
using Json = nlohmann::json;

TEST_CASE("part.fit serves the TT that junco-sim's parts store, and part.design uses it", "[daemon][stored-charge]") {
  const std::string config = "/tmp/junco-tt-sim-" + std::to_string(getpid()) + ".json";
  {
    std::ofstream f(config);
    f << R"({"thermal": {"theta_k_per_w": 0}, "nominal": {"tt_s": 5e-9}})";
  }
  test::BenchDaemon b("stored-charge", {"--settle-ms", "0", "--config", config});
  const Json plan{{"lot", "TT-0912"},
                  {"parts", {{{"slot", 1}, {"label", "TT-1"}}}},
                  {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-4}, {"stop", 0.01}, {"count", 8}, {"settle_s", 0}}},
                  {"reverse_v", {0, 0.5, 1, 2, 3, 5}},
                  {"ac", {{"freqs_hz", {1e6, 1e7, 3e7, 1e8}}, {"amplitude", 0.002}, {"unit", "vrms"}, {"settle_s", 0},
                          {"off_state", {{"amplitude", 0.05}, {"freqs_hz", {3e7, 1e8}}}}}}};
  b.run_plan(plan);
  std::remove(config.c_str());
  const Json truth = b.sim().control("lot?")["parts"][0];
  const Json fit = b.result("part.fit", {{"part_id", 1}});
  INFO(fit["detail"].value("stored_charge", Json()).dump() << "\ntruth " << truth.dump());
  CHECK(test::schema_problem(test::api_schema("part.fit")["result"], fit) == "");
  REQUIRE(fit["tt_s"]["value"].is_number());
  WARN("fitted TT " << fit["tt_s"]["value"].get<double>() << " +- " << fit["tt_s"]["std_error"].get<double>() << " s (sim 5e-9), N "
                    << fit["detail"]["stored_charge"]["n"]["value"] << " (sim " << truth["n"] << "), reduced chi2 "
                    << fit["detail"]["stored_charge"]["reduced_chi2"]);
  // The simulator's TT is the truth (tools/sim/part.cpp); tolerance ours, no
  // source: the sim's readings are large-signal solves with meter noise.
  CHECK(fit["tt_s"]["value"].get<double>() == Approx(5e-9).epsilon(0.05));
  CHECK(fit["tt_s"]["std_error"].get<double>() < 0.5e-9);
  CHECK(fit["detail"]["stored_charge"]["frequencies"] == 4);

  // part.design on the stored part computes with the fitted TT.
  const Json a = b.result("part.design", {{"part_id", 1}, {"calculator", "loss"}, {"inputs", {{"current_a", 1e-3}, {"freq_hz", 1e8}}}});
  CHECK(a["part"]["tt_s"].get<double>() == fit["tt_s"]["value"].get<double>());
}
