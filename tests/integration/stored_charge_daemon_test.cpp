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

  // The electro-thermal fit's AC model holds the fitted TT and the Cj(V) law,
  // so it describes these readings and its Is/N/RS are stored: N is the
  // sim's (an AC model without TT·gd gave 1.39 +- 0.12, reduced chi2 28 000).
  // Truth from the simulator (tools/sim/part.cpp); 0.5 % ours (the fit
  // lands within 0.03 %, its own SE is smaller than the sim's systematic part).
  INFO(fit.dump(1).substr(0, 3000));
  const Json& et = fit["detail"]["electrothermal"];
  CHECK(et["status"] == "fitted");
  CHECK(et["note"].get<std::string>().find("TT ") != std::string::npos);
  CHECK(fit.dump().find("electro-thermal fit not used") == std::string::npos);
  CHECK(fit["n"]["value"].get<double>() == Approx(truth["n"].get<double>()).epsilon(0.005));
  CHECK(fit["n"]["std_error"].get<double>() < 0.05);
  CHECK(et["reduced_chi2"].get<double>() < 10.0);

  // part.design on the stored part computes with the fitted TT.
  const Json a = b.result("part.design", {{"part_id", 1}, {"calculator", "loss"}, {"inputs", {{"current_a", 1e-3}, {"freq_hz", 1e8}}}});
  CHECK(a["part"]["tt_s"].get<double>() == fit["tt_s"]["value"].get<double>());

  // The part's model document (version 2) carries the covariance part.design
  // propagates: junco design --model on it gives the same values and the same
  // std_error as the stored part, every block (Is/N/RS, CJO/VJ/M, TT) in it.
  const std::string doc_text = b.result("part.export", {{"part_id", 1}, {"format", "json"}})["content"];
  const auto doc_file = (b.dir() / "tt1.json").string();
  std::ofstream(doc_file) << doc_text;
  const auto offline = b.junco({"design", "loss", "--model", doc_file, "--current", "1e-3", "--freq", "1e8", "--json"});
  INFO(offline.out << offline.err);
  REQUIRE(offline.status == 0);
  const Json local = Json::parse(offline.out);
  CHECK(local["uncertainty"]["parameters"] == a["uncertainty"]["parameters"]);
  for (const char* name : {"is_a", "n", "rs_ohm", "cj0_f", "vj_v", "m", "tt_s"})
    CHECK(local["uncertainty"]["parameters"].dump().find(std::string("\"") + name + "\"") != std::string::npos);
  REQUIRE(local["result"].size() == a["result"].size());
  for (std::size_t k = 0; k < a["result"].size(); ++k) {
    const Json &d = a["result"][k], &o = local["result"][k];
    INFO(d.dump() << " vs " << o.dump());
    CHECK(o["key"] == d["key"]);
    CHECK(o["value"].get<double>() == Approx(d["value"].get<double>()).epsilon(1e-9));
    // This part's forward fit has Is and RS within one standard error of 0
    // (8 readings from 0.1 mA, where RS barely shows), so the answer's std_error
    // may be null ("does not exist everywhere within one standard deviation"):
    // then the document must say the same. daemon_core_executor_test shows a
    // document whose fit is well determined printing "+-".
    if (d["std_error"].is_number()) {
      REQUIRE(o["std_error"].is_number());
      CHECK(o["std_error"].get<double>() == Approx(d["std_error"].get<double>()).epsilon(1e-9));
    } else {
      CHECK(o["std_error"].is_null());
    }
  }
  // Printed: the same lines, +- included, as --part (the part line names its source).
  const auto by_part = b.junco({"design", "loss", "--part", "TT-1", "--current", "1e-3", "--freq", "1e8"});
  const auto by_model = b.junco({"design", "loss", "--model", doc_file, "--current", "1e-3", "--freq", "1e8"});
  INFO(by_part.out << "\n" << by_model.out);
  REQUIRE(by_part.status == 0);
  REQUIRE(by_model.status == 0);
  CHECK(by_model.out.substr(by_model.out.find('\n')) == by_part.out.substr(by_part.out.find('\n')));

  // The same document as version 1 wrote it (temperature_k, no covariance): read, no uncertainty.
  Json v1 = Json::parse(doc_text);
  v1["version"] = 1;
  v1["temperature_k"] = v1["temp_k"];
  v1.erase("temp_k");
  v1.erase("covariance");
  std::ofstream((b.dir() / "tt1-v1.json").string()) << v1.dump(2);
  const auto old = b.junco({"design", "loss", "--model", (b.dir() / "tt1-v1.json").string(), "--current", "1e-3", "--freq", "1e8"});
  INFO(old.out << old.err);
  CHECK(old.status == 0);
  CHECK(old.out.find("no uncertainty (the model document carries no covariance") != std::string::npos);
  CHECK(old.out.find("+- ") == std::string::npos);
  const auto loss_line = [](const std::string& out) {  // "insertion loss (...)  X dB", without the +- that may follow
    const std::size_t at = out.find("insertion loss");
    return at == std::string::npos ? std::string() : out.substr(at, out.find(" dB", at) - at);
  };
  CHECK(!loss_line(old.out).empty());
  CHECK(loss_line(old.out) == loss_line(by_part.out));
}

// The same TT part heating at 400 K/W: the electro-thermal fit, with the
// stored-charge fit's TT and the off-state Cj(V) law in its AC model, is used
// and gives back junco-sim's configured thermal resistance and its Rs. Truth:
// the simulator's `lot?` and config (tools/sim/bench.cpp: Tj → ambient + θ·P;
// docs/sim.md); tolerances ours, no source: Rth within 10 % and 3 standard
// errors, Rs within 5 % (the heating target of docs/fitting.md's
// electro-thermal section) and 3 standard errors. A second run of the same
// part read at one frequency only (no TT can be fitted) shows juncod's guard:
// that fit does not describe the readings and is not used.
TEST_CASE("junco-sim TT part at 400 K/W: the electro-thermal fit with TT·gd and Cj(V) gives back Rth and Rs",
          "[daemon][stored-charge][electrothermal]") {
  const std::string config = "/tmp/junco-tt-hot-sim-" + std::to_string(getpid()) + ".json";
  {
    std::ofstream f(config);
    // τ = 5 ms; 30 ms settling per step (6 τ): every reading sees the steady junction.
    f << R"({"thermal": {"theta_k_per_w": 400, "tau_s": 0.005}, "nominal": {"tt_s": 4e-9}})";
  }
  test::BenchDaemon b("stored-charge-hot", {"--settle-ms", "0", "--config", config});
  Json plan{{"lot", "TT-0912"},
            {"parts", {{{"slot", 1}, {"label", "TTH-1"}}}},
            {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-5}, {"stop", 0.05}, {"count", 16}, {"settle_s", 0.03}}},
            {"reverse_v", {0, 0.5, 1, 2, 3, 5}},
            {"ac", {{"freqs_hz", {1e6, 1e7, 3e7, 1e8}}, {"amplitude", 0.002}, {"unit", "vrms"}, {"settle_s", 0},
                    {"off_state", {{"amplitude", 0.05}, {"freqs_hz", {3e7, 1e8}}}}}}};
  b.run_plan(plan);
  const Json truth = b.sim().control("lot?");
  const Json& part = truth["parts"][0];
  const double rth_true = truth["rth_k_per_w"].get<double>(), rs_true = part["rs_ohm"].get<double>();
  REQUIRE(rth_true == 400.0);
  const Json fit = b.result("part.fit", {{"part_id", 1}});
  const Json& et = fit["detail"]["electrothermal"];
  INFO(et.dump() << "\nstored charge " << fit["detail"].value("stored_charge", Json()).dump() << "\ntruth " << part.dump());
  REQUIRE(et["status"] == "fitted");
  REQUIRE(fit["tt_s"]["value"].is_number());
  const double rth = et["rth_k_per_w"]["value"].get<double>(), rth_se = et["rth_k_per_w"]["std_error"].get<double>();
  const double rs = fit["rs_ohm"]["value"].get<double>(), rs_se = fit["rs_ohm"]["std_error"].get<double>();
  WARN("TT part at 400 K/W: Rth " << rth << " +- " << rth_se << " K/W, Rs " << rs << " +- " << rs_se << " ohm (truth " << rs_true
                                  << ", DC-only " << et["apparent_rs_ohm"]["value"] << "), TT " << fit["tt_s"]["value"]
                                  << " s, reduced chi2 " << et["reduced_chi2"]);
  CHECK(std::abs(rth - rth_true) < 0.10 * rth_true);
  CHECK(std::abs(rth - rth_true) < 3 * rth_se);
  CHECK(std::abs(rs - rs_true) < 0.05 * rs_true);
  CHECK(std::abs(rs - rs_true) < 3 * rs_se);
  CHECK(et["rs_ohm"]["value"].get<double>() == Approx(rs));
  CHECK(fit["n"]["value"].get<double>() == Approx(part["n"].get<double>()).epsilon(0.01));
  // The DC-only Rs carries the heating (docs/references.md §8): well below the truth.
  CHECK(et["apparent_rs_ohm"]["value"].get<double>() < rs_true - 0.2);

  // One frequency (100 MHz, above the corner 1/(2π·4 ns) ≈ 40 MHz): no TT is fitted, the
  // AC model lacks TT·gd, and juncod keeps the DC-only values and says why.
  plan["lot"] = "TT-0913";
  plan["parts"] = {{{"slot", 1}, {"label", "TTH-1b"}}};
  plan["ac"] = {{"freqs_hz", {1e8}}, {"amplitude", 0.002}, {"unit", "vrms"}, {"settle_s", 0}};
  plan.erase("reverse_v");
  b.run_plan(plan);
  std::remove(config.c_str());
  const Json one = b.result("part.fit", {{"part_id", 2}});
  INFO(one["detail"]["electrothermal"].dump());
  CHECK(one["tt_s"]["value"].is_null());
  CHECK(one["detail"]["electrothermal"]["status"] == "not_used");
  CHECK(one.dump().find("electro-thermal fit not used") != std::string::npos);
  CHECK(one.dump().find("no TT was fitted") != std::string::npos);
}
