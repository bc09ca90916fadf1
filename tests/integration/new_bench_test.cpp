// A bench of an instrument family the shipped dialects were not written
// for: junco-sim's "scpi99" family answers *IDN? with its own maker and
// models, accepts the SCPI-99 command trees in long and short form
// (docs/references.md §5), and its meter has no range, integration-time or
// averaging commands (anything else answers -113). The config names only
// shipped generic dialects. The job must run to its end with a fit per part,
// and the parts must come out as the simulator made them.
//
// Also: a supply dialect without an in_current_limit query has its limit
// judged from its own current readings (drivers/dialects/template.json,
// current_limit_tolerance).
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <map>
#include <regex>
#include <sstream>

using namespace junco;
using Json = nlohmann::json;

namespace {

std::vector<std::string> no_heating(std::vector<std::string> more) {
  std::vector<std::string> args{"--settle-ms", "0", "--config", std::string(JUNCO_SOURCE_DIR) + "/tools/sim/no-heating.json"};
  args.insert(args.end(), more.begin(), more.end());
  return args;
}

std::string read_file(const std::filesystem::path& path) {
  std::ifstream in(path);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

}  // namespace

TEST_CASE("an unseen SCPI-99 bench runs a lot with the shipped generic dialects", "[daemon][dialects]") {
  test::BenchDaemonOptions o;
  o.roles = {"source", "meter", "scanner"};
  o.dialects = {{"source", "scpi-source"}, {"meter", "scpi-dmm"}, {"scanner", "scpi-switch"}};
  test::BenchDaemon b("new-bench", no_heating({"--family", "source=scpi99", "--family", "meter=scpi99", "--family", "scanner=scpi99"}), o);

  // The identities juncod found are the new family's, not the simulator's usual ones.
  const Json described = b.result("bench.describe", Json::object());
  for (const auto& inst : described["instruments"]) {
    INFO(inst.dump());
    CHECK(inst["identity"]["manufacturer"] == "Sim Bench Works");
  }

  const Json plan{{"lot", "MARSH-0301"},
                  {"parts", {{{"slot", 1}, {"label", "MH-01"}}, {{"slot", 2}, {"label", "MH-02"}}, {{"slot", 3}, {"label", "MH-03"}}}},
                  {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-5}, {"stop", 0.02}, {"count", 16}, {"settle_s", 0}}}};
  b.run_plan(plan);
  const Json truth = b.sim().control("lot?")["parts"];
  for (int part_id = 1; part_id <= 3; ++part_id) {
    const Json fit = b.result("part.fit", {{"part_id", part_id}});
    const Json& t = truth[part_id - 1];
    INFO("part " << part_id << ": " << fit.dump().substr(0, 400) << "\ntruth " << t.dump());
    REQUIRE(fit["status"] == "converged");
    // The simulator's own part (tools/sim/part.cpp) is the truth, no heating;
    // within 3 standard errors or 2 % (our bound, no source: the new family's
    // supply reads back with 100 µV / 1 µA resolution).
    const auto near = [](const Json& fitted, double truth_value, double rel) {
      const double v = fitted["value"].get<double>(), se = fitted["std_error"].get<double>();
      return std::fabs(v - truth_value) <= std::max(3 * se, rel * std::fabs(truth_value));
    };
    CHECK(near(fit["n"], t["n"].get<double>(), 0.02));
    CHECK(near(fit["rs_ohm"], t["rs_ohm"].get<double>(), 0.05));
  }
  // The meter was never sent a command it does not know: no -113 in the log.
  const std::string log = read_file(b.dir() / "juncod.log");
  CHECK(log.find("-113") == std::string::npos);
}

TEST_CASE("a supply without a limit query is judged current-limited from its own readings", "[daemon][dialects]") {
  // A copy of the generic supply dialect with its in_current_limit removed.
  std::string text = read_file(std::string(JUNCO_SOURCE_DIR) + "/drivers/dialects/scpi-source.json");
  text = std::regex_replace(text, std::regex(R"(,\s*//[^\n]*\n\s*"in_current_limit"[^\n]*\n)"), "\n");
  REQUIRE(text.find("in_current_limit\"") == std::string::npos);
  const auto dialect = std::filesystem::temp_directory_path() / ("junco-no-limit-query-" + std::to_string(::getpid()) + ".json");
  std::ofstream(dialect) << text;

  test::BenchDaemonOptions o;
  o.roles = {"source", "meter", "scanner"};
  o.dialects = {{"source", dialect.string()}};
  test::BenchDaemon b("no-limit-query", no_heating({}), o);
  // 0..3 V through 100 Ω into the diode wants ~23 mA at the top; the
  // compliance of 5 mA cuts in part-way up the sweep.
  const Json plan{{"lot", "MARSH-0302"},
                  {"parts", {{{"slot", 1}, {"label", "MH-11"}}}},
                  {"sweep", {{"mode", "voltage"}, {"spacing", "linear"}, {"start", 0.0}, {"stop", 3.0}, {"count", 31}, {"settle_s", 0},
                             {"compliance_a", 0.005}}}};
  b.run_plan(plan);
  const Json points = b.result("part.readings", {{"part_id", 1}})["points"];
  int limited = 0, last_unlimited_seq = -1, first_limited_seq = -1;
  for (const auto& p : points) {
    if (p["kind"] != "dc") continue;
    if (p["flags"].get<int>() & 1) {  // flag_current_limit (daemon/store.hpp)
      ++limited;
      if (first_limited_seq < 0) first_limited_seq = p["seq"];
      CHECK(p["i_a"].get<double>() >= 0.98 * 0.005);
    } else {
      last_unlimited_seq = p["seq"];
      CHECK(p["i_a"].get<double>() < 0.98 * 0.005);
    }
  }
  INFO(points.dump().substr(0, 2000));
  CHECK(limited == 1);  // the sweep stops going up at the first limited reading
  CHECK(first_limited_seq > last_unlimited_seq);
  CHECK(last_unlimited_seq >= 5);  // the unlimited part of the sweep was measured
  std::filesystem::remove(dialect);
}

TEST_CASE("a dry run says what a plan would do and queues nothing", "[daemon][plan]") {
  test::BenchDaemonOptions o;
  o.roles = {"source", "meter", "scanner"};
  test::BenchDaemon b("dry-run", no_heating({}), o);
  // Fixture 100 Ω (BenchDaemonOptions), safety: 10 V, 50 mA, 0.1 W, 5 V reverse.
  const Json plan{{"lot", "MARSH-0303"},
                  {"parts", {{{"slot", 1}, {"label", "MH-21"}}, {{"slot", 2}, {"label", "MH-22"}}}},
                  {"sweep", {{"mode", "voltage"}, {"spacing", "linear"}, {"start", 0.0}, {"stop", 4.0}, {"count", 41}, {"settle_s", 0.5},
                             {"compliance_a", 0.02}}},
                  {"reverse_v", {1, 5}}};
  const Json r = b.result("plan.check", {{"plan", plan}});
  INFO(r.dump(2));
  CHECK(test::schema_problem(test::api_schema("plan.check")["result"], r) == "");
  CHECK(r["points_per_part"] == 43);  // 41 forward + 2 reverse readings
  CHECK(r["points_total"] == 86);
  CHECK(r["min_duration_s"].get<double>() == Approx(2 * 43 * 0.5));  // settle times alone
  CHECK(r["duration_s"].get<double>() > r["min_duration_s"].get<double>());
  // 4 V over 100 Ω would drive 40 mA: the 20 mA compliance stops the sweep.
  CHECK(r["peak"]["current_a"].get<double>() == Approx(0.02));
  CHECK(r["peak"]["supply_v"].get<double>() == Approx(4.0));
  CHECK(r["peak"]["power_w"].get<double>() == Approx(1.5 * 0.02));  // vf_max_v default 1.5 V
  CHECK(r["peak"]["reverse_v"].get<double>() == Approx(5.0));
  std::map<std::string, Json> limits;
  for (const auto& l : r["limits"]) limits[l["limit"]] = l;
  CHECK(limits.at("current_limit_a")["binds"] == true);
  CHECK(limits.at("max_reverse_v")["binds"] == true);
  CHECK(limits.at("max_supply_v")["binds"] == false);
  CHECK(limits.at("max_power_w")["binds"] == false);
  CHECK(b.result("job.list", Json::object())["jobs"].empty());  // nothing queued

  // The same refusal as a submit, with the limit named.
  Json too_high = plan;
  too_high["sweep"]["stop"] = 12.0;
  const Json refused = b.client().request("plan.check", {{"plan", too_high}});
  CHECK(refused["error"]["code"] == -32002);
  CHECK(refused["error"]["data"]["limit"] == "max_supply_v");

  // And from the CLI.
  std::ofstream(b.dir() / "plan.jsonc") << plan.dump(2);
  const auto cli = b.junco({"submit", (b.dir() / "plan.jsonc").string(), "--dry-run"});
  INFO(cli.out << cli.err);
  CHECK(cli.status == 0);
  CHECK(cli.out.find("2 part(s) x 43 readings = 86 readings") != std::string::npos);
  CHECK(cli.out.find("BINDS: the supply's compliance") != std::string::npos);
  CHECK(cli.out.find("nothing queued (dry run)") != std::string::npos);
  CHECK(b.result("job.list", Json::object())["jobs"].empty());
}
