// juncod: loads the config, opens the Service (store, bench, executor) and
// serves it on the Unix socket until SIGINT/SIGTERM, then turns the outputs
// off and exits 0. Never listens on TCP. Three ways to run:
//  - default (by hand, `junco demo`): a supervisor process that holds no
//    instrument re-executes juncod as its worker and makes the bench safe
//    whenever the worker dies (daemon/supervisor.hpp);
//  - --no-supervisor: the worker alone (systemd supervises: the unit's
//    ExecStopPost= runs --make-safe; tools/systemd/juncod.service);
//  - --make-safe: open the bench, turn every output off, exit; no database.
#include "daemon/config.hpp"
#include "daemon/config_check.hpp"
#include "daemon/core_service.hpp"
#include "daemon/rpc_server.hpp"
#include "junco/version.hpp"
#include "daemon/supervisor.hpp"

#include <unistd.h>
#include "lab/pg.hpp"  // describe_conninfo

#include <boost/asio/executor_work_guard.hpp>
#include <boost/asio/io_context.hpp>
#include <boost/asio/signal_set.hpp>

#include <cmath>
#include <csignal>
#include <cstdio>
#include <exception>
#include <mutex>
#include <string>
#include <string_view>
#include <thread>
#include <vector>

namespace {

constexpr const char* usage_text =
    "usage: juncod --config FILE [--foreground] [--no-supervisor | --restart-limit N]\n"
    "              [--log-level LEVEL]\n"
    "       juncod --config FILE --check-config\n"
    "       juncod --config FILE --make-safe\n"
    "\n"
    "The junco bench daemon: runs characterisation jobs on the instruments in\n"
    "FILE, stores every reading in its SQLite database and serves clients\n"
    "(junco, scripts) with JSON-RPC 2.0 on a Unix socket (paths.socket in FILE).\n"
    "\n"
    "options:\n"
    "  --config FILE      bench config (JSON with comments); required\n"
    "  --check-config     validate FILE, print a summary and exit (0 ok, 2 bad)\n"
    "  --make-safe        open the bench, turn the supply output off (0 V), the\n"
    "                     generator off and the scanner open, then exit (0 all\n"
    "                     safe, 1 not); never opens the database. The systemd\n"
    "                     unit runs this after every stop (ExecStopPost=)\n"
    "  --no-supervisor    run the daemon in this one process (under systemd, which\n"
    "                     supervises it); default: a supervisor process that holds\n"
    "                     no instrument runs the daemon as its worker and, if the\n"
    "                     worker dies (crash, kill -9), turns the outputs off at\n"
    "                     once and starts a new one\n"
    "  --restart-limit N  supervisor: give up (outputs off, exit 1) after more\n"
    "                     than N worker deaths within 10 minutes (default 20);\n"
    "                     a worker that never starts serving is retried 5 times\n"    "  --worker-ready-fd N  internal: the supervisor passes it to its worker, which\n"
    "                     writes one byte there once its socket listens\n"
    "  --foreground       accepted for clarity: juncod never detaches; logs go to stderr\n"
    "  --log-level LEVEL  error, warn, info (default) or debug\n"
    "  --version          print the version and exit\n"
    "  --help             this text\n"
    "\n"
    "On SIGINT or SIGTERM the running job stops with the outputs off and juncod\n"
    "exits 0. Example config: share/doc/junco/bench.example.jsonc (or `junco demo`,\n"
    "which writes one).\n";

int level_rank(std::string_view level) {
  if (level == "error") return 0;
  if (level == "warn") return 1;
  if (level == "info") return 2;
  if (level == "debug") return 3;
  return -1;
}

// stderr logger; one line per message, levels filtered before formatting.
class Logger {
 public:
  explicit Logger(int max_rank) : max_rank_(max_rank) {}
  void operator()(std::string_view level, std::string_view message) const {
    if (level_rank(level) > max_rank_) return;
    std::lock_guard lock(mutex_);
    std::fprintf(stderr, "juncod: %.*s: %.*s\n", static_cast<int>(level.size()), level.data(),
                 static_cast<int>(message.size()), message.data());
    std::fflush(stderr);
  }

 private:
  int max_rank_;
  mutable std::mutex mutex_;
};

struct Args {
  std::string config;
  std::string log_level = "info";
  bool check_only = false;
  bool make_safe = false;
  bool no_supervisor = false;
  int restart_limit = 20;
  int ready_fd = -1;  // internal: set by the supervisor for its worker
  bool help = false;
};

// A whole non-negative number, or throws naming the option.
int count_value(const std::string& name, const std::string& text, int max) {
  std::size_t pos = 0;
  long v = -1;
  try {
    v = std::stol(text, &pos);
  } catch (const std::exception&) {
    pos = 0;
  }
  if (pos != text.size() || v < 0 || v > max) throw name + " wants a whole number 0.." + std::to_string(max) + ", not '" + text + "'";
  return static_cast<int>(v);
}

// Returns an error message, or "" when the command line is fine.
std::string parse_args(int argc, char** argv, Args& out) {
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    auto value = [&](const char* name) -> std::string {
      if (i + 1 >= argc) throw std::string(name) + " needs a value";
      return argv[++i];
    };
    try {
      if (a == "--help" || a == "-h") out.help = true;
      else if (a == "--config") out.config = value("--config");
      else if (a.rfind("--config=", 0) == 0) out.config = a.substr(9);
      else if (a == "--log-level") out.log_level = value("--log-level");
      else if (a.rfind("--log-level=", 0) == 0) out.log_level = a.substr(12);
      else if (a == "--check-config") out.check_only = true;
      else if (a == "--make-safe") out.make_safe = true;
      else if (a == "--no-supervisor") out.no_supervisor = true;
      else if (a == "--restart-limit") out.restart_limit = count_value(a, value("--restart-limit"), 100000);
      else if (a == "--worker-ready-fd") out.ready_fd = count_value(a, value("--worker-ready-fd"), 1 << 20);
      else if (a == "--foreground") {
      } else return "unknown option '" + a + "'";
    } catch (const std::string& message) {
      return message;
    }
  }
  if (out.help) return "";
  if (out.config.empty()) return "--config FILE is required";
  if (level_rank(out.log_level) < 0) return "--log-level must be error, warn, info or debug, not '" + out.log_level + "'";
  return "";
}

void print_summary(const junco::daemon::Config& c) {
  std::printf("config OK: %s\n", c.file.c_str());
  for (const auto& [role, ic] : c.bench) std::printf("  %-10s %s (%s)\n", role.c_str(), ic.address.c_str(), ic.dialect_path.c_str());
  std::printf("  fixture    %d slot(s), bias resistor %g ohm\n", c.fixture.slots, c.fixture.bias_resistor_ohm);
  std::printf("  safety     supply <= %g V, current limit %g A, power <= %g W, reverse <= %g V\n", c.safety.max_supply_v,
              c.safety.current_limit_a, c.safety.max_power_w, c.safety.max_reverse_v);
  std::printf("  database   %s\n  socket     %s%s%s\n", c.paths.database.c_str(), c.paths.socket.c_str(),
              c.paths.socket_group.empty() ? "" : " group ", c.paths.socket_group.c_str());
  if (!c.lab.database.empty())  // docs/lab.md; never the password
    std::printf("  lab        bench %s publishes to %s\n", c.lab.bench.c_str(), junco::lab::describe_conninfo(c.lab.database).c_str());
}

}  // namespace

int main(int argc, char** argv) {
  namespace d = junco::daemon;
  if (junco::print_version_if_asked(argc, argv, "juncod")) return 0;
  Args args;
  if (const auto error = parse_args(argc, argv, args); !error.empty()) {
    std::fprintf(stderr, "juncod: %s (see juncod --help)\n", error.c_str());
    return 2;
  }
  if (args.help) {
    std::fputs(usage_text, stdout);
    return 0;
  }
  if (args.check_only) {
    // Every problem at once, nothing opened or created (daemon/config_check.hpp).
    const d::ConfigCheck check = d::check_config_file(args.config);
    for (const auto& w : check.warnings) std::fprintf(stderr, "juncod: warning: %s\n", w.c_str());
    for (const auto& p : check.problems) std::fprintf(stderr, "juncod: %s\n", p.c_str());
    if (!check.ok()) {
      std::fprintf(stderr, "juncod: %zu problem(s) in %s\n", check.problems.size(), args.config.c_str());
      return 2;
    }
    print_summary(check.config);
    return 0;
  }
  d::Config config;
  try {
    config = d::load_config(args.config);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "juncod: bad config: %s\n", e.what());
    return 2;
  }

  // A client that hangs up mid-reply must not kill the daemon.
  std::signal(SIGPIPE, SIG_IGN);
  const Logger logger(level_rank(args.log_level));
  const d::LogFn log = [&logger](std::string_view level, std::string_view message) { logger(level, message); };

  if (args.make_safe) {
    // Three tries 200 ms apart: a supply that is still closing the dead
    // daemon's connection gets a second chance.
    const std::string errors = d::make_bench_safe_alone(config, 3);
    if (!errors.empty()) {
      log("error", "make-safe: " + errors + "; check the bench");
      return 1;
    }
    log("info", "make-safe: every output off, scanner open");
    return 0;
  }
  if (!args.no_supervisor) {
    d::SupervisorOptions so;
    // The worker gets this command line minus the supervisor's own option.
    for (int i = 0; i < argc; ++i) {
      if (std::string_view(argv[i]) == "--restart-limit") ++i;
      else so.worker_argv.push_back(argv[i]);
    }
    so.worker_argv.push_back("--no-supervisor");
    so.crash_limit = args.restart_limit;
    so.log = log;
    return d::run_supervisor(config, so);
  }

  boost::asio::io_context io;
  // Installed before the Service starts, so a signal during start-up is not lost.
  boost::asio::signal_set signals(io, SIGINT, SIGTERM);

  std::unique_ptr<d::Service> service;
  try {
    d::ServiceOptions so;
    so.log = [&logger](std::string_view line) {  // "warn: " marks a warning (core_service.hpp)
      if (line.substr(0, 6) == "warn: ") logger("warn", line.substr(6));
      else logger("info", line);
    };
    service = d::make_service(config, std::move(so));
  } catch (const std::exception& e) {
    log("error", std::string("cannot start: ") + e.what());
    return 1;
  }

  d::ServerOptions server_options;
  server_options.socket_path = config.paths.socket.string();
  server_options.group = config.paths.socket_group;
  server_options.idle_timeout_ms = static_cast<unsigned>(std::lround(config.server.idle_timeout_s * 1000.0));
  server_options.log = log;
  d::RpcServer server(io, *service, server_options);
  try {
    server.start();
  } catch (const std::exception& e) {
    log("error", std::string("cannot serve: ") + e.what());
    service->shutdown();
    return 1;
  }

  if (args.ready_fd >= 0) {
    // Tell the supervisor this worker serves (its restart back-off resets).
    (void)!::write(args.ready_fd, "R", 1);
    ::close(args.ready_fd);
  }

  auto work = boost::asio::make_work_guard(io);
  signals.async_wait([&](const boost::system::error_code& ec, int signo) {
    if (ec) return;
    log("info", std::string("signal ") + (signo == SIGINT ? "SIGINT" : "SIGTERM") + ": stopping, outputs off");
    server.stop();
    service->shutdown();
    work.reset();
    io.stop();
  });

  // Several threads so one client's slow request does not hold up others;
  // each connection is serialised by its own strand.
  constexpr int io_threads = 4;
  std::vector<std::thread> pool;
  for (int i = 1; i < io_threads; ++i) pool.emplace_back([&io] { io.run(); });
  io.run();
  for (auto& t : pool) t.join();
  log("info", "stopped");
  return 0;
}
