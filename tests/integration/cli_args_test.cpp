// junco's command line as real processes: values with units everywhere
// (units/si_text.hpp), old option spellings accepted with a warning naming the
// new one, one set of exit statuses (tools/junco/command.hpp), help generated
// from the option definitions.
#include "tests/support/cli_run.hpp"

#include <catch2/catch.hpp>

#include <fstream>
#include <string>
#include <vector>

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
  const auto plot = run_junco("plot ac --readings x.csv --model y.json --out z.svg --load 5x");
  CHECK(plot.status == 2);
  const auto fit = run_junco("fit " + examples + "kestrel24b_k24b017.csv --load 5x");
  CHECK(fit.status == 2);
  CHECK(fit.out.find("--load: '5x': unknown suffix 'x'") != std::string::npos);
}

TEST_CASE("the fixture resistors' old option names work and name the new ones", "[cli]") {
  // docs/names.md: Rb is --bias-resistor (bias_resistor_ohm), Rr --dc-return (dc_return_ohm).
  const std::string part = "design op --is 1n --n 1 --rs 1 --supply 5 ";
  const auto now = run_junco(part + "--bias-resistor 470 --dc-return 10");
  const auto old = run_junco(part + "--rbias 470 --rreturn=10");
  REQUIRE(now.status == 0);
  REQUIRE(old.status == 0);
  CHECK(now.out.find("warning") == std::string::npos);
  CHECK(old.out.find("junco design: warning: --rbias is now spelled --bias-resistor") != std::string::npos);
  CHECK(old.out.find("junco design: warning: --rreturn is now spelled --dc-return") != std::string::npos);
  CHECK(old.out.substr(old.out.find("assumed")) == now.out.substr(now.out.find("assumed")));
  CHECK(now.out.find("DC return        10 ohm") != std::string::npos);
  const auto fit_old = run_junco("fit " + examples + "kestrel24b_k24b017.csv --rreturn 1k");
  CHECK(fit_old.status == 0);
  CHECK(fit_old.out.find("junco fit: warning: --rreturn is now spelled --dc-return") != std::string::npos);
  CHECK(run_junco("fit " + examples + "kestrel24b_k24b017.csv --dc-return 0").status == 2);
}

TEST_CASE("submit, watch, transfer, bench, lab: CLI11 help, one-line errors, the old forms still parse", "[cli]") {
  ScratchDir d;
  const std::string nowhere = d.file("no-daemon.sock");
  std::ofstream(d.file("plan.jsonc")) << "{ // a plan, read before the daemon is asked\n}\n";
  struct Help {
    const char* command;
    std::vector<const char*> want;
  };
  const std::vector<Help> helps{{"submit", {"PLAN", "--dry-run", "--watch", "--socket", "exit status"}},
                                {"watch", {"JOB", "--socket", "exit status"}},
                                {"transfer", {"PART", "--run", "--sigma", "--cj", "--points", "--lot", "--json", "example"}},
                                {"bench", {"--socket", "--json", "*IDN?"}},
                                {"lab", {"lots", "parts", "stats", "--db", "--json"}},
                                {"lab parts", {"LOT", "--bench", "--db", "--json"}}};
  for (const auto& h : helps) {
    const auto r = run_junco(std::string(h.command) + " --help");
    INFO(h.command << ": " << r.out);
    CHECK(r.status == 0);
    for (const char* w : h.want) CHECK(r.out.find(w) != std::string::npos);
  }
  // Bad command lines: exit 2, one line naming the command, before any daemon is asked.
  struct Bad {
    std::string args, says;
  };
  const std::vector<Bad> bad{{"watch abc", "junco watch: JOB: must be a positive integer id, not 'abc'"},
                             {"watch", "junco watch: JOB is required"},
                             {"submit plan.jsonc --watch --dry-run", "junco submit: --dry-run queues nothing to --watch; give one of them"},
                             {"transfer WR-03 --cj 2xF", "junco transfer: --cj: '2xF'"},
                             {"transfer WR-03 --run 0", "junco transfer: --run: must be a positive integer id, not '0'"},
                             {"bench extra", "junco bench: unknown option or extra argument 'extra'"},
                             {"lab", "junco lab: which lab command? (lots, parts, stats; see junco lab --help)"},
                             {"lab parts", "junco lab: LOT is required"},
                             {"lab lots --bench b1", "junco lab: unknown option or extra argument '--bench b1'"}};
  for (const auto& b : bad) {
    const auto r = run_junco(b.args);
    INFO(b.args << ": " << r.out);
    CHECK(r.status == 2);
    CHECK(r.out.find(b.says) != std::string::npos);
  }
  // The forms scripts use keep parsing: --socket=PATH, options before the
  // operand, lab's --json before its command. With no daemon / lab there the
  // work fails (1), which is not a command-line error (2).
  for (const std::string& args : std::vector<std::string>{"watch --socket=" + nowhere + " 3", "bench --json --socket " + nowhere,
                                 "transfer --socket=" + nowhere + " --points WR-03 --sigma 0.02dB", "submit --socket " + nowhere + " " + d.file("plan.jsonc")}) {
    const auto r = run_junco(args);
    INFO(args << ": " << r.out);
    CHECK(r.status != 2);
    CHECK(r.out.find("--help") == std::string::npos);
  }
  const auto lab = run_junco("lab --json lots --db 'host=/nonexistent-" + std::string("dir") + " connect_timeout=1'");
  INFO(lab.out);
  CHECK(lab.status == 1);
}

TEST_CASE("--rg and --rl are now --source and --load: the old ones work and warn, both at once are refused", "[cli]") {
  // docs/names.md: source_ohm / --source, load_ohm / --load. Unequal values, so a
  // swap of the two shows in the assumed lines and in the load voltage.
  const std::string part = "design distortion --is 1n --n 1.8 --rs 0.6 --current 1mA --amplitude 0.1V ";
  const auto now = run_junco(part + "--source 75 --load 25");
  const auto old = run_junco(part + "--rg 75 --rl=25");
  INFO(now.out << "\n" << old.out);
  REQUIRE(now.status == 0);
  REQUIRE(old.status == 0);
  CHECK(now.out.find("warning") == std::string::npos);
  CHECK(old.out.find("junco design: warning: --rg is now spelled --source (the old spelling still works for now)") != std::string::npos);
  CHECK(old.out.find("junco design: warning: --rl is now spelled --load") != std::string::npos);
  CHECK(old.out.substr(old.out.find("part ")) == now.out.substr(now.out.find("part ")));
  CHECK(now.out.find("source Rg        75 ohm") != std::string::npos);
  CHECK(now.out.find("load RL          25 ohm") != std::string::npos);
  // junco fit and junco plot take the same names.
  const auto fit_old = run_junco("fit " + examples + "kestrel24b_k24b017.csv --rl 50");
  CHECK(fit_old.status == 0);
  CHECK(fit_old.out.find("junco fit: warning: --rl is now spelled --load") != std::string::npos);
  const auto plot_old = run_junco("plot ac --readings x.csv --model y.json --out z.svg --rg 5x");
  CHECK(plot_old.status == 2);
  CHECK(plot_old.out.find("junco plot: warning: --rg is now spelled --source") != std::string::npos);
  CHECK(plot_old.out.find("--source: '5x'") != std::string::npos);
  // Both spellings of one option: one line naming the one to give, not CLI11's
  // "At Most 1 required but received 2"; for every renamed pair.
  struct Both {
    std::string args, says;
  };
  const std::vector<Both> both{
      {part + "--rg 50 --source 50", "junco design: give --source only (--rg is its old spelling)"},
      {part + "--load=50 --rl 50", "junco design: give --load only (--rl is its old spelling)"},
      {"design op --is 1n --n 1 --rs 1 --supply 5 --rbias 1k --bias-resistor 1k", "junco design: give --bias-resistor only (--rbias is its old spelling)"},
      {"design op --is 1n --n 1 --rs 1 --supply 5 --bias-resistor 1k --dc-return 1 --rreturn 1", "junco design: give --dc-return only (--rreturn is its old spelling)"},
      {"design op --is 1n --n 1 --rs 1 --supply 5 --bias-resistor 1k --temp 20 --temp-c 20", "junco design: give --temp-c only (--temp is its old spelling)"},
      {"fit " + examples + "kestrel24b_k24b017.csv --rl 50 --load 50", "junco fit: give --load only (--rl is its old spelling)"},
      {"fit " + examples + "kestrel24b_k24b017.csv --rreturn 1k --dc-return 1k", "junco fit: give --dc-return only (--rreturn is its old spelling)"},
      {"plot ac --readings x.csv --model y.json --out z.svg --rbias 1k --bias-resistor 1k", "junco plot: give --bias-resistor only (--rbias is its old spelling)"}};
  for (const auto& b : both) {
    const auto r = run_junco(b.args);
    INFO(b.args << ": " << r.out);
    CHECK(r.status == 2);
    CHECK(r.out == b.says + "\n");
  }
}

TEST_CASE("an unknown or missing first word names the choices; design's usage line has no stray []", "[cli]") {
  struct Bad {
    std::string args, says;
  };
  const std::vector<Bad> bad{
      {"plot foo", "junco plot: no such plot 'foo' (iv, ac, off, lot)\n"},
      {"plot", "junco plot: which plot? (iv, ac, off, lot; see junco plot --help)\n"},
      {"plot --out x.svg", "junco plot: which plot? (iv, ac, off, lot; see junco plot --help)\n"},
      {"lab foo", "junco lab: no such lab command 'foo' (lots, parts, stats)\n"},
      {"export foo a.json", "junco export: no such format 'foo' (spice, json, touchstone, stats)\n"},
      {"export", "junco export: which format? (spice, json, touchstone, stats; see junco export --help)\n"},
      {"design foo --supply 5", "junco design: no such calculator 'foo' (op, bias-r, loss, "}};
  for (const auto& b : bad) {
    const auto r = run_junco(b.args);
    INFO(b.args << ": " << r.out);
    CHECK(r.status == 2);
    CHECK(r.out.rfind(b.says, 0) == 0);
  }
  const auto none = run_junco("design");
  CHECK(none.status == 2);
  CHECK(none.out.find("junco design: which calculator? (op, bias-r,") == 0);
  // The help of a command with subcommands still answers (exit 0).
  for (const char* help : {"plot --help", "design --help", "lab --help", "export --help", "plot ac --help", "design loss --help"}) {
    const auto r = run_junco(help);
    INFO(help << ": " << r.out);
    CHECK(r.status == 0);
  }
  // Usage lines as CLI11 prints them: no empty [] (a hidden positional's name).
  const auto design_help = run_junco("design --help");
  const std::size_t usage = design_help.out.find("Usage: junco design");
  REQUIRE(usage != std::string::npos);
  const std::string usage_line = design_help.out.substr(usage, design_help.out.find('\n', usage) - usage);
  CHECK(usage_line.find("[]") == std::string::npos);
  CHECK(usage_line.find("SUBCOMMAND") != std::string::npos);
}
