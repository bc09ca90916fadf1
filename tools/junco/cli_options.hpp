// CLI11 options that read values through the one units module, so every
// junco command accepts the same "1mA", "2.2pF", "10meg", "4.7µ".
#pragma once

#include <CLI/CLI.hpp>

#include <optional>
#include <string>
#include <vector>

namespace junco::cli {

// --name VALUE in `unit` ("A", "V", "ohm", "F", "dB", "C"; "" plain number)
// into `target`. `shown_default` (may be empty) is printed in --help; checks
// beyond the grammar (> 0, a range) belong to the caller after parsing.
CLI::Option* add_si_option(CLI::App& app, const std::string& names, double& target, const std::string& unit,
                           const std::string& help, const std::string& shown_default = "");
CLI::Option* add_si_option(CLI::App& app, const std::string& names, std::optional<double>& target, const std::string& unit,
                           const std::string& help);
// A comma-separated list ("1mA,10mA").
CLI::Option* add_si_list_option(CLI::App& app, const std::string& names, std::vector<double>& target, const std::string& unit,
                                const std::string& help, const std::string& shown_default = "");

// A job, part or run id: a positive integer ("12"); the error names the text.
CLI::Validator positive_id();

// --socket PATH, as every daemon-facing command takes it; empty: $JUNCO_SOCKET
// or the daemon's default (socket_path()).
CLI::Option* add_socket_option(CLI::App& app, std::string& target);
std::string socket_path(const std::string& option_value);

// Rewrites old spellings ("--temp" or "--temp=5" for {"--temp","--temp-c"}) in
// args and warns once per spelling on stderr, naming the new one. Both
// spellings of one option at once: prints "junco COMMAND: give --temp-c only
// (--temp is its old spelling)" and returns false (exit_usage), so the user
// is not told CLI11's "At Most 1 required but received 2".
bool apply_renames(const std::string& command, std::vector<std::string>& args,
                   const std::vector<std::pair<std::string, std::string>>& renamed);

// Parses `args` with `app` (command name first removed). Returns nullopt on
// success; otherwise the exit status after printing help (0) or one line
// "junco COMMAND: ... (see junco COMMAND --help)" (2).
std::optional<int> parse_command_line(CLI::App& app, const std::string& command, std::vector<std::string> args);

}  // namespace junco::cli
