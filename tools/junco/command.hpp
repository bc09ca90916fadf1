// The junco CLI is a table of subcommands. Each cmd_*.cpp registers its own
// entry at static-initialisation time, so a new subcommand touches no other
// file: define a `run` function and a `const bool registered = ...` line.
#pragma once

#include <functional>
#include <string>
#include <vector>

namespace junco::cli {

struct Command {
  std::string name;     // e.g. "fit"
  std::string summary;  // one line for `junco --help`
  std::string usage;    // full help text for `junco NAME --help`
  // args excludes the program and subcommand names; returns the exit status.
  std::function<int(const std::vector<std::string>& args)> run;
  // Commands with subcommands of their own see `--help` that follows a
  // subcommand name (e.g. `junco design loss --help`) and answer it themselves.
  bool has_subcommands = false;
};

bool register_command(Command command);
const std::vector<Command>& commands();

// Exit statuses shared by all subcommands.
inline constexpr int exit_ok = 0;
inline constexpr int exit_failure = 1;  // the work failed (fit not possible, daemon error)
inline constexpr int exit_usage = 2;    // bad command line or bad input file

}  // namespace junco::cli
