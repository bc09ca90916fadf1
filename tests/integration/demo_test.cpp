// The README's first command ends in `junco demo`: run it for real (junco-sim
// and juncod as child processes, a real socket, a real SQLite file) and check
// what a user is promised: a fitted lot table, the spread, the database kept.
#include "tests/support/cli_run.hpp"
#include "tests/support/db_rows.hpp"

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include <algorithm>
#include <cmath>
#include <csignal>
#include <sqlite3.h>

#include <cstdio>
#include <filesystem>
#include <regex>
#include <string>
#include <sys/wait.h>
#include <unistd.h>

namespace fs = std::filesystem;

namespace {

using Run = junco::test::CliRun;
using junco::test::run_shell;
using junco::test::count_rows;

// A value as the demo prints it: "1.234 mV", "2.5 nA", "731.2 mΩ" (engineering
// prefix, micro as "u") or a bare "1.8765".
double printed_value(const std::string& text) {
  std::smatch m;
  REQUIRE(std::regex_match(text, m, std::regex(R"((-?[0-9.]+(?:e[-+]?[0-9]+)?)(?: ([fpnumkMGT]?)(?:A|V|Ω))?)")));
  const std::string prefix = m[2].str();
  const double scale = prefix == "f" ? 1e-15 : prefix == "p" ? 1e-12 : prefix == "n" ? 1e-9 : prefix == "u" ? 1e-6 : prefix == "m" ? 1e-3
                       : prefix == "k" ? 1e3 : prefix == "M" ? 1e6 : prefix == "G" ? 1e9 : prefix == "T" ? 1e12 : 1.0;
  return std::stod(m[1].str()) * scale;
}

}  // namespace

TEST_CASE("junco demo characterises the simulated lot end to end") {
  char tmpl[] = "/tmp/junco-demo-test-XXXXXX";
  const fs::path dir = fs::path(mkdtemp(tmpl)) / "run";
  // --keep-running: the next steps it prints include the daemon's (README, "Next steps").
  const Run r = run_shell(std::string(JUNCO_BIN_DIR) + "/junco demo --keep-running --dir " + dir.string());
  INFO(r.out);
  // Whatever happens below, the released juncod and junco-sim do not outlive the test.
  std::smatch pids;
  REQUIRE(std::regex_search(r.out, pids, std::regex(R"(still running: juncod pid ([0-9]+), junco-sim pid ([0-9]+))")));
  struct StopChildren {
    pid_t daemon, sim;
    ~StopChildren() {
      for (pid_t p : {daemon, sim}) ::kill(p, SIGTERM);
    }
  } stop_children{std::stoi(pids[1].str()), std::stoi(pids[2].str())};
  REQUIRE(r.status == 0);

  // One table row per part: label, Is, n, Rs (each ± SE), Vf@1mA, Vf@10mA, rd@5mA.
  const std::regex row(R"(\nWR-0[1-8] +[0-9.]+ nA ± [0-9.]+ [pn]A +1\.[0-9]+ ± 0\.[0-9]+ )");
  CHECK(std::distance(std::sregex_iterator(r.out.begin(), r.out.end(), row), std::sregex_iterator()) == 8);
  CHECK(r.out.find("lot spread (8 parts)") != std::string::npos);

  // Common practice (no source): a silicon small-signal diode drops roughly
  // 0.6-0.7 V at 1 mA (550-699 mV accepted for "roughly") and a little more
  // at 10 mA; the demo's Vf columns must say so for every part.
  // (A value that rounds to whole millivolts prints without decimals: "738 mV".)
  const std::regex vf1(R"(\nWR-0[1-8] .* (5[5-9][0-9]|6[0-9]{2})(\.[0-9]+)? mV +(6[5-9][0-9]|7[0-9]{2})(\.[0-9]+)? mV)");
  CHECK(std::distance(std::sregex_iterator(r.out.begin(), r.out.end(), vf1), std::sregex_iterator()) == 8);

  // The lot table's Rs is the isothermal one (DC + AC fitted with the
  // junction's heating) and each part has its thermal resistance: junco-sim's
  // lot has Rs 0.6–0.8 Ω and heats at 400 K/W (docs/sim.md; bounds ours, no
  // source), where the DC curve alone reads 0.2–0.45 Ω.
  const std::regex lot_rs(R"(\nWR-0[1-8] +[0-9.]+ nA ± [0-9.]+ [pn]A +1\.[0-9]+ ± 0\.[0-9]+ +([0-9.]+) mΩ ± [0-9.]+ mΩ .* ([0-9]+) ± ([0-9]+) K/W)");
  int lot_rows = 0;
  for (auto it = std::sregex_iterator(r.out.begin(), r.out.end(), lot_rs); it != std::sregex_iterator(); ++it, ++lot_rows) {
    INFO((*it)[0].str());
    CHECK(std::stod((*it)[1].str()) > 550.0);
    CHECK(std::stod((*it)[1].str()) < 850.0);
    CHECK(std::abs(std::stod((*it)[2].str()) - 400.0) < 3 * std::stod((*it)[3].str()));
  }
  CHECK(lot_rows == 8);
  // The AC section: one row per part with the joint AC+DC verdict. The
  // simulated junction heats (400 K/W), so the isothermal joint fit cannot
  // agree, but the stored electro-thermal fit explains both; the AC readings
  // must see the larger Rs (docs/references.md §3: self-heating mimics a
  // lower RS in the DC curve).
  const std::regex ac_row(R"(\nWR-0[1-8] +0\.[0-9]+ dB +([0-9.]+) mΩ ± [0-9.]+ mΩ +([0-9.]+) mΩ ± [0-9.]+ mΩ +consistent once heating is modelled)");
  int ac_rows = 0;
  for (auto it = std::sregex_iterator(r.out.begin(), r.out.end(), ac_row); it != std::sregex_iterator(); ++it, ++ac_rows)
    CHECK(std::stod((*it)[2].str()) > std::stod((*it)[1].str()));
  CHECK(ac_rows == 8);
  CHECK(r.out.find("typical of self-heating") != std::string::npos);
  // The off-state section: a capacitance law and an isolation for each part.
  // Common practice, no source: small signal and PIN switching diodes have
  // zero-bias capacitances of a fraction of a pF to a few pF, and VJ of a
  // few tenths of a volt up to about 1 V.
  const std::regex off_row(R"(\nWR-0[1-8] +([0-9.]+) pF ± [0-9.]+ fF +([0-9.]+) mV ± [0-9.]+ [mu]V +0\.[0-9]+ ± [0-9.e-]+ +([0-9.]+) dB)");
  int off_rows = 0;
  for (auto it = std::sregex_iterator(r.out.begin(), r.out.end(), off_row); it != std::sregex_iterator(); ++it, ++off_rows) {
    CHECK(std::stod((*it)[1].str()) > 0.1);
    CHECK(std::stod((*it)[1].str()) < 10.0);
    CHECK(std::stod((*it)[2].str()) > 200.0);
    CHECK(std::stod((*it)[3].str()) > 10.0);  // off at 8 V, 100 MHz in 50 Ω: well isolated
  }
  CHECK(off_rows == 8);
  CHECK(std::regex_search(r.out, std::regex(R"(measured Cj is [0-9.]+ fF: [0-9.]+ dB of isolation at 1 GHz)")));
  // The design example and the plots.
  CHECK(std::regex_search(r.out, std::regex(R"(loses 0\.5 dB at [0-9.]+ mA: from 5 V, a bias resistor of [0-9.]+ Ω or less)")));
  for (const char* plot : {"WR-01-iv.svg", "WR-01-ac.svg", "WR-01-off.svg", "lot.svg"}) {
    CHECK(fs::exists(dir / plot));
    CHECK(r.out.find((dir / plot).string()) != std::string::npos);
  }

  // The lot spread the demo printed is juncod's (lot.stats, here through
  // `junco lots --json`), to the 4 significant digits printed: the demo
  // computes no statistics of its own.
  {
    const Run lots = run_shell(std::string(JUNCO_BIN_DIR) + "/junco lots WREN-0912 --json --at 1mA,5mA,10mA --socket " +
                               (dir / "run" / "juncod.sock").string());
    INFO(lots.out);
    REQUIRE(lots.status == 0);
    const auto served = nlohmann::json::parse(lots.out);
    const std::vector<std::pair<std::string, std::string>> rows{{"Is", "is_a"}, {"n", "n"}, {"Rs", "rs_ohm"},
                                                                {"Vf @ 1 mA", "vf_v@0.001A"}, {"Vf @ 10 mA", "vf_v@0.01A"},
                                                                {"rd @ 5 mA", "rd_ohm@0.005A"}};
    const std::string value = R"(-?[0-9.]+(?:e[-+]?[0-9]+)?(?: [fpnumkMGT]?(?:A|V|Ω))?)";
    int compared = 0;
    for (const auto& [label, name] : rows) {
      std::smatch m;
      INFO(label);
      REQUIRE(std::regex_search(r.out, m, std::regex("\n" + std::regex_replace(label, std::regex("[@ ]"), "[$&]") + " +(" + value + ") +(" + value +
                                                     ") +(" + value + ") +(" + value + ")")));
      nlohmann::json q;
      for (const auto& x : served["quantities"])
        if (x["name"] == name) q = x;
      REQUIRE(q.is_object());
      const char* keys[] = {"mean", "std_dev", "min", "max"};
      for (int k = 0; k < 4; ++k) {
        const double want = q[keys[k]].get<double>(), got = printed_value(m[k + 1].str());
        INFO(keys[k] << ": printed " << m[k + 1].str() << ", served " << want);
        // 4 significant digits, or "%.4f" for n
        CHECK(std::abs(got - want) <= std::max(1e-3 * std::abs(want), name == "n" ? 6e-5 : 0.0));
        ++compared;
      }
    }
    CHECK(compared == 24);
  }

  // The next steps: every "  $ " line, pasted into a shell with junco on the
  // PATH as after an install, succeeds; the last one stops the daemon.
  const auto steps_at = r.out.find("\nnext steps:");
  REQUIRE(steps_at != std::string::npos);
  std::vector<std::string> steps;
  const std::regex step(R"(\n  \$ ([^\n]+))");
  for (auto it = std::sregex_iterator(r.out.begin() + static_cast<long>(steps_at), r.out.end(), step); it != std::sregex_iterator(); ++it)
    steps.push_back((*it)[1].str());
  CHECK(steps.size() >= 10);
  for (const char* want : {"junco fit ", "junco design loss --model ", "junco plot iv --readings ", "sqlite3 ", "junco show WR-01 --socket ",
                           "junco lots WREN-0912 --socket ", "junco bench --socket ", "kill "}) {
    INFO(want);
    CHECK(std::any_of(steps.begin(), steps.end(), [&](const std::string& s) { return s.rfind(want, 0) == 0; }));
  }
  for (const auto& cmd : steps) {
    const Run step_run = run_shell("PATH='" + std::string(JUNCO_BIN_DIR) + "':\"$PATH\"; " + cmd);
    INFO("$ " << cmd << "\n" << step_run.out);
    CHECK(step_run.status == 0);
    // Each prints what it found, but the plot (its file is checked below) and the kill.
    if (cmd.find(" --out ") == std::string::npos && cmd.rfind("kill ", 0) != 0) CHECK_FALSE(step_run.out.empty());
  }
  CHECK(fs::exists(dir / "WR-01-iv-offline.svg"));
  // After the kill line, juncod has stopped (it turns the outputs off on SIGTERM).
  for (int i = 0; i < 200 && ::kill(stop_children.daemon, 0) == 0; ++i) ::usleep(50000);
  CHECK(::kill(stop_children.daemon, 0) != 0);

  const fs::path db = dir / "junco.db";
  REQUIRE(fs::exists(db));
  CHECK(count_rows(db, "SELECT count(DISTINCT part_id) FROM fits WHERE status = 'converged'") == 8);
  CHECK(count_rows(db, "SELECT count(*) FROM jobs WHERE state = 'done'") == 1);
  CHECK(count_rows(db, "SELECT count(*) FROM points") > 8 * 30);
  fs::remove_all(dir.parent_path());
}
