// A PIN part end to end: junco-sim with a PIN part (charge control, the
// I-region's conductance (µn + µp)·Q/W² from the stored charge Q = τ·Id,
// docs/sim.md), juncod running a plan with part_type "pin" whose AC readings
// span both sides of the lifetime's knee, and part.fit serving the PIN law.
//
// The truth is the sim's part (`lot?`): τ = tt_s, and for its ideal I-region
// the published relation R = W²/((µn + µp)·τ·I) (Bhat and Borrego 1977;
// textbook PIN relation, from memory), i.e. x = 1, K = W²/((µn + µp)·τ), with
// R0 the part's RS. Tolerances are ours (no source): the sim's readings are
// time-domain solves of finite signals read through a noisy level meter.
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <fstream>
#include <unistd.h>

using namespace junco;
using Json = nlohmann::json;

TEST_CASE("part.fit recovers the PIN law and lifetime of junco-sim's PIN part", "[daemon][pin]") {
  const std::string config = "/tmp/junco-pin-sim-" + std::to_string(getpid()) + ".json";
  {
    std::ofstream f(config);
    f << R"({"thermal": {"theta_k_per_w": 0},
             "nominal": {"type": "pin", "n": 2.0, "is_a": 5e-10, "rs_ohm": 0.3, "tt_s": 2e-7, "cj0_f": 3e-13, "m": 0.1,
                         "i_region_width_m": 3e-5, "mobility_sum_m2_per_v_s": 0.183}})";
  }
  test::BenchDaemon b("pin", {"--settle-ms", "0", "--config", config});
  const Json plan{{"lot", "WREN-0912"},
                  {"part_type", "pin"},
                  {"parts", {{{"slot", 1}, {"label", "PIN-1"}}}},
                  {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-4}, {"stop", 0.02}, {"count", 8}, {"settle_s", 0}}},
                  {"reverse_v", {1, 3, 5}},
                  {"ac", {{"freqs_hz", {3e4, 3e5, 1e6, 3e6, 3e7, 1e8}}, {"amplitude", 0.02}, {"unit", "vrms"}, {"settle_s", 0},
                          {"off_state", {{"amplitude", 0.05}, {"freqs_hz", {3e7, 1e8}}}}}}};
  b.run_plan(plan);
  std::remove(config.c_str());
  const Json truth = b.sim().control("lot?")["parts"][0];
  const Json fit = b.result("part.fit", {{"part_id", 1}});
  INFO("pin " << fit["pin"].dump() << "\ntruth " << truth.dump());
  CHECK(test::schema_problem(test::api_schema("part.fit")["result"], fit) == "");
  CHECK(fit["part_type"] == "pin");
  REQUIRE(fit["pin"].is_object());
  REQUIRE(fit["pin"]["ok"] == true);
  const Json& pin = fit["pin"];
  const auto v = [&](const char* k) { return pin[k]["value"].get<double>(); };
  const auto se = [&](const char* k) { return pin[k]["std_error"].get<double>(); };
  const double tau_true = truth["tt_s"].get<double>(), k_true = truth["k_ohm_a_x"].get<double>(), r0_true = truth["rs_ohm"].get<double>();
  WARN("fitted tau " << v("tau_s") << " +- " << se("tau_s") << " (sim " << tau_true << "), K " << v("k_ohm_a_x") << " +- "
                     << se("k_ohm_a_x") << " (sim " << k_true << "), x " << v("x") << " +- " << se("x") << " (1), R0 " << v("r0_ohm")
                     << " +- " << se("r0_ohm") << " (sim " << r0_true << "), chi2 " << pin["reduced_chi2"] << ", screen "
                     << pin["screen"].dump());
  CHECK(v("tau_s") == Approx(tau_true).epsilon(0.05));
  CHECK(v("x") == Approx(1.0).margin(0.05));
  CHECK(v("k_ohm_a_x") == Approx(k_true).epsilon(0.05));
  CHECK(v("r0_ohm") == Approx(r0_true).margin(0.15));
  // The charge criterion keeps readings the junction's small-signal rule would drop.
  CHECK(pin["screen"]["kept_by_charge_rule"].get<long>() > 0);
  CHECK(pin["above_knee"].get<long>() >= 16);
  REQUIRE(pin.contains("off_state"));
  CHECK(pin["off_state"]["ok"] == true);

  // part.transfer does not read the junction model's misfit as self-heating.
  const Json t = b.result("part.transfer", {{"part_id", 1}});
  CHECK(test::schema_problem(test::api_schema("part.transfer")["result"], t) == "");
  REQUIRE(t["joint"].is_object());
  CHECK(t["joint"]["verdict"].get<std::string>().rfind("PIN part", 0) == 0);
  CHECK_FALSE(t["joint"].contains("hint"));

  // part.design computes the stored PIN part's loss with its law: far above the
  // knee the series loss is 20·log10(1 + R/(2·Z0)) (docs/references.md §6).
  const Json a = b.result("part.design", {{"part_id", 1}, {"calculator", "loss"}, {"inputs", {{"current_a", 1e-3}, {"freq_hz", 1e9}}}});
  double loss_db = NAN;
  for (const auto& l : a["result"])
    if (l["key"] == "loss_db") loss_db = l["value"].get<double>();
  CHECK(loss_db == Approx(20.0 * std::log10(1.0 + v("r_1ma_ohm") / 100.0)).margin(0.01));
}

TEST_CASE("lot.stats gives the spread of the PIN law over a lot of junco-sim PIN parts", "[daemon][pin]") {
  // Two PIN parts of one seeded lot (RS, hence R0, differs by the lot's 8 %
  // spread, docs/sim.md). lot.stats's PIN rows are checked against a hand
  // calculation over the two parts' own part.fit values: mean, sample
  // standard deviation |a − b|/√2, min and max.
  const std::string config = "/tmp/junco-pin-lot-" + std::to_string(getpid()) + ".json";
  {
    std::ofstream f(config);
    f << R"({"thermal": {"theta_k_per_w": 0},
             "nominal": {"type": "pin", "n": 2.0, "is_a": 5e-10, "rs_ohm": 0.3, "tt_s": 2e-7, "cj0_f": 3e-13, "m": 0.1,
                         "i_region_width_m": 3e-5, "mobility_sum_m2_per_v_s": 0.183}})";
  }
  test::BenchDaemon b("pinlot", {"--settle-ms", "0", "--config", config});
  const Json plan{{"lot", "WREN-0912"},
                  {"part_type", "pin"},
                  {"parts", {{{"slot", 1}, {"label", "PIN-1"}}, {{"slot", 2}, {"label", "PIN-2"}}}},
                  {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-4}, {"stop", 0.02}, {"count", 8}, {"settle_s", 0}}},
                  {"reverse_v", {1, 3, 5}},
                  {"ac", {{"freqs_hz", {3e4, 3e5, 1e6, 3e6, 3e7, 1e8}}, {"amplitude", 0.02}, {"unit", "vrms"}, {"settle_s", 0},
                          {"off_state", {{"amplitude", 0.05}, {"freqs_hz", {3e7, 1e8}}}}}}};
  b.run_plan(plan);
  std::remove(config.c_str());
  const Json f1 = b.result("part.fit", {{"part_id", 1}}), f2 = b.result("part.fit", {{"part_id", 2}});
  REQUIRE(f1["pin"]["ok"] == true);
  REQUIRE(f2["pin"]["ok"] == true);
  const Json st = b.result("lot.stats", {{"lot", "WREN-0912"}});
  CHECK(test::schema_problem(test::api_schema("lot.stats")["result"], st) == "");
  const auto row = [&](const std::string& name) {
    for (const auto& q : st["quantities"])
      if (q["name"] == name) return q;
    FAIL("no quantity " << name << " in " << st["quantities"].dump());
    return Json();
  };
  for (const std::string name : {"r0_ohm", "k_ohm_a_x", "x", "tau_s", "r_1ma_ohm"}) {
    const double a = f1["pin"][name]["value"].get<double>(), c = f2["pin"][name]["value"].get<double>();
    const Json q = row(name);
    INFO(name << ": parts " << a << ", " << c << "; lot.stats " << q.dump());
    CHECK(q["count"] == 2);
    CHECK(q["mean"].get<double>() == Approx((a + c) / 2).epsilon(1e-9));
    CHECK(q["std_dev"].get<double>() == Approx(std::abs(a - c) / std::sqrt(2.0)).epsilon(1e-6));
    CHECK(q["min"].get<double>() == Approx(std::min(a, c)).epsilon(1e-9));
    CHECK(q["max"].get<double>() == Approx(std::max(a, c)).epsilon(1e-9));
  }
  for (const std::string name : {"ct_f", "rp_ohm"}) {
    const double a = f1["pin"]["off_state"][name]["value"].get<double>(), c = f2["pin"]["off_state"][name]["value"].get<double>();
    const Json q = row(name);
    INFO(name << ": parts " << a << ", " << c << "; lot.stats " << q.dump());
    CHECK(q["mean"].get<double>() == Approx((a + c) / 2).epsilon(1e-9));
    CHECK(q["max"].get<double>() == Approx(std::max(a, c)).epsilon(1e-9));
  }
  WARN("lot.stats PIN rows: r0_ohm " << row("r0_ohm").dump() << "; tau_s " << row("tau_s").dump());
}
