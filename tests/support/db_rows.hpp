// The first column of a one-row query on a SQLite file opened read-only:
// how tests count what the store holds without going through juncod.
#pragma once

#include <catch2/catch.hpp>
#include <sqlite3.h>

#include <filesystem>

namespace junco::test {

inline int count_rows(const std::filesystem::path& db, const char* sql) {
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

}  // namespace junco::test
