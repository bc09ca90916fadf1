// Blocking JSON-RPC client on a Unix socket, and option helpers (see rpc_client.hpp).
#include "tools/junco/rpc_client.hpp"
#include "units/si_text.hpp"

#include "daemon/rpc_framing.hpp"  // default_socket_path(), shared with the daemon

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

namespace {

// Largest reply accepted; part.readings of a long sweep is the biggest.
constexpr std::size_t max_reply_bytes = 64u << 20;

std::string start_hint(const std::string& path) {
  return "start it with `juncod --config FILE` (or `systemctl start juncod`), or point --socket / JUNCO_SOCKET at its socket "
         "(now: " + path + ")";
}

}  // namespace

RpcClient::RpcClient(const std::string& socket_path) : path_(socket_path) {
  sockaddr_un addr{};
  if (path_.size() >= sizeof addr.sun_path) throw ConnectError("socket path too long: " + path_);
  fd_ = ::socket(AF_UNIX, SOCK_STREAM | SOCK_CLOEXEC, 0);
  if (fd_ < 0) throw ConnectError(std::string("cannot create a socket: ") + std::strerror(errno));
  addr.sun_family = AF_UNIX;
  std::memcpy(addr.sun_path, path_.c_str(), path_.size() + 1);
  if (::connect(fd_, reinterpret_cast<sockaddr*>(&addr), sizeof addr) != 0) {
    const int err = errno;
    ::close(fd_);
    fd_ = -1;
    std::string why = std::strerror(err);
    if (err == ENOENT || err == ECONNREFUSED) why += " — is it running? " + start_hint(path_);
    if (err == EACCES) why += " — is your user in the socket's group (paths.socket_group in the daemon's config)?";
    throw ConnectError("cannot reach juncod at " + path_ + ": " + why);
  }
}

RpcClient::~RpcClient() {
  if (fd_ >= 0) ::close(fd_);
}

Json RpcClient::call(const std::string& method, Json params, std::chrono::milliseconds timeout) {
  const long id = next_id_++;
  auto line = Json{{"jsonrpc", "2.0"}, {"id", id}, {"method", method}, {"params", std::move(params)}}.dump(
      -1, ' ', false, Json::error_handler_t::replace);
  line.push_back('\n');
  std::size_t sent = 0;
  while (sent < line.size()) {
    const auto n = ::send(fd_, line.data() + sent, line.size() - sent, MSG_NOSIGNAL);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) throw ConnectError("juncod at " + path_ + " closed the connection: " + std::strerror(errno));
    sent += static_cast<std::size_t>(n);
  }
  const auto deadline = std::chrono::steady_clock::now() + timeout;
  for (;;) {
    auto msg = read_message(deadline);
    if (!msg) throw std::runtime_error("no reply from juncod to " + method + " within " + std::to_string(timeout.count()) + " ms");
    if (!msg->contains("id")) {
      notifications_.push_back(std::move(*msg));
      continue;
    }
    // An error with id null is juncod saying it could not read our request's
    // id (line over its size limit, not JSON): it is this call's answer, as
    // this client has one request in flight at a time. Show it now instead of
    // waiting out the timeout.
    const bool unread_request_error = (*msg)["id"].is_null() && msg->contains("error");
    if ((*msg)["id"] != id && !unread_request_error) continue;  // a stale reply (cannot happen with one caller; ignore)
    if (const auto e = msg->find("error"); e != msg->end())
      throw RpcError(e->value("code", 0), e->value("message", std::string("(no message)")), e->value("data", Json()));
    return msg->value("result", Json());
  }
}

std::optional<Json> RpcClient::next_notification(std::chrono::milliseconds timeout) {
  if (!notifications_.empty()) {
    Json n = std::move(notifications_.front());
    notifications_.pop_front();
    return n;
  }
  const auto deadline = std::chrono::steady_clock::now() + timeout;
  for (;;) {
    auto msg = read_message(deadline);
    if (!msg) return std::nullopt;
    if (!msg->contains("id")) return msg;
  }
}

std::optional<Json> RpcClient::read_message(std::chrono::steady_clock::time_point deadline) {
  for (;;) {
    if (const auto nl = buffer_.find('\n'); nl != std::string::npos) {
      Json msg = Json::parse(buffer_.begin(), buffer_.begin() + static_cast<long>(nl), nullptr, false);
      buffer_.erase(0, nl + 1);
      if (msg.is_discarded()) throw std::runtime_error("juncod sent a line that is not JSON");
      return msg;
    }
    const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - std::chrono::steady_clock::now());
    if (left.count() <= 0) return std::nullopt;
    pollfd p{fd_, POLLIN, 0};
    const int r = ::poll(&p, 1, static_cast<int>(std::min<long>(left.count(), 60000)));
    if (r < 0 && errno == EINTR) continue;
    if (r <= 0) continue;  // loop re-checks the deadline
    char chunk[65536];
    const auto n = ::recv(fd_, chunk, sizeof chunk, 0);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) throw ConnectError("juncod at " + path_ + " closed the connection");
    buffer_.append(chunk, static_cast<std::size_t>(n));
    if (buffer_.size() > max_reply_bytes) throw std::runtime_error("reply from juncod larger than 64 MiB");
  }
}

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
