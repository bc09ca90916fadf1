// juncod: loads the config, opens the Service (store, bench, executor) and
// serves it on the Unix socket until SIGINT/SIGTERM, then turns the outputs
// off and exits 0. Never forks and never listens on TCP; run it under
// systemd (tools/systemd/juncod.service) or from a shell.
#include "daemon/config.hpp"
#include "daemon/core_service.hpp"
#include "daemon/rpc_server.hpp"
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
    "usage: juncod --config FILE [--foreground] [--log-level LEVEL]\n"
    "       juncod --config FILE --check-config\n"
    "\n"
    "The junco bench daemon: runs characterisation jobs on the instruments in\n"
    "FILE, stores every reading in its SQLite database and serves clients\n"
    "(junco, scripts) with JSON-RPC 2.0 on a Unix socket (paths.socket in FILE).\n"
    "\n"
    "options:\n"
    "  --config FILE      bench config (JSON with comments); required\n"
    "  --check-config     validate FILE, print a summary and exit (0 ok, 2 bad)\n"
    "  --foreground       accepted for clarity: juncod never forks; logs go to stderr\n"
    "  --log-level LEVEL  error, warn, info (default) or debug\n"
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
  bool help = false;
};

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
  Args args;
  if (const auto error = parse_args(argc, argv, args); !error.empty()) {
    std::fprintf(stderr, "juncod: %s (see juncod --help)\n", error.c_str());
    return 2;
  }
  if (args.help) {
    std::fputs(usage_text, stdout);
    return 0;
  }
  d::Config config;
  try {
    config = d::load_config(args.config);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "juncod: bad config: %s\n", e.what());
    return 2;
  }
  if (args.check_only) {
    print_summary(config);
    return 0;
  }

  // A client that hangs up mid-reply must not kill the daemon.
  std::signal(SIGPIPE, SIG_IGN);
  const Logger logger(level_rank(args.log_level));
  const d::LogFn log = [&logger](std::string_view level, std::string_view message) { logger(level, message); };

  boost::asio::io_context io;
  // Installed before the Service starts, so a signal during start-up is not lost.
  boost::asio::signal_set signals(io, SIGINT, SIGTERM);

  std::unique_ptr<d::Service> service;
  try {
    d::ServiceOptions so;
    so.log = [&logger](std::string_view line) { logger("info", line); };
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
