// The CLI's option and output helpers (see rpc_client.hpp).
#include "tools/junco/rpc_client.hpp"
#include "units/si_text.hpp"

#include "protocol/framing.hpp"  // default_socket_path(), shared with the daemon

#include <poll.h>
#include <sys/socket.h>
#include <sys/un.h>
#include <unistd.h>

#include <algorithm>
#include <cctype>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <cstring>

namespace junco::cli {

std::optional<std::string> take_option(std::vector<std::string>& args, const std::string& name) {
  std::optional<std::string> value;
  for (std::size_t i = 0; i < args.size();) {
    if (args[i] == name) {
      if (i + 1 >= args.size()) throw std::invalid_argument(name + " needs a value");
      value = args[i + 1];
      args.erase(args.begin() + static_cast<long>(i), args.begin() + static_cast<long>(i) + 2);
    } else if (args[i].rfind(name + "=", 0) == 0) {
      value = args[i].substr(name.size() + 1);
      args.erase(args.begin() + static_cast<long>(i));
    } else {
      ++i;
    }
  }
  return value;
}

bool take_flag(std::vector<std::string>& args, const std::string& flag) {
  const auto it = std::find(args.begin(), args.end(), flag);
  if (it == args.end()) return false;
  args.erase(it);
  return true;
}

std::string take_socket_option(std::vector<std::string>& args) {
  if (auto s = take_option(args, "--socket")) return *s;
  return daemon::rpc::default_socket_path();
}

// One grammar for every command: units/si_text.hpp.
double parse_quantity(const std::string& text, const std::string& unit) { return units::parse_si_or_throw(text, unit); }

std::vector<double> parse_quantity_list(const std::string& text, const std::string& unit) { return units::parse_si_list(text, unit); }

std::string format_si(double value, const std::string& unit, int digits) { return units::format_si(value, unit, digits); }

int guarded(const std::string& command, const std::function<int()>& body) {
  try {
    return body();
  } catch (const std::invalid_argument& e) {
    std::fprintf(stderr, "junco %s: %s (see junco %s --help)\n", command.c_str(), e.what(), command.c_str());
    return 2;
  } catch (const ConnectError& e) {
    std::fprintf(stderr, "junco %s: %s\n", command.c_str(), e.what());
    return 1;
  } catch (const RpcError& e) {
    std::fprintf(stderr, "junco %s: juncod: %s\n", command.c_str(), e.what());
    return e.code() == -32602 || e.code() == -32002 ? 2 : 1;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "junco %s: %s\n", command.c_str(), e.what());
    return 1;
  }
}

std::string pad_columns(std::string text, std::size_t width) {
  std::size_t cols = 0;
  for (unsigned char c : text) cols += (c & 0xC0) != 0x80;
  if (cols < width) text.append(width - cols, ' ');
  return text;
}

void write_document(const std::string& content, const std::optional<std::string>& out_path) {
  if (!out_path) {
    std::fputs(content.c_str(), stdout);
    return;
  }
  std::ofstream f(*out_path, std::ios::trunc);
  f << content;
  f.close();
  if (!f) throw std::runtime_error("cannot write " + *out_path);
}

long resolve_part(RpcClient& client, const std::string& text, const std::optional<std::string>& lot) {
  if (!text.empty() && text.find_first_not_of("0123456789") == std::string::npos) return parse_id(text, "PART");
  Json params = Json::object();
  if (lot) params["lot"] = *lot;
  long found = 0;
  int matches = 0;
  for (const auto& p : client.call("part.list", params).value("parts", Json::array()))
    if (p.value("label", "") == text) {
      found = p.value("part_id", 0L);
      ++matches;
    }
  if (matches == 0) throw std::runtime_error("no part labelled '" + text + "'" + (lot ? " in lot " + *lot : ""));
  if (matches > 1) throw std::invalid_argument("label '" + text + "' is used in several lots; add --lot NAME");
  return found;
}

long parse_id(const std::string& text, const std::string& what) {
  std::size_t used = 0;
  long id = 0;
  try {
    id = std::stol(text, &used);
  } catch (const std::exception&) {
    used = 0;
  }
  if (used != text.size() || id <= 0) throw std::invalid_argument(what + " must be a positive integer id, not '" + text + "'");
  return id;
}

bool stdout_is_tty() { return ::isatty(STDOUT_FILENO) == 1; }

void print_bench_wait(RpcClient& client) {
  const Json s = client.call("daemon.status", Json::object());
  if (s.value("bench_open", true) && !s.value("bench_problem", Json()).is_string()) return;
  const std::string why = s.value("bench_problem", Json()).is_string() ? s["bench_problem"].get<std::string>() : "the bench is not open";
  std::fprintf(stderr, "waiting for bench: %s\n%s", why.c_str(), kBenchHint);
}

}  // namespace junco::cli
