// What every daemon-facing junco subcommand needs: the blocking JSON-RPC
// client (protocol/rpc_client.hpp), the common --socket option, and parsing of unit-bearing option values ("1mA").
#pragma once

#include "protocol/rpc_client.hpp"  // RpcClient, RpcError, ConnectError

#include <nlohmann/json.hpp>

#include <chrono>
#include <deque>
#include <functional>
#include <optional>
#include <stdexcept>
#include <string>
#include <vector>

namespace junco::cli {

// Removes "--socket PATH" / "--socket=PATH" from args and returns the path
// to use: that option, else $JUNCO_SOCKET, else the daemon's default.
std::string take_socket_option(std::vector<std::string>& args);

// Removes a flag ("--watch") from args; true when it was there.
bool take_flag(std::vector<std::string>& args, const std::string& flag);
// Removes "--name VALUE" / "--name=VALUE"; throws std::invalid_argument when the value is missing.
std::optional<std::string> take_option(std::vector<std::string>& args, const std::string& name);

// Parses an engineering value in `unit` ("A", "V", "ohm"): "1mA", "10e-3",
// "5 mA", "100u", "4.7µA", "2.5k", "10meg" (units::parse_si). Throws
// std::invalid_argument with a one-line message naming the text and the unit.
double parse_quantity(const std::string& text, const std::string& unit);
// Comma-separated list of the above ("1mA,10mA").
std::vector<double> parse_quantity_list(const std::string& text, const std::string& unit);

// Formats with an SI prefix and unit: 1.234e-3 → "1.234 mA".
// What to do while the bench is not open, for every command that reports it.
inline constexpr const char* kBenchHint =
    "             (juncod retries every few seconds by itself; fix the instrument or its address,\n"
    "             check the config with juncod --config FILE --check-config)\n";

// "waiting for bench: REASON" and the hint, when the daemon says the bench
// is not open; nothing otherwise.
void print_bench_wait(RpcClient& client);

// Formats with an SI prefix and unit: 1.234e-3 → "1.234 mA" (units::format_si).
std::string format_si(double value, const std::string& unit, int digits = 4);

// Pads to `width` terminal columns (UTF-8: Ω and ± are two bytes, one column).
std::string pad_columns(std::string text, std::size_t width);

// A document the daemon made (an export): to stdout, or to out_path, which is
// only written once the whole content is in hand. Throws std::runtime_error.
void write_document(const std::string& content, const std::optional<std::string>& out_path);

// Runs a daemon-facing subcommand, printing any error as one line
// "junco COMMAND: ..." on stderr. Exit statuses: std::invalid_argument (bad
// options) → 2; an RPC error for bad input (invalid params, refused plan) → 2;
// daemon unreachable, other RPC errors, failures → 1.
int guarded(const std::string& command, const std::function<int()>& body);

// Parses a job or part id given on the command line ("12"); throws std::invalid_argument.
long parse_id(const std::string& text, const std::string& what);

// A part given on the command line: an id ("12") or a label ("WR-03"); a
// label used in several lots needs the lot. Throws std::runtime_error for no
// such part, std::invalid_argument for an ambiguous label.
long resolve_part(RpcClient& client, const std::string& text, const std::optional<std::string>& lot);

// Follows a job until it ends (cmd_watch.cpp): a live progress bar on a
// terminal, plain lines otherwise. Returns 0 when the job is done, 1 when it
// failed, was cancelled or interrupted.
int watch_job(RpcClient& client, long job_id);

// True when stdout is a terminal (progress bars, colours off otherwise).
bool stdout_is_tty();

}  // namespace junco::cli
