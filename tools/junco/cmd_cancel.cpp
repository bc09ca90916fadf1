// junco cancel JOB: stops the job with the outputs off; its readings stay in the database.
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <cstdio>

namespace junco::cli {
namespace {

const char* const usage = R"(usage: junco cancel JOB [--socket PATH]

Asks juncod to cancel job JOB: stops the job with the outputs off; its readings stay in the database.
Prints the job's new state.

options:
  --socket PATH  juncod's socket (see junco status --help)

exit status: 0 done; 1 no such job or the job cannot be cancelled in its state.)";

int run(std::vector<std::string> args) {
  return guarded("cancel", [&] {
    const auto socket = take_socket_option(args);
    if (args.size() != 1) throw std::invalid_argument("expected one job id");
    const long job = parse_id(args[0], "JOB");
    RpcClient client(socket);
    const Json j = client.call("job.cancel", Json{{"job_id", job}});
    std::printf("job %ld: %s\n", job, j.value("state", "?").c_str());
    return exit_ok;
  });
}

const bool registered = register_command({"cancel", "cancel a job (outputs off)", usage, run});

}  // namespace
}  // namespace junco::cli
