// junco jobs: the daemon's jobs, newest last.
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <cstdio>

namespace junco::cli {
namespace {

const char* const description = R"(Lists juncod's jobs: id, state, points done / total, lot, submission time,
and the error of a failed job.
)";
const char* const footer = R"()";

struct Options {
  std::string socket, state;
  bool json = false;
};
Options g_opt;  // bound by define(); one command per process

void define(CLI::App& app) {
  app.description(description);
  app.footer(footer);
  app.add_option("--state", g_opt.state, "only jobs in STATE")
      ->check(CLI::IsMember({"queued", "running", "paused", "done", "failed", "cancelled", "interrupted"}).description(""))
      ->type_name("queued|running|paused|done|failed|cancelled|interrupted");
  add_socket_option(app, g_opt.socket);
  app.add_flag("--json", g_opt.json, "print the job.list result as JSON");
}

int run() {
  return guarded("jobs", [&] {
    const bool json = g_opt.json;
    const auto state = g_opt.state.empty() ? std::nullopt : std::optional<std::string>(g_opt.state);
    RpcClient client(socket_path(g_opt.socket));
    Json params = Json::object();
    if (state) params["state"] = *state;
    const Json r = client.call("job.list", params);
    if (json) {
      std::printf("%s\n", r.dump(2).c_str());
      return exit_ok;
    }
    const Json jobs = r.value("jobs", Json::array());
    if (jobs.empty()) {
      std::printf("no jobs%s\n", state ? (" in state " + *state).c_str() : "");
      return exit_ok;
    }
    std::printf("%6s  %-11s  %13s  %-20s  %-20s  %s\n", "job", "state", "points", "lot", "submitted", "error");
    for (const auto& j : jobs) {
      const std::string points = std::to_string(j.value("points_done", 0L)) + "/" + std::to_string(j.value("points_total", 0L));
      const std::string lot = j.contains("plan") && j["plan"].is_object() ? j["plan"].value("lot", "") : "";
      const std::string error = j.value("error", Json()).is_string() ? j["error"].get<std::string>() : "";
      std::printf("%6ld  %-11s  %13s  %-20s  %-20s  %s\n", j.value("job_id", 0L), j.value("state", "?").c_str(), points.c_str(),
                  lot.c_str(), j.value("submitted_at", "").c_str(), error.c_str());
    }
    return exit_ok;
  });
}

Command make_command() {
  Command c;
  c.name = "jobs";
  c.summary = "list the daemon's jobs";
  c.define = define;
  c.run_parsed = run;
  return c;
}

const bool registered = register_command(make_command());

}  // namespace
}  // namespace junco::cli
