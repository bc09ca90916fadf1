// The junco CLI is a table of subcommands. Each cmd_*.cpp registers its own
// entry at static-initialisation time, so a new subcommand touches no other
// file: define its options and a run function, and a `const bool registered
// = ...` line.
//
// Two kinds of entry, so commands can move over one at a time:
//  - CLI11 (the way to write a command): `define` adds the options, with help
//    text, defaults and checks, to the command's CLI::App; `run_parsed` runs
//    after a successful parse. --help is generated from the same
//    definitions (plus the app's description and footer), bad options exit 2
//    with one line. tools/junco/cli_options.hpp has the unit-bearing options.
//  - the older argument vector: `run` receives the raw arguments and
//    `usage` is its hand-written --help (left in plot and demo).
#pragma once

#include <functional>
#include <string>
#include <utility>
#include <vector>

namespace CLI {
class App;
}

namespace junco::cli {

struct Command {
  std::string name;     // e.g. "fit"
  std::string summary;  // one line for `junco --help`
  std::string usage;    // argument-vector commands: full help text for `junco NAME --help`
  // args excludes the program and subcommand names; returns the exit status.
  std::function<int(const std::vector<std::string>& args)> run;
  // Commands with subcommands of their own see `--help` that follows a
  // subcommand name (e.g. `junco design loss --help`) and answer it themselves.
  bool has_subcommands = false;
  // CLI11 commands (see above); `run` stays empty.
  std::function<void(CLI::App& app)> define{};
  std::function<int()> run_parsed{};
  // Old spellings still accepted, {"--temp", "--temp-c"}: the argument is
  // rewritten before parsing and a warning names the new spelling (both kinds).
  std::vector<std::pair<std::string, std::string>> renamed{};
  // Commands whose first word says what to do (plot KIND, design CALCULATOR,
  // lab COMMAND, export FORMAT): what that word is called, for one line naming
  // the choices, "junco plot: no such plot 'foo' (iv, ac, off, lot)", instead
  // of CLI11's "A subcommand is required". The choices are the CLI11
  // subcommands, or first_words for a command that takes it as a positional.
  std::string first_word_noun{};
  std::vector<std::string> first_words{};
};

bool register_command(Command command);
const std::vector<Command>& commands();

// Exit statuses shared by all subcommands.
inline constexpr int exit_ok = 0;
inline constexpr int exit_failure = 1;  // the work failed (fit not possible, daemon error)
inline constexpr int exit_usage = 2;    // bad command line or bad input file

}  // namespace junco::cli
