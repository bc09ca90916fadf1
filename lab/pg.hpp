// The lab database on PostgreSQL, through libpq (the C client library that
// ships with the server; why not libpqxx: DEVELOPERS.md). A thin RAII layer:
// one connection, text-format parameters and results, errors as PgError.
//
// Connection strings are libpq's own (key=value or postgresql:// URI); the
// password comes the usual libpq way (~/.pgpass or PGPASSFILE, a service file
// with PGSERVICE / service=, PGPASSWORD) and is never logged: anything this
// layer prints about a connection goes through describe_conninfo().
#pragma once

#include <libpq-fe.h>

#include <memory>
#include <optional>
#include <stdexcept>
#include <string>
#include <string_view>
#include <vector>

namespace junco::lab {

class PgError : public std::runtime_error {
 public:
  // connection_lost: the server went away (retry later), as opposed to a
  // statement the server refused.
  PgError(const std::string& what, bool connection_lost) : std::runtime_error(what), connection_lost_(connection_lost) {}
  bool connection_lost() const { return connection_lost_; }

 private:
  bool connection_lost_;
};

// "host=/tmp/x port=5432 dbname=lab user=bench1" — only these keys, never a
// password; "(bad connection string: ...)" when libpq cannot parse it.
std::string describe_conninfo(const std::string& conninfo);
// "" when libpq can parse the string and it carries no password; else what
// is wrong, in one line (the password itself never appears).
std::string conninfo_problem(const std::string& conninfo);

class PgResult {
 public:
  PgResult() = default;
  explicit PgResult(PGresult* r) : r_(r, &PQclear) {}
  int rows() const { return r_ ? PQntuples(r_.get()) : 0; }
  int cols() const { return r_ ? PQnfields(r_.get()) : 0; }
  bool null(int row, int col) const { return PQgetisnull(r_.get(), row, col) != 0; }
  std::string_view text(int row, int col) const { return PQgetvalue(r_.get(), row, col); }
  std::optional<std::string> opt(int row, int col) const {
    return null(row, col) ? std::nullopt : std::optional<std::string>(PQgetvalue(r_.get(), row, col));
  }
  double number(int row, int col) const;  // NaN when NULL
  long long integer(int row, int col) const;  // 0 when NULL
  std::string name(int col) const { return PQfname(r_.get(), col); }

 private:
  std::shared_ptr<PGresult> r_;
};

using Param = std::optional<std::string>;  // nullopt = SQL NULL

class PgConnection {
 public:
  // Connects (timeout connect_timeout_s unless the string sets its own);
  // throws PgError(connection_lost = true) naming describe_conninfo() and
  // libpq's reason.
  explicit PgConnection(const std::string& conninfo, int connect_timeout_s = 5, const char* application_name = "junco");
  ~PgConnection();
  PgConnection(const PgConnection&) = delete;
  PgConnection& operator=(const PgConnection&) = delete;

  PgResult exec(const std::string& sql);
  PgResult exec(const std::string& sql, const std::vector<Param>& params);
  bool ok() const;
  PGconn* raw() { return conn_; }

 private:
  PgResult check(PGresult* r, const std::string& sql);
  PGconn* conn_ = nullptr;
};

// Text of a double that reads back as the same double (shortest round trip),
// "NaN" never: a NaN or infinity is sent as NULL by the callers.
std::string exact_text(double x);

// --- lab schema (schema/pg/NNNN_*.sql, embedded) ------------------------------
struct PgMigration {
  int version = 0;
  std::string_view name;
  std::string_view sql;
};
std::vector<PgMigration> embedded_pg_migrations();
// Applies the missing migrations, each in its own transaction under an
// advisory lock (several benches may start at once); returns how many.
int apply_lab_migrations(PgConnection& db);
// Highest applied version, 0 when the schema is not there.
int lab_schema_version(PgConnection& db);

}  // namespace junco::lab
