// junco's command line as real processes: values with units everywhere
// (units/si_text.hpp), old option spellings accepted with a warning naming the
// new one, one set of exit statuses (tools/junco/command.hpp), help generated
// from the option definitions.
#include "tests/support/cli_run.hpp"

#include <catch2/catch.hpp>

#include <string>

using junco::test::run_junco;
using junco::test::ScratchDir;

namespace {

const std::string examples = std::string(JUNCO_SOURCE_DIR) + "/tools/examples/";

}  // namespace

TEST_CASE("export stats takes --match-current 1mA (it used to fail with 'stod')", "[cli]") {
  ScratchDir d;
  const std::string a = d.file("k17.json"), b = d.file("k31.json");
  REQUIRE(run_junco("fit " + examples + "kestrel24b_k24b017.csv --model-out " + a + " --label K17 --lot KESTREL-24B").status == 0);
  REQUIRE(run_junco("fit " + examples + "kestrel24b_k24b031_glitch.csv --model-out " + b + " --label K31 --lot KESTREL-24B").status == 0);
  // Vf(1 mA) of the two fitted parts differ by about 2.7 mV (both near 0.627 V), so
  // a 50 mV window pairs them and a 1 mV window does not.
  const auto wide = run_junco("export stats " + a + " " + b + " --match-current 1mA --match-tol 50mV");
  CHECK(wide.status == 0);
  CHECK(wide.out.find("matched sets (Vf at 1 mA within 50 mV):\n    K17 K31") != std::string::npos);
  const auto narrow = run_junco("export stats " + a + " " + b + " --match-current 1e-3 --match-tol 1m");
  CHECK(narrow.status == 0);
  CHECK(narrow.out.find("matched sets (Vf at 1 mA within 1 mV): none") != std::string::npos);
  const auto bad = run_junco("export stats " + a + " --match-current 1mV");
  CHECK(bad.status == 2);
  CHECK(bad.out.find("junco export: --match-current: '1mV': unknown suffix 'mV'") != std::string::npos);
}

TEST_CASE("renamed spellings: the old one works and names the new one", "[cli]") {
  const std::string part = "design bias-r --is 1n --n 1 --rs 1 --supply 5 --current 1mA ";
  const auto now = run_junco(part + "--temp-c 50");
  const auto old = run_junco(part + "--temp 50");
  REQUIRE(now.status == 0);
  REQUIRE(old.status == 0);
  CHECK(now.out.find("warning") == std::string::npos);
  CHECK(old.out.find("junco design: warning: --temp is now spelled --temp-c") != std::string::npos);
  // Same answer once the warning line is taken away.
  CHECK(old.out.substr(old.out.find('\n') + 1) == now.out);
  CHECK(now.out.find("at 50.00 degC") != std::string::npos);
}

TEST_CASE("one set of exit statuses and generated help", "[cli]") {
  const auto version = run_junco("--version");
  CHECK(version.status == 0);
  CHECK(version.out.rfind("junco ", 0) == 0);
  CHECK(run_junco("no-such-command").status == 2);
  CHECK(run_junco("").status == 2);
  const auto help = run_junco("export --help");
  CHECK(help.status == 0);
  for (const char* opt : {"--match-current", "--match-tol", "--set-size", "--out", "--name", "exit status", "examples:"})
    CHECK(help.out.find(opt) != std::string::npos);
  CHECK(run_junco("export stats --set-size 1 x.json").status == 2);
  const auto plot = run_junco("plot ac --readings x.csv --model y.json --out z.svg --rl 5x");
  CHECK(plot.status == 2);
  const auto fit = run_junco("fit " + examples + "kestrel24b_k24b017.csv --rl 5x");
  CHECK(fit.status == 2);
  CHECK(fit.out.find("--rl: '5x': unknown suffix 'x'") != std::string::npos);
}
