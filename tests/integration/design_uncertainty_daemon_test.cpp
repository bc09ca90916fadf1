// Uncertainty and lot worst case through juncod: junco-sim's lot (its parts
// drawn with a spread), juncod fitting them, part.design answers carrying
// std_error from the stored fit's covariance (checked against the GUM law
// with the analytic sensitivities of Vf = n·Vt·ln(I/Is) + I·Rs, from memory),
// `junco design --part` printing ±, and lot.design / `junco design
// --worst-case` naming the extreme part with the value a manual min/max over
// the per-part answers gives — real processes on real sockets.
#include "fitting/diode.hpp"
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

#include <cmath>

using namespace junco;
using junco::test::BenchDaemon;
using Json = nlohmann::json;

namespace {

Json dc_plan(const std::string& lot, int parts) {
  Json p{{"lot", lot},
         {"parts", Json::array()},
         {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-6}, {"stop", 0.02}, {"count", 24}, {"settle_s", 0}}}};
  for (int i = 1; i <= parts; ++i) p["parts"].push_back({{"slot", i}, {"label", "WREN-" + std::to_string(i)}});
  return p;
}

const Json& line(const Json& answer, const std::string& key) {
  for (const auto& l : answer["result"])
    if (l["key"] == key) return l;
  FAIL("no line " << key << " in " << answer.dump());
  static const Json none;
  return none;
}

}  // namespace

TEST_CASE("part.design carries std_error from the stored covariance; lot.design names the extreme part", "[design][daemon]") {
  BenchDaemon b("uncert", {"--settle-ms", "0", "--config", std::string(JUNCO_SOURCE_DIR) + "/tools/sim/no-heating.json"});
  b.run_plan(dc_plan("WREN-0912", 4));
  const Json inputs{{"supply_v", 5.0}, {"current_a", 0.005}};

  // Each part: std_error of Vf against cᵀ·V·c with the analytic sensitivities.
  std::vector<double> rb(5, NAN);
  for (int id = 1; id <= 4; ++id) {
    const Json a = b.result("part.design", {{"part_id", id}, {"calculator", "bias-r"}, {"inputs", inputs}});
    INFO(a.dump());
    const Json fit = b.result("part.fit", {{"part_id", id}});
    REQUIRE(a["uncertainty"]["parameters"].size() >= 3);
    const double is = a["part"]["is_a"], n = a["part"]["n"], vt = fitting::thermal_voltage_v(a["part"]["temp_k"].get<double>());
    const double i = 0.005;
    const std::vector<double> c{-n * vt / is, vt * std::log(i / is), i};
    // part.fit gives the correlation and standard errors: cov = r·u·u (GUM C.3.6).
    const Json& names = fit["detail"]["parameter_names"];
    const Json& corr = fit["detail"]["correlation"];
    REQUIRE(names.size() >= 3);
    REQUIRE(names[0] == "is_a");
    REQUIRE(names[1] == "n");
    REQUIRE(names[2] == "rs_ohm");
    const double u[3] = {fit["is_a"]["std_error"].get<double>(), fit["n"]["std_error"].get<double>(), fit["rs_ohm"]["std_error"].get<double>()};
    double u2 = 0;
    for (int p = 0; p < 3; ++p)
      for (int q = 0; q < 3; ++q) u2 += c[p] * corr[p][q].get<double>() * u[p] * u[q] * c[q];
    CHECK(line(a, "diode_voltage_v")["std_error"].get<double>() == Approx(std::sqrt(u2)).epsilon(0.03));
    CHECK(line(a, "diode_voltage_v")["std_error"].get<double>() > 0);
    CHECK(test::schema_problem(test::api_schema("part.design")["result"], a) == "");
    rb[static_cast<std::size_t>(id)] = line(a, "bias_resistor_ohm")["value"].get<double>();
  }

  // The CLI prints ± on a stored part, and says there is none for explicit parameters.
  auto cli = b.junco({"design", "bias-r", "--part", "WREN-2", "--supply", "5", "--current", "5mA"});
  INFO(cli.out << cli.err);
  CHECK(cli.status == 0);
  CHECK(cli.out.find("+- ") != std::string::npos);
  cli = b.junco({"design", "bias-r", "--is", "2.5n", "--n", "1.85", "--rs", "0.7", "--supply", "5", "--current", "5mA"});
  CHECK(cli.out.find("no uncertainty (explicit parameters)") != std::string::npos);
  CHECK(cli.out.find("+- ") == std::string::npos);

  // Lot worst case: the manual min/max over the per-part answers, and its part.
  const Json w = b.result("lot.design", {{"lot", "WREN-0912"}, {"calculator", "bias-r"}, {"inputs", inputs}});
  INFO(w.dump());
  CHECK(test::schema_problem(test::api_schema("lot.design")["result"], w) == "");
  CHECK(w["parts"] == 4);
  CHECK(w["corners"] == 1);
  std::size_t lo = 1, hi = 1;
  for (std::size_t k = 2; k <= 4; ++k) {
    lo = rb[k] < rb[lo] ? k : lo;
    hi = rb[k] > rb[hi] ? k : hi;
  }
  REQUIRE(lo != hi);  // the sim's lot has a spread
  const Json& r = line(w, "bias_resistor_ohm");
  CHECK(r["min"]["value"].get<double>() == Approx(rb[lo]).epsilon(1e-12));
  CHECK(r["max"]["value"].get<double>() == Approx(rb[hi]).epsilon(1e-12));
  CHECK(r["min"]["part_id"] == static_cast<long>(lo));
  CHECK(r["max"]["part"] == "WREN-" + std::to_string(hi));

  // With a supply tolerance the extremes sit at its corners: Rb rises with the supply.
  const Json t = b.result("lot.design", {{"lot", "WREN-0912"}, {"calculator", "bias-r"}, {"inputs", inputs}, {"supply_tol", 0.05}});
  CHECK(t["corners"] == 2);
  CHECK(line(t, "bias_resistor_ohm")["max"]["corner"]["supply_v"].get<double>() == Approx(5.25));
  CHECK(line(t, "bias_resistor_ohm")["min"]["corner"]["supply_v"].get<double>() == Approx(4.75));
  CHECK(line(t, "bias_resistor_ohm")["max"]["value"].get<double>() > rb[hi]);

  // The CLI: --worst-case over the lot names the extreme part.
  cli = b.junco({"design", "bias-r", "--lot", "WREN-0912", "--worst-case", "--supply", "5", "--current", "5mA"});
  INFO(cli.out << cli.err);
  CHECK(cli.status == 0);
  CHECK(cli.out.find("max") != std::string::npos);
  CHECK(cli.out.find("WREN-" + std::to_string(hi)) != std::string::npos);
  CHECK(cli.out.find("WREN-" + std::to_string(lo)) != std::string::npos);
  cli = b.junco({"design", "bias-r", "--lot", "WREN-0912", "--worst-case", "--supply", "5", "--current", "5mA", "--supply-tol", "80%"});
  CHECK(cli.status == 2);
  CHECK(cli.err.find("--supply-tol") != std::string::npos);
  // A bad input is refused naming it.
  const Json bad = b.client().request("lot.design", {{"lot", "WREN-0912"}, {"calculator", "bias-r"}, {"inputs", {{"supply_v", -1}}}});
  CHECK(bad["error"]["data"]["field"] == "inputs.supply_v");
}
