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
