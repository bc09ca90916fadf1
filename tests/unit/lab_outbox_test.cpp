// The lab outbox in the bench's SQLite store (migration 0003) and the
// publisher's side of it, without a PostgreSQL server: rows are queued by
// the store's own commits only while publishing is on, joining a lab queues
// the history, an unreachable lab is reported (not fatal) and keeps every
// row, and leaving the lab empties the outbox. (With a real server:
// tests/integration/lab_publish_test.cpp.)
#include "daemon/lab_publisher.hpp"
#include "daemon/store.hpp"
#include "tests/support/db_rows.hpp"

#include <catch2/catch.hpp>

#include <chrono>
#include <filesystem>
#include <thread>
#include <unistd.h>

using namespace junco::daemon;
namespace fs = std::filesystem;

namespace {

struct TempDir {
  fs::path path;
  TempDir() {
    path = fs::temp_directory_path() / ("junco-outbox-" + std::to_string(::getpid()) + "-" +
                                        std::to_string(std::chrono::steady_clock::now().time_since_epoch().count()));
    fs::create_directories(path);
  }
  ~TempDir() { fs::remove_all(path); }
};

int outbox(const fs::path& db, const char* table) {
  return junco::test::count_rows(db, (std::string("SELECT count(*) FROM lab_outbox WHERE tbl = '") + table + "'").c_str());
}

}  // namespace

TEST_CASE("outbox: off without a lab; joining queues the history; unreachable lab keeps rows; leaving empties it") {
  TempDir dir;
  const fs::path file = dir.path / "junco.db";
  Store store(file);
  std::vector<std::string> log;
  const auto logger = [&log](std::string_view line) { log.emplace_back(line); };
  const Id lot = store.ensure_lot("WREN-0912");
  store.ensure_part(lot, "K24B-1", 1);
  {
    LabPublisher off(file, LabConfig{}, logger);
    CHECK(off.status() == nlohmann::json{{"enabled", false}});
  }
  store.ensure_lot("WREN-0913");
  CHECK(junco::test::count_rows(file, "SELECT count(*) FROM lab_outbox") == 0);  // no lab: nothing queued

  LabConfig lab;
  lab.database = "host=" + (dir.path / "no-server").string() + " user=bench1 dbname=lab";
  lab.bench = "bench-1";
  {
    LabPublisher on(file, lab, logger);
    CHECK(outbox(file, "lots") == 2);  // the history
    CHECK(outbox(file, "parts") == 1);
    store.ensure_part(lot, "K24B-2", 2);
    store.ensure_part(lot, "K24B-1", 3);  // an update (slot) is queued too
    CHECK(outbox(file, "parts") == 3);
    on.start();
    nlohmann::json s;
    for (int i = 0; i < 200; ++i) {
      s = on.status();
      if (!s["last_error"].is_null()) break;
      std::this_thread::sleep_for(std::chrono::milliseconds(10));
    }
    CHECK(s["enabled"] == true);
    CHECK(s["connected"] == false);
    CHECK(s["backlog_rows"] == 5);
    CHECK(s["published_rows"] == 0);
    CHECK(s["lag_s"].get<double>() >= 0);
    CHECK(s["database"] == "user=bench1 dbname=lab host=" + (dir.path / "no-server").string());
    REQUIRE(s["last_error"].is_string());
    CHECK(s["last_error"].get<std::string>().find("lab database user=bench1 dbname=lab host=") == 0);
    on.stop();
  }
  CHECK(outbox(file, "parts") == 3);  // nothing lost by a stop
  {
    LabPublisher again(file, lab, logger);  // still on: the history is not queued twice
    CHECK(outbox(file, "lots") == 2);
  }
  {
    LabPublisher off(file, LabConfig{}, logger);
  }
  CHECK(junco::test::count_rows(file, "SELECT count(*) FROM lab_outbox") == 0);
  store.ensure_lot("WREN-0914");
  CHECK(junco::test::count_rows(file, "SELECT count(*) FROM lab_outbox") == 0);
  CHECK(std::find(log.begin(), log.end(), "lab: no lab.database in the config: publishing off, outbox emptied") != log.end());
}

TEST_CASE("outbox: a lab refusing TCP connections at start is reported, not fatal") {
  TempDir dir;
  const fs::path file = dir.path / "junco.db";
  Store store(file);
  LabConfig lab;
  lab.database = "host=127.0.0.1 port=1 user=bench1 dbname=lab connect_timeout=2";  // port 1: nothing listens (common practice, no source)
  lab.bench = "bench-1";
  std::vector<std::string> log;
  LabPublisher p(file, lab, [&log](std::string_view line) { log.emplace_back(line); });
  p.start();
  store.ensure_lot("WREN-0912");
  nlohmann::json s;
  for (int i = 0; i < 300; ++i) {
    s = p.status();
    if (s["last_error"].is_string()) break;
    std::this_thread::sleep_for(std::chrono::milliseconds(10));
  }
  REQUIRE(s["last_error"].is_string());
  CHECK(s["last_error"].get<std::string>().find("Connection refused") != std::string::npos);
  CHECK(s["last_error"].get<std::string>().find('\n') == std::string::npos);
  CHECK(s["connected"] == false);
  CHECK(s["backlog_rows"] == 1);
  p.stop();
  bool logged = false;
  for (const auto& l : log) logged = logged || (l.find("Connection refused") != std::string::npos && l.find("will retry") != std::string::npos);
  CHECK(logged);
}
