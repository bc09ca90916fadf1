// junco resume JOB: continues a paused job from its next point.
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <cstdio>

namespace junco::cli {
namespace {

const char* const description = R"(Asks juncod to resume job JOB: continues a paused job from its next point.
Prints the job's new state.
)";
const char* const footer = R"(exit status: 0 done; 1 no such job or the job cannot be resumed in its state.)";

struct Options {
  long job = 0;
  std::string socket;
};
Options g_opt;  // bound by define(); one command per process

void define(CLI::App& app) {
  app.description(description);
  app.footer(footer);
  app.add_option("JOB", g_opt.job, "the job id (junco jobs lists them)")->required()->check(positive_id());
  add_socket_option(app, g_opt.socket);
}

int run() {
  return guarded("resume", [&] {
    const long job = g_opt.job;
    RpcClient client(socket_path(g_opt.socket));
    const Json j = client.call("job.resume", Json{{"job_id", job}});
    std::printf("job %ld: %s\n", job, j.value("state", "?").c_str());
    return exit_ok;
  });
}

Command make_command() {
  Command c;
  c.name = "resume";
  c.summary = "resume a paused job";
  c.define = define;
  c.run_parsed = run;
  return c;
}

const bool registered = register_command(make_command());

}  // namespace
}  // namespace junco::cli
