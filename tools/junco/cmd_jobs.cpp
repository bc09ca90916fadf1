// junco jobs: the daemon's jobs, newest last.
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <cstdio>

namespace junco::cli {
namespace {

const char* const usage = R"(usage: junco jobs [--state STATE] [--socket PATH] [--json]

Lists juncod's jobs: id, state, points done / total, lot, submission time,
and the error of a failed job.

options:
  --state STATE  only jobs in STATE: queued, running, paused, done, failed,
                 cancelled or interrupted
  --socket PATH  juncod's socket (see junco status --help)
  --json         print the job.list result as JSON)";

int run(std::vector<std::string> args) {
  return guarded("jobs", [&] {
    const auto socket = take_socket_option(args);
    const bool json = take_flag(args, "--json");
    const auto state = take_option(args, "--state");
    if (!args.empty()) throw std::invalid_argument("unexpected argument '" + args.front() + "'");
    RpcClient client(socket);
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

const bool registered = register_command({"jobs", "list the daemon's jobs", usage, run});

}  // namespace
}  // namespace junco::cli
