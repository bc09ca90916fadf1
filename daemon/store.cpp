#include "daemon/store.hpp"

#include "daemon/api_json.hpp"

#include "daemon/migrations.hpp"
#include "fitting/extract.hpp"
#include "formats/fit_json.hpp"
#include "formats/json_limits.hpp"
#include "formats/report_json.hpp"
#include "fitting/junction_cap.hpp"

#include <sqlite3.h>

#include <fcntl.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <system_error>
#include <unordered_map>

namespace junco::daemon {

namespace fs = std::filesystem;

namespace {

// SQLite's message for a failed call, with the cause a person needs. A file
// system that went read-only under an open database (an ext4 error, a failing
// disk) makes a commit fail as a bare "disk I/O error", and statvfs may not
// show it; so on an I/O-class failure an unnamed file (O_TMPFILE: nothing is
// left behind) is tried in the database's directory, and its errno named.
std::string failure(sqlite3* db, const std::string& what) {
  std::string out = (what.empty() ? "" : what + ": ") + sqlite3_errmsg(db);
  const int primary = sqlite3_errcode(db) & 0xff;
  if (primary != SQLITE_IOERR && primary != SQLITE_READONLY && primary != SQLITE_CANTOPEN && primary != SQLITE_FULL) return out;
  if (const int err = sqlite3_system_errno(db); err != 0) out += std::string(" (") + std::strerror(err) + ")";
  const char* name = sqlite3_db_filename(db, "main");
  if (!name || !*name) return out;
  const fs::path dir = fs::path(name).parent_path();
  const int fd = ::open(dir.c_str(), O_TMPFILE | O_WRONLY | O_CLOEXEC, 0600);
  const int err = errno;
  if (fd >= 0) {
    ::close(fd);
  } else if (err == EROFS) {
    out += "; database is read-only: the file system holding " + dir.string() + " is read-only";
  } else if (err == ENOSPC || err == EDQUOT) {
    out += "; the disk holding " + dir.string() + " is full";
  }
  return out;
}

}  // namespace

// How long a writer waits for another connection's lock (e.g. the sqlite3
// shell reading a copy) before SQLITE_BUSY becomes an error.
constexpr int kBusyTimeoutMs = 5000;

// One SQLite connection and its prepared statements, cached by SQL text.
// Used by one thread at a time (the writer under write_mutex_, a reader
// while leased).
class Store::Conn {
 public:
  Conn(const fs::path& file, bool read_only) {
    const int flags = (read_only ? SQLITE_OPEN_READONLY : SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE) | SQLITE_OPEN_NOMUTEX;
    const int rc = sqlite3_open_v2(file.c_str(), &db, flags, nullptr);
    if (rc != SQLITE_OK) {
      std::string msg = db ? sqlite3_errmsg(db) : "out of memory";
      sqlite3_close(db);
      db = nullptr;
      throw StoreError("cannot open database " + file.string() + ": " + msg);
    }
    sqlite3_busy_timeout(db, kBusyTimeoutMs);
  }
  ~Conn() {
    for (auto& [sql, st] : cache) sqlite3_finalize(st);
    sqlite3_close(db);
  }
  Conn(const Conn&) = delete;
  Conn& operator=(const Conn&) = delete;

  sqlite3_stmt* statement(const std::string& sql) {
    auto it = cache.find(sql);
    if (it != cache.end()) return it->second;
    sqlite3_stmt* st = nullptr;
    if (sqlite3_prepare_v2(db, sql.c_str(), -1, &st, nullptr) != SQLITE_OK)
      throw StoreError(std::string("prepare: ") + sqlite3_errmsg(db));
    cache.emplace(sql, st);
    return st;
  }

  void exec(const char* sql) {
    if (sqlite3_exec(db, sql, nullptr, nullptr, nullptr) != SQLITE_OK) throw StoreError(failure(db, sql));
  }

  sqlite3* db = nullptr;
  std::unordered_map<std::string, sqlite3_stmt*> cache;
};

// A cached prepared statement in use: positional binding from 1, typed
// columns; reset (ending its read snapshot) and unbound on scope exit.
class Store::Stmt {
 public:
  Stmt(Conn& c, const std::string& sql) : db_(c.db), st_(c.statement(sql)) {}
  ~Stmt() {
    sqlite3_reset(st_);
    sqlite3_clear_bindings(st_);
  }
  Stmt(const Stmt&) = delete;
  Stmt& operator=(const Stmt&) = delete;

  Stmt& bind(int i, Id v) { check(sqlite3_bind_int64(st_, i, v)); return *this; }
  Stmt& bind(int i, int v) { check(sqlite3_bind_int64(st_, i, v)); return *this; }
  Stmt& bind(int i, unsigned long v) { check(sqlite3_bind_int64(st_, i, static_cast<Id>(v))); return *this; }
  // NaN and infinities are stored as NULL ("not known").
  Stmt& bind(int i, double v) {
    check(std::isfinite(v) ? sqlite3_bind_double(st_, i, v) : sqlite3_bind_null(st_, i));
    return *this;
  }
  Stmt& bind(int i, const std::string& v) {
    check(sqlite3_bind_text(st_, i, v.data(), static_cast<int>(v.size()), SQLITE_TRANSIENT));
    return *this;
  }
  Stmt& bind(int i, const char* v) { return bind(i, std::string(v)); }
  Stmt& bind_null(int i) { check(sqlite3_bind_null(st_, i)); return *this; }
  Stmt& bind_opt(int i, const std::optional<std::string>& v) { return v ? bind(i, *v) : bind_null(i); }

  bool step() {
    const int rc = sqlite3_step(st_);
    if (rc == SQLITE_ROW) return true;
    if (rc == SQLITE_DONE) return false;
    throw StoreError(failure(db_, ""));
  }
  void run() { while (step()) {} }

  Id i64(int c) const { return sqlite3_column_int64(st_, c); }
  double real(int c) const { return sqlite3_column_type(st_, c) == SQLITE_NULL ? kNaN : sqlite3_column_double(st_, c); }
  std::string text(int c) const {
    const auto* p = sqlite3_column_text(st_, c);
    return p ? std::string(reinterpret_cast<const char*>(p), static_cast<std::size_t>(sqlite3_column_bytes(st_, c))) : std::string();
  }
  bool is_null(int c) const { return sqlite3_column_type(st_, c) == SQLITE_NULL; }

 private:
  void check(int rc) {
    if (rc != SQLITE_OK) throw StoreError(std::string("bind: ") + sqlite3_errmsg(db_));
  }
  sqlite3* db_;
  sqlite3_stmt* st_;
};

// A read-only connection borrowed from the pool, returned on scope exit.
class Store::ReadLease {
 public:
  ReadLease(Store& s, std::unique_ptr<Conn> c) : store_(s), conn_(std::move(c)) {}
  ~ReadLease() { store_.release(std::move(conn_)); }
  ReadLease(const ReadLease&) = delete;
  ReadLease& operator=(const ReadLease&) = delete;
  Stmt operator()(const std::string& sql) { return Stmt(*conn_, sql); }
  sqlite3* db() { return conn_->db; }

 private:
  Store& store_;
  std::unique_ptr<Conn> conn_;
};

namespace {

constexpr const char* kNow = "strftime('%Y-%m-%dT%H:%M:%fZ','now')";

// A JSON column as stored; one that does not parse is damage, named by `where`.
Json stored_json(const std::string& text, const std::string& where) {
  try {
    return parse_json_limited(text, where);
  } catch (const std::exception& e) {
    throw StoreError(where + ": damaged (" + e.what() + ")");
  }
}

double number_or_nan(const Json& j) {
  if (j.is_null()) return kNaN;
  if (!j.is_number()) throw std::invalid_argument(std::string("a number or null, not ") + j.type_name());
  return j.get<double>();
}

// A square matrix of numbers (null = not determined, NaN); [] when the fit
// determined none (too few readings, a failed fit).
std::vector<std::vector<double>> matrix_of(const Json& j, std::size_t dim, const char* what) {
  if (j.is_array() && j.empty()) return {};
  if (!j.is_array() || j.size() != dim) throw std::invalid_argument(std::string(what) + ": not a " + std::to_string(dim) + "×" + std::to_string(dim) + " matrix");
  std::vector<std::vector<double>> out;
  for (const auto& row : j) {
    if (!row.is_array() || row.size() != dim) throw std::invalid_argument(std::string(what) + ": a row is not " + std::to_string(dim) + " long");
    std::vector<double> r;
    for (const auto& c : row) r.push_back(number_or_nan(c));
    out.push_back(std::move(r));
  }
  return out;
}

// The stored fixture is the one the API serves (daemon/api_json.cpp): what
// was recorded, nothing more, so one writer keeps them the same.
std::string fixture_text(const RunFixture& f) { return to_json(f).dump(); }

// Keys this version does not know (a newer juncod's) are left out.
RunFixture fixture_of(const std::string& text, const std::string& where) {
  const Json j = stored_json(text, where);
  RunFixture f;
  try {
    if (!j.is_object()) throw std::invalid_argument(std::string("an object, not ") + j.type_name());
    const auto get = [&](const char* key) { return j.contains(key) ? number_or_nan(j[key]) : kNaN; };
    f.bias_resistor_ohm = get("bias_resistor_ohm");
    f.dc_return_ohm = get("dc_return_ohm");
    f.source_ohm = get("source_ohm");
    f.load_ohm = get("load_ohm");
    f.stray_c_f = get("stray_c_f");
    if (j.contains("current_from")) f.current_from = j["current_from"].get<std::string>();
    if (j.contains("ac_units")) {
      const Json& u = j["ac_units"];
      f.ac_units = AcUnits{u.at("plan").get<std::string>(), u.at("siggen").get<std::string>(), u.at("levelmeter").get<std::string>()};
    }
  } catch (const std::exception& e) {
    throw StoreError(where + ": damaged (" + e.what() + ")");
  }
  return f;
}

JobState state_of(const std::string& text, const std::string& where) {
  const auto s = job_state_from_string(text);
  if (!s) throw StoreError(where + ": damaged (state \"" + text + "\" is not a job state)");
  return *s;
}

// Commits on scope exit only if commit() was called; otherwise rolls back.
class Transaction {
 public:
  explicit Transaction(sqlite3* db) : db_(db) { run("BEGIN IMMEDIATE"); }
  ~Transaction() {
    if (!done_) sqlite3_exec(db_, "ROLLBACK", nullptr, nullptr, nullptr);
  }
  Transaction(const Transaction&) = delete;
  Transaction& operator=(const Transaction&) = delete;
  void commit() {
    run("COMMIT");
    done_ = true;
  }

 private:
  void run(const char* sql) {
    if (sqlite3_exec(db_, sql, nullptr, nullptr, nullptr) != SQLITE_OK) throw StoreError(failure(db_, sql));
  }
  sqlite3* db_;
  bool done_ = false;
};

}  // namespace

namespace {

// PRAGMA quick_check (integrity_check without the index-content cross-check:
// linear in the file size, a second or so for a few hundred MB). A damaged
// page makes SQLite report "malformed" here instead of failing some later
// query in the middle of a job. Throws with the first complaint, one line.
void check_integrity(sqlite3* db) {
  sqlite3_stmt* st = nullptr;
  if (sqlite3_prepare_v2(db, "PRAGMA quick_check", -1, &st, nullptr) != SQLITE_OK)
    throw StoreError(std::string("PRAGMA quick_check: ") + sqlite3_errmsg(db));
  std::string first;
  long problems = 0;
  int rc;
  while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
    const auto* t = sqlite3_column_text(st, 0);
    const std::string line = t ? reinterpret_cast<const char*>(t) : "";
    if (line == "ok") continue;
    if (problems++ == 0) first = line;
  }
  const std::string step_error = rc == SQLITE_DONE ? "" : sqlite3_errmsg(db);
  sqlite3_finalize(st);
  if (!step_error.empty()) throw StoreError("database is corrupt: PRAGMA quick_check: " + step_error);
  if (problems == 0) return;
  std::replace(first.begin(), first.end(), '\n', ' ');
  throw StoreError("database is corrupt: PRAGMA quick_check: " + first +
                   (problems > 1 ? " (and " + std::to_string(problems - 1) + " more problems)" : ""));
}

}  // namespace

Store::Store(const fs::path& file) : file_(file) {
  std::error_code ec;
  if (file.has_parent_path()) fs::create_directories(file.parent_path(), ec);
  try {
    writer_ = std::make_unique<Conn>(file, false);
    writer_->exec("PRAGMA journal_mode=WAL");
    writer_->exec("PRAGMA synchronous=FULL");
    writer_->exec("PRAGMA foreign_keys=ON");
    check_integrity(writer_->db);  // before migrations write into a damaged file
    apply_migrations(writer_->db, embedded_migrations());
    release(std::make_unique<Conn>(file, true));  // fail here, not on the first query
  } catch (const StoreError& e) {
    writer_.reset();
    throw StoreError(file.string() + ": " + e.what());
  }
}

Store::~Store() = default;

Store::ReadLease Store::reader() {
  {
    std::lock_guard lock(pool_mutex_);
    if (!idle_readers_.empty()) {
      auto c = std::move(idle_readers_.back());
      idle_readers_.pop_back();
      return ReadLease(*this, std::move(c));
    }
  }
  // As many connections as threads reading at once (server threads, executor).
  return ReadLease(*this, std::make_unique<Conn>(file_, true));
}

void Store::release(std::unique_ptr<Conn> conn) {
  if (!conn) return;
  std::lock_guard lock(pool_mutex_);
  idle_readers_.push_back(std::move(conn));
}

int Store::schema_version() {
  auto r = reader();
  return daemon::schema_version(r.db());
}

Json Store::pragma_summary() {
  std::lock_guard lock(write_mutex_);
  Json out;
  for (const char* p : {"journal_mode", "synchronous", "foreign_keys"}) {
    Stmt st(*writer_, std::string("PRAGMA ") + p);
    if (st.step()) out[p] = st.text(0);
  }
  return out;
}

// ---- lots and parts --------------------------------------------------------

Id Store::ensure_lot(const std::string& name) {
  std::lock_guard lock(write_mutex_);
  Stmt(*writer_, std::string("INSERT INTO lots(name, created_at) VALUES (?, ") + kNow + ") ON CONFLICT(name) DO NOTHING").bind(1, name).run();
  Stmt st(*writer_, "SELECT id FROM lots WHERE name = ?");
  st.bind(1, name);
  st.step();
  return st.i64(0);
}

Id Store::ensure_part(Id lot_id, const std::string& label, int slot) {
  std::lock_guard lock(write_mutex_);
  Stmt(*writer_, std::string("INSERT INTO parts(lot_id, label, slot, created_at) VALUES (?, ?, ?, ") + kNow +
                     ") ON CONFLICT(lot_id, label) DO UPDATE SET slot = excluded.slot")
      .bind(1, lot_id)
      .bind(2, label)
      .bind(3, slot)
      .run();
  Stmt st(*writer_, "SELECT id FROM parts WHERE lot_id = ? AND label = ?");
  st.bind(1, lot_id).bind(2, label);
  st.step();
  return st.i64(0);
}

std::optional<PartRow> Store::part(Id part_id) {
  auto r = reader();
  auto st = r("SELECT p.id, p.lot_id, l.name, p.label, COALESCE(p.slot, 0) FROM parts p JOIN lots l ON l.id = p.lot_id WHERE p.id = ?");
  st.bind(1, part_id);
  if (!st.step()) return std::nullopt;
  return PartRow{st.i64(0), st.i64(1), st.text(2), st.text(3), static_cast<int>(st.i64(4))};
}

std::vector<LotRow> Store::lots() {
  auto r = reader();
  auto st = r("SELECT l.id, l.name, l.created_at, (SELECT COUNT(*) FROM parts p WHERE p.lot_id = l.id) FROM lots l ORDER BY l.id");
  std::vector<LotRow> out;
  while (st.step()) out.push_back(LotRow{st.i64(0), st.text(1), st.text(2), static_cast<long>(st.i64(3))});
  return out;
}

std::vector<PartListRow> Store::parts(const std::optional<std::string>& lot) {
  auto r = reader();
  auto st = r(
      "SELECT p.id, p.lot_id, l.name, p.label, COALESCE(p.slot, 0),"
      " (SELECT MAX(f.id) FROM fits f WHERE f.part_id = p.id)"
      " FROM parts p JOIN lots l ON l.id = p.lot_id WHERE (?1 IS NULL OR l.name = ?1) ORDER BY p.id");
  st.bind_opt(1, lot);
  std::vector<PartListRow> out;
  while (st.step()) out.push_back(PartListRow{PartRow{st.i64(0), st.i64(1), st.text(2), st.text(3), static_cast<int>(st.i64(4))}, !st.is_null(5)});
  return out;
}

// ---- instruments -----------------------------------------------------------

void Store::record_instrument(const std::string& role, const std::string& address, const std::string& manufacturer,
                              const std::string& model, const std::string& serial, const std::string& firmware) {
  std::lock_guard lock(write_mutex_);
  Stmt(*writer_, std::string("INSERT INTO instruments(role, address, manufacturer, model, serial, firmware, first_seen, last_seen)"
                             " VALUES (?, ?, ?, ?, ?, ?, ") +
                     kNow + ", " + kNow +
                     ") ON CONFLICT(role, manufacturer, model, serial) DO UPDATE SET"
                     " address = excluded.address, firmware = excluded.firmware, last_seen = excluded.last_seen")
      .bind(1, role).bind(2, address).bind(3, manufacturer).bind(4, model).bind(5, serial).bind(6, firmware)
      .run();
}

std::vector<InstrumentRow> Store::instruments() {
  auto r = reader();
  auto st = r("SELECT role, address, manufacturer, model, serial, firmware, first_seen, last_seen FROM instruments ORDER BY last_seen DESC, id");
  std::vector<InstrumentRow> out;
  while (st.step()) out.push_back(InstrumentRow{st.text(0), st.text(1), st.text(2), st.text(3), st.text(4), st.text(5), st.text(6), st.text(7)});
  return out;
}

// ---- jobs ------------------------------------------------------------------

namespace {
constexpr const char* kJobColumns =
    "SELECT id, plan, state, points_done, points_total, COALESCE(error, ''), COALESCE(submitted_uid, -1),"
    " COALESCE(submitted_pid, -1), submitted_at, COALESCE(started_at, ''), COALESCE(finished_at, ''), updated_at FROM jobs ";

// The stored plan is parsed as a submitted one is (parse_plan): a plan this
// version cannot read is damage, named with the job.
template <typename S>
JobRecord job_row(const S& st) {
  const Id id = st.i64(0);
  const std::string where = "job " + std::to_string(id);
  Plan plan;
  try {
    plan = parse_plan(stored_json(st.text(1), where + ": plan"));
  } catch (const StoreError&) {
    throw;
  } catch (const std::exception& e) {
    throw StoreError(where + ": stored plan damaged (" + e.what() + ")");
  }
  return JobRecord{id, std::move(plan), state_of(st.text(2), where), static_cast<long>(st.i64(3)), static_cast<long>(st.i64(4)),
                   st.text(5), static_cast<int>(st.i64(6)), static_cast<int>(st.i64(7)), st.text(8), st.text(9), st.text(10), st.text(11),
                   true};
}
}  // namespace

Id Store::insert_job(const Plan& plan, long points_total, int uid, int pid) {
  std::lock_guard lock(write_mutex_);
  Stmt(*writer_, std::string("INSERT INTO jobs(plan, state, points_total, submitted_uid, submitted_pid, submitted_at, updated_at)"
                             " VALUES (?, 'queued', ?, ?, ?, ") +
                     kNow + ", " + kNow + ")")
      .bind(1, to_json(plan).dump()).bind(2, points_total).bind(3, uid).bind(4, pid)
      .run();
  return sqlite3_last_insert_rowid(writer_->db);
}

std::optional<JobRecord> Store::job(Id id) {
  auto r = reader();
  auto st = r(std::string(kJobColumns) + "WHERE id = ?");
  st.bind(1, id);
  if (!st.step()) return std::nullopt;
  JobRecord row = job_row(st);
  apply_held(row);
  return row;
}

void Store::hold_job_state(Id id, JobState state, const std::string& error) {
  std::lock_guard lock(held_mutex_);
  held_states_[id] = {state, error};
}

void Store::apply_held(JobRecord& row) {
  std::lock_guard lock(held_mutex_);
  const auto it = held_states_.find(row.id);
  if (it == held_states_.end()) return;
  row.state = it->second.first;
  row.error = it->second.second;
  row.persisted = false;
}

double Store::seconds_since_first_start(Id id) {
  auto r = reader();
  auto st = r("SELECT (julianday('now') - julianday(started_at)) * 86400.0 FROM jobs WHERE id = ? AND started_at IS NOT NULL");
  st.bind(1, id);
  if (!st.step() || st.is_null(0)) return 0.0;
  return std::max(0.0, st.real(0));
}

std::vector<JobRecord> Store::jobs(const std::optional<JobState>& state) {
  auto r = reader();
  bool any_held = false;
  {
    std::lock_guard lock(held_mutex_);
    any_held = !held_states_.empty();
  }
  // With held states the file's state is not the one served: filter after.
  auto st = r(std::string(kJobColumns) + "WHERE (?1 IS NULL OR state = ?1) ORDER BY id");
  st.bind_opt(1, any_held || !state ? std::nullopt : std::optional<std::string>(to_string(*state)));
  std::vector<JobRecord> out;
  while (st.step()) {
    JobRecord row = job_row(st);
    if (any_held) {
      apply_held(row);
      if (state && row.state != *state) continue;
    }
    out.push_back(std::move(row));
  }
  return out;
}

// One UPDATE, so "only if still in `from`" is atomic without a read first.
bool Store::set_job_state_if(Id id, const std::optional<JobState>& from, JobState state, const std::optional<std::string>& error) {
  std::lock_guard lock(write_mutex_);
  Stmt(*writer_, std::string("UPDATE jobs SET state = ?2, error = CASE WHEN ?3 THEN NULLIF(?4, '') ELSE error END, updated_at = ") + kNow +
                     ", started_at = CASE WHEN ?2 = 'running' AND started_at IS NULL THEN " + kNow +
                     " ELSE started_at END, finished_at = CASE WHEN ?2 IN ('done','failed','cancelled','interrupted') THEN " + kNow +
                     " ELSE finished_at END WHERE id = ?1 AND (?5 IS NULL OR state = ?5)")
      .bind(1, id).bind(2, to_string(state)).bind(3, error ? 1 : 0).bind_opt(4, error)
      .bind_opt(5, from ? std::optional<std::string>(to_string(*from)) : std::nullopt)
      .run();
  const bool changed = sqlite3_changes(writer_->db) > 0;
  if (changed) {
    std::lock_guard held(held_mutex_);
    held_states_.erase(id);  // the file has the state again
  }
  return changed;
}

void Store::set_job_state(Id id, JobState state, const std::optional<std::string>& error) {
  set_job_state_if(id, std::nullopt, state, error);
}

bool Store::transition_job(Id id, JobState from, JobState to, const std::optional<std::string>& error) {
  return set_job_state_if(id, from, to, error);
}

std::optional<Id> Store::next_queued_job() {
  auto r = reader();
  auto st = r("SELECT id FROM jobs WHERE state = 'queued' ORDER BY id LIMIT 1");
  if (!st.step()) return std::nullopt;
  return st.i64(0);
}

// ---- runs and points -------------------------------------------------------

namespace {
constexpr const char* kRunColumns =
    "SELECT id, job_id, part_id, slot, fixture, temp_k, state, started_at, COALESCE(finished_at, ''), temp_index, setpoint_k, ambient_k, "
    "ambient_end_k FROM runs ";

template <typename S>
RunRecord run_row(const S& st) {
  const Id id = st.i64(0);
  const auto state = run_state_from_string(st.text(6));
  if (!state) throw StoreError("run " + std::to_string(id) + ": state \"" + st.text(6) + "\" is not a run state");
  RunRecord r{id,         st.i64(1),  st.i64(2),  static_cast<int>(st.i64(3)), fixture_of(st.text(4), "run " + std::to_string(id) + ": fixture"),
              st.real(5), *state,     st.text(7), st.text(8)};
  r.temp_index = static_cast<int>(st.i64(9));
  r.setpoint_k = st.real(10);
  r.ambient_k = st.real(11);
  r.ambient_end_k = st.real(12);
  return r;
}
}  // namespace

RunRecord Store::ensure_run(Id job_id, Id part_id, int slot, const RunFixture& fixture, double temp_k, int temp_index, double setpoint_k) {
  std::lock_guard lock(write_mutex_);
  Stmt(*writer_, std::string("INSERT INTO runs(job_id, part_id, slot, fixture, temp_k, state, started_at, temp_index, setpoint_k) "
                             "VALUES (?, ?, ?, ?, ?, 'running', ") +
                     kNow + ", ?, ?) ON CONFLICT(job_id, part_id, temp_index) DO NOTHING")
      .bind(1, job_id).bind(2, part_id).bind(3, slot).bind(4, fixture_text(fixture)).bind(5, temp_k).bind(6, temp_index).bind(7, setpoint_k)
      .run();
  Stmt st(*writer_, std::string(kRunColumns) + "WHERE job_id = ? AND part_id = ? AND temp_index = ?");
  st.bind(1, job_id).bind(2, part_id).bind(3, temp_index);
  st.step();
  return run_row(st);
}

void Store::set_run_ambient(Id run_id, double ambient_k, double ambient_end_k, double temp_k) {
  std::lock_guard lock(write_mutex_);
  Stmt(*writer_, "UPDATE runs SET ambient_k = ?, ambient_end_k = ?, temp_k = ? WHERE id = ?")
      .bind(1, ambient_k).bind(2, ambient_end_k).bind(3, temp_k).bind(4, run_id)
      .run();
}

Id Store::insert_temperature_fit(Id part_id, Id job_id, const TemperatureLawReport& law) {
  const fitting::TemperatureFit& f = law.fit;
  const std::string detail = fitting::temperature_law_json(law).dump();
  std::lock_guard lock(write_mutex_);
  Stmt(*writer_, std::string("INSERT INTO temperature_fits(part_id, job_id, status, message, eg_ev, eg_ev_se, xti, xti_se, trs1_per_k, "
                             "trs1_per_k_se, tnom_k, detail, created_at) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ") + kNow + ")")
      .bind(1, part_id).bind(2, job_id).bind(3, std::string(f.ok ? "ok" : "failed"))
      .bind_opt(4, f.message.empty() ? std::nullopt : std::optional<std::string>(f.message))
      .bind(5, f.eg_ev.value).bind(6, f.eg_ev.std_error)
      .bind(7, f.xti.value).bind(8, f.xti.std_error)
      .bind(9, f.trs1_per_k.value).bind(10, f.trs1_per_k.std_error)
      .bind(11, f.tnom_k).bind(12, detail)
      .run();
  return sqlite3_last_insert_rowid(writer_->db);
}

std::vector<RunFitAtTemperature> Store::fits_of_job_part(Id job_id, Id part_id) {
  auto r = reader();
  auto st = r(
      "SELECT r.id, r.temp_index, r.temp_k, r.ambient_k, r.ambient_end_k, f.status, f.is_a, f.is_a_se, f.n, f.n_se, f.rs_ohm, f.rs_ohm_se,"
      " COALESCE(f.detail, '{}'), f.id FROM runs r JOIN fits f ON f.run_id = r.id"
      " WHERE r.job_id = ? AND r.part_id = ? AND f.id = (SELECT MAX(id) FROM fits WHERE run_id = r.id) ORDER BY r.temp_index");
  st.bind(1, job_id).bind(2, part_id);
  std::vector<RunFitAtTemperature> out;
  while (st.step()) {
    const auto est = [&](int c) { return fitting::Estimate{st.real(c), st.real(c + 1)}; };
    RunFitAtTemperature f{st.i64(0), static_cast<int>(st.i64(1)), st.real(2), st.real(3), st.real(4), st.text(5), est(6), est(8), est(10), 0.0};
    // corr(Is, n) from the stored correlation when its first two parameters are Is and n.
    const Json detail = stored_json(st.text(12), "fit " + std::to_string(st.i64(13)) + ": detail");
    const Json& names = detail.value("parameter_names", Json::array());
    const Json& corr = detail.value("correlation", Json::array());
    if (names.size() >= 2 && names[0] == "is_a" && names[1] == "n" && corr.size() >= 2 && corr[0].is_array() && corr[0].size() >= 2 &&
        corr[0][1].is_number())
      f.corr_is_n = corr[0][1].get<double>();
    out.push_back(std::move(f));
  }
  return out;
}

std::optional<TemperatureLawRecord> Store::latest_temperature_fit(Id part_id) {
  auto r = reader();
  auto st = r("SELECT id, job_id, detail, created_at FROM temperature_fits WHERE part_id = ? ORDER BY id DESC LIMIT 1");
  st.bind(1, part_id);
  if (!st.step()) return std::nullopt;
  TemperatureLawRecord rec{st.i64(0), st.i64(1), st.text(3), {}};
  const std::string where = "temperature fit " + std::to_string(rec.id) + " of part " + std::to_string(part_id);
  try {
    rec.report = fitting::temperature_law_report_of(stored_json(st.text(2), where + ": detail"));
  } catch (const StoreError&) {
    throw;
  } catch (const std::exception& e) {
    throw StoreError(where + ": detail damaged (" + e.what() + ")");
  }
  return rec;
}

std::vector<RunRecord> Store::runs_of_part(Id part_id) {
  auto r = reader();
  auto st = r(std::string(kRunColumns) + "WHERE part_id = ? ORDER BY id");
  st.bind(1, part_id);
  std::vector<RunRecord> out;
  while (st.step()) out.push_back(run_row(st));
  return out;
}

std::vector<RunRecord> Store::runs_of_job(Id job_id) {
  auto r = reader();
  auto st = r(std::string(kRunColumns) + "WHERE job_id = ? ORDER BY id");
  st.bind(1, job_id);
  std::vector<RunRecord> out;
  while (st.step()) out.push_back(run_row(st));
  return out;
}

void Store::finish_run(Id run_id, RunState state) {
  std::lock_guard lock(write_mutex_);
  Stmt(*writer_, std::string("UPDATE runs SET state = ?, finished_at = ") + kNow + " WHERE id = ?").bind(1, to_string(state)).bind(2, run_id).run();
}

std::optional<long> Store::last_seq(Id run_id) {
  auto r = reader();
  auto st = r("SELECT MAX(seq) FROM points WHERE run_id = ?");
  st.bind(1, run_id);
  if (!st.step() || st.is_null(0)) return std::nullopt;
  return static_cast<long>(st.i64(0));
}

bool Store::run_has_flag(Id run_id, int flag) {
  auto r = reader();
  auto st = r("SELECT 1 FROM points WHERE run_id = ? AND (flags & ?) != 0 LIMIT 1");
  st.bind(1, run_id).bind(2, flag);
  return st.step();
}

void Store::insert_point(Id job_id, const PointRow& p) { insert_points(job_id, {p}); }

void Store::insert_points(Id job_id, const std::vector<PointRow>& points) {
  if (points.empty()) return;
  std::lock_guard lock(write_mutex_);
  Transaction tx(writer_->db);
  for (const auto& p : points)
    Stmt(*writer_,
         "INSERT INTO points(run_id, seq, kind, set_value, set_unit, supply_v, v, i_a, ac_in_v, ac_out_v, ac_unit, freq_hz, temp_k, t_s, flags,"
         " series, dwell_s, ratio, phase_deg) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)")
        .bind(1, p.run_id).bind(2, p.seq).bind(3, p.kind).bind(4, p.set_value).bind(5, p.set_unit).bind(6, p.supply_v)
        .bind(7, p.v).bind(8, p.i_a).bind(9, p.ac_in_v).bind(10, p.ac_out_v)
        .bind_opt(11, p.ac_unit.empty() ? std::nullopt : std::optional<std::string>(p.ac_unit))
        .bind(12, p.freq_hz).bind(13, p.temp_k).bind(14, p.t_s).bind(15, p.flags)
        .bind_opt(16, p.kind == "dc" ? std::optional<std::string>(p.series) : std::nullopt)
        .bind(17, p.dwell_s)
        .bind(18, p.ratio)
        .bind(19, p.phase_deg)
        .run();
  Stmt(*writer_, std::string("UPDATE jobs SET points_done = points_done + ?2, updated_at = ") + kNow + " WHERE id = ?1")
      .bind(1, job_id)
      .bind(2, static_cast<Id>(points.size()))
      .run();
  tx.commit();
}

std::vector<PointRow> Store::points(Id run_id) {
  auto r = reader();
  auto st = r(
      "SELECT run_id, seq, kind, set_value, set_unit, supply_v, v, i_a, ac_in_v, ac_out_v, COALESCE(ac_unit, ''), freq_hz, temp_k, t_s, flags,"
      " COALESCE(series, 'up'), dwell_s, ratio, phase_deg FROM points WHERE run_id = ? ORDER BY seq");
  st.bind(1, run_id);
  std::vector<PointRow> out;
  while (st.step())
    out.push_back(PointRow{st.i64(0), static_cast<long>(st.i64(1)), st.text(2), st.real(3), st.text(4), st.real(5), st.real(6), st.real(7),
                           st.real(8), st.real(9), st.text(10), st.real(11), st.real(12), st.real(13), static_cast<int>(st.i64(14)),
                           st.text(15), st.real(16), st.real(17), st.real(18)});
  return out;
}

// ---- fits ------------------------------------------------------------------

Id Store::insert_fit_row(Id part_id, Id run_id, const fitting::FitResult& fit, const JunctionCapReport* cap,
                         const ElectrothermalReport* electrothermal, const MoreReports& more) {
  const Json detail = fit_detail_json(fit, cap, electrothermal, more);
  // The law's columns only when its fit succeeded; the report (with the
  // reason when it did not) goes into detail either way.
  fitting::Estimate cj0, vj, m;
  if (cap) {
    if (cap->ok) {
      cj0 = cap->cj0_f;
      vj = cap->vj_v;
      m = cap->m;
    }
  }
  Stmt(*writer_, std::string("INSERT INTO fits(part_id, run_id, model, status, message, is_a, is_a_se, n, n_se, rs_ohm, rs_ohm_se, rsh_ohm, rsh_ohm_se,"
                               " temp_k, cost, rms_residual, points_used, warnings, detail, cj0_f, cj0_f_se, vj_v, vj_v_se, m, m_se, covariance, created_at)"
                               " VALUES (?, ?, 'forward', ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ") +
                       kNow + ")")
        .bind(1, part_id).bind(2, run_id).bind(3, fitting::to_string(fit.status)).bind(4, fit.message)
        .bind(5, fit.is_a.value).bind(6, fit.is_a.std_error).bind(7, fit.n.value).bind(8, fit.n.std_error)
        .bind(9, fit.rs_ohm.value).bind(10, fit.rs_ohm.std_error).bind(11, fit.rsh_ohm.value).bind(12, fit.rsh_ohm.std_error)
        .bind(13, fit.temp_k).bind(14, fit.cost).bind(15, fit.rms_residual).bind(16, fit.points_used)
        .bind(17, Json(fit.warnings).dump()).bind(18, detail.dump())
        .bind(19, cj0.value).bind(20, cj0.std_error).bind(21, vj.value).bind(22, vj.std_error).bind(23, m.value).bind(24, m.std_error)
        .bind(25, fitting::matrix_json(fit.covariance).dump())
        .run();
  return sqlite3_last_insert_rowid(writer_->db);
}

void Store::forget_cached_fit(Id part_id) {
  std::lock_guard lock(fit_cache_mutex_);
  ++fit_generation_;
  fit_cache_.erase(part_id);
}

Id Store::insert_fit(Id part_id, Id run_id, const fitting::FitResult& fit, const JunctionCapReport* cap,
                     const ElectrothermalReport* electrothermal, const MoreReports& more) {
  Id id = 0;
  {
    std::lock_guard lock(write_mutex_);
    id = insert_fit_row(part_id, run_id, fit, cap, electrothermal, more);
  }
  forget_cached_fit(part_id);
  return id;
}

Id Store::finish_run_with_fit(Id part_id, Id run_id, const fitting::FitResult& fit, const JunctionCapReport* cap,
                              const ElectrothermalReport* electrothermal, const MoreReports& more) {
  Id id = 0;
  {
    std::lock_guard lock(write_mutex_);
    Transaction tx(writer_->db);
    id = insert_fit_row(part_id, run_id, fit, cap, electrothermal, more);
    Stmt(*writer_, std::string("UPDATE runs SET state = 'done', finished_at = COALESCE(finished_at, ") + kNow + ") WHERE id = ?").bind(1, run_id).run();
    tx.commit();
  }
  forget_cached_fit(part_id);
  return id;
}

std::vector<RunRecord> Store::runs_without_fit(std::optional<Id> job_id, bool done_only) {
  auto r = reader();
  auto st = r(std::string(kRunColumns) +
              "WHERE (?1 IS NULL OR job_id = ?1) AND NOT EXISTS (SELECT 1 FROM fits WHERE fits.run_id = runs.id)"
              " AND (CASE WHEN ?2 THEN state = 'done' ELSE EXISTS (SELECT 1 FROM points WHERE points.run_id = runs.id) END) ORDER BY id");
  if (job_id) st.bind(1, *job_id);
  st.bind(2, done_only ? 1 : 0);
  std::vector<RunRecord> out;
  while (st.step()) out.push_back(run_row(st));
  return out;
}

namespace {

fitting::FitStatus fit_status_of(const std::string& text) {
  for (auto st : {fitting::FitStatus::converged, fitting::FitStatus::no_convergence, fitting::FitStatus::failed,
                  fitting::FitStatus::insufficient})
    if (text == fitting::to_string(st)) return st;
  throw std::invalid_argument("status \"" + text + "\" is not a fit status");
}

// The parts of the stored detail the fit itself needs, into r; the rest
// (reports) stays in the document. Throws on a wrong shape.
void read_fit_detail(const Json& detail, fitting::FitResult& r) {
  if (!detail.is_object()) throw std::invalid_argument(std::string("detail: an object, not ") + detail.type_name());
  if (detail.contains("parameter_names")) r.parameter_names = detail["parameter_names"].get<std::vector<std::string>>();
  for (const auto& name : r.parameter_names)
    if (name != "is_a" && name != "n" && name != "rs_ohm" && name != "rsh_ohm") throw std::invalid_argument("detail.parameter_names: unknown \"" + name + "\"");
  if (detail.contains("correlation")) r.correlation = matrix_of(detail["correlation"], r.parameter_names.size(), "detail.correlation");
  if (detail.contains("excluded"))
    for (const auto& e : detail["excluded"]) r.excluded.push_back({e.at("index").get<std::size_t>(), e.at("reason").get<std::string>()});
  if (detail.contains("iterations")) r.iterations = detail["iterations"].get<int>();
}

// Rows written before migration 0007 have no covariance column value. The
// stored correlation and standard errors determine it: cov(a, b) = r(a, b)·
// u(a)·u(b) (the definition of the correlation coefficient, GUM C.3.6), and
// the stored correlation is that of the stored parameters (the fit's change
// of variables ln Is → Is has a positive derivative, so correlations carry
// over; fitting/extract.cpp fill_uncertainties).
std::vector<std::vector<double>> covariance_from_correlation(const fitting::FitResult& r) {
  const auto se = [&](const std::string& name) {
    return name == "is_a" ? r.is_a.std_error : name == "n" ? r.n.std_error : name == "rs_ohm" ? r.rs_ohm.std_error : r.rsh_ohm.std_error;
  };
  const std::size_t dim = r.parameter_names.size();
  if (r.correlation.size() != dim) return {};
  std::vector<std::vector<double>> cov(dim, std::vector<double>(dim, kNaN));
  for (std::size_t a = 0; a < dim; ++a)
    for (std::size_t b = 0; b < dim; ++b) cov[a][b] = r.correlation[a][b] * se(r.parameter_names[a]) * se(r.parameter_names[b]);
  return cov;
}

}  // namespace

std::shared_ptr<const FitRecord> Store::latest_fit(Id part_id) {
  std::uint64_t generation = 0;
  {
    std::lock_guard lock(fit_cache_mutex_);
    if (auto it = fit_cache_.find(part_id); it != fit_cache_.end()) return it->second;
    generation = fit_generation_;
  }
  auto r = reader();
  auto st = r(
      "SELECT id, part_id, run_id, model, status, COALESCE(message, ''), is_a, is_a_se, n, n_se, rs_ohm, rs_ohm_se, rsh_ohm, rsh_ohm_se,"
      " temp_k, cost, rms_residual, points_used, warnings, COALESCE(detail, '{}'), created_at, cj0_f, cj0_f_se, vj_v, vj_v_se, m, m_se,"
      " covariance FROM fits WHERE part_id = ? ORDER BY id DESC LIMIT 1");
  st.bind(1, part_id);
  if (!st.step()) return nullptr;
  auto rec = std::make_shared<FitRecord>();
  rec->id = st.i64(0);
  rec->part_id = st.i64(1);
  if (!st.is_null(2)) rec->run_id = st.i64(2);
  rec->model = st.text(3);
  rec->created_at = st.text(20);
  const std::string where = "fit " + std::to_string(rec->id) + " of part " + std::to_string(part_id);
  fitting::FitResult& f = rec->fit;
  const auto est = [&](int c) { return fitting::Estimate{st.real(c), st.real(c + 1)}; };
  f.message = st.text(5);
  f.is_a = est(6);
  f.n = est(8);
  f.rs_ohm = est(10);
  f.rsh_ohm = est(12);
  f.temp_k = st.real(14);
  f.cost = st.real(15);
  f.rms_residual = st.real(16);
  f.points_used = static_cast<std::size_t>(st.i64(17));
  rec->cj0_f = est(21);
  rec->vj_v = est(23);
  rec->m = est(25);
  const char* part = "status";
  try {
    f.status = fit_status_of(st.text(4));
    part = "warnings";
    f.warnings = stored_json(st.text(18), where + ": warnings").get<std::vector<std::string>>();
    part = "detail";
    const Json detail = stored_json(st.text(19), where + ": detail");
    read_fit_detail(detail, f);
    // The reports into their typed rows (api_json writes them back).
    part = "detail.junction_cap";
    if (const auto it = detail.find("junction_cap"); it != detail.end()) rec->junction_cap = fitting::junction_cap_report_of(*it);
    part = "detail.electrothermal";
    if (const auto it = detail.find("electrothermal"); it != detail.end()) rec->electrothermal = fitting::electrothermal_report_of(*it);
    part = "detail.heating";
    if (const auto it = detail.find("heating"); it != detail.end()) rec->heating = fitting::heating_report_of(*it);
    part = "detail.stored_charge";
    if (const auto it = detail.find("stored_charge"); it != detail.end()) {
      rec->stored_charge = fitting::ac_charge_fit_of(*it);
      if (rec->stored_charge->ok) rec->tt_s = rec->stored_charge->tt_s;
    }
    part = "detail.pin";
    if (const auto it = detail.find("pin"); it != detail.end()) rec->pin = fitting::pin_report_of(*it);
    part = "detail.package";
    if (const auto it = detail.find("package"); it != detail.end()) rec->package = fitting::vector_run_fit_of(*it);
    part = "covariance";
    f.covariance = st.is_null(27) ? covariance_from_correlation(f)
                                  : matrix_of(stored_json(st.text(27), where + ": covariance"), f.parameter_names.size(), "covariance");
  } catch (const StoreError&) {
    throw;
  } catch (const std::exception& e) {
    throw StoreError(where + ": " + part + " damaged (" + e.what() + ")");
  }
  std::shared_ptr<const FitRecord> out = std::move(rec);
  std::lock_guard lock(fit_cache_mutex_);
  if (generation == fit_generation_) fit_cache_.emplace(part_id, out);  // no fit inserted meanwhile
  return out;
}

}  // namespace junco::daemon
