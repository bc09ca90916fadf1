// juncod: loads the config, opens the Service (store, bench, executor) and
// serves it on the Unix socket until SIGINT/SIGTERM, then turns the outputs
// off and exits 0. Never listens on TCP. Three ways to run:
//  - default (by hand, `junco demo`): a supervisor process that holds no
//    instrument re-executes juncod as its worker and makes the bench safe
//    whenever the worker dies (daemon/supervisor.hpp);
//  - --no-supervisor: the worker alone (systemd supervises: the unit's
//    ExecStopPost= runs --make-safe; tools/systemd/juncod.service);
//  - --make-safe: open the bench, turn every output off, exit; no database.
// The worker listens on its socket before it first opens the bench
// (daemon/startup_gate.hpp). Logs: daemon/log.hpp.
#include "daemon/config.hpp"
#include "daemon/config_check.hpp"
#include "daemon/core_service.hpp"
#include "daemon/log.hpp"
#include "daemon/rpc_server.hpp"
#include "daemon/startup_gate.hpp"
#include "daemon/supervisor.hpp"
#include "junco/cli_args.hpp"
#include "junco/exit_status.hpp"
#include "junco/version.hpp"
#include "lab/pg.hpp"  // describe_conninfo

#include <unistd.h>

#include <boost/asio/executor_work_guard.hpp>
#include <boost/asio/io_context.hpp>
#include <boost/asio/signal_set.hpp>

#include <algorithm>
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

struct Args {
  std::string config;
  std::string log_level;  // "" = server.log_level of the config, else info
  bool check_only = false;
  bool make_safe = false;
  bool no_supervisor = false;
  int restart_limit = 20;
  int ready_fd = -1;  // internal: set by the supervisor for its worker
};

// The options, defined once: parsing and --help both come from here.
void define_options(CLI::App& app, Args& a) {
  app.description(
      "The junco bench daemon: runs characterisation jobs on the instruments in\n"
      "FILE, stores every reading in its SQLite database and serves clients\n"
      "(junco, scripts) with JSON-RPC 2.0 on a Unix socket (paths.socket in FILE).\n"
      "It listens before it opens the bench, so `junco status` answers at once.");
  // Required, but checked after parsing: an unknown option is the first thing to report.
  junco::cli_args::shown_as(app.add_option("--config", a.config, "bench config (JSON with comments); required"), "FILE");
  app.add_flag("--check-config", a.check_only,
                             "check FILE as a start would (addresses, dialects, socket and database\n"
                             "directories, limits), print every problem or a summary, exit 0 ok / 2 bad");
  app.add_flag("--make-safe", a.make_safe,
                            "open the bench, turn the supply output off (0 V), the generator off\n"
                            "and the scanner open, then exit (0 all safe, 1 not); never opens the\n"
                            "database. The systemd unit runs this after every stop (ExecStopPost=)");
  app.add_flag("--no-supervisor", a.no_supervisor,
               "run the daemon in this one process (under systemd, which supervises it);\n"
               "default: a supervisor process that holds no instrument runs the daemon as\n"
               "its worker and, if the worker dies (crash, kill -9), turns the outputs off\n"
               "at once and starts a new one");
  junco::cli_args::shown_as(app.add_option("--restart-limit", a.restart_limit,
                                           "supervisor: give up (outputs off, exit 1) after more than N worker deaths\n"
                                           "within 10 minutes; a worker that never starts serving is retried 5 times")
                                ->check(junco::cli_args::whole_number(0, 100000)),
                            "N");
  junco::cli_args::shown_as(app.add_option("--log-level", a.log_level,
                 "error (safety failures), warn (faults, retries, pauses), info (lifecycle)\n"
                 "or debug (also every SCPI line); default: server.log_level in FILE, else info")
      ->check(CLI::Validator(
          [](std::string& v) {
            return junco::daemon::parse_log_level(v) ? std::string()
                                                     : std::string("must be ") + junco::daemon::kLogLevelWords + ", not '" + v + "'";
          },
          "", "log level")), "LEVEL");
  app.add_flag("--foreground")->description("accepted for clarity: juncod never detaches; logs go to stderr");
  // Internal: the supervisor passes it to its worker, which writes one byte
  // there once it serves. Hidden from --help (empty group).
  app.add_option("--worker-ready-fd", a.ready_fd, "")->group("")->check(junco::cli_args::whole_number(0, 1 << 20));
  app.footer(
      "Logs go to stderr: under systemd (JOURNAL_STREAM names stderr) each line starts\n"
      "with its journald priority <3> <4> <6> <7>; otherwise with an ISO 8601 UTC time\n"
      "and the level. On SIGINT or SIGTERM the running job stops with the outputs off\n"
      "and juncod exits 0.\n"
      "\n"
      "Examples:\n"
      "  juncod --config bench.jsonc                     supervised, logs at info\n"
      "  juncod --config bench.jsonc --check-config      check a config, start nothing\n"
      "  juncod --config /etc/junco/bench.jsonc --no-supervisor --log-level debug\n"
      "                                                  as the unit runs it, with SCPI traffic\n"
      "  juncod --config bench.jsonc --make-safe         outputs off, then exit\n"
      "\n"
      "Example config: share/doc/junco/bench.example.jsonc (or `junco demo`, which\n"
      "writes one). Exit status: 0 ok, 1 failure, 2 bad command line or config.");
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
  Args args;
  CLI::App app;
  junco::cli_args::setup(app, "juncod");
  define_options(app, args);
  if (const auto code = junco::cli_args::parse(app, argc, argv)) return *code;
  if (args.config.empty()) {
    std::fprintf(stderr, "juncod: --config FILE is required (see juncod --help)\n");
    return junco::exit_usage;
  }

  if (args.check_only) {
    // Every problem at once, nothing opened or created (daemon/config_check.hpp).
    const d::ConfigCheck check = d::check_config_file(args.config);
    for (const auto& w : check.warnings) std::fprintf(stderr, "juncod: warning: %s\n", w.c_str());
    for (const auto& p : check.problems) std::fprintf(stderr, "juncod: %s\n", p.c_str());
    if (!check.ok()) {
      std::fprintf(stderr, "juncod: %zu problem(s) in %s\n", check.problems.size(), args.config.c_str());
      return junco::exit_usage;
    }
    print_summary(check.config);
    return junco::exit_ok;
  }
  d::Config config;
  try {
    config = d::load_config(args.config);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "juncod: bad config: %s\n", e.what());
    return junco::exit_usage;
  }

  // A client that hangs up mid-reply must not kill the daemon.
  std::signal(SIGPIPE, SIG_IGN);
  // The command line wins over the config; both were checked already.
  const std::string level_text = !args.log_level.empty() ? args.log_level : config.server.log_level;
  const d::LogLevel level = d::parse_log_level(level_text).value_or(d::LogLevel::info);
  const d::Log log = d::stderr_log("juncod", level, d::stderr_is_journal() ? d::LogFormat::journal : d::LogFormat::timestamped);

  if (args.make_safe) {
    // Three tries 200 ms apart: a supply that is still closing the dead
    // daemon's connection gets a second chance.
    const std::string errors = d::make_bench_safe_alone(config, 3, std::chrono::milliseconds(200), log);
    if (!errors.empty()) {
      log.error("make-safe failed: " + errors + "; outputs not known to be off, check the bench");
      return junco::exit_failure;
    }
    log.info("make-safe: every output off, scanner open");
    return junco::exit_ok;
  }
  if (!args.no_supervisor) {
    d::SupervisorOptions so;
    // The worker gets this command line minus the supervisor's own option.
    for (int i = 0; i < argc; ++i) {
      const std::string_view a = argv[i];
      if (a == "--restart-limit") ++i;
      else if (a.rfind("--restart-limit=", 0) != 0) so.worker_argv.push_back(argv[i]);
    }
    so.worker_argv.push_back("--no-supervisor");
    so.crash_limit = args.restart_limit;
    so.log = log;
    return d::run_supervisor(config, so);
  }

  boost::asio::io_context io;
  // Installed before anything starts, so a signal during start-up is not lost.
  boost::asio::signal_set signals(io, SIGINT, SIGTERM);

  // The socket first (daemon/startup_gate.hpp): clients learn at once that
  // the bench is being opened, and a second juncod on the same socket is
  // refused before it touches the instruments of the first.
  d::StartupGate gate(config);
  d::ServerOptions server_options;
  server_options.socket_path = config.paths.socket.string();
  server_options.group = config.paths.socket_group;
  server_options.idle_timeout_ms = static_cast<unsigned>(std::lround(config.server.idle_timeout_s * 1000.0));
  server_options.log = log;
  d::RpcServer server(io, gate, server_options);
  try {
    server.start();
  } catch (const std::exception& e) {
    log.error(std::string("cannot serve: ") + e.what());
    return junco::exit_failure;
  }

  std::mutex start_mutex;
  bool stop_asked = false;  // guarded by start_mutex
  auto work = boost::asio::make_work_guard(io);
  signals.async_wait([&](const boost::system::error_code& ec, int signo) {
    if (ec) return;
    log.info(std::string("signal ") + (signo == SIGINT ? "SIGINT" : "SIGTERM") + ": stopping, outputs off");
    d::Service* service = nullptr;
    {
      std::lock_guard lock(start_mutex);
      stop_asked = true;
      service = gate.service();  // null while starting: main() stops it once built
    }
    server.stop();
    if (service) service->shutdown();
    work.reset();
    io.stop();
  });

  // Several threads so one client's slow request does not hold up others;
  // each connection is serialised by its own strand. They serve the gate
  // while this thread builds the Service.
  constexpr int io_threads = 4;
  std::vector<std::thread> pool;
  for (int i = 0; i < io_threads; ++i) pool.emplace_back([&io] { io.run(); });
  auto join_all = [&pool] {
    for (auto& t : pool) t.join();
  };

  std::unique_ptr<d::Service> service;
  try {
    d::ServiceOptions so;
    // The start's warnings and errors also go to daemon.status until it is done.
    so.log = d::Log(
        [&log, &gate](d::LogLevel l, std::string_view m) {
          log.write(l, m);
          if (l <= d::LogLevel::warn && !gate.service()) gate.note(std::string(m));
        },
        std::max(level, d::LogLevel::warn));
    service = d::make_service(config, std::move(so));
  } catch (const std::exception& e) {
    log.error(std::string("cannot start: ") + e.what());
    gate.fail(e.what());
    server.stop();
    work.reset();
    io.stop();
    join_all();
    return junco::exit_failure;
  }
  bool stop_now = false;
  {
    std::lock_guard lock(start_mutex);
    gate.open(*service);
    stop_now = stop_asked;
  }
  if (stop_now) service->shutdown();  // a signal came while it started

  if (args.ready_fd >= 0) {
    // Tell the supervisor this worker serves (its restart back-off resets).
    (void)!::write(args.ready_fd, "R", 1);
    ::close(args.ready_fd);
  }

  join_all();
  service->shutdown();  // once only (the signal handler may have done it)
  log.info("stopped");
  return junco::exit_ok;
}
