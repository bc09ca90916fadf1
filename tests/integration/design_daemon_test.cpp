// Using stored parts through juncod: the design calculators (part.design),
// the AC transfer against the model with the joint AC+DC fit
// (part.transfer), and the CLI's design/transfer/plot commands on --part —
// junco-sim, juncod and junco as real processes on real sockets.
#include "design/calculators.hpp"
#include "units/si_text.hpp"
#include "formats/model_document.hpp"
#include "tests/support/bench_daemon.hpp"

#include <boost/math/special_functions/lambert_w.hpp>
#include <catch2/catch.hpp>

#include <cmath>
#include <fstream>

using namespace junco;
using junco::test::BenchDaemon;
using Json = nlohmann::json;

namespace {

Json plan(const std::string& lot, int parts, const Json& freqs) {
  Json p{{"lot", lot},
         {"parts", Json::array()},
         {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-6}, {"stop", 0.02}, {"count", 24}, {"settle_s", 0}}},
         {"ac", {{"freqs_hz", freqs}, {"amplitude", 0.002}, {"unit", "vrms"}, {"settle_s", 0}}}};
  for (int i = 1; i <= parts; ++i) p["parts"].push_back({{"slot", i}, {"label", "DS-" + std::to_string(i)}});
  return p;
}

std::vector<std::string> no_heating() {
  return {"--settle-ms", "0", "--config", std::string(JUNCO_SOURCE_DIR) + "/tools/sim/no-heating.json"};
}

double value_of(const Json& lines, const std::string& key) {
  for (const auto& l : lines)
    if (l["key"] == key) return l["value"].get<double>();
  FAIL("no line " << key << " in " << lines.dump());
  return 0;
}

}  // namespace

TEST_CASE("part.design answers as the calculators do on the exported model", "[design][daemon]") {
  BenchDaemon b("design", no_heating());
  b.run_plan(plan("DSN-0413", 1, {1e6}));
  const Json model_text = b.result("part.export", {{"part_id", 1}, {"format", "json"}})["content"];
  std::string why;
  const auto model = fitting::parse_model_document(model_text.get<std::string>(), &why);
  REQUIRE(model);
  fitting::DesignPart local;
  local.dc = model->params;
  local.temp_k = model->temp_k;
  local.law = model->law;  // junction-temp moves the part to its Tj

  struct Case {
    std::string calculator;
    Json inputs;
    std::string key;
  };
  const std::vector<Case> cases{
      {"op", {{"supply_v", 5.0}, {"bias_resistor_ohm", 390.0}}, "bias_current_a"},
      {"bias-r", {{"supply_v", 5.0}, {"current_a", 0.01}}, "bias_resistor_ohm"},
      {"loss", {{"current_a", 0.01}, {"switch", "shunt"}, {"freq_hz", 1e8}}, "isolation_db"},
      {"distortion", {{"current_a", 0.005}, {"amplitude_v", 0.1}}, "thd_pct"},
      {"isolation", {{"cj0_f", 2e-12}, {"reverse_v", 5.0}, {"freq_hz", 1e9}}, "isolation_db"},
      {"off-headroom", {{"cj0_f", 2e-12}, {"reverse_v", 5.0}, {"power_w", 0.01}, {"bv_v", 30.0}}, "junction_peak_v"},
      {"junction-temp", {{"current_a", 0.01}, {"theta_k_per_w", 500.0}, {"power_w", 1e-3}}, "tj_k"},
      {"bias-network", {{"supply_v", 5.0}, {"bias_resistor_ohm", 390.0}, {"rground_ohm", 1000.0}, {"feed_diode", "same"}}, "supply_leak_db"},
      {"series-shunt", {{"cj0_f", 2e-12}, {"current_a", 0.01}, {"reverse_v", 5.0}, {"freq_hz", 1e8}}, "isolation_db"},
  };
  const Json schema = test::api_schema("part.design");
  const Json by_value_schema = test::api_schema("design.run");
  for (const auto& c : cases) {
    const Json params{{"part_id", 1}, {"calculator", c.calculator}, {"inputs", c.inputs}};
    const Json remote = b.result("part.design", params);
    INFO(c.calculator << ": " << remote.dump());
    CHECK(test::schema_problem(schema["result"], remote) == "");
    CHECK(test::schema_problem(schema["params"], params) == "");
    const Json mine = fitting::run_design(c.calculator, &local, c.inputs);
    // The model document carries the fit to 9 significant digits.
    CHECK(value_of(remote["result"], c.key) == Approx(value_of(mine["result"], c.key)).epsilon(1e-6));
    CHECK(remote["assumed"].size() == mine["assumed"].size());
    CHECK(remote["part_id"] == 1);
    // design.run on the answer's own part (by value) answers the same.
    const Json by_value_params{{"calculator", c.calculator}, {"part", remote["part"]}, {"inputs", c.inputs}};
    const Json by_value = b.result("design.run", by_value_params);
    CHECK(test::schema_problem(by_value_schema["params"], by_value_params) == "");
    CHECK(test::schema_problem(by_value_schema["result"], by_value) == "");
    CHECK(value_of(by_value["result"], c.key) == value_of(remote["result"], c.key));
    CHECK(by_value["part"] == remote["part"]);
    CHECK_FALSE(by_value.contains("part_id"));
  }
  // A calculator without a part takes none; one that needs a part says so,
  // and a bad part names its field.
  const Json headroom = b.result("design.run", {{"calculator", "headroom"}, {"inputs", {{"amplitude_v", 1.0}}}});
  CHECK(test::schema_problem(by_value_schema["result"], headroom) == "");
  CHECK_FALSE(headroom.contains("part"));
  const Json pad = b.result("design.run", {{"calculator", "attenuator"},
                                          {"inputs", {{"pad", "tee"}, {"target_db", 6.0}, {"r0_ohm", 1.0}, {"k_ohm_a_x", 0.04}, {"x", 0.9}}}});
  CHECK(test::schema_problem(by_value_schema["result"], pad) == "");
  CHECK(value_of(pad["result"], "pad_loss_db") == Approx(6.0));
  CHECK(test::schema_problem(schema["result"], b.result("part.design", {{"part_id", 1}, {"calculator", "headroom"}, {"inputs", {{"amplitude_v", 1.0}}}})) == "");
  const Json good_part{{"is_a", 2e-9}, {"n", 1.8}, {"rs_ohm", 0.7}};
  auto by_value_error = [&](const Json& part) {
    Json params{{"calculator", "op"}, {"inputs", {{"supply_v", 5.0}, {"bias_resistor_ohm", 390.0}}}};
    if (!part.is_null()) params["part"] = part;
    const Json r = b.client().request("design.run", params);
    INFO(r.dump());
    CHECK(r["error"]["code"] == -32602);
    return r["error"]["data"].value("field", std::string());
  };
  CHECK(by_value_error(nullptr) == "part");
  CHECK(by_value_error(Json::array()) == "part");
  CHECK(by_value_error({{"n", 1.8}, {"rs_ohm", 0.7}}) == "part.is_a");
  CHECK(by_value_error({{"is_a", -2e-9}, {"n", 1.8}, {"rs_ohm", 0.7}}) == "part.is_a");
  CHECK(by_value_error({{"is_a", 2e-9}, {"n", 1.8}, {"rs_ohm", 0.7}, {"cj", 1e-12}}) == "part.cj");
  CHECK(by_value_error({{"is_a", 2e-9}, {"n", "1.8"}, {"rs_ohm", 0.7}}) == "part.n");
  // The op answer by value against docs/references.md §2's explicit current with
  // Boost.Math's W0: I = (N·Vt/R)·W0[(IS·R/(N·Vt))·exp((V + IS·R)/(N·Vt))] − IS, R = RBIAS + RS.
  {
    const Json op = b.result("design.run", {{"calculator", "op"}, {"part", good_part}, {"inputs", {{"supply_v", 5.0}, {"bias_resistor_ohm", 390.0}}}});
    const double nvt = 1.8 * 1.380649e-23 * 300.15 / 1.602176634e-19, r = 390.0 + 0.7, is = 2e-9;
    const double expected = nvt / r * boost::math::lambert_w0(is * r / nvt * std::exp((5.0 + is * r) / nvt)) - is;
    CHECK(value_of(op["result"], "bias_current_a") == Approx(expected).epsilon(1e-9));
  }
  // Bad input is refused and names the field; nothing about the part changes.
  auto reply = b.client().request("part.design", {{"part_id", 1}, {"calculator", "op"}, {"inputs", {{"supply_v", 5.0}}}});
  CHECK(reply["error"]["code"] == -32602);
  CHECK(reply["error"]["data"]["field"] == "inputs.bias_resistor_ohm");
  // The old input names (rbias_ohm, rreturn_ohm) still work, with a warning naming the new one (docs/names.md).
  {
    const Json old = b.result("part.design", {{"part_id", 1}, {"calculator", "op"},
                                              {"inputs", {{"supply_v", 5.0}, {"rbias_ohm", 390.0}, {"rreturn_ohm", 10.0}}}});
    const Json now = b.result("part.design", {{"part_id", 1}, {"calculator", "op"},
                                              {"inputs", {{"supply_v", 5.0}, {"bias_resistor_ohm", 390.0}, {"dc_return_ohm", 10.0}}}});
    CHECK(value_of(old["result"], "bias_current_a") == value_of(now["result"], "bias_current_a"));
    CHECK(old["warnings"].dump().find("rbias_ohm is now spelled bias_resistor_ohm") != std::string::npos);
    CHECK(old["warnings"].dump().find("rreturn_ohm is now spelled dc_return_ohm") != std::string::npos);
    CHECK(now["warnings"].empty());
  }
  // rg_ohm and rl_ohm likewise (now source_ohm, load_ohm); both spellings at once: -32602 naming the old one.
  {
    const Json old = b.result("part.design", {{"part_id", 1}, {"calculator", "loss"},
                                              {"inputs", {{"current_a", 1e-3}, {"switch", "shunt"}, {"rg_ohm", 75.0}, {"rl_ohm", 25.0}}}});
    const Json now = b.result("part.design", {{"part_id", 1}, {"calculator", "loss"},
                                              {"inputs", {{"current_a", 1e-3}, {"switch", "shunt"}, {"source_ohm", 75.0}, {"load_ohm", 25.0}}}});
    CHECK(old["result"] == now["result"]);
    CHECK(old["warnings"].dump().find("rg_ohm is now spelled source_ohm") != std::string::npos);
    CHECK(old["warnings"].dump().find("rl_ohm is now spelled load_ohm") != std::string::npos);
    const Json both = b.client().request(
        "part.design", {{"part_id", 1}, {"calculator", "loss"}, {"inputs", {{"current_a", 1e-3}, {"rg_ohm", 50.0}, {"source_ohm", 50.0}}}});
    CHECK(both["error"]["code"] == -32602);
    CHECK(both["error"]["data"]["field"] == "inputs.rg_ohm");
    CHECK(both["error"]["message"].get<std::string>().find("give source_ohm only") != std::string::npos);
  }
  reply = b.client().request("part.design", {{"part_id", 1}, {"calculator", "op"}, {"inputs", {{"supply_v", 5.0}, {"bias_resistor_ohm", 1.0}, {"vbias", 3}}}});
  CHECK(reply["error"]["data"]["field"] == "inputs.vbias");
  reply = b.client().request("part.design", {{"part_id", 1}, {"calculator", "warp"}});
  CHECK(reply["error"]["data"]["field"] == "calculator");
  reply = b.client().request("part.design", {{"part_id", 9}, {"calculator", "op"}});
  CHECK(reply["error"]["code"] == -32001);
  reply = b.client().request("part.design", {{"part_id", 1}, {"calculator", "op"}, {"supply_v", 5.0}});
  CHECK(reply["error"]["data"]["field"] == "supply_v");  // inputs go inside "inputs"

  // The CLI on --part: the daemon's numbers, printed with the assumed inputs.
  const double i_a = value_of(b.result("part.design", {{"part_id", 1}, {"calculator", "op"}, {"inputs", {{"supply_v", 5.0}, {"bias_resistor_ohm", 390.0}}}})["result"],
                              "bias_current_a");
  auto cli = b.junco({"design", "op", "--part", "DS-1", "--supply", "5V", "--bias-resistor", "390"});
  INFO(cli.out << cli.err);
  CHECK(cli.status == 0);
  CHECK(cli.out.find("assumed   bias resistor    390 ohm") != std::string::npos);  // one formatter: no trailing zeros
  CHECK(cli.out.find(junco::units::format_si(i_a, "A", 6)) != std::string::npos);
  cli = b.junco({"design", "op", "--part", "DS-1", "--supply", "-5", "--bias-resistor", "390"});
  CHECK(cli.status == 2);
  CHECK(cli.err.find("--supply: must be > 0") != std::string::npos);
  cli = b.junco({"design", "op", "--part", "NO-SUCH", "--supply", "5", "--bias-resistor", "390"});
  CHECK(cli.status == 1);
  CHECK(cli.err.find("no part labelled 'NO-SUCH'") != std::string::npos);
}

TEST_CASE("part.transfer: without self-heating the AC readings agree with the DC fit", "[transfer][daemon]") {
  BenchDaemon b("transfer", no_heating());
  b.run_plan(plan("DSN-0414", 2, {1e6, 2e6}));
  const Json truth = b.sim().control("lot?")["parts"];
  const Json schema = test::api_schema("part.transfer");
  for (long part = 1; part <= 2; ++part) {
    const Json params{{"part_id", part}};
    const Json r = b.result("part.transfer", params);
    INFO("part " << part << ": " << r.dump().substr(0, 1500));
    CHECK(test::schema_problem(schema["result"], r) == "");
    CHECK(r["points"].size() == 48);  // 24 steps x 2 frequencies
    CHECK(r["points_used"].get<long>() >= 20);
    // junco-sim's level meter: 0.01 % of reading + 2 uV (tools/sim); the
    // model is the same small-signal circuit, so the residual is noise plus
    // the DC fit's own error (its Rs is uncertain by ~0.1 ohm against rd of
    // a few ohms at the top): a few hundredths of a dB (our bound, no source).
    CHECK(r["rms_residual_db"].get<double>() < 0.05);
    const Json& j = r["joint"];
    REQUIRE(j.is_object());
    CHECK(j["joint"]["ok"] == true);
    CHECK(j["agree"] == true);
    CHECK_FALSE(j.contains("hint"));
    // The joint fit recovers the simulator's true Rs and n (its `lot?`).
    const Json& t = truth[static_cast<std::size_t>(part - 1)];
    CHECK(j["joint"]["rs_ohm"]["value"].get<double>() == Approx(t["rs_ohm"].get<double>()).epsilon(0.05));
    CHECK(j["joint"]["n"]["value"].get<double>() == Approx(t["n"].get<double>()).epsilon(0.01));
    // And so do the AC readings alone (rd = Rs + n·Vt/I, docs/references.md §3).
    REQUIRE(j["ac_only"]["ok"] == true);
    CHECK(j["ac_only"]["rs_ohm"]["value"].get<double>() == Approx(t["rs_ohm"].get<double>()).epsilon(0.05));
    CHECK(j["ac_only"]["n"]["value"].get<double>() == Approx(t["n"].get<double>()).epsilon(0.01));
  }
  // Options are checked; unknown params refused.
  CHECK(b.client().request("part.transfer", {{"part_id", 1}, {"ac_sigma_db", 0}})["error"]["data"]["field"] == "ac_sigma_db");
  CHECK(b.client().request("part.transfer", {{"part_id", 1}, {"sigma", 0.1}})["error"]["data"]["field"] == "sigma");
  CHECK(b.client().request("part.transfer", {{"part_id", 1}, {"run_id", 77}})["error"]["code"] == -32001);

  // Lot statistics and the lot nominal over the two parts, against their fits:
  // the mean of n is their average; the nominal IS is the median in log, for
  // two parts their geometric mean (definition of the median, no source needed).
  const Json stats_params{{"lot", "DSN-0414"}, {"currents_a", {1e-3}}};
  const Json stats = b.result("lot.stats", stats_params);
  CHECK(test::schema_problem(test::api_schema("lot.stats")["result"], stats) == "");
  CHECK(test::schema_problem(test::api_schema("lot.stats")["params"], stats_params) == "");
  const Json f1 = b.result("part.fit", {{"part_id", 1}}), f2 = b.result("part.fit", {{"part_id", 2}});
  CHECK(stats["parts"].size() == 2);
  for (const auto& q : stats["quantities"])
    if (q["name"] == "n") CHECK(q["mean"].get<double>() == Approx((f1["n"]["value"].get<double>() + f2["n"]["value"].get<double>()) / 2));
  const double is_nominal = std::sqrt(f1["is_a"]["value"].get<double>() * f2["is_a"]["value"].get<double>());
  CHECK(stats["nominal"]["is_a"].get<double>() == Approx(is_nominal).epsilon(1e-9));
  const Json card = b.result("lot.export", {{"lot", "DSN-0414"}, {"format", "spice"}});
  CHECK(card["parts"] == 2);
  CHECK(card["content"].get<std::string>().find(".model D_DSN_0414_NOM D(IS=") != std::string::npos);
  CHECK(card["content"].get<std::string>().find("median of 2 fitted parts") != std::string::npos);
  CHECK(b.client().request("lot.stats", {{"lot", "NO-SUCH"}})["error"]["code"] == -32001);
  CHECK(b.client().request("lot.stats", {{"lot", "DSN-0414"}, {"set_size", 1}})["error"]["data"]["field"] == "set_size");
  CHECK(b.client().request("lot.export", {{"lot", "DSN-0414"}, {"format", "pdf"}})["error"]["data"]["field"] == "format");
  auto lots = b.junco({"lots", "DSN-0414", "--at", "1mA"});
  INFO(lots.out << lots.err);
  CHECK(lots.status == 0);
  CHECK(lots.out.find("lot DSN-0414: 2 fitted parts") != std::string::npos);
  CHECK(lots.out.find("Vf @ 1 mA") != std::string::npos);
  lots = b.junco({"lots", "DSN-0414", "--set-size", "two"});
  CHECK(lots.status == 2);
  CHECK(lots.err.find("--set-size must be a whole number of parts (2..64), not 'two'") != std::string::npos);
  lots = b.junco({"lots", "DSN-0414", "--set-size", "1"});
  CHECK(lots.status == 2);
  CHECK(lots.err.find("set_size: must be an integer 2..64") != std::string::npos);

  // The CLI's report, and the plots straight from the daemon.
  auto cli = b.junco({"transfer", "DS-1"});
  INFO(cli.out << cli.err);
  CHECK(cli.status == 0);
  CHECK(cli.out.find("verdict: AC and DC agree") != std::string::npos);
  CHECK(cli.out.find("1 MHz") != std::string::npos);
  CHECK(cli.out.find("2 MHz") != std::string::npos);
  const auto svg = [&](const std::string& name) {
    std::ifstream f(b.dir() / name);
    return std::string(std::istreambuf_iterator<char>(f), std::istreambuf_iterator<char>());
  };
  struct Plot {
    std::vector<std::string> args;
    std::string file;
    std::vector<std::string> labels;
  };
  const std::vector<Plot> plots{
      {{"plot", "iv", "--part", "DS-1"}, "iv.svg", {"forward voltage V (V)", "DS-1", "DSN-0414"}},
      {{"plot", "ac", "--part", "DS-2"}, "ac.svg", {"bias current I (A)", "(dB)", "measured, 1 MHz", "model, 2 MHz", "DS-2"}},
      {{"plot", "lot", "--lot", "DSN-0414"}, "lot.svg", {"IS (A)", "DS-1", "DS-2"}},
  };
  for (const auto& p : plots) {
    auto args = p.args;
    args.push_back("--out");
    args.push_back((b.dir() / p.file).string());
    const auto r = b.junco(args);
    INFO(p.file << ": " << r.out << r.err);
    REQUIRE(r.status == 0);
    const std::string text = svg(p.file);
    CHECK(text.find("</svg>") != std::string::npos);
    for (const auto& l : p.labels) CHECK(text.find(l) != std::string::npos);
  }
}

TEST_CASE("part.transfer: self-heating shows as AC and DC disagreeing, with a hint", "[transfer][daemon]") {
  // A 600 K/W junction with a 5 ms thermal time constant, and 30 ms of
  // settling per step: the top of the DC sweep runs hot, every time (with
  // less settling the heating would depend on the machine's timing).
  const auto config = test::scratch_dir("heating-cfg") / "hot.json";
  std::filesystem::create_directories(config.parent_path());
  std::ofstream(config) << R"({"thermal": {"theta_k_per_w": 600, "tau_s": 0.005}})";
  BenchDaemon b("heating", {"--settle-ms", "0", "--config", config.string()});
  auto p = plan("DSN-0415", 1, {1e6});
  p["sweep"]["settle_s"] = 0.03;
  b.run_plan(p);
  std::filesystem::remove_all(config.parent_path());
  const Json r = b.result("part.transfer", {{"part_id", 1}});
  INFO(r.dump().substr(0, 1500));
  const Json& j = r["joint"];
  REQUIRE(j.is_object());
  WARN("self-heating: " << j["agreement"].get<std::string>());
  CHECK(j["agree"] == false);
  CHECK(j["joint"]["rs_ohm"]["value"].get<double>() > j["dc_only"]["rs_ohm"]["value"].get<double>());
  CHECK(j.value("hint", "").find("self-heating") != std::string::npos);
  const Json truth = b.sim().control("lot?")["parts"][0];
  // The AC readings see the true Rs better than the hot DC curve does.
  CHECK(std::abs(j["joint"]["rs_ohm"]["value"].get<double>() - truth["rs_ohm"].get<double>()) <
        std::abs(j["dc_only"]["rs_ohm"]["value"].get<double>() - truth["rs_ohm"].get<double>()));
  CHECK(std::abs(j["ac_only"]["rs_ohm"]["value"].get<double>() - truth["rs_ohm"].get<double>()) <
        std::abs(j["dc_only"]["rs_ohm"]["value"].get<double>() - truth["rs_ohm"].get<double>()));
  CHECK(j["ac_only"]["rs_ohm"]["value"].get<double>() > j["dc_only"]["rs_ohm"]["value"].get<double>());
}
