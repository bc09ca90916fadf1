// A throw-away PostgreSQL server for a test: initdb into a scratch
// directory, listening only on a Unix socket in that directory (no TCP),
// trust authentication for the local superuser junco_admin, fsync off.
// PostgreSQL refuses to run as root, so when the test runs as root (CI) the
// server runs as `nobody` through runuser (util-linux); the directory is
// handed to that user. Needs Debian's postgresql package (tools/setup); the
// binaries are found in $JUNCO_PG_BIN or the newest /usr/lib/postgresql/*/bin.
//
//   junco::test::PgCluster pg("lab");
//   config["lab"] = {{"database", pg.conninfo()}, {"bench", "bench-a"}};
//   pg.stop(); ... pg.start();            // an outage, same data
#pragma once

#include "tests/support/process.hpp"

#include <unistd.h>

#include <chrono>
#include <cstdlib>
#include <filesystem>
#include <stdexcept>
#include <string>
#include <vector>

namespace junco::test {

class PgCluster {
 public:
  explicit PgCluster(const std::string& tag) {
    bin_ = find_bin();
    dir_ = std::filesystem::temp_directory_path() /
           ("junco-pg-" + tag + "-" + std::to_string(::getpid()) + "-" +
            std::to_string(std::chrono::steady_clock::now().time_since_epoch().count() % 1000000));
    std::filesystem::remove_all(dir_);
    std::filesystem::create_directories(dir_ / "sock");
    if (::geteuid() == 0) {
      as_ = "runuser -u nobody -- ";
      sh("chown -R nobody: '" + dir_.string() + "'");
    }
    sh(as_ + "'" + bin_ + "/initdb' -D '" + data() + "' -U junco_admin -A trust --no-sync -E UTF8 --locale=C >'" +
       (dir_ / "initdb.log").string() + "' 2>&1");
    start();
  }
  ~PgCluster() {
    if (running_) {
      try {
        run_shell_command(as_ + "'" + bin_ + "/pg_ctl' -D '" + data() + "' -m immediate -w stop");
      } catch (const std::exception&) {  // a destructor: the cluster's directory goes anyway
      }
    }
    std::error_code ec;
    std::filesystem::remove_all(dir_, ec);
  }
  PgCluster(const PgCluster&) = delete;
  PgCluster& operator=(const PgCluster&) = delete;

  void start() {
    sh(as_ + "'" + bin_ + "/pg_ctl' -D '" + data() + "' -l '" + (dir_ / "server.log").string() +
       "' -w -t 60 -o \"-k '" + socket_dir() + "' -c listen_addresses='' -c fsync=off -c synchronous_commit=off"
       " -c full_page_writes=off -c max_connections=40\" start >/dev/null");
    running_ = true;
  }
  // Fast shutdown: clients are disconnected, as when a server is restarted.
  void stop() {
    sh(as_ + "'" + bin_ + "/pg_ctl' -D '" + data() + "' -m fast -w -t 60 stop >/dev/null");
    running_ = false;
  }
  bool running() const { return running_; }

  std::string socket_dir() const { return (dir_ / "sock").string(); }
  std::string conninfo(const std::string& user = "junco_admin", const std::string& db = "postgres") const {
    return "host=" + socket_dir() + " port=5432 dbname=" + db + " user=" + user;
  }
  // Runs SQL with psql as the superuser; returns its unaligned output.
  std::string psql(const std::string& sql) const {
    const ProgramRun r = run_program({bin_ + "/psql", "-X", "-q", "-A", "-t", "-v", "ON_ERROR_STOP=1", conninfo(), "-c", sql});
    if (r.exit_code != 0) throw std::runtime_error("psql failed: " + r.out);
    std::string out = r.out;
    while (!out.empty() && out.back() == '\n') out.pop_back();
    return out;
  }
  const std::string& bin() const { return bin_; }

 private:
  std::string data() const { return (dir_ / "data").string(); }
  static void sh(const std::string& cmd) {
    const ProgramRun r = run_shell_command(cmd);
    if (r.exit_code != 0) throw std::runtime_error("PgCluster: failed: " + cmd + "\n" + r.out);
  }
  static std::string find_bin() {
    if (const char* env = std::getenv("JUNCO_PG_BIN"); env && *env) return env;
    std::string best;
    std::error_code ec;
    for (const auto& e : std::filesystem::directory_iterator("/usr/lib/postgresql", ec))
      if (std::filesystem::exists(e.path() / "bin" / "initdb") && e.path().string() > best) best = e.path().string();
    if (best.empty()) throw std::runtime_error("PgCluster: no PostgreSQL server found (tools/setup installs postgresql)");
    return best + "/bin";
  }
  std::string bin_;
  std::filesystem::path dir_;
  std::string as_;  // command prefix to run as the cluster's owner
  bool running_ = false;
};

}  // namespace junco::test
