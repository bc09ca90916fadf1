// `juncod --check-config` reports every problem of a config in one run and
// touches nothing (daemon/config_check.hpp). Each case breaks one thing in a
// good config; one config breaks many at once.
#include "tests/support/cli_run.hpp"

#include <catch2/catch.hpp>

#include <nlohmann/json.hpp>
#include <sys/stat.h>

#include <filesystem>
#include <fstream>
#include <string>

using Json = nlohmann::json;
namespace fs = std::filesystem;

namespace {

junco::test::CliRun check(const fs::path& config) {
  return junco::test::run_shell(std::string(JUNCO_BIN_DIR) + "/juncod --config '" + config.string() + "' --check-config");
}

Json good_config(const junco::test::ScratchDir& dir) {
  return {{"bench",
           {{"source", {{"address", "tcp:127.0.0.1:5025"}, {"dialect", "scpi-source"}}},
            {"meter", {{"address", "TCPIP0::127.0.0.1::5026::SOCKET"}, {"dialect", "scpi-dmm"}}},
            {"scanner", {{"address", "ASRL/dev/ttyUSB0::INSTR"}, {"dialect", "scpi-switch"}}}}},
          {"fixture", {{"bias_resistor_ohm", 100}, {"slots", 8}}},
          {"safety", {{"max_supply_v", 10}, {"current_limit_a", 0.05}, {"max_power_w", 0.1}, {"max_reverse_v", 5}, {"max_job_s", 3600}}},
          {"paths", {{"database", dir.file("data/junco.db")}, {"socket", dir.file("run/juncod.sock")}}}};
}

fs::path write(const junco::test::ScratchDir& dir, const Json& config) {
  const fs::path p = dir.path / "bench.jsonc";
  std::ofstream(p) << "// check-config test\n" << config.dump(2);
  return p;
}

}  // namespace

TEST_CASE("a good config passes and nothing is created", "[daemon][check-config]") {
  junco::test::ScratchDir dir("junco-check");
  fs::create_directory(dir.path / "data");
  const auto r = check(write(dir, good_config(dir)));
  INFO(r.out);
  CHECK(r.status == 0);
  CHECK(r.out.find("config OK") != std::string::npos);
  CHECK_FALSE(fs::exists(dir.path / "run"));             // the socket directory is not made by a check
  CHECK_FALSE(fs::exists(dir.path / "data/junco.db"));  // nor the database
}

TEST_CASE("every problem of a config is reported in one run", "[daemon][check-config]") {
  junco::test::ScratchDir dir("junco-check");
  Json c = good_config(dir);
  c["bench"]["source"]["address"] = "tcp:127.0.0.1:99999";                      // 1 bad port
  c["bench"]["meter"]["dialect"] = "scpi-switch";                               // 2 wrong role
  c["bench"]["scanner"]["dialect"] = "no-such-dialect";                         // 3 not found
  c["bench"]["siggen"] = {{"address", "GPIB0::22::INSTR"}, {"dialect", "scpi-gen"}};  // 4 unsupported interface
  c["fixture"]["slots"] = 0;                                                    // 5 out of range
  c["safety"].erase("max_job_s");                                               // 6 missing
  c["server"] = {{"idle_timeout_s", -1}};                                       // 7 negative
  // 8: the data directory does not exist (never created silently)
  const auto r = check(write(dir, c));
  INFO(r.out);
  CHECK(r.status == 2);
  CHECK(r.out.find("/bench/source/address: bad instrument address 'tcp:127.0.0.1:99999': port must be 1..65535") != std::string::npos);
  CHECK(r.out.find("/bench/meter/dialect:") != std::string::npos);
  CHECK(r.out.find("is for role scanner, not meter") != std::string::npos);
  CHECK(r.out.find("/bench/scanner/dialect: dialect \"no-such-dialect\" not found") != std::string::npos);
  CHECK(r.out.find("/bench/siggen/address:") != std::string::npos);
  CHECK(r.out.find("GPIB resources are not supported") != std::string::npos);
  CHECK(r.out.find("/fixture/slots: must be in 1..256, got 0") != std::string::npos);
  CHECK(r.out.find("/safety/max_job_s: missing (required)") != std::string::npos);
  CHECK(r.out.find("/server/idle_timeout_s:") != std::string::npos);
  CHECK(r.out.find("database: directory " + dir.file("data") + " does not exist") != std::string::npos);
  CHECK(r.out.find("9 problem(s)") == std::string::npos);
  CHECK(r.out.find("8 problem(s)") != std::string::npos);
  CHECK_FALSE(fs::exists(dir.path / "data"));
}

TEST_CASE("the socket's directory and path are checked as the server would", "[daemon][check-config]") {
  junco::test::ScratchDir dir("junco-check");
  fs::create_directory(dir.path / "data");
  Json c = good_config(dir);
  fs::create_directory(dir.path / "open");
  ::chmod((dir.path / "open").c_str(), 0777);
  c["paths"]["socket"] = dir.file("open/juncod.sock");
  auto r = check(write(dir, c));
  INFO(r.out);
  CHECK(r.status == 2);
  CHECK(r.out.find("mode 0777 lets every user in; make it 0750") != std::string::npos);

  c["paths"]["socket"] = dir.file(std::string(120, 's') + "/juncod.sock");
  r = check(write(dir, c));
  CHECK(r.status == 2);
  CHECK(r.out.find("the limit for a Unix socket is 107") != std::string::npos);
}

TEST_CASE("current read by the meter needs a meter dialect that reads current", "[daemon][check-config]") {
  junco::test::ScratchDir dir("junco-check");
  fs::create_directory(dir.path / "data");
  Json c = good_config(dir);
  std::ofstream(dir.path / "volts-only.json") << R"({"dialect": "volts-only", "role": "meter",
    "operations": {"measure_dc_voltage": {"query": "MEAS:VOLT:DC?", "reply": {"type": "number"}}}})";
  c["bench"]["meter"]["dialect"] = dir.file("volts-only.json");
  CHECK(check(write(dir, c)).status == 0);  // current from the source (the default): fine
  c["fixture"]["current_from"] = "meter";
  const auto r = check(write(dir, c));
  INFO(r.out);
  CHECK(r.status == 2);
  CHECK(r.out.find("has no measure_dc_current, but fixture.current_from is \"meter\"") != std::string::npos);
}

TEST_CASE("limits that look like a unit slip are warned about", "[daemon][check-config]") {
  junco::test::ScratchDir dir("junco-check");
  fs::create_directory(dir.path / "data");
  Json c = good_config(dir);
  c["safety"]["current_limit_a"] = 50;  // meant 50 mA
  const auto r = check(write(dir, c));
  INFO(r.out);
  CHECK(r.status == 0);
  CHECK(r.out.find("warning:") != std::string::npos);
  CHECK(r.out.find("/safety/current_limit_a:") != std::string::npos);
}
