// The heating plan options (plan.heating, docs/daemon-core.md) run by a real
// juncod against junco-sim with its junction heating: the simulator's truth
// comes back. Sources: the simulator's thermal model (docs/sim.md: first
// order, Tj → ambient + θ·P with time constant τ, set in its config, so θ and
// τ are the truth here), the first-order RC step response for the dwells
// (fitting/heating.hpp; common practice, no source), the target (Rs
// within 5 % of the truth), docs/references.md §8 for the DC-only bias.
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>

using junco::test::BenchDaemon;
using Json = nlohmann::json;

namespace {

// A junco-sim config with the given thermal resistance and time constant.
std::filesystem::path thermal_config(const std::string& tag, double theta_k_per_w, double tau_s) {
  const auto path = junco::test::scratch_dir("heat-cfg-" + tag) / "thermal.json";
  std::filesystem::create_directories(path.parent_path());
  std::ofstream(path) << Json{{"thermal", {{"theta_k_per_w", theta_k_per_w}, {"tau_s", tau_s}}}}.dump();
  return path;
}

Json two_parts(const std::string& prefix) { return {{{"slot", 1}, {"label", prefix + "-01"}}, {{"slot", 2}, {"label", prefix + "-02"}}}; }

// Off intervals of the supply output (s) that end in an "on", in order.
std::vector<double> off_before_on_s(const Json& switches) {
  std::vector<double> out;
  long long off_at = -1;
  for (const auto& s : switches) {
    if (s["on"] == false) off_at = s["t_ns"].get<long long>();
    else if (off_at >= 0) out.push_back(static_cast<double>(s["t_ns"].get<long long>() - off_at) * 1e-9);
  }
  return out;
}

}  // namespace

TEST_CASE("two dwells per pulsed step give the simulator's Rth and thermal time constant", "[heating][daemon]") {
  // θ 400 K/W, τ 40 ms. Each top-decade step: one pulse after 250 ms off
  // (6 τ: from cold), read at its start (~1 ms), at 30 ms and at 200 ms (5 τ).
  const auto config = thermal_config("dwell", 400, 0.040);
  BenchDaemon b("heat-dwell", {"--settle-ms", "0", "--config", config.string()});
  std::filesystem::remove_all(config.parent_path());
  const Json plan{{"lot", "WREN-0912"},
                  {"parts", two_parts("WR")},
                  {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-4}, {"stop", 0.05}, {"count", 10}, {"settle_s", 0.01}}},
                  {"heating", {{"pulse", {{"on_s", 0.001}, {"off_s", 0.25}}}, {"dwell", {{"short_s", 0.03}, {"long_s", 0.2}}}}}};
  b.run_plan(plan);
  for (long part = 1; part <= 2; ++part) {
    const Json fit = b.result("part.fit", {{"part_id", part}});
    INFO("part.fit " << fit.dump().substr(0, 3000));
    const Json& d = fit["detail"]["heating"]["dwell"];
    REQUIRE(d["status"] == "measured");
    const double rth = d["rth_k_per_w"]["value"], tau = d["tau_s"]["value"];
    std::printf("two dwells, part %ld: Rth %.1f K/W (truth 400, %+.1f %%), tau %.2f ms (truth 40, %+.1f %%) from %d steps\n", part, rth,
                (rth / 400 - 1) * 100, tau * 1e3, (tau / 0.040 - 1) * 100, d["steps_used"].get<int>());
    for (const auto& s : d["steps"])
      if (s["used"] == true)
        std::printf("  step %.4g A: Rth %.1f K/W, tau %.2f ms, dVf %.2f mV\n", s["i_a"].get<double>(), s["rth_k_per_w"].get<double>(),
                    s["tau_s"].get<double>() * 1e3, s["delta_vf_inf_v"].get<double>() * 1e3);
    CHECK(std::abs(rth - 400.0) < 0.10 * 400.0);
    CHECK(std::abs(tau - 0.040) < 0.20 * 0.040);
    CHECK(d["steps_used"].get<int>() >= 2);
    // The readings carry the measured dwell: pulse start < short < long.
    const Json r = b.result("part.readings", {{"part_id", part}});
    int dwell_readings = 0;
    for (const auto& p : r["points"])
      if (p["series"] == "dwell") {
        ++dwell_readings;
        CHECK(p["dwell_s"].get<double>() >= 0.03);
      }
    CHECK(dwell_readings == 2 * fit["detail"]["heating"]["pulsed_readings"].get<int>());
  }
}

TEST_CASE("pulsed top decade: the DC-only Rs comes back near the truth where the held sweep's is biased low",
          "[heating][daemon]") {
  // θ 400 K/W, τ 100 ms. The held sweep settles 250 ms (2.5 τ, 92 % of the
  // settled rise) per step. The pulsed plan reads the top decade ~1 ms after
  // the output goes on (~1 % of the rise; 5 ms under load would still be
  // 5 %, 0.02 ohm), 500 ms (5 τ) off before each pulse.
  const auto config = thermal_config("pulse", 400, 0.100);
  BenchDaemon b("heat-pulse", {"--settle-ms", "0", "--config", config.string()});
  std::filesystem::remove_all(config.parent_path());
  const Json sweep{{"mode", "current"}, {"spacing", "log"}, {"start", 1e-5}, {"stop", 0.05}, {"count", 16}, {"settle_s", 0.25}};
  b.run_plan({{"lot", "WREN-0912"}, {"parts", two_parts("WH")}, {"sweep", sweep}});
  const auto before = b.sim().control("outputs?")["source"]["switches"].size();
  b.run_plan({{"lot", "WREN-0912"},
              {"parts", {{{"slot", 1}, {"label", "WP-01"}}, {{"slot", 2}, {"label", "WP-02"}}}},
              {"sweep", sweep},
              {"heating", {{"pulse", {{"on_s", 0.001}, {"off_s", 0.5}}}}}});
  const Json truth = b.sim().control("lot?")["parts"];
  for (long part = 1; part <= 2; ++part) {
    const double rs = truth[static_cast<std::size_t>(part - 1)]["rs_ohm"];
    const Json held = b.result("part.fit", {{"part_id", part}});
    const Json pulsed = b.result("part.fit", {{"part_id", part + 2}});
    INFO("held " << held.dump().substr(0, 1500) << "\npulsed " << pulsed.dump().substr(0, 2500));
    const double rs_held = held["rs_ohm"]["value"], rs_pulsed = pulsed["rs_ohm"]["value"];
    std::printf("pulsed top decade, slot %ld: Rs %.4f ohm (truth %.4f, %+.1f %%), pulsed readings at %.2f ms; held sweep %.4f (%+.1f %%)\n",
                part, rs_pulsed, rs, (rs_pulsed / rs - 1) * 100, pulsed["detail"]["heating"]["pulse_dwell_s"].get<double>() * 1e3, rs_held,
                (rs_held / rs - 1) * 100);
    CHECK(std::abs(rs_pulsed - rs) < 0.05 * rs);
    CHECK(rs_held < rs - 0.15);  // biased low by the heating (docs/references.md §8)
    CHECK(pulsed["detail"]["heating"]["pulsed_readings"].get<int>() >= 3);
    // Without AC readings part.fit says Rs may include heating, with its size.
    bool says_heating = false;
    for (const auto& w : held["warnings"]) says_heating = says_heating || w.get<std::string>().find("self-heating") != std::string::npos;
    CHECK(says_heating);
    // ... and, for the pulsed readings, that they carry only part of it.
    bool says_pulsed = false;
    for (const auto& w : pulsed["warnings"]) says_pulsed = says_pulsed || w.get<std::string>().find("were pulsed") != std::string::npos;
    CHECK(says_pulsed);
  }
  // Safety: the supply really went off before every pulse for the off time.
  // Each pulsed reading (and each correction of a current target) is a pulse.
  const Json switches = b.sim().control("outputs?")["source"]["switches"];
  const Json job_switches(std::vector<Json>(switches.begin() + static_cast<long>(before), switches.end()));
  int long_offs = 0;
  for (double s : off_before_on_s(job_switches)) long_offs += s >= 0.5 * 0.98 ? 1 : 0;
  const int pulsed_readings = b.result("part.fit", {{"part_id", 3}})["detail"]["heating"]["pulsed_readings"].get<int>() +
                              b.result("part.fit", {{"part_id", 4}})["detail"]["heating"]["pulsed_readings"].get<int>();
  std::printf("pulsed plan: %d output-on switches after >= 490 ms off, for %d pulsed readings\n", long_offs, pulsed_readings);
  CHECK(long_offs >= pulsed_readings);
  CHECK(b.sim().control("outputs?")["source"]["output_on"] == false);
}

TEST_CASE("sweep up and down: a heating junction is flagged, a cold one is not", "[heating][daemon]") {
  // Steps of 10 ms against τ 50 ms: the junction lags its power.
  const Json plan{{"lot", "WREN-0912"},
                  {"parts", {{{"slot", 1}, {"label", "WU-01"}}}},
                  {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-5}, {"stop", 0.04}, {"count", 20}, {"settle_s", 0.01}}},
                  {"heating", {{"down_sweep", true}}}};
  // The noise is the bench config's accuracy: junco-sim reads the current
  // back from its supply with 0.2 µA of noise (docs/sim.md), so the config
  // says ±0.5 µA (σ = 0.29 µA); the default 1 nA would call that noise hysteresis.
  junco::test::BenchDaemonOptions options;
  options.extra = {{"accuracy", {{"i_abs_a", 5e-7}}}};
  for (const double theta : {400.0, 0.0}) {
    const auto config = thermal_config(theta > 0 ? "hot" : "cold", theta, 0.050);
    BenchDaemon b(theta > 0 ? "heat-updown" : "cold-updown", {"--settle-ms", "0", "--config", config.string()}, options);
    std::filesystem::remove_all(config.parent_path());
    b.run_plan(plan);
    const Json fit = b.result("part.fit", {{"part_id", 1}});
    INFO("theta " << theta << ": " << fit.dump().substr(0, 2500));
    const Json& h = fit["detail"]["heating"]["hysteresis"];
    REQUIRE(h["pairs"].get<int>() == 20);
    std::printf("up/down at %.0f K/W: largest |Vup - Vdown| %.3f mV (%.1f sigma), mean %+.3f mV, flagged %s\n", theta,
                h["max_abs_v"].get<double>() * 1e3, h["max_z"].get<double>(), h["mean_v"].get<double>() * 1e3,
                h["flagged"].get<bool>() ? "yes" : "no");
    CHECK(h["flagged"].get<bool>() == (theta > 0));
    if (theta > 0) CHECK(h["mean_v"].get<double>() > 0);  // cooler going up, warmer coming down
  }
}
