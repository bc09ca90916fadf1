// junco status: what the daemon is doing (version, uptime, running job, queue).
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <cstdio>

namespace junco::cli {
namespace {

const char* const description = R"(Asks juncod what it is doing: version, uptime, the running job, the queue,
whether the bench is open, the database file, and when the bench publishes to
a lab database: the lab, whether it is reachable, the rows not yet published
(backlog) and how long the oldest has waited (lag).
)";
const char* const footer = R"(exit status: 0 the daemon answered; 1 it could not be reached.)";

struct Options {
  std::string socket;
  bool json = false;
};
Options g_opt;  // bound by define(); one command per process

void define(CLI::App& app) {
  app.description(description);
  app.footer(footer);
  app.add_option("--socket", g_opt.socket,
                 "juncod's socket (default: $JUNCO_SOCKET; as root /run/junco/juncod.sock; else your own daemon's "
                 "$XDG_RUNTIME_DIR/junco/juncod.sock if it is there, else the service's /run/junco/juncod.sock: members "
                 "of group junco need no option)")
      ->type_name("PATH");
  app.add_flag("--json", g_opt.json, "print the daemon.status result as JSON");
}

int run() {
  return guarded("status", [&] {
    const std::string socket = socket_path(g_opt.socket);
    const bool json = g_opt.json;
    RpcClient client(socket);
    const Json s = client.call("daemon.status");
    if (json) {
      std::printf("%s\n", s.dump(2).c_str());
      return exit_ok;
    }
    std::printf("juncod %s, up %.0f s, socket %s\n", s.value("version", "?").c_str(), s.value("uptime_s", 0.0), socket.c_str());
    const Json running = s.value("running_job", Json());
    std::printf("running job: %s\n", running.is_null() ? "none" : running.dump().c_str());
    const Json queue = s.value("queue", Json::array());
    std::printf("queued jobs: %s\n", queue.empty() ? "none" : queue.dump().c_str());
    std::printf("bench:       %s\n", s.value("bench_open", false) ? "open" : "not open");
    if (s.value("bench_problem", Json()).is_string())
      std::printf("             %s\n%s", s["bench_problem"].get<std::string>().c_str(), kBenchHint);
    if (s.contains("database")) std::printf("database:    %s\n", s["database"].get<std::string>().c_str());
    if (const Json lab = s.value("lab", Json()); lab.is_object() && lab.value("enabled", false)) {
      std::printf("lab:         bench %s -> %s, %s; backlog %lld rows, lag %.1f s\n", lab.value("bench", "?").c_str(),
                  lab.value("database", "?").c_str(), lab.value("connected", false) ? "connected" : "NOT connected",
                  lab.value("backlog_rows", 0LL), lab.value("lag_s", 0.0));
      if (lab.contains("last_error") && lab["last_error"].is_string())
        std::printf("lab error:   %s\n", lab["last_error"].get<std::string>().c_str());
    }
    return exit_ok;
  });
}

Command make_command() {
  Command c;
  c.name = "status";
  c.summary = "show what juncod is doing";
  c.define = define;
  c.run_parsed = run;
  return c;
}

const bool registered = register_command(make_command());

}  // namespace
}  // namespace junco::cli
