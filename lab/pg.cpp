#include "lab/pg.hpp"

#include "lab/pg_migrations_embedded.hpp"

#include <charconv>
#include <cmath>
#include <cstdlib>
#include <limits>

namespace junco::lab {

namespace {

// libpq's own parse of a connection string: the options, or why it is not one.
struct ParsedConninfo {
  PQconninfoOption* options = nullptr;
  std::string error;
  explicit ParsedConninfo(const std::string& conninfo) {
    char* err = nullptr;
    options = PQconninfoParse(conninfo.c_str(), &err);
    if (options) return;
    error = err ? err : "out of memory";
    PQfreemem(err);
    while (!error.empty() && error.back() == '\n') error.pop_back();
  }
  ~ParsedConninfo() {
    if (options) PQconninfoFree(options);
  }
  ParsedConninfo(const ParsedConninfo&) = delete;
  ParsedConninfo& operator=(const ParsedConninfo&) = delete;
};

}  // namespace

std::string describe_conninfo(const std::string& conninfo) {
  const ParsedConninfo parsed(conninfo);
  if (!parsed.options) return "(bad connection string: " + parsed.error + ")";
  std::string out;
  for (PQconninfoOption* o = parsed.options; o->keyword; ++o) {
    const std::string k = o->keyword;
    if (!o->val || !*o->val) continue;
    if (k == "host" || k == "hostaddr" || k == "port" || k == "dbname" || k == "user" || k == "service")
      out += (out.empty() ? "" : " ") + k + "=" + o->val;
  }
  return out.empty() ? "(libpq defaults)" : out;
}

std::string conninfo_problem(const std::string& conninfo) {
  const ParsedConninfo parsed(conninfo);
  if (!parsed.options) return "not a libpq connection string: " + parsed.error;
  for (PQconninfoOption* o = parsed.options; o->keyword; ++o)
    if (std::string(o->keyword) == "password" && o->val && *o->val)
      return "must not carry a password; use ~/.pgpass, PGPASSFILE or a service file";
  return "";
}

double PgResult::number(int row, int col) const {
  if (null(row, col)) return std::numeric_limits<double>::quiet_NaN();
  return std::strtod(PQgetvalue(r_.get(), row, col), nullptr);
}

long long PgResult::integer(int row, int col) const {
  if (null(row, col)) return 0;
  return std::strtoll(PQgetvalue(r_.get(), row, col), nullptr, 10);
}

namespace {
// libpq's messages span lines ("...failed: No such file\n\tIs the server
// running...?"); ours are one line: line breaks and tabs become "; " / " ".
std::string trimmed(const char* s) {
  std::string m = s ? s : "";
  while (!m.empty() && (m.back() == '\n' || m.back() == ' ')) m.pop_back();
  std::string out;
  for (std::size_t i = 0; i < m.size(); ++i) {
    if (m[i] == '\n') {
      while (i + 1 < m.size() && (m[i + 1] == '\t' || m[i + 1] == ' ')) ++i;
      out += "; ";
    } else {
      out += m[i] == '\t' ? ' ' : m[i];
    }
  }
  return out;
}
}  // namespace

PgConnection::PgConnection(const std::string& conninfo, int connect_timeout_s, const char* application_name) {
  // Our defaults first, then the user's string (expand_dbname): what the
  // string sets wins. Over TCP, a server that vanishes without closing the
  // connection (cable, power) is noticed within about 20 s instead of the
  // kernel's minutes, so a publisher retries and juncod can stop.
  const std::string timeout = std::to_string(connect_timeout_s);
  const char* keys[] = {"connect_timeout", "application_name", "keepalives_idle", "keepalives_interval", "keepalives_count",
                        "tcp_user_timeout", "dbname", nullptr};
  const char* values[] = {timeout.c_str(), application_name, "10", "5", "2", "20000", conninfo.c_str(), nullptr};
  conn_ = PQconnectdbParams(keys, values, 1);
  if (!conn_ || PQstatus(conn_) != CONNECTION_OK) {
    const std::string why = conn_ ? trimmed(PQerrorMessage(conn_)) : "out of memory";
    if (conn_) PQfinish(conn_);
    conn_ = nullptr;
    throw PgError("lab database " + describe_conninfo(conninfo) + ": " + why, true);
  }
  // Doubles as text must read back exactly (the PostgreSQL 12+ default; set
  // in case a server or role configures otherwise).
  exec("SET extra_float_digits = 1");
}

PgConnection::~PgConnection() {
  if (conn_) PQfinish(conn_);
}

bool PgConnection::ok() const { return conn_ && PQstatus(conn_) == CONNECTION_OK; }

PgResult PgConnection::check(PGresult* r, const std::string& sql) {
  const auto st = r ? PQresultStatus(r) : PGRES_FATAL_ERROR;
  if (st == PGRES_COMMAND_OK || st == PGRES_TUPLES_OK) return PgResult(r);
  std::string why = trimmed(r ? PQresultErrorMessage(r) : PQerrorMessage(conn_));
  if (why.empty()) why = trimmed(PQerrorMessage(conn_));
  if (r) PQclear(r);
  const bool lost = PQstatus(conn_) != CONNECTION_OK;
  throw PgError("lab database: " + why + (lost ? "" : " (in: " + sql.substr(0, 80) + ")"), lost);
}

PgResult PgConnection::exec(const std::string& sql) { return check(PQexec(conn_, sql.c_str()), sql); }

PgResult PgConnection::exec(const std::string& sql, const std::vector<Param>& params) {
  std::vector<const char*> values;
  values.reserve(params.size());
  for (const auto& p : params) values.push_back(p ? p->c_str() : nullptr);
  return check(PQexecParams(conn_, sql.c_str(), static_cast<int>(values.size()), nullptr, values.data(), nullptr, nullptr, 0), sql);
}

std::string exact_text(double x) {
  char buf[64];
  const auto r = std::to_chars(buf, buf + sizeof buf, x);
  return std::string(buf, r.ptr);
}

std::vector<PgMigration> embedded_pg_migrations() {
  std::vector<PgMigration> out;
  for (const auto& m : embedded_pg::migrations) out.push_back({m.version, m.name, m.sql});
  return out;
}

int lab_schema_version(PgConnection& db) {
  const PgResult r = db.exec("SELECT to_regclass('junco.schema_migrations') IS NOT NULL");
  if (r.text(0, 0) != "t") return 0;
  return static_cast<int>(db.exec("SELECT COALESCE(MAX(version), 0) FROM junco.schema_migrations").integer(0, 0));
}

int apply_lab_migrations(PgConnection& db) {
  // One lock id for "the junco lab schema"; held to the end of each transaction.
  constexpr const char* lock = "SELECT pg_advisory_xact_lock(7400120913)";
  int applied = 0;
  for (const auto& m : embedded_pg_migrations()) {
    db.exec("BEGIN");
    try {
      db.exec(lock);
      db.exec("CREATE SCHEMA IF NOT EXISTS junco");
      db.exec("CREATE TABLE IF NOT EXISTS junco.schema_migrations (version integer PRIMARY KEY, name text NOT NULL,"
              " applied_at timestamptz NOT NULL DEFAULT now())");
      const PgResult done = db.exec("SELECT 1 FROM junco.schema_migrations WHERE version = $1", {std::to_string(m.version)});
      if (done.rows() == 0) {
        db.exec(std::string(m.sql));
        db.exec("INSERT INTO junco.schema_migrations(version, name) VALUES ($1, $2)", {std::to_string(m.version), std::string(m.name)});
        ++applied;
      }
      db.exec("COMMIT");
    } catch (const PgError& e) {
      if (db.ok()) PQclear(PQexec(db.raw(), "ROLLBACK"));
      throw PgError(std::string("migration ") + std::string(m.name) + ": " + e.what(), e.connection_lost());
    }
  }
  return applied;
}

}  // namespace junco::lab
