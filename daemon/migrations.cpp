#include "daemon/migrations.hpp"

#include "daemon/migrations_embedded.hpp"
#include "daemon/store.hpp"

#include <string>

namespace junco::daemon {

namespace {

void exec(sqlite3* db, const std::string& sql, const std::string& what) {
  char* err = nullptr;
  if (sqlite3_exec(db, sql.c_str(), nullptr, nullptr, &err) != SQLITE_OK) {
    std::string msg = err ? err : sqlite3_errmsg(db);
    sqlite3_free(err);
    throw StoreError(what + ": " + msg);
  }
}

bool recorded(sqlite3* db, int version) {
  sqlite3_stmt* st = nullptr;
  if (sqlite3_prepare_v2(db, "SELECT 1 FROM schema_migrations WHERE version = ?", -1, &st, nullptr) != SQLITE_OK)
    throw StoreError(std::string("schema_migrations: ") + sqlite3_errmsg(db));
  sqlite3_bind_int(st, 1, version);
  const bool found = sqlite3_step(st) == SQLITE_ROW;
  sqlite3_finalize(st);
  return found;
}

}  // namespace

std::vector<Migration> embedded_migrations() {
  std::vector<Migration> out;
  for (const auto& m : embedded::migrations) out.push_back({m.version, m.name, m.sql});
  return out;
}

int schema_version(sqlite3* db) {
  sqlite3_stmt* st = nullptr;
  if (sqlite3_prepare_v2(db, "SELECT COALESCE(MAX(version), 0) FROM schema_migrations", -1, &st, nullptr) != SQLITE_OK) {
    return 0;  // table not there yet
  }
  int v = 0;
  if (sqlite3_step(st) == SQLITE_ROW) v = sqlite3_column_int(st, 0);
  sqlite3_finalize(st);
  return v;
}

int apply_migrations(sqlite3* db, const std::vector<Migration>& migrations) {
  exec(db,
       "CREATE TABLE IF NOT EXISTS schema_migrations ("
       " version INTEGER PRIMARY KEY, name TEXT NOT NULL, applied_at TEXT NOT NULL)",
       "schema_migrations");
  int applied = 0;
  int previous = 0;
  for (const auto& m : migrations) {
    if (m.version <= previous) throw StoreError("migration " + std::string(m.name) + ": versions out of order");
    previous = m.version;
    // IMMEDIATE, and the check inside it: a second process opening the same
    // fresh file waits for the first, then sees the migration recorded.
    // PRAGMA foreign_keys is a no-op inside a transaction: set it before.
    const bool fk_off = m.sql.substr(0, kForeignKeysOff.size()) == kForeignKeysOff;
    struct RestoreForeignKeys {
      sqlite3* db;
      bool active;
      ~RestoreForeignKeys() {
        if (active) sqlite3_exec(db, "PRAGMA foreign_keys=ON", nullptr, nullptr, nullptr);
      }
    } restore{db, fk_off};
    if (fk_off) exec(db, "PRAGMA foreign_keys=OFF", "migration " + std::string(m.name));
    exec(db, "BEGIN IMMEDIATE", "migration " + std::string(m.name));
    try {
      if (recorded(db, m.version)) {
        exec(db, "COMMIT", "migration " + std::string(m.name));
        continue;
      }
      exec(db, std::string(m.sql), "migration " + std::string(m.name));
      if (fk_off) {
        sqlite3_stmt* check = nullptr;
        sqlite3_prepare_v2(db, "PRAGMA foreign_key_check", -1, &check, nullptr);
        const bool dangling = check && sqlite3_step(check) == SQLITE_ROW;
        sqlite3_finalize(check);
        if (dangling) throw StoreError("migration " + std::string(m.name) + ": leaves rows whose foreign key points nowhere");
      }
      sqlite3_stmt* st = nullptr;
      sqlite3_prepare_v2(db,
                         "INSERT INTO schema_migrations(version, name, applied_at)"
                         " VALUES (?, ?, strftime('%Y-%m-%dT%H:%M:%fZ','now'))",
                         -1, &st, nullptr);
      sqlite3_bind_int(st, 1, m.version);
      sqlite3_bind_text(st, 2, m.name.data(), static_cast<int>(m.name.size()), SQLITE_TRANSIENT);
      const int rc = sqlite3_step(st);
      sqlite3_finalize(st);
      if (rc != SQLITE_DONE) throw StoreError("migration " + std::string(m.name) + ": " + sqlite3_errmsg(db));
      exec(db, "COMMIT", "migration " + std::string(m.name));
    } catch (...) {
      sqlite3_exec(db, "ROLLBACK", nullptr, nullptr, nullptr);
      throw;
    }
    ++applied;
  }
  return applied;
}

}  // namespace junco::daemon
