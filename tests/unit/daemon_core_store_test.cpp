// The store: migrations on a fresh file and on re-open, durable pragmas, one
// reading per (run, seq), and readings committed by a process that is then
// SIGKILLed are all there when the file is opened again.
#include "daemon/api_json.hpp"
#include "daemon/migrations.hpp"
#include "daemon/part_analysis.hpp"
#include "daemon/store.hpp"
#include "fitting/diode.hpp"
#include "fitting/electrothermal_fit.hpp"
#include "fitting/extract.hpp"
#include "fitting/junction_cap.hpp"

#include "tests/support/db_rows.hpp"

#include <catch2/catch.hpp>

#include <signal.h>
#include <sqlite3.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cmath>
#include <cstdint>
#include <cstdio>
#include <filesystem>
#include <limits>
#include <string>
#include <vector>

using namespace junco::daemon;
namespace fs = std::filesystem;

namespace {

struct TempDir {
  fs::path path;
  TempDir() {
    char tmpl[] = "/tmp/junco-store-XXXXXX";
    path = ::mkdtemp(tmpl);
  }
  ~TempDir() { fs::remove_all(path); }
};

using junco::test::count_rows;

Plan plan_json() {
  Plan p;
  p.lot = "QX-7";
  return p;
}

}  // namespace

TEST_CASE("a fresh database gets every embedded migration once; re-opening applies nothing") {
  TempDir dir;
  const fs::path db = dir.path / "sub" / "junco.db";
  const auto migrations = embedded_migrations();
  REQUIRE(!migrations.empty());
  CHECK(migrations.front().name == "0001_initial.sql");
  {
    Store s(db);
    CHECK(s.schema_version() == migrations.back().version);
    // Durability settings as promised (SQLite pragma docs: synchronous FULL = 2).
    const Json p = s.pragma_summary();
    CHECK(p["journal_mode"] == "wal");
    CHECK(p["synchronous"] == "2");
    CHECK(p["foreign_keys"] == "1");
  }
  CHECK(count_rows(db, "SELECT COUNT(*) FROM schema_migrations") == static_cast<int>(migrations.size()));
  {
    Store again(db);
    sqlite3* h = nullptr;
    REQUIRE(sqlite3_open(db.c_str(), &h) == SQLITE_OK);
    CHECK(apply_migrations(h, embedded_migrations()) == 0);
    sqlite3_close(h);
  }
  CHECK(count_rows(db, "SELECT COUNT(*) FROM schema_migrations") == static_cast<int>(migrations.size()));
}

TEST_CASE("a failing migration leaves nothing of itself behind and names itself") {
  TempDir dir;
  sqlite3* h = nullptr;
  REQUIRE(sqlite3_open((dir.path / "m.db").c_str(), &h) == SQLITE_OK);
  std::vector<Migration> ms{{1, "0001_a.sql", "CREATE TABLE a(x);"}, {2, "0002_b.sql", "CREATE TABLE b(y); CREATE TABLE a(z);"}};
  CHECK(apply_migrations(h, {ms[0]}) == 1);
  try {
    apply_migrations(h, ms);
    FAIL("accepted a broken migration");
  } catch (const StoreError& e) {
    CHECK(std::string(e.what()).find("migration 0002_b.sql") != std::string::npos);
  }
  CHECK(schema_version(h) == 1);
  sqlite3_stmt* st = nullptr;
  CHECK(sqlite3_prepare_v2(h, "SELECT * FROM b", -1, &st, nullptr) != SQLITE_OK);  // rolled back
  sqlite3_finalize(st);
  sqlite3_close(h);
}

TEST_CASE("a schema-1 store upgrades to off-state readings keeping every row and id") {
  TempDir dir;
  const fs::path db = dir.path / "old.db";
  {
    sqlite3* h = nullptr;
    REQUIRE(sqlite3_open(db.c_str(), &h) == SQLITE_OK);
    REQUIRE(apply_migrations(h, {embedded_migrations().front()}) == 1);
    const char* rows =
        "INSERT INTO lots VALUES (1, 'QX-7', '2026-01-01T00:00:00Z');"
        "INSERT INTO parts VALUES (1, 1, 'QX-7-01', 1, '2026-01-01T00:00:00Z');"
        "INSERT INTO jobs (id, plan, state, points_total, submitted_at, updated_at) VALUES (1, '{}', 'done', 3, 'x', 'x');"
        "INSERT INTO runs VALUES (1, 1, 1, 1, '{}', 300.15, 'done', 'x', 'x');"
        "INSERT INTO points VALUES (7, 1, 0, 'dc', 0.01, 'A', 1.7, 0.69, 0.0101, NULL, NULL, NULL, NULL, NULL, 1.0, 0);"
        "INSERT INTO points VALUES (8, 1, 1, 'ac', 0.01, 'A', 1.7, NULL, NULL, 0.002, 0.0019, 'vrms', 1e7, NULL, 2.0, 0);"
        "INSERT INTO points VALUES (9, 1, 2, 'reverse', -2, 'V', -2, -2, -1e-9, NULL, NULL, NULL, NULL, NULL, 3.0, 4);"
        "INSERT INTO fits (id, part_id, run_id, model, status, is_a, n, rs_ohm, points_used, warnings, created_at)"
        " VALUES (5, 1, 1, 'forward', 'converged', 2.5e-9, 1.85, 0.7, 1, '[]', 'x');";
    char* err = nullptr;
    REQUIRE(sqlite3_exec(h, rows, nullptr, nullptr, &err) == SQLITE_OK);
    // Schema 1 has no off-state kind.
    CHECK(sqlite3_exec(h, "INSERT INTO points VALUES (10, 1, 3, 'reverse_ac', -2, 'V', -2, NULL, NULL, 0.05, 1e-3, 'vrms', 1e8, NULL, 4.0, 0)",
                       nullptr, nullptr, &err) == SQLITE_CONSTRAINT);
    sqlite3_free(err);
    sqlite3_close(h);
  }
  Store s(db);
  CHECK(s.schema_version() == embedded_migrations().back().version);
  const auto points = s.points(1);
  REQUIRE(points.size() == 3);
  CHECK(points[0].kind == "dc");
  CHECK(points[0].i_a == 0.0101);
  CHECK(points[1].ac_out_v == 0.0019);
  CHECK(points[2].kind == "reverse");
  CHECK(points[2].flags == 4);
  CHECK(count_rows(db, "SELECT COUNT(*) FROM points WHERE id IN (7, 8, 9)") == 3);
  const auto fit = s.latest_fit(1);
  REQUIRE(fit);
  CHECK(fit->id == 5);
  CHECK(fit->fit.n.value == 1.85);
  CHECK(std::isnan(fit->cj0_f.value));  // no off-state readings, no capacitance law
  CHECK(to_json(*fit)["cj0_f"]["value"].is_null());
  CHECK(fit->fit.covariance.empty());  // schema 1 kept no correlation: nothing to rebuild it from
  PointRow off;
  off.run_id = 1;
  off.seq = 3;
  off.kind = "reverse_ac";
  off.set_value = -2;
  off.set_unit = "V";
  off.ac_in_v = 0.05;
  off.ac_out_v = 1e-3;
  off.ac_unit = "vrms";
  off.freq_hz = 1e8;
  s.insert_point(1, off);
  CHECK(s.points(1).back().kind == "reverse_ac");
}

TEST_CASE("a reading is stored once per (run, seq) and counted in its job") {
  TempDir dir;
  Store s(dir.path / "junco.db");
  const Id lot = s.ensure_lot("QX-7");
  CHECK(s.ensure_lot("QX-7") == lot);
  const Id part = s.ensure_part(lot, "QX-7-01", 1);
  const Id job = s.insert_job(plan_json(), 3, 1000, 42);
  const RunRecord run = s.ensure_run(job, part, 1, RunFixture{}, 300.15);
  CHECK(s.ensure_run(job, part, 1, RunFixture{}, 300.15).id == run.id);
  PointRow p;
  p.run_id = run.id;
  p.seq = 0;
  p.v = 0.61;
  p.i_a = 1e-3;
  s.insert_point(job, p);
  CHECK_THROWS_AS(s.insert_point(job, p), StoreError);
  p.seq = 1;
  s.insert_point(job, p);
  CHECK(s.job(job)->points_done == 2);  // the rejected duplicate did not count
  CHECK(*s.last_seq(run.id) == 1);
  const auto pts = s.points(run.id);
  REQUIRE(pts.size() == 2);
  CHECK(std::isnan(pts[0].ac_in_v));  // NaN in, NULL stored, NaN out
  CHECK(pts[1].v == 0.61);
}

TEST_CASE("job state transitions stamp their times") {
  TempDir dir;
  Store s(dir.path / "junco.db");
  const Id job = s.insert_job(plan_json(), 1, 1000, 42);
  CHECK(s.job(job)->state == JobState::queued);
  CHECK(s.transition_job(job, JobState::queued, JobState::running));
  CHECK_FALSE(s.transition_job(job, JobState::queued, JobState::running));
  CHECK(!s.job(job)->started_at.empty());
  CHECK(s.job(job)->finished_at.empty());
  s.set_job_state(job, JobState::paused, std::string("meter: timeout"));
  CHECK(s.job(job)->error == "meter: timeout");
  s.set_job_state(job, JobState::done);
  CHECK(s.job(job)->error == "meter: timeout");  // unchanged when not given
  CHECK(!s.job(job)->finished_at.empty());
}

TEST_CASE("readings committed by a process killed with SIGKILL survive") {
  TempDir dir;
  const fs::path db = dir.path / "junco.db";
  Id run_id = 0, job_id = 0;
  {
    Store s(db);
    const Id part = s.ensure_part(s.ensure_lot("QX-7"), "QX-7-01", 1);
    job_id = s.insert_job(plan_json(), 100000, 0, 0);
    run_id = s.ensure_run(job_id, part, 1, RunFixture{}, 300.15).id;
  }
  int fds[2];
  REQUIRE(::pipe(fds) == 0);
  const pid_t child = ::fork();
  REQUIRE(child >= 0);
  if (child == 0) {
    // Commits readings forever, reporting each committed seq on the pipe.
    ::close(fds[0]);
    try {
      Store s(db);
      for (long seq = 0;; ++seq) {
        PointRow p;
        p.run_id = run_id;
        p.seq = seq;
        p.v = 0.5 + 1e-4 * static_cast<double>(seq);
        p.i_a = 1e-3;
        s.insert_point(job_id, p);
        if (::write(fds[1], &seq, sizeof seq) != sizeof seq) ::_exit(3);
      }
    } catch (...) {
      ::_exit(2);
    }
  }
  ::close(fds[1]);
  long last_reported = -1, seq = 0;
  while (last_reported < 50 && ::read(fds[0], &seq, sizeof seq) == sizeof seq) last_reported = seq;
  ::kill(child, SIGKILL);
  int status = 0;
  ::waitpid(child, &status, 0);
  CHECK(WIFSIGNALED(status));
  // The child may have committed more after its last report, never fewer.
  while (::read(fds[0], &seq, sizeof seq) == sizeof seq) last_reported = seq;
  ::close(fds[0]);
  Store s(db);
  const auto pts = s.points(run_id);
  REQUIRE(static_cast<long>(pts.size()) >= last_reported + 1);
  for (std::size_t k = 0; k < pts.size(); ++k) CHECK(pts[k].seq == static_cast<long>(k));  // no gaps, no duplicates
  CHECK(s.job(job_id)->points_done == static_cast<long>(pts.size()));  // counter committed with each reading
}

TEST_CASE("a damaged page is refused at open: PRAGMA quick_check, the file named in one line") {
  TempDir dir;
  const fs::path db = dir.path / "junco.db";
  {
    Store s(db);
    const Id job = s.insert_job(plan_json(), 400, 1000, 42);
    const Id part = s.ensure_part(s.ensure_lot("QX-7"), "QX-7-01", 1);
    const RunRecord run = s.ensure_run(job, part, 1, RunFixture{}, 300.15);
    std::vector<PointRow> step;
    for (long k = 0; k < 400; ++k) {
      PointRow p;
      p.run_id = run.id;
      p.seq = k;
      p.v = 0.5 + 1e-3 * static_cast<double>(k);
      p.i_a = 1e-6 * static_cast<double>(k);
      step.push_back(p);
    }
    s.insert_points(job, step);
  }  // last connection closed: checkpointed, the file is all there is
  REQUIRE_FALSE(fs::exists(dir.path / "junco.db-wal"));
  REQUIRE(fs::file_size(db) > 6 * 4096);
  { Store again(db); }  // healthy: opens

  // A table page in the middle of the file overwritten with junk (a bad sector, a stray write).
  {
    sqlite3* h = nullptr;
    REQUIRE(sqlite3_open_v2(db.c_str(), &h, SQLITE_OPEN_READONLY, nullptr) == SQLITE_OK);
    sqlite3_stmt* st = nullptr;
    REQUIRE(sqlite3_prepare_v2(h, "PRAGMA page_size", -1, &st, nullptr) == SQLITE_OK);
    REQUIRE(sqlite3_step(st) == SQLITE_ROW);
    const long page_size = sqlite3_column_int(st, 0);
    sqlite3_finalize(st);
    sqlite3_close(h);
    std::FILE* f = std::fopen(db.c_str(), "r+b");
    REQUIRE(f);
    const long pages = static_cast<long>(fs::file_size(db)) / page_size;
    std::fseek(f, (pages - 2) * page_size, SEEK_SET);  // one of the points table's leaves
    std::string junk(static_cast<std::size_t>(page_size), '\0');
    for (std::size_t k = 0; k < junk.size(); ++k) junk[k] = static_cast<char>(0x5A ^ (k * 17));
    REQUIRE(std::fwrite(junk.data(), 1, junk.size(), f) == junk.size());
    std::fclose(f);
  }
  std::string what;
  try {
    Store broken(db);
  } catch (const StoreError& e) {
    what = e.what();
  }
  INFO(what);
  REQUIRE_FALSE(what.empty());
  CHECK(what.rfind(db.string() + ": ", 0) == 0);
  CHECK(what.find("quick_check") != std::string::npos);
  CHECK((what.find("malformed") != std::string::npos || what.find("corrupt") != std::string::npos));
  CHECK(what.find('\n') == std::string::npos);
}

TEST_CASE("a job state the store could not write is held in memory and served until a write succeeds") {
  TempDir dir;
  Store s(dir.path / "junco.db");
  const Id a = s.insert_job(plan_json(), 10, 1000, 42);
  const Id b = s.insert_job(plan_json(), 10, 1000, 43);
  s.set_job_state(a, JobState::running);
  s.set_job_state(b, JobState::running);
  s.hold_job_state(a, JobState::paused, "storage: attempt to write a readonly database");
  const auto held = s.job(a);
  REQUIRE(held);
  CHECK(held->state == JobState::paused);
  CHECK(held->error == "storage: attempt to write a readonly database");
  CHECK_FALSE(held->persisted);
  const Json j = to_json(*held);
  CHECK(j["persisted"] == false);
  CHECK(j["state"] == "paused");
  CHECK_FALSE(to_json(*s.job(b)).contains("persisted"));
  // The file still has the old state; the lists serve the held one.
  CHECK(count_rows(dir.path / "junco.db", "SELECT COUNT(*) FROM jobs WHERE state = 'running'") == 2);
  const auto running = s.jobs(JobState::running);
  REQUIRE(running.size() == 1);
  CHECK(running[0].id == b);
  const auto paused = s.jobs(JobState::paused);
  REQUIRE(paused.size() == 1);
  CHECK(paused[0].id == a);
  CHECK(s.jobs(std::nullopt).size() == 2);
  // A state written for that job replaces the held one.
  s.set_job_state(a, JobState::queued);
  CHECK(s.job(a)->state == JobState::queued);
  CHECK(s.job(a)->persisted);
}

TEST_CASE("a run's end and its fit are one transaction: both or neither") {
  TempDir dir;
  const fs::path file = dir.path / "junco.db";
  Store s(file);
  const Id part = s.ensure_part(s.ensure_lot("QX-7"), "QX-7-01", 1);
  const Id job = s.insert_job(plan_json(), 2, 1000, 42);
  const RunRecord run = s.ensure_run(job, part, 1, RunFixture{}, 300.15);
  PointRow p;
  p.run_id = run.id;
  p.v = 0.61;
  p.i_a = 1e-3;
  s.insert_point(job, p);
  CHECK(s.runs_without_fit(job, false).size() == 1);  // readings, no fit
  CHECK(s.runs_without_fit(job, true).empty());       // not done yet

  junco::fitting::FitResult fit;  // status insufficient: a stated outcome, stored like any other
  fit.message = "2 usable points, 3 needed";
  {
    // The second statement of the transaction (the run's end) fails: the
    // fit written just before it must not remain. (A trigger on a second
    // connection makes the UPDATE fail; without one transaction the fit row
    // would stay while the run is not done.)
    sqlite3* db = nullptr;
    REQUIRE(sqlite3_open(file.c_str(), &db) == SQLITE_OK);
    REQUIRE(sqlite3_exec(db, "CREATE TRIGGER refuse_run_end BEFORE UPDATE ON runs BEGIN SELECT RAISE(ABORT, 'refused by test'); END",
                         nullptr, nullptr, nullptr) == SQLITE_OK);
    CHECK_THROWS_AS(s.finish_run_with_fit(part, run.id, fit), StoreError);
    CHECK(count_rows(file, "SELECT COUNT(*) FROM fits") == 0);
    CHECK(s.runs_of_job(job)[0].state == RunState::running);
    CHECK_FALSE(s.latest_fit(part));
    REQUIRE(sqlite3_exec(db, "DROP TRIGGER refuse_run_end", nullptr, nullptr, nullptr) == SQLITE_OK);
    sqlite3_close(db);
  }
  const Id fit_id = s.finish_run_with_fit(part, run.id, fit);
  CHECK(s.runs_of_job(job)[0].state == RunState::done);
  CHECK_FALSE(s.runs_of_job(job)[0].finished_at.empty());
  const auto stored = s.latest_fit(part);
  REQUIRE(stored);
  CHECK(stored->id == fit_id);
  CHECK(stored->fit.status == junco::fitting::FitStatus::insufficient);
  CHECK(stored->fit.message == "2 usable points, 3 needed");
  CHECK(s.runs_without_fit(job, false).empty());
  CHECK(s.runs_without_fit(std::nullopt, true).empty());

  // A database written before: run done, fit missing. Found for recovery.
  const Id part2 = s.ensure_part(s.ensure_lot("QX-7"), "QX-7-02", 2);
  const RunRecord run2 = s.ensure_run(job, part2, 2, RunFixture{}, 300.15);
  s.finish_run(run2.id, RunState::done);
  const auto orphans = s.runs_without_fit(std::nullopt, true);
  REQUIRE(orphans.size() == 1);
  CHECK(orphans[0].id == run2.id);
}

TEST_CASE("a job state set with an empty error clears the old message") {
  TempDir dir;
  Store s(dir.path / "junco.db");
  const Id job = s.insert_job(plan_json(), 1, 1000, 42);
  s.set_job_state(job, JobState::paused, "paused by request");
  CHECK(s.job(job)->error == "paused by request");
  s.set_job_state(job, JobState::queued);  // nullopt: kept
  CHECK(s.job(job)->error == "paused by request");
  s.set_job_state(job, JobState::done, std::string());
  CHECK(s.job(job)->error.empty());
  CHECK(to_json(*s.job(job))["error"].is_null());
}

TEST_CASE("a stored fit keeps its covariance; older rows rebuild it; damage is a StoreError naming the fit") {
  TempDir dir;
  const fs::path file = dir.path / "junco.db";
  Store s(file);
  const Id part = s.ensure_part(s.ensure_lot("WREN-0912"), "WR-01", 1);
  const Id job = s.insert_job(plan_json(), 1, 1000, 42);
  const RunRecord run = s.ensure_run(job, part, 1, RunFixture{}, 300.15);
  // Readings from the Shockley law with series resistance (invented part
  // values) with a small deterministic wiggle, so the fit has a residual and
  // a covariance.
  const junco::fitting::DiodeParams truth{2e-9, 1.8, 0.9};
  std::vector<junco::fitting::IvPoint> iv;
  for (int k = 0; k < 16; ++k) {
    const double i = 1e-5 * std::pow(10.0, k * 3.0 / 15);
    iv.push_back({junco::fitting::diode_voltage_v(truth, i, 300.15) * (1 + 2e-4 * ((k % 3) - 1)), i});
  }
  const auto fit = junco::fitting::fit_forward(iv);
  REQUIRE(fit.usable());
  REQUIRE(fit.covariance.size() == 3);
  s.finish_run_with_fit(part, run.id, fit);

  const auto stored = s.latest_fit(part);
  REQUIRE(stored);
  for (int a = 0; a < 3; ++a)
    for (int b = 0; b < 3; ++b) CHECK(stored->fit.covariance[a][b] == fit.covariance[a][b]);  // stored as written (JSON doubles round-trip)

  // A row as written before migration 0007: no covariance. It is rebuilt
  // from the stored correlation and standard errors, cov = r·u·u (GUM C.3.6).
  REQUIRE(count_rows(file, "SELECT COUNT(*) FROM fits WHERE covariance IS NOT NULL") == 1);
  {
    sqlite3* db = nullptr;
    REQUIRE(sqlite3_open(file.c_str(), &db) == SQLITE_OK);
    REQUIRE(sqlite3_exec(db, "UPDATE fits SET covariance = NULL", nullptr, nullptr, nullptr) == SQLITE_OK);
    sqlite3_close(db);
  }
  Store again(file);  // a fresh cache
  const auto old_row = again.latest_fit(part);
  REQUIRE(old_row);
  REQUIRE(old_row->fit.covariance.size() == 3);
  for (int a = 0; a < 3; ++a)
    for (int b = 0; b < 3; ++b) CHECK(old_row->fit.covariance[a][b] == Approx(fit.covariance[a][b]).epsilon(1e-12));

  // Damage: a cut detail, a correlation of the wrong size, an unknown status.
  for (const char* damage : {"UPDATE fits SET detail = '{\"parameter_names\": [\"is_a\"'",
                             "UPDATE fits SET detail = '{\"parameter_names\": [\"is_a\", \"n\", \"rs_ohm\"], \"correlation\": [[1]]}'",
                             "UPDATE fits SET status = 'splendid'"}) {
    INFO(damage);
    sqlite3* db = nullptr;
    REQUIRE(sqlite3_open(file.c_str(), &db) == SQLITE_OK);
    REQUIRE(sqlite3_exec(db, damage, nullptr, nullptr, nullptr) == SQLITE_OK);
    sqlite3_close(db);
    Store fresh(file);
    try {
      fresh.latest_fit(part);
      FAIL("damage not noticed");
    } catch (const StoreError& e) {
      CHECK(std::string(e.what()).rfind("fit 1 of part " + std::to_string(part) + ": ", 0) == 0);
    }
  }
}

TEST_CASE("a stored plan and fixture read back typed; a damaged plan is a StoreError naming the job") {
  TempDir dir;
  const fs::path file = dir.path / "junco.db";
  Store s(file);
  Plan plan = plan_json();
  plan.parts = {{1, "WR-01"}};
  plan.temp_k = 310.0;
  const Id job = s.insert_job(plan, 1, 1000, 42);
  const auto back = s.job(job);
  REQUIRE(back);
  CHECK(back->plan.temp_k == 310.0);
  CHECK(to_json(back->plan) == to_json(plan));  // the wire's job.plan is unchanged by the round trip
  const Id part = s.ensure_part(s.ensure_lot("WREN-0912"), "WR-01", 1);
  FixtureConfig fc;
  fc.bias_resistor_ohm = 100;
  fc.stray_c_f = 0.2e-12;
  const RunRecord run = s.ensure_run(job, part, 1, run_fixture(fc), 300.15);
  CHECK(s.runs_of_job(job)[0].fixture.stray_c_f == 0.2e-12);
  CHECK(to_json(run.fixture) == Json{{"bias_resistor_ohm", 100.0}, {"dc_return_ohm", 0.0}, {"source_ohm", 50.0}, {"load_ohm", 50.0},
                                     {"current_from", "source"}, {"stray_c_f", 0.2e-12}});
  {
    sqlite3* db = nullptr;
    REQUIRE(sqlite3_open(file.c_str(), &db) == SQLITE_OK);
    REQUIRE(sqlite3_exec(db, "UPDATE jobs SET plan = '{\"lot\": 7}'", nullptr, nullptr, nullptr) == SQLITE_OK);
    sqlite3_close(db);
  }
  try {
    s.job(job);
    FAIL("damage not noticed");
  } catch (const StoreError& e) {
    CHECK(std::string(e.what()).rfind("job " + std::to_string(job) + ": stored plan damaged (plan.lot: ", 0) == 0);
  }
}

// Migration order across the merge of the chamber (0004) with the heating
// readings (0006) and fit covariance (0007): a file that already has 0006 and
// 0007 but not 0004 (written by a juncod without the chamber) gets 0004 on
// open, its runs rebuilt with every row, id and reading kept; a fresh file
// gets all of them in version order. Common practice, no source.
TEST_CASE("a store with 0006 and 0007 but without 0004 gets 0004 on open, keeping its rows; a fresh one gets all in order") {
  TempDir dir;
  const fs::path db = dir.path / "no-chamber.db";
  {
    sqlite3* h = nullptr;
    REQUIRE(sqlite3_open(db.c_str(), &h) == SQLITE_OK);
    std::vector<Migration> without_chamber;
    for (const auto& m : embedded_migrations())
      if (m.version != 4) without_chamber.push_back(m);
    REQUIRE(without_chamber.size() + 1 == embedded_migrations().size());
    REQUIRE(apply_migrations(h, without_chamber) == static_cast<int>(without_chamber.size()));
    const char* rows =
        "INSERT INTO lots VALUES (1, 'QX-7', '2026-01-01T00:00:00Z');"
        "INSERT INTO parts VALUES (1, 1, 'QX-7-01', 1, '2026-01-01T00:00:00Z');"
        "INSERT INTO jobs (id, plan, state, points_total, submitted_at, updated_at) VALUES (1, '{\"lot\":\"QX-7\"}', 'done', 3, 'x', 'x');"
        "INSERT INTO runs VALUES (4, 1, 1, 1, '{}', 300.15, 'done', 'x', 'x');"
        "INSERT INTO points (id, run_id, seq, kind, set_value, set_unit, v, i_a, t_s, flags, series, dwell_s)"
        " VALUES (7, 4, 0, 'dc', 0.01, 'A', 0.69, 0.0101, 1.0, 0, 'dwell', 0.03);"
        "INSERT INTO fits (id, part_id, run_id, model, status, is_a, n, rs_ohm, points_used, warnings, created_at, covariance)"
        " VALUES (5, 1, 4, 'forward', 'converged', 2.5e-9, 1.85, 0.7, 1, '[]', 'x', NULL);";
    char* err = nullptr;
    const int rc = sqlite3_exec(h, rows, nullptr, nullptr, &err);
    INFO((err ? err : ""));
    REQUIRE(rc == SQLITE_OK);
    // Without 0004 a second run of the same (job, part) is refused.
    CHECK(sqlite3_exec(h, "INSERT INTO runs VALUES (5, 1, 1, 1, '{}', 300.15, 'done', 'x', 'x')", nullptr, nullptr, nullptr) ==
          SQLITE_CONSTRAINT);
    sqlite3_close(h);
  }
  {
    Store s(db);
    CHECK(count_rows(db, "SELECT COUNT(*) FROM schema_migrations") == static_cast<int>(embedded_migrations().size()));
    CHECK(count_rows(db, "SELECT COUNT(*) FROM schema_migrations WHERE version = 4") == 1);
    const auto runs = s.runs_of_job(1);
    REQUIRE(runs.size() == 1);
    CHECK(runs[0].id == 4);
    CHECK(runs[0].temp_index == 0);
    CHECK(std::isnan(runs[0].setpoint_k));
    const auto points = s.points(4);
    REQUIRE(points.size() == 1);
    CHECK(points[0].series == "dwell");
    CHECK(points[0].dwell_s == 0.03);
    const auto fit = s.latest_fit(1);
    REQUIRE(fit);
    CHECK(fit->id == 5);
    // The chamber's second temperature of the same (job, part) is a run of its own now.
    const RunRecord hot = s.ensure_run(1, 1, 1, RunFixture{}, 358.15, 1, 358.15);
    CHECK(hot.id != 4);
    CHECK(hot.temp_index == 1);
    CHECK(hot.setpoint_k == 358.15);
    CHECK(s.runs_of_job(1).size() == 2);
  }
  const fs::path fresh = dir.path / "fresh.db";
  Store s(fresh);
  CHECK(s.schema_version() == embedded_migrations().back().version);
  CHECK(count_rows(fresh, "SELECT COUNT(*) FROM schema_migrations") == static_cast<int>(embedded_migrations().size()));
  // 0004's table, 0006's and 0007's columns are all there.
  CHECK(count_rows(fresh, "SELECT COUNT(*) FROM temperature_fits") == 0);
  CHECK(count_rows(fresh, "SELECT COUNT(*) FROM points WHERE series IS NOT NULL OR dwell_s IS NOT NULL") == 0);
  CHECK(count_rows(fresh, "SELECT COUNT(*) FROM fits WHERE covariance IS NOT NULL") == 0);
  CHECK(count_rows(fresh, "SELECT COUNT(*) FROM runs WHERE temp_index IS NOT NULL") == 0);
}

// Fits stored before juncod recorded their run (run_id NULL) get it from
// migration 0010: the part's latest run started no later than the fit; a fit
// older than every run of its part keeps NULL. Common practice, no source.
TEST_CASE("migration 0010 gives each fit stored without a run id the run it was made from") {
  TempDir dir;
  const fs::path db = dir.path / "no-run-ids.db";
  {
    sqlite3* h = nullptr;
    REQUIRE(sqlite3_open(db.c_str(), &h) == SQLITE_OK);
    std::vector<Migration> before;
    for (const auto& m : embedded_migrations())
      if (m.version < 10) before.push_back(m);
    REQUIRE(before.size() + 1 <= embedded_migrations().size());
    REQUIRE(apply_migrations(h, before) == static_cast<int>(before.size()));
    const char* rows =
        "INSERT INTO lots VALUES (1, 'QX-7', '2026-01-01T00:00:00Z');"
        "INSERT INTO parts VALUES (1, 1, 'QX-7-01', 1, '2026-01-01T00:00:00Z');"
        "INSERT INTO parts VALUES (2, 1, 'QX-7-02', 2, '2026-01-01T00:00:00Z');"
        "INSERT INTO jobs (id, plan, state, points_total, submitted_at, updated_at) VALUES (1, '{\"lot\":\"QX-7\"}', 'done', 3, 'x', 'x');"
        "INSERT INTO jobs (id, plan, state, points_total, submitted_at, updated_at) VALUES (2, '{\"lot\":\"QX-7\"}', 'done', 3, 'x', 'x');"
        "INSERT INTO runs (id, job_id, part_id, slot, fixture, temp_k, state, started_at, finished_at)"
        " VALUES (3, 1, 1, 1, '{}', 300.15, 'done', '2026-01-01T10:00:00.000Z', '2026-01-01T10:05:00.000Z');"
        "INSERT INTO runs (id, job_id, part_id, slot, fixture, temp_k, state, started_at, finished_at)"
        " VALUES (4, 1, 2, 2, '{}', 300.15, 'done', '2026-01-01T10:06:00.000Z', '2026-01-01T10:09:00.000Z');"
        "INSERT INTO runs (id, job_id, part_id, slot, fixture, temp_k, state, started_at, finished_at)"
        " VALUES (7, 2, 1, 1, '{}', 300.15, 'done', '2026-01-02T10:00:00.000Z', '2026-01-02T10:05:00.000Z');"
        // part 1: a fit after each of its runs; part 2: one after its run and one older than any run
        "INSERT INTO fits (id, part_id, run_id, model, status, is_a, n, rs_ohm, points_used, warnings, created_at)"
        " VALUES (10, 1, NULL, 'forward', 'converged', 2.5e-9, 1.85, 0.7, 5, '[]', '2026-01-01T10:05:00.500Z');"
        "INSERT INTO fits (id, part_id, run_id, model, status, is_a, n, rs_ohm, points_used, warnings, created_at)"
        " VALUES (11, 2, NULL, 'forward', 'converged', 2.5e-9, 1.85, 0.7, 5, '[]', '2026-01-01T10:09:00.500Z');"
        "INSERT INTO fits (id, part_id, run_id, model, status, is_a, n, rs_ohm, points_used, warnings, created_at)"
        " VALUES (12, 1, NULL, 'forward', 'converged', 2.6e-9, 1.86, 0.7, 5, '[]', '2026-01-02T10:05:00.500Z');"
        "INSERT INTO fits (id, part_id, run_id, model, status, is_a, n, rs_ohm, points_used, warnings, created_at)"
        " VALUES (9, 2, NULL, 'forward', 'converged', 2.5e-9, 1.85, 0.7, 5, '[]', '2025-12-31T00:00:00.000Z');";
    char* err = nullptr;
    const int rc = sqlite3_exec(h, rows, nullptr, nullptr, &err);
    INFO((err ? err : ""));
    REQUIRE(rc == SQLITE_OK);
    sqlite3_close(h);
  }
  Store s(db);
  CHECK(count_rows(db, "SELECT run_id FROM fits WHERE id = 10") == 3);
  CHECK(count_rows(db, "SELECT run_id FROM fits WHERE id = 11") == 4);
  CHECK(count_rows(db, "SELECT run_id FROM fits WHERE id = 12") == 7);
  CHECK(count_rows(db, "SELECT COUNT(*) FROM fits WHERE id = 9 AND run_id IS NULL") == 1);
  const auto fit = s.latest_fit(1);
  REQUIRE(fit);
  REQUIRE(fit->run_id);
  CHECK(*fit->run_id == 7);
  CHECK(to_json(*s.latest_fit(2))["run_id"] == 4);
}

// The capacitance and electro-thermal reports are typed rows inside juncod
// and JSON only at the API: stored and read back, part.fit's detail carries
// exactly what fitting's own writers (junction_cap_json,
// electrothermal_run_json, the documented shapes) give for the same fits.
TEST_CASE("typed fit reports go through the store and reach the API as the fitting library writes them") {
  TempDir dir;
  Store s(dir.path / "junco.db");
  const Id part = s.ensure_part(s.ensure_lot("QX-7"), "QX-7-01", 1);
  const Id job = s.insert_job(plan_json(), 3, 1000, 42);
  const RunRecord run = s.ensure_run(job, part, 1, RunFixture{}, 300.15);
  junco::fitting::JunctionCapFit cap;
  cap.ok = true;
  cap.message = "VJ, M held";
  cap.cj0_f = {1.25e-12, 3e-15};
  cap.vj_v = {0.65, kNaN};
  cap.m = {0.4, kNaN};
  cap.law_held = true;
  cap.points_used = 1;
  cap.reduced_chi2 = 1.3;
  cap.c_f = {1.1e-12, kNaN};
  cap.left_out = {"", "below the level floor"};
  const std::vector<junco::fitting::OffStatePoint> off{{2.0, 1e8, 0.05, 1e-3}, {5.0, 1e8, 0.05, 2e-5}};
  junco::fitting::ElectroThermalRunOptions eo;
  eo.fit.ambient_k = 299.5;
  junco::fitting::ElectroThermalRun et;
  et.status = "fitted";
  et.note = "Rth from DC and AC";
  et.ac_total = 12;
  et.ac_left_out = 2;
  et.fit.rs_ohm = {0.71, 0.02};
  et.fit.is_a = {2.1e-9, 1e-11};
  et.fit.n = {1.85, 0.001};
  et.fit.rth_k_per_w = {390, 20};
  et.fit.top_tj_k = {310.2, 0.5};
  et.fit.top_power_w = 0.024;
  et.fit.apparent_rs_ohm = {0.3, 0.002};
  et.fit.reduced_chi2 = 0.9;
  const JunctionCapReport cap_report = junction_cap_report(cap, off);
  const ElectrothermalReport et_report = electrothermal_report(et, eo);
  junco::fitting::FitResult fit;
  fit.status = junco::fitting::FitStatus::converged;
  fit.is_a = {2.1e-9, 1e-11};
  fit.n = {1.85, 0.001};
  fit.rs_ohm = {0.71, 0.02};
  fit.points_used = 5;
  s.insert_fit(part, run.id, fit, &cap_report, &et_report);

  const auto stored = s.latest_fit(part);
  REQUIRE(stored);
  REQUIRE(stored->junction_cap);
  REQUIRE(stored->electrothermal);
  CHECK(stored->cap_points_used() == 1);
  CHECK(stored->electrothermal->rth_k_per_w.value == 390);
  CHECK(stored->cj0_f.value == 1.25e-12);  // the law's columns, from the report
  const Json detail = to_json(*stored)["detail"];
  Json cap_json = detail["junction_cap"];
  REQUIRE(cap_json.contains("readings"));
  const Json readings = cap_json["readings"];
  cap_json.erase("readings");
  CHECK(cap_json == junco::fitting::junction_cap_json(cap));
  CHECK(detail["electrothermal"] == junco::fitting::electrothermal_run_json(et, eo));
  REQUIRE(readings.size() == 2);
  // −20·log10(Vout/Vin): 0.05 → 1e-3 is 33.98 dB (the definition of the ratio in dB).
  CHECK(readings[0]["fixture_ratio_db"].get<double>() == Approx(-20.0 * std::log10(1e-3 / 0.05)));
  CHECK(readings[0]["isolation_db"] == readings[0]["fixture_ratio_db"]);
  CHECK(readings[1]["c_f"].is_null());
  CHECK(readings[1]["left_out"] == "below the level floor");
}

// design_covariance read the VJ–M correlation from detail.junction_cap after
// the store had moved that report into its typed row, so the correlation was
// dropped. cov(VJ, M) = ρ·u(VJ)·u(M): the definition of the correlation
// coefficient (GUM, JCGM 100:2008, C.3.6).
TEST_CASE("the capacitance law's VJ-M correlation reaches the design covariance from the typed report") {
  FitRecord f;
  f.id = 3;
  f.fit.parameter_names = {"is_a", "n", "rs_ohm"};
  f.fit.covariance = {{1e-22, 0, 0}, {0, 1e-6, 0}, {0, 0, 1e-4}};
  f.cj0_f = {1e-12, 1e-14};
  f.vj_v = {0.7, 0.05};
  f.m = {0.45, 0.02};
  JunctionCapReport cap;
  cap.ok = true;
  cap.vj_m_correlation = 0.93;
  f.junction_cap = cap;
  const auto c = design_covariance(f);
  std::size_t ivj = c.names.size(), im = c.names.size();
  for (std::size_t k = 0; k < c.names.size(); ++k) {
    if (c.names[k] == "vj_v") ivj = k;
    if (c.names[k] == "m") im = k;
  }
  REQUIRE(ivj < c.names.size());
  REQUIRE(im < c.names.size());
  CHECK(c.matrix[ivj][im] == Approx(0.93 * 0.05 * 0.02));
  CHECK(c.matrix[im][ivj] == Approx(0.93 * 0.05 * 0.02));
}

// The heating, stored-charge, PIN and package reports are read into typed
// rows: one of the wrong shape is damage, a StoreError naming the fit and the
// report (juncod answers it as a storage error, -32004), never a value passed on.
TEST_CASE("a damaged heating, stored-charge, PIN or package report is a StoreError naming the report") {
  TempDir dir;
  const fs::path file = dir.path / "junco.db";
  Id part = 0;
  {
    Store s(file);
    part = s.ensure_part(s.ensure_lot("QX-7"), "QX-7-01", 1);
    const Id job = s.insert_job(plan_json(), 3, 1000, 42);
    const RunRecord run = s.ensure_run(job, part, 1, RunFixture{}, 300.15);
    junco::fitting::FitResult fit;
    fit.status = junco::fitting::FitStatus::converged;
    fit.points_used = 5;
    MoreReports more;
    more.heating.emplace();
    more.heating->pulsed_readings = 3;
    more.stored_charge.emplace();
    more.stored_charge->ok = true;
    more.stored_charge->tt_s = {4e-9, 1e-10};
    more.pin.emplace();
    more.pin->law.emplace();
    more.pin->law->ok = true;
    more.pin->law->tau_s = {1.2e-6, 5e-8};
    more.pin->off_state.emplace();
    more.pin->off_state->ok = true;
    more.pin->off_state->ct_f = {2.2e-13, 4e-15};
    more.package.emplace();
    more.package->package.ok = true;
    more.package->package.package = {1.1e-9, 1.5e-13};
    more.package->readings = 40;
    s.insert_fit(part, run.id, fit, nullptr, nullptr, more);
    const auto stored = s.latest_fit(part);
    REQUIRE(stored);
    REQUIRE(stored->heating);
    CHECK(stored->heating->pulsed_readings == 3);
    CHECK(stored->tt_s.value == 4e-9);  // served as tt_s from the typed report
    REQUIRE(stored->pin);
    REQUIRE(stored->pin->law_ok());
    CHECK(stored->pin->law->tau_s.value == 1.2e-6);
    CHECK(stored->pin->off_state->ct_f.std_error == 4e-15);
    REQUIRE(stored->package);
    CHECK(stored->package->package.package.cp_f == 1.5e-13);
    CHECK(stored->package->readings == 40);
    CHECK_FALSE(stored->package->cap);
    const auto part_pin = pin_part_of_fit(*stored);  // what design and lot statistics take
    REQUIRE(part_pin);
    CHECK(part_pin->law.tau_s == 1.2e-6);
    CHECK(part_pin->ct_f == 2.2e-13);
  }
  // The store reads heating, stored_charge, pin, package in that order:
  // damage the later ones first.
  for (const auto& [damage, report] :
       {std::pair{"UPDATE fits SET detail = json_set(detail, '$.package.ls_h', 'short')", "detail.package"},
        std::pair{"UPDATE fits SET detail = json_set(detail, '$.pin.covariance', json('[[1, 2]]'))", "detail.pin"},
        std::pair{"UPDATE fits SET detail = json_set(detail, '$.stored_charge.tt_s', json('[1, 2]'))", "detail.stored_charge"},
        std::pair{"UPDATE fits SET detail = json_set(detail, '$.heating.pulsed_readings', 'three')", "detail.heating"}}) {
    INFO(damage);
    sqlite3* db = nullptr;
    REQUIRE(sqlite3_open(file.c_str(), &db) == SQLITE_OK);
    REQUIRE(sqlite3_exec(db, damage, nullptr, nullptr, nullptr) == SQLITE_OK);
    sqlite3_close(db);
    Store fresh(file);
    try {
      fresh.latest_fit(part);
      FAIL("damage not noticed");
    } catch (const StoreError& e) {
      CHECK(std::string(e.what()).find(std::string(report) + " damaged") != std::string::npos);
    }
  }
}

// The temperature law is read into a typed row as well: stored and read back
// it is the same law; a damaged one is a StoreError naming the row.
TEST_CASE("a stored temperature law reads back typed; a damaged one is a StoreError naming it") {
  TempDir dir;
  const fs::path file = dir.path / "junco.db";
  Id part = 0;
  {
    Store s(file);
    part = s.ensure_part(s.ensure_lot("QX-7"), "QX-7-01", 1);
    const Id job = s.insert_job(plan_json(), 3, 1000, 42);
    CHECK_FALSE(s.latest_temperature_fit(part));
    TemperatureLawReport law;
    law.fit.ok = true;
    law.fit.tnom_k = 300.15;
    law.fit.eg_ev = {1.13, 0.02};
    law.fit.xti = {3.0, std::numeric_limits<double>::quiet_NaN()};
    law.fit.xti_held = true;
    law.fit.temps_k = {273.15, 300.15, 358.15};
    law.fit.residuals_ln_is = {0.01, -0.02, 0.01};
    law.runs = {4, 5, 6};
    s.insert_temperature_fit(part, job, law);
    const auto back = s.latest_temperature_fit(part);
    REQUIRE(back);
    CHECK(back->job_id == job);
    CHECK(back->report.fit.ok);
    CHECK(back->report.fit.eg_ev.value == 1.13);
    CHECK(back->report.fit.eg_ev.std_error == 0.02);
    CHECK(std::isnan(back->report.fit.xti.std_error));
    CHECK(back->report.fit.xti_held);
    CHECK(back->report.fit.temps_k.size() == 3);
    CHECK(back->report.runs == std::vector<std::int64_t>{4, 5, 6});
  }
  sqlite3* db = nullptr;
  REQUIRE(sqlite3_open(file.c_str(), &db) == SQLITE_OK);
  REQUIRE(sqlite3_exec(db, "UPDATE temperature_fits SET detail = json_set(detail, '$.eg_ev', 'high')", nullptr, nullptr, nullptr) == SQLITE_OK);
  sqlite3_close(db);
  Store fresh(file);
  try {
    fresh.latest_temperature_fit(part);
    FAIL("damage not noticed");
  } catch (const StoreError& e) {
    CHECK(std::string(e.what()).find("temperature fit 1 of part " + std::to_string(part) + ": detail damaged") != std::string::npos);
  }
}
