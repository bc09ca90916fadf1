// The README's first command ends in `junco demo`: run it for real (junco-sim
// and juncod as child processes, a real socket, a real SQLite file) and check
// what a user is promised: a fitted lot table, the spread, the database kept.
#include <catch2/catch.hpp>
#include <sqlite3.h>

#include <cstdio>
#include <filesystem>
#include <regex>
#include <string>
#include <sys/wait.h>
#include <unistd.h>

namespace fs = std::filesystem;

namespace {

struct Run {
  int status;
  std::string out;
};

Run run(const std::string& cmd) {
  FILE* p = popen((cmd + " 2>&1").c_str(), "r");
  REQUIRE(p);
  std::string out;
  char buf[1024];
  while (std::fgets(buf, sizeof buf, p)) out += buf;
  const int st = pclose(p);
  return {WIFEXITED(st) ? WEXITSTATUS(st) : -1, out};
}

int count_rows(const fs::path& db, const char* sql) {
  sqlite3* h = nullptr;
  REQUIRE(sqlite3_open_v2(db.c_str(), &h, SQLITE_OPEN_READONLY, nullptr) == SQLITE_OK);
  sqlite3_stmt* st = nullptr;
  REQUIRE(sqlite3_prepare_v2(h, sql, -1, &st, nullptr) == SQLITE_OK);
  REQUIRE(sqlite3_step(st) == SQLITE_ROW);
  const int n = sqlite3_column_int(st, 0);
  sqlite3_finalize(st);
  sqlite3_close(h);
  return n;
}

}  // namespace

TEST_CASE("junco demo characterises the simulated lot end to end") {
  char tmpl[] = "/tmp/junco-demo-test-XXXXXX";
  const fs::path dir = fs::path(mkdtemp(tmpl)) / "run";
  const Run r = run(std::string(JUNCO_BIN_DIR) + "/junco demo --dir " + dir.string());
  INFO(r.out);
  REQUIRE(r.status == 0);

  // One table row per part: label, Is, n, Rs (each ± SE), Vf@1mA, Vf@10mA, rd@5mA.
  const std::regex row(R"(\nWR-0[1-8] +[0-9.]+ nA ± [0-9.]+ [pn]A +1\.[0-9]+ ± 0\.[0-9]+ )");
  CHECK(std::distance(std::sregex_iterator(r.out.begin(), r.out.end(), row), std::sregex_iterator()) == 8);
  CHECK(r.out.find("lot spread (8 parts)") != std::string::npos);

  // Common practice (no source): a silicon small-signal diode drops roughly
  // 0.6-0.7 V at 1 mA (550-699 mV accepted for "roughly") and a little more
  // at 10 mA; the demo's Vf columns must say so for every part.
  const std::regex vf1(R"(\nWR-0[1-8] .* (5[5-9][0-9]|6[0-9]{2})\.[0-9] mV +(6[5-9][0-9]|7[0-9]{2})\.[0-9] mV)");
  CHECK(std::distance(std::sregex_iterator(r.out.begin(), r.out.end(), vf1), std::sregex_iterator()) == 8);

  const fs::path db = dir / "junco.db";
  REQUIRE(fs::exists(db));
  CHECK(count_rows(db, "SELECT count(DISTINCT part_id) FROM fits WHERE status = 'converged'") == 8);
  CHECK(count_rows(db, "SELECT count(*) FROM jobs WHERE state = 'done'") == 1);
  CHECK(count_rows(db, "SELECT count(*) FROM points") > 8 * 30);
  fs::remove_all(dir.parent_path());
}
