// junco: entry point and subcommand dispatch (the table of command.hpp).
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "junco/version.hpp"

#include <CLI/CLI.hpp>

#include <algorithm>
#include <cstdio>
#include <exception>
#include <optional>
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
  std::printf(
      "\nValues take SI prefixes and an optional unit: 1mA, 2.2pF, 100MHz, 10meg, 4.7u (m = milli,\n"
      "M = mega). Exit status: 0 ok, 1 the work failed, 2 bad command line or input file.\n");
}

// The first word of a command that has a choice of them (Command::first_word_noun):
// an unknown one, or none where one is required, is said here in one line with
// the choices. Words after an option are left to CLI11 (an option may take them).
std::optional<int> check_first_word(const junco::cli::Command& c, const CLI::App& app, const std::vector<std::string>& args) {
  using namespace junco::cli;
  if (c.first_word_noun.empty()) return std::nullopt;
  std::vector<std::string> names = c.first_words;
  if (names.empty())
    for (const auto* sub : app.get_subcommands([](const CLI::App*) { return true; })) names.push_back(sub->get_name());
  std::string list;
  for (const auto& n : names) list += (list.empty() ? "" : ", ") + n;
  const auto is_name = [&](const std::string& w) { return std::find(names.begin(), names.end(), w) != names.end(); };
  const auto is_help = [](const std::string& w) { return w == "--help" || w == "-h"; };
  if (std::any_of(args.begin(), args.end(), is_help)) return std::nullopt;
  if (!args.empty() && !args[0].empty() && args[0][0] != '-' && !is_name(args[0])) {
    std::fprintf(stderr, "junco %s: no such %s '%s' (%s)\n", c.name.c_str(), c.first_word_noun.c_str(), args[0].c_str(), list.c_str());
    return exit_usage;
  }
  const bool required = c.first_words.empty() ? app.get_require_subcommand_min() > 0 : true;
  if (required && std::none_of(args.begin(), args.end(), is_name)) {
    std::fprintf(stderr, "junco %s: which %s? (%s; see junco %s --help)\n", c.name.c_str(), c.first_word_noun.c_str(), list.c_str(),
                 c.name.c_str());
    return exit_usage;
  }
  return std::nullopt;
}

// A CLI11 command: its options are defined on a fresh app, parsed, then run.
int run_defined(const junco::cli::Command& c, const std::vector<std::string>& args) {
  using namespace junco::cli;
  CLI::App app(c.summary, "junco " + c.name);
  app.get_formatter()->column_width(30);
  app.get_formatter()->label("OPTIONS", "options");
  app.get_formatter()->label("REQUIRED", "required");
  c.define(app);
  if (const auto status = check_first_word(c, app, args)) return *status;
  if (const auto status = parse_command_line(app, c.name, args)) return *status;
  return c.run_parsed();
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
  if (!apply_renames(name, args, it->renamed)) return exit_usage;
  try {
    if (it->define) return run_defined(*it, args);
    const bool wants_help = it->has_subcommands ? (!args.empty() && (args[0] == "--help" || args[0] == "-h"))
                                                : std::find(args.begin(), args.end(), "--help") != args.end();
    if (wants_help) {
      std::printf("%s\n", it->usage.c_str());
      return exit_ok;
    }
    return it->run(args);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "junco %s: %s\n", name.c_str(), e.what());
    return exit_failure;
  }
}
