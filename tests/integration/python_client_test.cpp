// tools/python/junco_client.py and examples/lot_to_csv.py against a real
// juncod + junco-sim: the CSV must carry exactly the daemon's fitted values.
// Runs /usr/bin/python3 (Debian's, standard library only).
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

#include <algorithm>
#include <fstream>
#include <sstream>

using namespace junco;
namespace fs = std::filesystem;

namespace {

std::vector<std::string> split(const std::string& line) {
  std::vector<std::string> out;
  std::stringstream s(line);
  for (std::string cell; std::getline(s, cell, ',');) out.push_back(cell);
  return out;
}

}  // namespace

TEST_CASE("lot_to_csv.py writes the lot's fits as the daemon reports them", "[python]") {
  if (::access("/usr/bin/python3", X_OK) != 0) FAIL("/usr/bin/python3 is required (tools/setup installs it)");
  test::BenchDaemonOptions bench;
  bench.roles = {"source", "meter", "scanner"};
  test::BenchDaemon b("py", {"--settle-ms", "0"}, bench);
  const auto& dir = b.dir();
  const auto sock = b.socket();
  auto& c = b.client();
  b.run_plan({{"lot", "PY-LOT"},
              {"parts", {{{"slot", 1}, {"label", "PY-1"}}, {{"slot", 2}, {"label", "PY-2"}}, {{"slot", 3}, {"label", "PY-3"}}}},
              {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-6}, {"stop", 0.02}, {"count", 12}, {"settle_s", 0.0}}}});

  const auto csv = dir / "lot.csv";
  test::ChildProcess py({"/usr/bin/python3", std::string(JUNCO_SOURCE_DIR) + "/tools/python/examples/lot_to_csv.py", "PY-LOT",
                         csv.string(), "--socket", sock, "--at", "0.001,0.01"});
  const auto said = py.read_line(std::chrono::seconds(30));
  REQUIRE(py.wait(std::chrono::seconds(30)).value_or(-1) == 0);
  CHECK_THAT(said.value_or(""), Catch::Contains("3 part(s) of PY-LOT"));

  std::ifstream in(csv);
  std::string line;
  REQUIRE(std::getline(in, line));
  const auto header = split(line);
  const auto col = [&](const std::string& name) {
    const auto it = std::find(header.begin(), header.end(), name);
    REQUIRE(it != header.end());
    return static_cast<std::size_t>(it - header.begin());
  };
  int rows = 0;
  while (std::getline(in, line)) {
    if (!line.empty() && line.back() == '\r') line.pop_back();
    const auto cells = split(line);
    const long part_id = std::stol(cells[col("part_id")]);
    const auto fit = c.request("part.fit", {{"part_id", part_id}})["result"];
    const auto figs = c.request("part.figures", {{"part_id", part_id}, {"currents_a", {0.001, 0.01}}})["result"]["figures"];
    CHECK(cells[col("status")] == fit["status"].get<std::string>());
    CHECK(std::stod(cells[col("is_a")]) == Approx(fit["is_a"]["value"].get<double>()).epsilon(1e-12));
    CHECK(std::stod(cells[col("n_se")]) == Approx(fit["n"]["std_error"].get<double>()).epsilon(1e-12));
    CHECK(std::stod(cells[col("rs_ohm")]) == Approx(fit["rs_ohm"]["value"].get<double>()).epsilon(1e-12));
    CHECK(std::stod(cells[col("vf_v@0.01A")]) == Approx(figs[1]["vf_v"].get<double>()).epsilon(1e-12));
    CHECK(std::stod(cells[col("rd_ohm@0.001A")]) == Approx(figs[0]["rd_ohm"].get<double>()).epsilon(1e-12));
    ++rows;
  }
  CHECK(rows == 3);

  // The client's error path: an unknown lot is reported, exit 1.
  test::ChildProcess missing({"/usr/bin/python3", std::string(JUNCO_SOURCE_DIR) + "/tools/python/examples/lot_to_csv.py", "NO-SUCH-LOT",
                              (dir / "none.csv").string(), "--socket", sock});
  CHECK(missing.wait(std::chrono::seconds(30)).value_or(-1) == 1);
  CHECK(b.daemon().stop() == 0);
}
