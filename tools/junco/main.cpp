// junco: entry point and subcommand dispatch.
#include "tools/junco/command.hpp"
#include "junco/version.hpp"

#include <algorithm>
#include <cstdio>
#include <exception>
#include <string>
#include <vector>

namespace junco::cli {

namespace {
std::vector<Command>& registry() {
  static std::vector<Command> table;
  return table;
}
}  // namespace

bool register_command(Command command) {
  registry().push_back(std::move(command));
  return true;
}

const std::vector<Command>& commands() {
  auto& table = registry();
  std::sort(table.begin(), table.end(), [](const Command& a, const Command& b) { return a.name < b.name; });
  return table;
}

}  // namespace junco::cli

namespace {

void print_overview() {
  std::printf(
      "junco — characterise switching diodes on a bench, fit their models, use the results.\n\n"
      "usage: junco COMMAND [options]      junco COMMAND --help for details\n"
      "       junco --version\n\ncommands:\n");
  for (const auto& c : junco::cli::commands()) std::printf("  %-10s %s\n", c.name.c_str(), c.summary.c_str());
}

}  // namespace

int main(int argc, char** argv) {
  using namespace junco::cli;
  if (argc < 2) {
    print_overview();
    return exit_usage;
  }
  const std::string name = argv[1];
  if (name == "--help" || name == "-h" || name == "help") {
    print_overview();
    return exit_ok;
  }
  if (name == "--version") {
    std::printf("junco %s\n", junco::version);
    return exit_ok;
  }
  const auto& table = commands();
  const auto it = std::find_if(table.begin(), table.end(), [&](const Command& c) { return c.name == name; });
  if (it == table.end()) {
    std::fprintf(stderr, "junco: unknown command '%s' (see junco --help)\n", name.c_str());
    return exit_usage;
  }
  std::vector<std::string> args(argv + 2, argv + argc);
  const bool wants_help = it->has_subcommands ? (!args.empty() && (args[0] == "--help" || args[0] == "-h"))
                                              : std::find(args.begin(), args.end(), "--help") != args.end();
  if (wants_help) {
    std::printf("%s\n", it->usage.c_str());
    return exit_ok;
  }
  try {
    return it->run(args);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "junco %s: %s\n", name.c_str(), e.what());
    return exit_failure;
  }
}
