// junco parts [--lot L]: measured parts, and whether each has a fit.
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <cstdio>

namespace junco::cli {
namespace {

const char* const description = R"(Lists measured parts: part id, lot, label, fixture slot, and whether the part
has a fit. `junco show PART` prints a part's fitted model.
)";
const char* const footer = R"()";

struct Options {
  std::string socket, lot;
  bool json = false;
};
Options g_opt;  // bound by define(); one command per process

void define(CLI::App& app) {
  app.description(description);
  app.footer(footer);
  app.add_option("--lot", g_opt.lot, "only the parts of lot NAME")->type_name("NAME");
  add_socket_option(app, g_opt.socket);
  app.add_flag("--json", g_opt.json, "print the part.list result as JSON");
}

int run() {
  return guarded("parts", [&] {
    const bool json = g_opt.json;
    const auto lot = g_opt.lot.empty() ? std::nullopt : std::optional<std::string>(g_opt.lot);
    RpcClient client(socket_path(g_opt.socket));
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

Command make_command() {
  Command c;
  c.name = "parts";
  c.summary = "list measured parts (of a lot)";
  c.define = define;
  c.run_parsed = run;
  return c;
}

const bool registered = register_command(make_command());

}  // namespace
}  // namespace junco::cli
