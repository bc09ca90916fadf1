// The junco CLI as a real program against a real juncod + junco-sim:
// submit/watch/jobs/lots/parts/show output, exit statuses, and the messages
// for a daemon that is not running and for bad option values.
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <fstream>
#include <set>
#include <sstream>

using namespace junco;
namespace fs = std::filesystem;

namespace {

struct Output {
  int status = -1;
  std::vector<std::string> lines;  // stdout
  std::string err;                 // stderr
  std::string all() const {
    std::string t;
    for (const auto& l : lines) t += l + "\n";
    return t;
  }
};

Output junco_cli(const fs::path& dir, std::vector<std::string> args) {
  args.insert(args.begin(), std::string(JUNCO_BIN_DIR) + "/junco");
  test::ChildOptions o;
  o.stderr_path = (dir / "cli.err").string();
  test::ChildProcess p(args, o);
  Output out;
  while (auto line = p.read_line(std::chrono::seconds(60))) out.lines.push_back(*line);
  out.status = p.wait(std::chrono::seconds(10)).value_or(-1);
  std::ifstream e(o.stderr_path);
  out.err.assign(std::istreambuf_iterator<char>(e), std::istreambuf_iterator<char>());
  return out;
}

}  // namespace

TEST_CASE("junco explains an unreachable daemon and bad values", "[cli]") {
  const auto dir = test::scratch_dir("cli-none");
  const auto sock = (dir / "nothing.sock").string();
  auto r = junco_cli(dir, {"status", "--socket", sock});
  CHECK(r.status == 1);
  CHECK_THAT(r.err, Catch::Contains("cannot reach juncod at " + sock) && Catch::Contains("No such file") &&
                        Catch::Contains("is it running?") && Catch::Contains("juncod --config"));
  r = junco_cli(dir, {"show", "3", "--at", "5 parsecs", "--socket", sock});
  CHECK(r.status == 2);
  CHECK_THAT(r.err, Catch::Contains("--at: '5 parsecs': unknown suffix 'parsecs'"));
  r = junco_cli(dir, {"cancel", "twelve", "--socket", sock});
  CHECK(r.status == 2);
  r = junco_cli(dir, {"watch", "--help"});
  CHECK(r.status == 0);
  CHECK_THAT(r.all(), Catch::Contains("Usage: junco watch [options] JOB") && Catch::Contains("--socket PATH"));
  fs::remove_all(dir);
}

TEST_CASE("junco submit, watch, jobs, lots, parts, show against a running daemon", "[cli]") {
  test::BenchDaemonOptions bench;
  bench.roles = {"source", "meter", "scanner"};
  test::BenchDaemon b("cli", {"--settle-ms", "0"}, bench);
  const auto& dir = b.dir();
  const auto sock = b.socket();
  std::ofstream(dir / "plan.jsonc") << R"(// two parts of an invented lot
{ "lot": "CLI-LOT", "parts": [{"slot": 1, "label": "CL-1"}, {"slot": 2, "label": "CL-2"}],
  /* quick sweep */ "sweep": {"mode": "current", "spacing": "log", "start": 1e-6, "stop": 0.02, "count": 10, "settle_s": 0} })";

  auto r = junco_cli(dir, {"status", "--socket", sock});
  CHECK(r.status == 0);
  CHECK_THAT(r.all(), Catch::Contains("juncod 0.1.0"));

  // submit prints the id alone; --watch then prints plain progress lines (stdout is a pipe).
  r = junco_cli(dir, {"submit", (dir / "plan.jsonc").string(), "--watch", "--socket", sock});
  REQUIRE(r.status == 0);
  REQUIRE(r.lines.size() >= 2);
  CHECK(r.lines.front() == "1");
  CHECK_THAT(r.lines.back(), Catch::StartsWith("job 1 done: 20/20 points"));
  for (const auto& l : r.lines) CHECK(l.find('\r') == std::string::npos);  // no bar in a pipe

  r = junco_cli(dir, {"jobs", "--socket", sock});
  CHECK_THAT(r.all(), Catch::Contains("done") && Catch::Contains("20/20") && Catch::Contains("CLI-LOT"));
  r = junco_cli(dir, {"lots", "--socket", sock});
  CHECK_THAT(r.all(), Catch::Contains("CLI-LOT"));
  r = junco_cli(dir, {"parts", "--lot", "CLI-LOT", "--socket", sock});
  CHECK_THAT(r.all(), Catch::Contains("CL-1") && Catch::Contains("CL-2"));

  // show by label, with engineering units; the JSON form carries the numbers.
  r = junco_cli(dir, {"show", "CL-2", "--at", "1mA, 5 mA,10e-3", "--socket", sock, "--json"});
  REQUIRE(r.status == 0);
  const auto shown = daemon::Json::parse(r.all());
  const auto figures = shown["figures"]["figures"];
  REQUIRE(figures.size() == 3);
  CHECK(figures[0]["i_a"].get<double>() == Approx(1e-3));
  CHECK(figures[1]["i_a"].get<double>() == Approx(5e-3));
  CHECK(figures[2]["i_a"].get<double>() == Approx(10e-3));
  // rd = N·Vt/I + RS (docs/references.md §3, dynamic resistance; I ≫ IS here).
  const double vt = 1.380649e-23 * 300.15 / 1.602176634e-19;  // docs/references.md §1
  const double n = shown["fit"]["n"]["value"], rs = shown["fit"]["rs_ohm"]["value"];
  CHECK(figures[1]["rd_ohm"]["value"].get<double>() == Approx(n * vt / 5e-3 + rs).epsilon(1e-3));
  r = junco_cli(dir, {"show", "CL-1", "--socket", sock});
  CHECK_THAT(r.all(), Catch::Contains("Is  = ") && Catch::Contains("Rs  = ") && Catch::Contains("±"));

  // The daemon's export feeds the offline tools: the SPICE card carries the
  // fitted N, and the model document is accepted by a calculator.
  r = junco_cli(dir, {"show", "CL-2", "--export", "spice", "--socket", sock});
  REQUIRE(r.status == 0);
  CHECK_THAT(r.all(), Catch::Contains(".model") && Catch::Contains(" D("));
  const auto model = dir / "cl2.json";
  r = junco_cli(dir, {"show", "CL-2", "--export", "json", "--out", model.string(), "--socket", sock});
  REQUIRE(r.status == 0);
  r = junco_cli(dir, {"design", "op", "--model", model.string(), "--supply", "5V", "--bias-resistor", "1k"});
  CHECK(r.status == 0);
  CHECK_THAT(r.all(), Catch::Contains("CL-2"));
  r = junco_cli(dir, {"show", "CL-2", "--out", model.string(), "--socket", sock});
  CHECK(r.status == 2);

  // Errors from the daemon: printed with their message, exit 1.
  r = junco_cli(dir, {"show", "999", "--socket", sock});
  CHECK(r.status == 1);
  CHECK_THAT(r.err, Catch::Contains("juncod: no part 999"));
  r = junco_cli(dir, {"cancel", "1", "--socket", sock});
  CHECK(r.status == 1);
  CHECK_THAT(r.err, Catch::Contains("job 1 is done"));
  // A refused plan exits 2.
  std::ofstream(dir / "hot.jsonc") << R"({"lot":"X","parts":[{"slot":1,"label":"H"}],"sweep":{"mode":"current","start":1e-3,"stop":1,"count":3}})";
  r = junco_cli(dir, {"submit", (dir / "hot.jsonc").string(), "--socket", sock});
  CHECK(r.status == 2);
  CHECK_FALSE(r.err.empty());

  // The readings CSV keeps milliseconds: written to 9 digits (whole seconds of
  // Unix time) the 10 readings of a part shared one or two times. With no
  // settle time two readings may still fall in one millisecond, so the check
  // is: more distinct times than whole seconds give.
  r = junco_cli(dir, {"show", "CL-2", "--export", "csv", "--socket", sock});
  REQUIRE(r.status == 0);
  REQUIRE(r.lines.size() >= 11);
  std::set<std::string> times, seconds;
  for (std::size_t k = 1; k < r.lines.size(); ++k) {
    std::vector<std::string> cells;
    std::stringstream row(r.lines[k]);
    for (std::string c; std::getline(row, c, ',');) cells.push_back(c);
    REQUIRE(cells.size() >= 14);
    const std::string& t = cells[13];  // t_s
    CHECK(t.size() > 4);
    CHECK(t[t.size() - 4] == '.');  // three decimals: milliseconds
    times.insert(t);
    seconds.insert(t.substr(0, t.size() - 4));
  }
  CHECK(times.size() > seconds.size());
  CHECK(times.size() >= 5);

  // Re-measure CL-1 alone (job 2, after the refused plan): show and lots say
  // which run they show and that the other exists; nothing mixes silently.
  std::ofstream(dir / "again.jsonc") << R"({ "lot": "CLI-LOT", "parts": [{"slot": 1, "label": "CL-1"}],
    "sweep": {"mode": "current", "spacing": "log", "start": 1e-6, "stop": 0.02, "count": 10, "settle_s": 0} })";
  r = junco_cli(dir, {"submit", (dir / "again.jsonc").string(), "--watch", "--socket", sock});
  REQUIRE(r.status == 0);
  const std::string job2 = r.lines.front();
  r = junco_cli(dir, {"show", "CL-1", "--socket", sock});
  REQUIRE(r.status == 0);
  CHECK_THAT(r.all(), Catch::StartsWith("part CL-1 (id 1), lot CLI-LOT\n  run 3 (job " + job2 + ", "));
  CHECK_THAT(r.all(), Catch::Contains("also measured in run 1 (job 1, ") && Catch::Contains("shown: the latest fit, from run 3 only"));
  r = junco_cli(dir, {"show", "CL-1", "--run", "3", "--json", "--socket", sock});
  REQUIRE(r.status == 0);
  const auto again = daemon::Json::parse(r.all());
  CHECK(again["run"]["run_id"] == 3);
  CHECK(again["fit"]["run_id"] == 3);
  REQUIRE(again["other_runs"].size() == 1);
  CHECK(again["other_runs"][0]["run_id"] == 1);
  r = junco_cli(dir, {"show", "CL-1", "--run", "1", "--socket", sock});
  CHECK(r.status == 1);
  CHECK_THAT(r.err, Catch::Contains("run 1 (job 1, ") && Catch::Contains("has no fit that juncod serves; its latest fit is from run 3"));
  r = junco_cli(dir, {"show", "CL-1", "--run", "99", "--socket", sock});
  CHECK(r.status == 1);
  CHECK_THAT(r.err, Catch::Contains("has no run 99 (its runs: 1, 3)"));
  r = junco_cli(dir, {"show", "CL-2", "--socket", sock});
  CHECK_THAT(r.all(), !Catch::Contains("also measured"));
  r = junco_cli(dir, {"lots", "--socket", sock});
  CHECK_THAT(r.all(), Catch::Contains("jobs 1, " + job2 + " (re-measured)"));
  r = junco_cli(dir, {"lots", "CLI-LOT", "--socket", sock});
  REQUIRE(r.status == 0);
  CHECK_THAT(r.all(), Catch::Contains("the lot was measured by 2 jobs") && Catch::Contains("job 1 (") &&
                          Catch::Contains("note: these statistics mix runs of different jobs"));
  CHECK(b.daemon().stop() == 0);
}
