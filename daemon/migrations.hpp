// Schema migrations: schema/migrations/NNNN_name.sql, embedded at build time,
// applied in order, each in its own transaction, and recorded in
// schema_migrations(version, name, applied_at). Re-applying is a no-op.
// A migration whose first line is kForeignKeysOff rebuilds a table other
// tables refer to (SQLite's documented way to change a constraint: new
// table, copy, drop, rename); it runs with foreign-key enforcement off, and
// PRAGMA foreign_key_check must find nothing before it commits.
#pragma once

#include <sqlite3.h>

#include <string_view>
#include <vector>

namespace junco::daemon {

inline constexpr std::string_view kForeignKeysOff = "-- junco: foreign_keys off";

struct Migration {
  int version = 0;
  std::string_view name;  // file name, e.g. "0001_initial.sql"
  std::string_view sql;
};

// The embedded set, in version order.
std::vector<Migration> embedded_migrations();

// Applies those not yet recorded; returns how many were applied.
// Throws StoreError naming the migration when one fails (nothing of it stays).
int apply_migrations(sqlite3* db, const std::vector<Migration>& migrations);

// Highest recorded version, 0 on a fresh database.
int schema_version(sqlite3* db);

}  // namespace junco::daemon
