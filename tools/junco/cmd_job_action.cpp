// junco cancel | pause | resume JOB: one job.* request that changes a job's
// state, and the state it is in afterwards. The three differ only in their
// words and method, so they are one table.
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <cstdio>
#include <memory>

namespace junco::cli {
namespace {

struct JobAction {
  const char* name;         // the subcommand
  const char* method;       // the JSON-RPC method (schema/api)
  const char* summary;      // one line for `junco --help`
  const char* description;  // what it does
  const char* verb;         // "... cannot be VERB in its state"
};

const JobAction kActions[] = {
    {"cancel", "job.cancel", "cancel a job (outputs off)",
     "stops the job with the outputs off; its readings stay in the database.", "cancelled"},
    {"pause", "job.pause", "pause a job (outputs off)",
     "stops the job after the current point, outputs off; junco resume continues it.", "paused"},
    {"resume", "job.resume", "resume a paused job", "continues a paused job from its next point.", "resumed"},
};

struct Options {
  long job = 0;
  std::string socket;
};

Command make_command(const JobAction& a) {
  auto opt = std::make_shared<Options>();  // bound by define(); one command per process
  Command c;
  c.name = a.name;
  c.summary = a.summary;
  c.define = [a, opt](CLI::App& app) {
    app.description(std::string("Asks juncod to ") + a.name + " job JOB: " + a.description + "\nPrints the job's new state.\n");
    app.footer(std::string("exit status: 0 done; 1 no such job or the job cannot be ") + a.verb + " in its state.");
    app.add_option("JOB", opt->job, "the job id (junco jobs lists them)")->required()->check(positive_id());
    add_socket_option(app, opt->socket);
  };
  c.run_parsed = [a, opt] {
    return guarded(a.name, [&] {
      RpcClient client(socket_path(opt->socket));
      const Json j = client.call(a.method, Json{{"job_id", opt->job}});
      std::printf("job %ld: %s\n", opt->job, j.value("state", "?").c_str());
      return exit_ok;
    });
  };
  return c;
}

const bool registered = [] {
  bool ok = true;
  for (const auto& a : kActions) ok = register_command(make_command(a)) && ok;
  return ok;
}();

}  // namespace
}  // namespace junco::cli
