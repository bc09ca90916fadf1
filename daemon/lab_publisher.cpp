#include "daemon/lab_publisher.hpp"

#include "daemon/store.hpp"  // StoreError
#include "lab/pg.hpp"

#include <sqlite3.h>

#include <chrono>
#include <cmath>
#include <map>
#include <set>
#include <vector>

namespace junco::daemon {

namespace {

using Json = nlohmann::json;

// What is published, parents first: the lab's foreign keys are checked at
// COMMIT, but a batch in this order reads naturally in the server's log.
// Column names are the same in the store and the lab (schema/pg/0001_lab.sql),
// except that the store's points are the lab's readings.
struct Table {
  const char* store;
  const char* lab;
  std::vector<const char*> columns;  // "id" first
};
const std::vector<Table>& tables() {
  static const std::vector<Table> t{
      {"lots", "lots", {"id", "name", "created_at"}},
      {"parts", "parts", {"id", "lot_id", "label", "slot", "created_at"}},
      {"jobs", "jobs", {"id", "plan", "state", "points_done", "points_total", "error", "submitted_uid", "submitted_pid",
                        "submitted_at", "started_at", "finished_at", "updated_at"}},
      {"runs", "runs", {"id", "job_id", "part_id", "slot", "fixture", "temp_k", "state", "started_at", "finished_at"}},
      {"points", "readings", {"id", "run_id", "seq", "kind", "set_value", "set_unit", "supply_v", "v", "i_a", "ac_in_v",
                              "ac_out_v", "ac_unit", "freq_hz", "temp_k", "t_s", "flags"}},
      {"fits", "fits", {"id", "part_id", "run_id", "model", "status", "message", "is_a", "is_a_se", "n", "n_se", "rs_ohm",
                        "rs_ohm_se", "rsh_ohm", "rsh_ohm_se", "temp_k", "cost", "rms_residual", "points_used", "warnings",
                        "detail", "created_at", "cj0_f", "cj0_f_se", "vj_v", "vj_v_se", "m", "m_se"}},
  };
  return t;
}

// PostgreSQL takes at most 65535 parameters per statement.
constexpr std::size_t kMaxParams = 60000;

double unix_now_s() {
  return std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
}

}  // namespace

// One SQLite connection of the publisher's own (not the store's).
struct LabPublisher::Sqlite {
  explicit Sqlite(const std::filesystem::path& file) {
    if (sqlite3_open_v2(file.c_str(), &db, SQLITE_OPEN_READWRITE | SQLITE_OPEN_NOMUTEX, nullptr) != SQLITE_OK) {
      std::string msg = db ? sqlite3_errmsg(db) : "out of memory";
      sqlite3_close(db);
      throw StoreError("lab publisher: cannot open " + file.string() + ": " + msg);
    }
    sqlite3_busy_timeout(db, 10000);
    // Losing the last outbox deletions in a power cut only sends rows again.
    exec("PRAGMA synchronous=NORMAL");
  }
  ~Sqlite() { sqlite3_close(db); }
  void exec(const std::string& sql) {
    char* err = nullptr;
    if (sqlite3_exec(db, sql.c_str(), nullptr, nullptr, &err) != SQLITE_OK) {
      std::string msg = err ? err : sqlite3_errmsg(db);
      sqlite3_free(err);
      throw StoreError("lab publisher: " + msg + " (in: " + sql.substr(0, 60) + ")");
    }
  }
  sqlite3_stmt* prepare(const std::string& sql) {
    sqlite3_stmt* st = nullptr;
    if (sqlite3_prepare_v2(db, sql.c_str(), -1, &st, nullptr) != SQLITE_OK)
      throw StoreError("lab publisher: " + std::string(sqlite3_errmsg(db)));
    return st;
  }
  sqlite3* db = nullptr;
};

struct LabPublisher::Pg {
  std::unique_ptr<lab::PgConnection> conn;
};

LabPublisher::LabPublisher(const std::filesystem::path& sqlite_file, const LabConfig& lab, Log log)
    : lab_(lab), log_(std::move(log)), sqlite_(std::make_unique<Sqlite>(sqlite_file)), pg_(std::make_unique<Pg>()) {
  if (lab_.database.empty()) {
    // A bench taken out of a lab keeps no outbox; joining again re-queues
    // all. Written only when it was on: a bench that never had a lab starts
    // exactly as before.
    sqlite3_stmt* st = sqlite_->prepare("SELECT enabled FROM lab_publishing");
    const bool was_on = sqlite3_step(st) == SQLITE_ROW && sqlite3_column_int(st, 0) == 1;
    sqlite3_finalize(st);
    if (was_on) {
      sqlite_->exec("BEGIN IMMEDIATE");
      sqlite_->exec("UPDATE lab_publishing SET enabled = 0");
      sqlite_->exec("DELETE FROM lab_outbox");
      sqlite_->exec("COMMIT");
      log_("lab: no lab.database in the config: publishing off, outbox emptied");
    }
    sqlite_.reset();
    return;
  }
  // Turning on and queueing the existing rows is one transaction with the
  // store's writer locked out, so no row is missed between the two.
  sqlite_->exec("BEGIN IMMEDIATE");
  try {
    sqlite_->exec("UPDATE lab_publishing SET enabled = 1 WHERE enabled = 0");
    if (sqlite3_changes(sqlite_->db) > 0) {
      for (const auto& t : tables())
        sqlite_->exec(std::string("INSERT INTO lab_outbox(tbl, row_id, queued_at) SELECT '") + t.store +
                      "', id, (julianday('now') - 2440587.5) * 86400.0 FROM " + t.store + " ORDER BY id");
      log_("lab: publishing on; the store's existing rows are queued");
    }
    sqlite_->exec("COMMIT");
  } catch (...) {
    sqlite3_exec(sqlite_->db, "ROLLBACK", nullptr, nullptr, nullptr);
    throw;
  }
  {
    sqlite3_stmt* st = sqlite_->prepare("SELECT store_id FROM lab_publishing");
    if (sqlite3_step(st) == SQLITE_ROW) store_id_ = reinterpret_cast<const char*>(sqlite3_column_text(st, 0));
    sqlite3_finalize(st);
  }
  status_ = std::make_unique<Sqlite>(sqlite_file);
  log_("lab: bench \"" + lab_.bench + "\" publishes to " + lab::describe_conninfo(lab_.database));
}

LabPublisher::~LabPublisher() { stop(); }

void LabPublisher::start() {
  if (!sqlite_ || thread_.joinable()) return;
  thread_ = std::thread([this] { run(); });
}

void LabPublisher::stop() {
  {
    std::lock_guard lock(mutex_);
    stopping_ = true;
  }
  wake_.notify_all();
  if (thread_.joinable()) thread_.join();
}

bool LabPublisher::wait_for(double seconds) {
  std::unique_lock lock(mutex_);
  return !wake_.wait_for(lock, std::chrono::duration<double>(seconds), [this] { return stopping_; });
}

void LabPublisher::connect() {
  auto conn = std::make_unique<lab::PgConnection>(lab_.database, 3, "juncod");
  const int applied = lab::apply_lab_migrations(*conn);
  const int version = lab::lab_schema_version(*conn);
  conn->exec("INSERT INTO junco.benches(bench, store_id) VALUES ($1, $2) ON CONFLICT (bench) DO NOTHING", {lab_.bench, store_id_});
  const lab::PgResult owner = conn->exec("SELECT store_id FROM junco.benches WHERE bench = $1", {lab_.bench});
  if (owner.rows() != 1 || owner.text(0, 0) != store_id_)
    throw lab::PgError("lab database: bench name \"" + lab_.bench + "\" is already used by another store (" +
                           std::string(owner.rows() ? owner.text(0, 0) : "?") + ", this one is " + store_id_ +
                           "); give this bench its own lab.bench",
                       false);
  pg_->conn = std::move(conn);
  std::lock_guard lock(mutex_);
  connected_ = true;
  lab_schema_version_ = version;
  last_error_.clear();
  if (applied) log_("lab: applied " + std::to_string(applied) + " lab schema migration(s), now version " + std::to_string(version));
}

void LabPublisher::run() {
  double backoff_s = 0.2;
  std::string logged_error;
  for (;;) {
    {
      std::lock_guard lock(mutex_);
      if (stopping_) return;
    }
    try {
      if (!pg_->conn || !pg_->conn->ok()) {
        pg_->conn.reset();
        connect();
        log_("lab: connected");
        logged_error.clear();
        backoff_s = 0.2;
      }
      if (!publish_batch() && !wait_for(0.05)) return;
    } catch (const std::exception& e) {
      // Server down, refused, restarted, or a row it would not take: keep the
      // outbox, say so once per distinct reason, retry with a back-off.
      const bool lost = dynamic_cast<const lab::PgError*>(&e) ? static_cast<const lab::PgError&>(e).connection_lost() : false;
      if (pg_->conn && lost) pg_->conn.reset();
      {
        std::lock_guard lock(mutex_);
        connected_ = pg_->conn && pg_->conn->ok();
        last_error_ = e.what();
      }
      if (logged_error != e.what()) {
        log_.warn(std::string("lab: ") + e.what() + "; will retry, the outbox keeps every row");
        logged_error = e.what();
      }
      if (pg_->conn) {
        PQclear(PQexec(pg_->conn->raw(), "ROLLBACK"));
        if (!pg_->conn->ok()) pg_->conn.reset();
      }
      if (!wait_for(backoff_s)) return;
      backoff_s = std::min(backoff_s * 2, 2.0);
    }
  }
}

bool LabPublisher::publish_batch() {
  sqlite3* db = sqlite_->db;
  // 1. The oldest outbox entries, distinct rows per table.
  std::map<std::string, std::set<long long>> ids;
  long long max_seq = 0;
  std::size_t entries = 0;
  {
    sqlite3_stmt* st = sqlite_->prepare("SELECT seq, tbl, row_id FROM lab_outbox ORDER BY seq LIMIT ?");
    sqlite3_bind_int(st, 1, lab_.batch_rows);
    while (sqlite3_step(st) == SQLITE_ROW) {
      max_seq = sqlite3_column_int64(st, 0);
      ids[reinterpret_cast<const char*>(sqlite3_column_text(st, 1))].insert(sqlite3_column_int64(st, 2));
      ++entries;
    }
    sqlite3_finalize(st);
  }
  if (entries == 0) return false;

  // 2. Those rows as they are now, read in one snapshot; 3. upserted in one
  // lab transaction.
  lab::PgConnection& pg = *pg_->conn;
  sqlite_->exec("BEGIN");
  long long rows = 0;
  try {
    pg.exec("BEGIN");
    pg.exec("UPDATE junco.benches SET last_publish = now() WHERE bench = $1", {lab_.bench});
    for (const auto& t : tables()) {
      auto it = ids.find(t.store);
      if (it == ids.end()) continue;
      std::string id_list = "[";
      for (long long id : it->second) id_list += (id_list.size() > 1 ? "," : "") + std::to_string(id);
      id_list += "]";
      std::string cols;
      for (const char* c : t.columns) cols += (cols.empty() ? "" : ", ") + std::string(c);
      sqlite3_stmt* st = sqlite_->prepare("SELECT " + cols + " FROM " + t.store + " WHERE id IN (SELECT value FROM json_each(?))");
      sqlite3_bind_text(st, 1, id_list.c_str(), -1, SQLITE_TRANSIENT);
      std::vector<lab::Param> params{lab_.bench};
      std::string values;
      std::size_t in_statement = 0;
      std::string update;
      for (std::size_t i = 1; i < t.columns.size(); ++i)
        update += std::string(i > 1 ? ", " : "") + t.columns[i] + " = EXCLUDED." + t.columns[i];
      auto flush = [&] {
        if (!in_statement) return;
        pg.exec(std::string("INSERT INTO junco.") + t.lab + " (bench, " + cols + ") VALUES " + values +
                    " ON CONFLICT (bench, id) DO UPDATE SET " + update,
                params);
        params.resize(1);
        values.clear();
        in_statement = 0;
      };
      int rc;
      while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
        values += values.empty() ? "($1" : ", ($1";
        for (std::size_t c = 0; c < t.columns.size(); ++c) {
          const int c_i = static_cast<int>(c);
          switch (sqlite3_column_type(st, c_i)) {
            case SQLITE_NULL: params.emplace_back(std::nullopt); break;
            case SQLITE_INTEGER: params.emplace_back(std::to_string(sqlite3_column_int64(st, c_i))); break;
            case SQLITE_FLOAT: {
              const double x = sqlite3_column_double(st, c_i);
              params.emplace_back(std::isfinite(x) ? lab::Param(lab::exact_text(x)) : std::nullopt);
              break;
            }
            default: params.emplace_back(std::string(reinterpret_cast<const char*>(sqlite3_column_text(st, c_i)),
                                                     static_cast<std::size_t>(sqlite3_column_bytes(st, c_i))));
          }
          values += ", $" + std::to_string(params.size());
        }
        values += ")";
        ++in_statement;
        ++rows;
        if (params.size() + t.columns.size() > kMaxParams) flush();
      }
      sqlite3_finalize(st);
      if (rc != SQLITE_DONE) throw StoreError(std::string("lab publisher: reading ") + t.store + ": " + sqlite3_errmsg(db));
      flush();
    }
    pg.exec("COMMIT");
    sqlite_->exec("COMMIT");
  } catch (...) {
    sqlite3_exec(db, "ROLLBACK", nullptr, nullptr, nullptr);
    throw;
  }
  // 4. Only now forget them. If juncod dies before this, they go again.
  sqlite_->exec("DELETE FROM lab_outbox WHERE seq <= " + std::to_string(max_seq));
  std::lock_guard lock(mutex_);
  published_rows_ += rows;
  ++batches_;
  last_publish_unix_s_ = unix_now_s();
  return true;
}

Json LabPublisher::status() {
  if (!status_) return Json{{"enabled", false}};
  long long backlog = 0;
  double oldest = NAN;
  {
    std::lock_guard lock(status_mutex_);
    sqlite3_stmt* st = status_->prepare("SELECT count(*), (SELECT queued_at FROM lab_outbox ORDER BY seq LIMIT 1) FROM lab_outbox");
    if (sqlite3_step(st) == SQLITE_ROW) {
      backlog = sqlite3_column_int64(st, 0);
      if (sqlite3_column_type(st, 1) != SQLITE_NULL) oldest = sqlite3_column_double(st, 1);
    }
    sqlite3_finalize(st);
  }
  std::lock_guard lock(mutex_);
  return Json{{"enabled", true},
              {"bench", lab_.bench},
              {"store_id", store_id_},
              {"database", lab::describe_conninfo(lab_.database)},
              {"connected", connected_},
              {"lab_schema_version", lab_schema_version_},
              {"backlog_rows", backlog},
              // How long the oldest row not yet in the lab has waited.
              {"lag_s", std::isfinite(oldest) ? std::max(0.0, unix_now_s() - oldest) : 0.0},
              {"published_rows", published_rows_},
              {"batches", batches_},
              {"last_publish_unix_s", last_publish_unix_s_ > 0 ? Json(last_publish_unix_s_) : Json(nullptr)},
              {"last_error", last_error_.empty() ? Json(nullptr) : Json(last_error_)}};
}

}  // namespace junco::daemon
