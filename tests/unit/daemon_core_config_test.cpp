// Config loading: every refusal names the file, the JSON pointer and the problem.
#include "daemon/config.hpp"

#include <catch2/catch.hpp>

#include <cstdlib>
#include <filesystem>
#include <fstream>

using namespace junco::daemon;
namespace fs = std::filesystem;

namespace {

const char* kGood = R"({
  // comments are allowed
  "bench": {
    "source":  {"address": "tcp:127.0.0.1:5025", "dialect": "scpi-source"},
    "meter":   {"address": "tcp:127.0.0.1:5026", "dialect": "scpi-dmm", "reply_timeout_ms": 500},
    "scanner": {"address": "tcp:127.0.0.1:5027", "dialect": "scpi-switch"}
  },
  "fixture": {"bias_resistor_ohm": 100, "slots": 8, "current_from": "meter"},
  "safety": {"max_supply_v": 10, "current_limit_a": 0.1, "max_power_w": 0.25, "max_reverse_v": 5, "max_job_s": 3600},
  "paths": {"database": "data/junco.db", "socket": "/tmp/junco-test.sock"}
})";

std::string message_of(const std::string& text) {
  try {
    parse_config(text, "/etc/junco/bench.jsonc");
  } catch (const ConfigError& e) {
    return e.what();
  }
  return "(accepted)";
}

std::string with(std::string text, const std::string& from, const std::string& to) {
  const auto pos = text.find(from);
  REQUIRE(pos != std::string::npos);
  return text.replace(pos, from.size(), to);
}

}  // namespace

TEST_CASE("a good config loads, with paths resolved against the config's directory") {
  const Config c = parse_config(kGood, "/etc/junco/bench.jsonc");
  CHECK(c.bench.size() == 3);
  CHECK(c.instrument("meter")->reply_timeout_ms == 500);
  CHECK(c.instrument("source")->dialect_path.filename() == "scpi-source.json");
  CHECK(fs::exists(c.instrument("source")->dialect_path));
  CHECK(c.fixture.bias_resistor_ohm == 100);
  CHECK(c.fixture.current_from == CurrentFrom::meter);
  CHECK(c.safety.max_power_w == 0.25);
  CHECK(c.paths.database == fs::path("/etc/junco/data/junco.db"));
  CHECK(c.paths.socket == fs::path("/tmp/junco-test.sock"));
  CHECK(c.instrument("siggen") == nullptr);
}

TEST_CASE("config errors name file, pointer and problem exactly") {
  CHECK(message_of("{ \"bench\": ") .rfind("/etc/junco/bench.jsonc: /: not valid JSON: ", 0) == 0);
  CHECK(message_of("[]") == "/etc/junco/bench.jsonc: /: must be an object, not array");
  CHECK(message_of(with(kGood, "\"max_supply_v\": 10", "\"max_supply_v\": \"10\"")) ==
        "/etc/junco/bench.jsonc: /safety/max_supply_v: must be a number, not string");
  CHECK(message_of(with(kGood, "\"max_power_w\": 0.25, ", "")) == "/etc/junco/bench.jsonc: /safety/max_power_w: missing (required)");
  CHECK(message_of(with(kGood, "\"current_limit_a\": 0.1", "\"current_limit_a\": -1")) ==
        "/etc/junco/bench.jsonc: /safety/current_limit_a: must be > 0, got -1");
  CHECK(message_of(with(kGood, "\"max_reverse_v\": 5", "\"max_reverse_v\": 20")) ==
        "/etc/junco/bench.jsonc: /safety/max_reverse_v: must not exceed max_supply_v = 10 V, got 20 V");
  CHECK(message_of(with(kGood, "\"slots\": 8", "\"slots\": 0")) == "/etc/junco/bench.jsonc: /fixture/slots: must be in 1..256, got 0");
  CHECK(message_of(with(kGood, "\"current_from\": \"meter\"", "\"current_from\": \"probe\"")) ==
        "/etc/junco/bench.jsonc: /fixture/current_from: must be \"source\" or \"meter\", got \"probe\"");
  CHECK(message_of(with(kGood, "\"dialect\": \"scpi-dmm\"", "\"dialect\": \"no-such-meter\"")) ==
        "/etc/junco/bench.jsonc: /bench/meter/dialect: dialect \"no-such-meter\" not found");
  CHECK(message_of(with(kGood, "\"address\": \"tcp:127.0.0.1:5027\", ", "")) ==
        "/etc/junco/bench.jsonc: /bench/scanner/address: missing (required)");
  CHECK(message_of(with(kGood, "\"max_supply_v\"", "\"max_suply_v\"")) == "/etc/junco/bench.jsonc: /safety/max_suply_v: unknown key");
  CHECK(message_of(with(kGood, "\"source\":  {", "\"psu\": {")) ==
        "/etc/junco/bench.jsonc: /bench/psu: unknown role (expected source, meter, scanner, siggen, levelmeter, chamber or vectormeter)");
  CHECK(message_of(with(kGood, "\"meter\":   {\"address\": \"tcp:127.0.0.1:5026\", \"dialect\": \"scpi-dmm\", \"reply_timeout_ms\": 500},", "")) ==
        "/etc/junco/bench.jsonc: /bench/meter: missing (required)");
}

TEST_CASE("dialects: relative file paths resolve against the config directory; a missing file is an error") {
  const fs::path dir = fs::temp_directory_path() / ("junco-cfg-" + std::to_string(::getpid()));
  fs::create_directories(dir / "dialects");
  fs::copy_file(fs::path(JUNCO_SOURCE_DIR) / "drivers/dialects/scpi-source.json", dir / "dialects/my-psu.json",
                fs::copy_options::overwrite_existing);
  {
    std::ofstream(dir / "bench.jsonc") << with(kGood, "\"dialect\": \"scpi-source\"", "\"dialect\": \"dialects/my-psu.json\"");
  }
  const Config c = load_config(dir / "bench.jsonc");
  CHECK(c.instrument("source")->dialect_path == dir / "dialects/my-psu.json");
  CHECK(c.paths.database == dir / "data/junco.db");
  try {
    load_config(dir / "missing.jsonc");
    FAIL("accepted a missing file");
  } catch (const ConfigError& e) {
    CHECK(std::string(e.what()) == (dir / "missing.jsonc").string() + ": /: cannot read the file");
  }
  fs::remove_all(dir);
}

TEST_CASE("default paths follow XDG for a normal user") {
  if (::geteuid() == 0) {
    const auto p = default_paths();
    CHECK(p.database == fs::path("/var/lib/junco/junco.db"));
    CHECK(p.socket == fs::path("/run/junco/juncod.sock"));
  } else {
    ::setenv("XDG_STATE_HOME", "/tmp/xdg-state", 1);
    ::setenv("XDG_RUNTIME_DIR", "/tmp/xdg-run", 1);
    const auto p = default_paths();
    CHECK(p.database == fs::path("/tmp/xdg-state/junco/junco.db"));
    CHECK(p.socket == fs::path("/tmp/xdg-run/junco/juncod.sock"));
  }
}

TEST_CASE("the shipped example config loads") {
  const Config c = load_config(fs::path(JUNCO_SOURCE_DIR) / "tools/examples/bench.jsonc");
  CHECK(c.bench.size() == 5);
  CHECK(c.paths.socket_group == "junco");
}

TEST_CASE("the bench's accuracy: optional, defaults from the fit, each term checked") {
  const junco::fitting::AccuracyModel defaults;
  const Config plain = parse_config(kGood, "/etc/junco/bench.jsonc");
  CHECK(plain.accuracy.i_abs_a == defaults.i_abs_a);
  CHECK(plain.accuracy.v_rel == defaults.v_rel);
  const std::string declared =
      with(kGood, "\"paths\":", "\"accuracy\": {\"v_rel\": 1e-5, \"v_abs_v\": 5e-6, \"i_abs_a\": 3.5e-7},\n  \"paths\":");
  const Config c = parse_config(declared, "/etc/junco/bench.jsonc");
  CHECK(c.accuracy.v_rel == 1e-5);
  CHECK(c.accuracy.v_abs_v == 5e-6);
  CHECK(c.accuracy.i_abs_a == 3.5e-7);
  CHECK(c.accuracy.i_rel == defaults.i_rel);  // not given: the default
  CHECK(message_of(with(declared, "\"v_rel\": 1e-5", "\"v_rel\": -1")) == "/etc/junco/bench.jsonc: /accuracy/v_rel: must be >= 0, got -1");
  CHECK(message_of(with(declared, "\"i_abs_a\": 3.5e-7", "\"i_abs_a\": 0")) ==
        "/etc/junco/bench.jsonc: /accuracy/i_abs_a: must be > 0 (the current reading's offset term)");
  CHECK(message_of(with(declared, "\"v_rel\"", "\"v_relative\"")) == "/etc/junco/bench.jsonc: /accuracy/v_relative: unknown key");
}

TEST_CASE("the socket's idle timeout: 10 min by default, 0 = never, bounded") {
  CHECK(parse_config(kGood, "/etc/junco/bench.jsonc").server.idle_timeout_s == 600.0);
  const auto server = [](const std::string& body) { return with(kGood, "\"paths\":", "\"server\": " + body + ",\n  \"paths\":"); };
  CHECK(parse_config(server(R"({"idle_timeout_s": 0})"), "/etc/junco/bench.jsonc").server.idle_timeout_s == 0.0);
  CHECK(parse_config(server(R"({"idle_timeout_s": 2.5})"), "/etc/junco/bench.jsonc").server.idle_timeout_s == 2.5);
  CHECK(parse_config(server("{}"), "/etc/junco/bench.jsonc").server.idle_timeout_s == 600.0);
  CHECK(message_of(server(R"({"idle_timeout_s": -1})")) == "/etc/junco/bench.jsonc: /server/idle_timeout_s: must be >= 0, got -1");
  CHECK(message_of(server(R"({"idle_timeout_s": 1e9})")) ==
        "/etc/junco/bench.jsonc: /server/idle_timeout_s: must be at most 86400 (a day; 0 = never)");
  CHECK(message_of(server(R"({"idle_timeout": 5})")) == "/etc/junco/bench.jsonc: /server/idle_timeout: unknown key");
  CHECK(message_of(server("5")) == "/etc/junco/bench.jsonc: /server: must be an object, not number");
}

TEST_CASE("the fixture's stray capacitance: optional, in farads, bounded") {
  CHECK(parse_config(kGood, "/etc/junco/bench.jsonc").fixture.stray_c_f == 0.0);
  const std::string with_stray = with(kGood, "\"slots\": 8", "\"slots\": 8, \"stray_c_f\": 0.2e-12");
  CHECK(parse_config(with_stray, "/etc/junco/bench.jsonc").fixture.stray_c_f == 0.2e-12);
  CHECK(message_of(with(kGood, "\"slots\": 8", "\"slots\": 8, \"stray_c_f\": -1e-12")) ==
        "/etc/junco/bench.jsonc: /fixture/stray_c_f: must be >= 0, got -1e-12");
  CHECK(message_of(with(kGood, "\"slots\": 8", "\"slots\": 8, \"stray_c_f\": 0.2")) ==
        "/etc/junco/bench.jsonc: /fixture/stray_c_f: must be at most 1e-9 F (a fixture's stray is pF; is the unit farads?)");
}

TEST_CASE("a config nested deeper than 64 levels or over 4 MiB is refused by name, never built") {
  // 10^5 levels: before the limit the copy into Config::raw recursed per level
  // and overflowed the stack (issue 10); now the parse stops at level 65.
  const std::string deep = with(kGood, R"("paths": {)", R"("x": )" + std::string(100000, '[') + std::string(100000, ']') + R"(, "paths": {)");
  CHECK(message_of(deep) == "/etc/junco/bench.jsonc: /: the config nested deeper than 64 levels");
  // 63 levels below the top-level object: within the limit, refused only as an unknown key.
  const std::string ok_depth = with(kGood, R"("paths": {)", R"("x": )" + std::string(63, '[') + std::string(63, ']') + R"(, "paths": {)");
  CHECK(message_of(ok_depth) == "/etc/junco/bench.jsonc: /x: unknown key");
  CHECK(message_of(std::string(4u << 20, ' ') + kGood) == "/etc/junco/bench.jsonc: /: the config larger than the limit of 4194304 bytes");
  // The file reader refuses before reading it all.
  const fs::path big = fs::temp_directory_path() / "junco-config-too-big.jsonc";
  {
    std::ofstream out(big);
    out << std::string((4u << 20) + 1, ' ');
  }
  try {
    load_config(big);
    FAIL("accepted");
  } catch (const ConfigError& e) {
    CHECK(std::string(e.what()) == big.string() + ": /: the config is larger than the limit of 4194304 bytes");
  }
  fs::remove(big);
}

TEST_CASE("job limits: optional, with defaults, each checked") {
  const Config d = parse_config(kGood, "/etc/junco/bench.jsonc");
  CHECK(d.limits.max_points_per_job == 1000000);
  CHECK(d.limits.max_plan_memory_bytes == 64.0 * 1024 * 1024);
  const std::string lim = with(kGood, R"("paths": {)", R"("limits": {"max_points_per_job": 5000, "max_plan_memory_bytes": 1e6}, "paths": {)");
  const Config c = parse_config(lim, "/etc/junco/bench.jsonc");
  CHECK(c.limits.max_points_per_job == 5000);
  CHECK(c.limits.max_plan_memory_bytes == 1e6);
  CHECK(message_of(with(kGood, R"("paths": {)", R"("limits": {"max_points_per_job": 0}, "paths": {)")) ==
        "/etc/junco/bench.jsonc: /limits/max_points_per_job: must be in 1..1000000000, got 0");
  CHECK(message_of(with(kGood, R"("paths": {)", R"("limits": {"max_points_per_job": 1.5}, "paths": {)")) ==
        "/etc/junco/bench.jsonc: /limits/max_points_per_job: must be an integer, not number");
  CHECK(message_of(with(kGood, R"("paths": {)", R"("limits": {"max_plan_memory_bytes": -1}, "paths": {)")) ==
        "/etc/junco/bench.jsonc: /limits/max_plan_memory_bytes: must be > 0, got -1");
  CHECK(message_of(with(kGood, R"("paths": {)", R"("limits": {"max_plan_mb": 1}, "paths": {)")) ==
        "/etc/junco/bench.jsonc: /limits/max_plan_mb: unknown key");
}

TEST_CASE("an AC instrument's amplitude unit and dBm impedance come from the config, named when wrong") {
  const std::string ac = with(kGood, R"("scanner": {)",
                              R"("siggen": {"address": "tcp:127.0.0.1:5028", "dialect": "scpi-gen", "amplitude_unit": "dbm", "impedance_ohm": 50},
    "levelmeter": {"address": "tcp:127.0.0.1:5029", "dialect": "scpi-acv", "amplitude_unit": "vrms"},
    "scanner": {)");
  const Config c = parse_config(ac, "/etc/junco/bench.jsonc");
  REQUIRE(c.instrument("siggen")->amplitude_unit);
  CHECK(*c.instrument("siggen")->amplitude_unit == junco::drivers::LevelUnit::dbm);
  CHECK(c.instrument("siggen")->impedance_ohm == 50.0);
  CHECK(*c.instrument("levelmeter")->amplitude_unit == junco::drivers::LevelUnit::vrms);
  CHECK_FALSE(c.instrument("source")->amplitude_unit);  // default: the dialect's
  CHECK(message_of(with(ac, R"("amplitude_unit": "dbm")", R"("amplitude_unit": "dBm")")) ==
        "/etc/junco/bench.jsonc: /bench/siggen/amplitude_unit: unknown unit \"dBm\" (known: vpp, vrms, dbm)");
  CHECK(message_of(with(ac, R"("impedance_ohm": 50)", R"("impedance_ohm": 0)")).rfind("/etc/junco/bench.jsonc: /bench/siggen/impedance_ohm: ", 0) == 0);
  CHECK(message_of(with(kGood, R"("dialect": "scpi-source")", R"("dialect": "scpi-source", "amplitude_unit": "vpp")")) ==
        "/etc/junco/bench.jsonc: /bench/source/amplitude_unit: only siggen and levelmeter take an amplitude unit");
}
