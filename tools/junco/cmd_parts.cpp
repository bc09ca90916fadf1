// junco parts [--lot L]: measured parts, and whether each has a fit.
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <cstdio>

namespace junco::cli {
namespace {

const char* const usage = R"(usage: junco parts [--lot NAME] [--socket PATH] [--json]

Lists measured parts: part id, lot, label, fixture slot, and whether the part
has a fit. `junco show PART` prints a part's fitted model.

options:
  --lot NAME     only the parts of lot NAME
  --socket PATH  juncod's socket (see junco status --help)
  --json         print the part.list result as JSON)";

int run(std::vector<std::string> args) {
  return guarded("parts", [&] {
    const auto socket = take_socket_option(args);
    const bool json = take_flag(args, "--json");
    const auto lot = take_option(args, "--lot");
    if (!args.empty()) throw std::invalid_argument("unexpected argument '" + args.front() + "'");
    RpcClient client(socket);
    Json params = Json::object();
    if (lot) params["lot"] = *lot;
    const Json r = client.call("part.list", params);
    if (json) {
      std::printf("%s\n", r.dump(2).c_str());
      return exit_ok;
    }
    const Json parts = r.value("parts", Json::array());
    if (parts.empty()) {
      std::printf("no parts%s\n", lot ? (" in lot " + *lot).c_str() : "");
      return exit_ok;
    }
    std::printf("%6s  %-20s  %-16s  %4s  %s\n", "part", "lot", "label", "slot", "fit");
    for (const auto& p : parts)
      std::printf("%6ld  %-20s  %-16s  %4d  %s\n", p.value("part_id", 0L), p.value("lot", "").c_str(), p.value("label", "").c_str(),
                  p.value("slot", 0), p.value("has_fit", false) ? "yes" : "no");
    return exit_ok;
  });
}

const bool registered = register_command({"parts", "list measured parts (of a lot)", usage, run});

}  // namespace
}  // namespace junco::cli
