// Command lines of juncod and junco-sim (CLI11, issue 14): every option
// works as before, old spellings included (--config=FILE, --log-level
// warn); a bad one is one line on stderr naming it, exit 2; --help shows
// defaults and examples. Real processes. Exit statuses are the project's
// own convention (include/junco/exit_status.hpp); no outside source.
#include "tests/integration/daemon_api_test_support.hpp"
#include "tests/support/process.hpp"
#include "tests/support/sim_process.hpp"

#include <catch2/catch.hpp>

#include <fstream>
#include <sstream>

using junco::test::ChildOptions;
using junco::test::ChildProcess;
using junco::test::SimProcess;
using Json = nlohmann::json;
using namespace std::chrono_literals;

namespace {

struct Outcome {
  int code = -1;
  std::string out, err;
};

// Runs a program to its end; stdout and stderr captured.
Outcome run(const std::vector<std::string>& argv, const std::filesystem::path& dir) {
  ChildOptions o;
  o.stderr_path = (dir / "stderr.txt").string();
  ChildProcess p(argv, o);
  Outcome r;
  while (auto line = p.read_line(10s)) r.out += *line + "\n";
  r.code = p.wait(10s).value_or(-1);
  std::ifstream in(o.stderr_path);
  std::stringstream s;
  s << in.rdbuf();
  r.err = s.str();
  return r;
}

int lines(const std::string& text) { return static_cast<int>(std::count(text.begin(), text.end(), '\n')); }

const std::string kJuncod = std::string(JUNCO_BIN_DIR) + "/juncod";
const std::string kSim = std::string(JUNCO_BIN_DIR) + "/junco-sim";

}  // namespace

TEST_CASE("juncod: bad command lines are one line and exit 2; old spellings still work", "[args]") {
  const auto dir = junco::test::scratch_dir("args-juncod");
  SimProcess sim({"--settle-ms", "0"});
  Json bench = Json::object();
  for (const char* r : {"source", "meter", "scanner"}) bench[r] = {{"address", sim.endpoint(r)}, {"dialect", sim.family(r)}};
  const auto config = (dir / "bench.jsonc").string();
  std::ofstream(config) << Json{{"bench", bench},
                                {"fixture", {{"bias_resistor_ohm", 100.0}, {"slots", 8}}},
                                {"safety", {{"max_supply_v", 10.0}, {"current_limit_a", 0.05}, {"max_power_w", 0.25},
                                            {"max_reverse_v", 5.0}, {"max_job_s", 600.0}}},
                                {"paths", {{"database", (dir / "junco.db").string()}, {"socket", (dir / "run/juncod.sock").string()}}}}
                               .dump(2);

  struct Bad {
    std::vector<std::string> args;
    std::string says;
  };
  for (const Bad& b : std::vector<Bad>{{{"--bogus"}, "--bogus"},
                                       {{}, "--config FILE is required"},
                                       {{"--config", config, "--log-level", "loud"}, "'loud'"},
                                       {{"--config", config, "--restart-limit", "many"}, "--restart-limit: wants a whole number 0..100000, not 'many'"},
                                       {{"--config", config, "--restart-limit", "-3"}, "--restart-limit"},
                                       {{"--config"}, "--config"}}) {
    std::vector<std::string> argv{kJuncod};
    argv.insert(argv.end(), b.args.begin(), b.args.end());
    const Outcome r = run(argv, dir);
    INFO("juncod " << Catch::Detail::stringify(b.args) << " → " << r.code << ": " << r.err);
    CHECK(r.code == 2);
    CHECK(lines(r.err) == 1);
    CHECK_THAT(r.err, Catch::StartsWith("juncod: ") && Catch::Contains(b.says) && Catch::Contains("see juncod --help"));
    CHECK(r.out.empty());
  }

  // Spellings of before: --config=FILE, a level word, -h; --check-config with the others.
  const Outcome ok = run({kJuncod, "--config=" + config, "--check-config", "--log-level", "warn", "--restart-limit", "5", "--foreground"}, dir);
  INFO(ok.err);
  CHECK(ok.code == 0);
  CHECK_THAT(ok.out, Catch::StartsWith("config OK: " + config));
  CHECK(run({kJuncod, "--config", config, "--check-config", "--log-level=warning"}, dir).code == 0);  // syslog's word too

  const Outcome help = run({kJuncod, "-h"}, dir);
  CHECK(help.code == 0);
  CHECK_THAT(help.out, Catch::Contains("--restart-limit N [20]") && Catch::Contains("Examples:") &&
                           Catch::Contains("juncod --config bench.jsonc --check-config"));
  CHECK(help.out.find("--worker-ready-fd") == std::string::npos);  // internal, hidden
  std::filesystem::remove_all(dir);
}

TEST_CASE("junco-sim: bad command lines are one line and exit 2; every option still takes effect", "[args]") {
  const auto dir = junco::test::scratch_dir("args-sim");
  struct Bad {
    std::vector<std::string> args;
    std::string says;
  };
  for (const Bad& b : std::vector<Bad>{{{"--bogus"}, "--bogus"},
                                       {{"--slots", "0"}, "--slots: wants a whole number 1..256, not '0'"},
                                       {{"--settle-ms", "-1"}, "--settle-ms: wants a number >= 0, not '-1'"},
                                       {{"--seed", "x"}, "--seed: wants a whole number"},
                                       {{"--fault", "source:loud"}, "unknown mode 'loud'"},
                                       {{"--dialect", "source=nope"}, "'nope' is not a source dialect"},
                                       {{"--serial", "toaster"}, "unknown role 'toaster'"},
                                       {{"--config", (dir / "missing.json").string()}, "missing.json"}}) {
    std::vector<std::string> argv{kSim};
    argv.insert(argv.end(), b.args.begin(), b.args.end());
    const Outcome r = run(argv, dir);
    INFO("junco-sim " << Catch::Detail::stringify(b.args) << " → " << r.code << ": " << r.err);
    CHECK(r.code == 2);
    CHECK(lines(r.err) == 1);
    CHECK_THAT(r.err, Catch::StartsWith("junco-sim: ") && Catch::Contains(b.says));
    CHECK(r.out.empty());
  }

  // The config file first, the command line over it.
  std::ofstream(dir / "sim.json") << R"({"slots": 5, "seed": 3})";
  SimProcess sim({"--config", (dir / "sim.json").string(), "--slots", "3", "--settle-ms", "0", "--dialect=source=psu-compact",
                  "--dialect", "meter=dmm-prefixed", "--fault", "scanner:late:1"});
  CHECK(sim.family("source") == "psu-compact");
  CHECK(sim.family("meter") == "dmm-prefixed");
  CHECK(sim.family("scanner") == "scpi-switch");  // the default
  CHECK(sim.control("lot?")["parts"].size() == 3);  // --slots beat the file's 5

  const Outcome help = run({kSim, "--help"}, dir);
  CHECK(help.code == 0);
  CHECK_THAT(help.out, Catch::Contains("--slots N [8]") && Catch::Contains("scpi99") && Catch::Contains("Examples:") &&
                           Catch::Contains("Control endpoint") && Catch::Contains("--dialect ROLE=NAME"));
  CHECK_THAT(help.out, !Catch::Contains("--family"));  // the former spelling works, but is not taught
  std::filesystem::remove_all(dir);
}

TEST_CASE("junco-sim: former spellings (--family, families, fixture.rb_ohm ...) work with a warning naming the new one", "[args]") {
  // docs/names.md: the instrument's command file is a dialect; the fixture keys are the daemon config's.
  const auto dir = junco::test::scratch_dir("args-sim-renamed");
  std::ofstream(dir / "old.json") << R"({"families": {"meter": "dmm-prefixed"},
      "fixture": {"rb_ohm": 220, "return": "resistor", "return_ohm": 1000, "rg_ohm": 50, "rl_ohm": 50}})";
  ChildOptions o;
  o.stderr_path = (dir / "stderr.txt").string();
  {
    SimProcess sim({"--config", (dir / "old.json").string(), "--family", "source=psu-compact"}, o);
    CHECK(sim.family("source") == "psu-compact");
    CHECK(sim.family("meter") == "dmm-prefixed");
    CHECK(sim.ready()["dialects"] == sim.ready()["families"]);
  }
  std::ifstream in(o.stderr_path);
  std::stringstream err;
  err << in.rdbuf();
  INFO(err.str());
  for (const char* w : {"warning: --family is now spelled --dialect", "config key families is now spelled dialects",
                        "config key fixture.rb_ohm is now spelled fixture.bias_resistor_ohm",
                        "config key fixture.return_ohm is now spelled fixture.dc_return_ohm",
                        "config key fixture.rg_ohm is now spelled fixture.source_ohm",
                        "config key fixture.rl_ohm is now spelled fixture.load_ohm"})
    CHECK(err.str().find(w) != std::string::npos);
  // The old key is read as the new one: its value is checked under the new name;
  // both at once is refused, naming the one to keep.
  std::ofstream(dir / "bad.json") << R"({"fixture": {"rl_ohm": -5}})";
  Outcome r = run({kSim, "--config", (dir / "bad.json").string()}, dir);
  CHECK(r.code == 2);
  CHECK_THAT(r.err, Catch::Contains("fixture.load_ohm must be > 0"));
  std::ofstream(dir / "both.json") << R"({"fixture": {"rb_ohm": 100, "bias_resistor_ohm": 100}})";
  r = run({kSim, "--config", (dir / "both.json").string()}, dir);
  CHECK(r.code == 2);
  CHECK_THAT(r.err, Catch::Contains("give fixture.bias_resistor_ohm only (fixture.rb_ohm is its old name)"));
  std::filesystem::remove_all(dir);
}
