// junco resume JOB: continues a paused job from its next point.
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <cstdio>

namespace junco::cli {
namespace {

const char* const usage = R"(usage: junco resume JOB [--socket PATH]

Asks juncod to resume job JOB: continues a paused job from its next point.
Prints the job's new state.

options:
  --socket PATH  juncod's socket (see junco status --help)

exit status: 0 done; 1 no such job or the job cannot be resumed in its state.)";

int run(std::vector<std::string> args) {
  return guarded("resume", [&] {
    const auto socket = take_socket_option(args);
    if (args.size() != 1) throw std::invalid_argument("expected one job id");
    const long job = parse_id(args[0], "JOB");
    RpcClient client(socket);
    const Json j = client.call("job.resume", Json{{"job_id", job}});
    std::printf("job %ld: %s\n", job, j.value("state", "?").c_str());
    return exit_ok;
  });
}

const bool registered = register_command({"resume", "resume a paused job", usage, run});

}  // namespace
}  // namespace junco::cli
