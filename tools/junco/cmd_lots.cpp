// junco lots: the lots the daemon has measured.
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <cstdio>

namespace junco::cli {
namespace {

const char* const usage = R"(usage: junco lots [--socket PATH] [--json]

Lists the lots in juncod's database: id, name, number of parts, when the lot
was first seen. `junco parts --lot NAME` lists a lot's parts.

options:
  --socket PATH  juncod's socket (see junco status --help)
  --json         print the lot.list result as JSON)";

int run(std::vector<std::string> args) {
  return guarded("lots", [&] {
    const auto socket = take_socket_option(args);
    const bool json = take_flag(args, "--json");
    if (!args.empty()) throw std::invalid_argument("unexpected argument '" + args.front() + "'");
    RpcClient client(socket);
    const Json r = client.call("lot.list");
    if (json) {
      std::printf("%s\n", r.dump(2).c_str());
      return exit_ok;
    }
    const Json lots = r.value("lots", Json::array());
    if (lots.empty()) {
      std::printf("no lots yet (submit a plan: junco submit PLAN.jsonc)\n");
      return exit_ok;
    }
    std::printf("%6s  %-24s  %6s  %s\n", "lot", "name", "parts", "created");
    for (const auto& l : lots)
      std::printf("%6ld  %-24s  %6ld  %s\n", l.value("lot_id", 0L), l.value("name", "").c_str(), l.value("parts", 0L),
                  l.value("created_at", "").c_str());
    return exit_ok;
  });
}

const bool registered = register_command({"lots", "list measured lots", usage, run});

}  // namespace
}  // namespace junco::cli
