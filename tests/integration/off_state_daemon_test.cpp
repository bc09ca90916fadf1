// Off-state readings end to end: junco-sim, juncod and junco as real
// processes. A plan with ac.off_state reads the levels at each reverse bias;
// juncod fits the junction capacitance law from them with the forward fit,
// serves it in part.fit, writes it into the SPICE card, and the isolation
// calculator takes it for a stored part.
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>

using namespace junco;
using Json = nlohmann::json;

namespace {

Json off_state_plan(const std::string& lot, const Json& reverse_v) {
  Json p{{"lot", lot},
         {"parts", {{{"slot", 1}, {"label", "OS-1"}}, {{"slot", 2}, {"label", "OS-2"}}}},
         {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-5}, {"stop", 0.01}, {"count", 12}, {"settle_s", 0}}},
         {"reverse_v", reverse_v},
         {"ac", {{"freqs_hz", {1e7}}, {"amplitude", 0.002}, {"unit", "vrms"}, {"settle_s", 0},
                 {"off_state", {{"amplitude", 0.05}, {"freqs_hz", {3e7, 1e8}}}}}}};
  return p;
}

std::vector<std::string> no_heating() {
  return {"--settle-ms", "0", "--config", std::string(JUNCO_SOURCE_DIR) + "/tools/sim/no-heating.json"};
}

}  // namespace

TEST_CASE("off-state readings give each part's CJO, VJ and M, served, exported and designed with", "[daemon][off-state]") {
  test::BenchDaemon b("off-state", no_heating());
  b.run_plan(off_state_plan("OSL-0707", {0, 0.5, 1, 2, 3, 5}));
  const Json truth = b.sim().control("lot?")["parts"];
  for (int part_id = 1; part_id <= 2; ++part_id) {
    const Json& t = truth[part_id - 1];
    const Json fit = b.result("part.fit", {{"part_id", part_id}});
    INFO("part " << part_id << ": " << fit.dump() << "\ntruth " << t.dump());
    CHECK(test::schema_problem(test::api_schema("part.fit")["result"], fit) == "");
    // The simulator's own law (SPICE depletion form, tools/sim/part.cpp) is
    // the truth; tolerances are ours, no source: a 70 mV peak signal at 0 V
    // averages C over its swing (seen: CJO +0.15 %, VJ −0.6 %).
    CHECK(fit["cj0_f"]["value"].get<double>() == Approx(t["cj0_f"].get<double>()).epsilon(0.005));
    CHECK(fit["vj_v"]["value"].get<double>() == Approx(t["vj_v"].get<double>()).epsilon(0.02));
    CHECK(fit["m"]["value"].get<double>() == Approx(t["m"].get<double>()).epsilon(0.02));
    CHECK(fit["detail"]["junction_cap"]["points_used"] == 12);
    CHECK(fit["detail"]["junction_cap"]["law_held"] == false);

    const Json points = b.result("part.readings", {{"part_id", part_id}})["points"];
    long off = 0;
    for (const auto& p : points)
      if (p["kind"] == "reverse_ac") {
        ++off;
        CHECK(p["set_value"].get<double>() <= 0.0);
        CHECK(p["ac_out_v"].get<double>() < 0.1 * p["ac_in_v"].get<double>());  // the part isolates
      }
    CHECK(off == 12);

    const std::string card = b.result("part.export", {{"part_id", part_id}, {"format", "spice"}})["content"];
    CHECK(card.find("CJO=") != std::string::npos);
    CHECK(card.find("* CJO, VJ, M from 12 off-state readings; standard errors ") != std::string::npos);
    CHECK(card.find(" M=") != std::string::npos);
  }

  // junco show prints the law.
  auto shown = b.junco({"show", "OS-1"});
  INFO(shown.out << shown.err);
  CHECK(shown.status == 0);
  CHECK(shown.out.find("CJO = 2.0") != std::string::npos);  // the sim's slot-1 part: 2.03 pF
  CHECK(shown.out.find("(from 12 off-state readings)") != std::string::npos);

  // Each reading's C as stored with the fit follows the fitted law (the
  // simulator's readings carry little noise: within 1 %, our bound).
  {
    const Json fit1 = b.result("part.fit", {{"part_id", 1}});
    const Json readings = fit1["detail"]["junction_cap"]["readings"];
    REQUIRE(readings.size() == 12);
    const double cj0 = fit1["cj0_f"]["value"], vj = fit1["vj_v"]["value"], m = fit1["m"]["value"];
    for (const auto& r : readings) {
      INFO(r.dump());
      REQUIRE(r["c_f"].is_number());
      CHECK(r["c_f"].get<double>() == Approx(cj0 * std::pow(1.0 + r["reverse_v"].get<double>() / vj, -m)).epsilon(0.01));
      CHECK(r["fixture_ratio_db"].get<double>() > 10.0);
      CHECK(r["isolation_db"] == r["fixture_ratio_db"]);  // the former name, kept for one release
    }
  }
  // The off-state plot, from juncod and from the exported files; and the CSV.
  const std::string off_csv = b.result("part.export", {{"part_id", 1}, {"format", "off-csv"}})["content"];
  CHECK(off_csv.rfind("reverse_v,freq_hz,vin,vout\n", 0) == 0);
  CHECK(std::count(off_csv.begin(), off_csv.end(), '\n') == 13);
  auto plotted = b.junco({"plot", "off", "--part", "OS-1", "--out", (b.dir() / "off.svg").string()});
  INFO(plotted.err);
  CHECK(plotted.status == 0);
  const auto svg_text = [](const std::filesystem::path& path) {
    std::ifstream f(path);
    return std::string((std::istreambuf_iterator<char>(f)), std::istreambuf_iterator<char>());
  };
  const std::string svg = svg_text(b.dir() / "off.svg");
  for (const char* text : {"reverse bias V", "junction capacitance C", "(pF)", "isolation", "fitted law", "OS-1", "100 MHz", "30 MHz"})
    CHECK(svg.find(text) != std::string::npos);
  std::ofstream(b.dir() / "os1-off.csv") << off_csv;
  std::ofstream(b.dir() / "os1.json") << b.result("part.export", {{"part_id", 1}, {"format", "json"}})["content"].get<std::string>();
  plotted = b.junco({"plot", "off", "--readings", (b.dir() / "os1-off.csv").string(), "--model", (b.dir() / "os1.json").string(), "--out",
                     (b.dir() / "off-files.svg").string()});
  CHECK(plotted.status == 0);
  CHECK(svg_text(b.dir() / "off-files.svg").find("fitted law") != std::string::npos);
  plotted = b.junco({"plot", "off", "--readings", (b.dir() / "os1.json").string(), "--model", (b.dir() / "os1.json").string(), "--out",
                     (b.dir() / "bad.svg").string()});
  CHECK(plotted.status == 2);

  // The lot: the law's spread, and the nominal's CJO the median of the parts' (two: their mean).
  const Json stats = b.result("lot.stats", {{"lot", "OSL-0707"}});
  CHECK(test::schema_problem(test::api_schema("lot.stats")["result"], stats) == "");
  const double cj1 = b.result("part.fit", {{"part_id", 1}})["cj0_f"]["value"], cj2 = b.result("part.fit", {{"part_id", 2}})["cj0_f"]["value"];
  CHECK(stats["nominal"]["cj0_f"].get<double>() == Approx(0.5 * (cj1 + cj2)).epsilon(1e-12));
  bool spread_listed = false;
  for (const auto& q : stats["quantities"]) spread_listed = spread_listed || (q["name"] == "cj0_f" && q["count"] == 2);
  CHECK(spread_listed);
  const std::string nominal_card = b.result("lot.export", {{"lot", "OSL-0707"}, {"format", "spice"}})["content"];
  INFO(nominal_card);
  CHECK(nominal_card.find("CJO=") != std::string::npos);
  CHECK(nominal_card.find("CJO, VJ, M: median of the 2 parts with off-state readings") != std::string::npos);

  const auto lots = b.junco({"lots", "OSL-0707"});
  INFO(lots.out);
  CHECK(lots.out.find("CJO  ") != std::string::npos);  // a spread row
  CHECK(lots.out.find(", CJO = 2.") != std::string::npos);  // and the nominal (the sim's lot: about 2 pF)

  // The isolation calculator on a stored part needs no cj0_f now, and
  // agrees with the same calculator given the fitted law by value.
  const Json fit = b.result("part.fit", {{"part_id", 1}});
  const Json inputs{{"freq_hz", 1e9}, {"reverse_v", 5.0}};
  const Json stored = b.result("part.design", {{"part_id", 1}, {"calculator", "isolation"}, {"inputs", inputs}});
  Json by_value_part = stored["part"];
  CHECK(by_value_part["cj0_f"] == fit["cj0_f"]["value"]);
  const Json by_value = b.result("design.run", {{"calculator", "isolation"}, {"part", by_value_part}, {"inputs", inputs}});
  // The same values; only the stored part has a covariance, so only it
  // carries std_error (design.run by value: explicit parameters).
  Json bare = stored["result"];
  for (auto& line : bare) {
    CHECK(line.contains("std_error"));
    line.erase("std_error");
    line.erase("nonlinear");
  }
  CHECK(bare == by_value["result"]);
}

TEST_CASE("off-state readings at too few biases hold VJ and M; the plan's checks refuse a bad off_state", "[daemon][off-state]") {
  test::BenchDaemon b("off-state-few", no_heating());
  Json plan = off_state_plan("OSL-0708", {1, 4});
  plan["parts"] = {{{"slot", 3}, {"label", "OS-3"}}};
  b.run_plan(plan);
  const Json fit = b.result("part.fit", {{"part_id", 1}});
  INFO(fit.dump());
  CHECK(fit["detail"]["junction_cap"]["law_held"] == true);
  CHECK(fit["vj_v"]["std_error"].is_null());
  CHECK(fit["cj0_f"]["value"].get<double>() > 0);
  const std::string card = b.result("part.export", {{"part_id", 1}, {"format", "spice"}})["content"];
  CHECK(card.find(" V, held, held") == std::string::npos);
  CHECK(card.find(" F, held V, held") != std::string::npos);
  const auto shown = b.junco({"show", "OS-3"});
  CHECK(shown.out.find("(held at the default: fewer than 4 reverse biases)") != std::string::npos);

  plan["ac"]["off_state"]["amplitude"] = 1.0;  // 1.41 V peak against 1 V reverse
  const Json reply = b.client().request("job.submit", {{"plan", plan}});
  CHECK(reply["error"]["code"] == -32002);
  CHECK(reply["error"]["message"].get<std::string>().find("conduct on the signal peaks") != std::string::npos);
}

TEST_CASE("the config's fixture stray capacitance is subtracted from each off-state reading", "[daemon][off-state]") {
  // junco-sim's fixture has no stray across the slot, so declaring 0.1 pF
  // must take exactly that off each reading's C, against the sim's law.
  test::BenchDaemonOptions options;
  options.fixture["stray_c_f"] = 0.1e-12;
  test::BenchDaemon b("off-state-stray", no_heating(), options);
  Json plan = off_state_plan("OSL-0709", {0, 0.5, 1, 2, 3, 5});
  plan["parts"] = {{{"slot", 4}, {"label", "OS-4"}}};
  b.run_plan(plan);
  const Json t = b.sim().control("lot?")["parts"][3];
  const Json fit = b.result("part.fit", {{"part_id", 1}});
  INFO(fit.dump());
  const double cjo = t["cj0_f"], vj = t["vj_v"], m = t["m"];
  for (const auto& r : fit["detail"]["junction_cap"]["readings"]) {
    const double truth = cjo * std::pow(1.0 + r["reverse_v"].get<double>() / vj, -m);
    // Our bound, no source: the sim's readings of the part alone agree with
    // its law within 0.3 % (the 70 mV signal at 0 V); 0.1 pF is 5-10 % of C.
    CHECK(r["c_f"].get<double>() + 0.1e-12 == Approx(truth).epsilon(0.003));
  }
  CHECK(b.result("bench.describe", Json::object())["fixture"]["stray_c_f"] == 0.1e-12);
}
