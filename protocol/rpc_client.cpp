// Blocking JSON-RPC client on a Unix socket (see rpc_client.hpp).
#include "protocol/rpc_client.hpp"

#include <poll.h>
#include <sys/socket.h>
#include <sys/un.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <utility>

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

void RpcClient::send_raw(const std::string& bytes) {
  std::size_t sent = 0;
  while (sent < bytes.size()) {
    const auto n = ::send(fd_, bytes.data() + sent, bytes.size() - sent, MSG_NOSIGNAL);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) throw ConnectError("juncod at " + path_ + " closed the connection: " + std::strerror(errno));
    sent += static_cast<std::size_t>(n);
  }
}

Json RpcClient::call(const std::string& method, Json params, std::chrono::milliseconds timeout) {
  const long id = next_id_++;
  auto line = Json{{"jsonrpc", "2.0"}, {"id", id}, {"method", method}, {"params", std::move(params)}}.dump(
      -1, ' ', false, Json::error_handler_t::replace);
  line.push_back('\n');
  send_raw(line);
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

std::optional<std::string> RpcClient::take_line() {
  const auto nl = buffer_.find('\n');
  if (nl == std::string::npos) return std::nullopt;
  std::string line = buffer_.substr(0, nl);
  buffer_.erase(0, nl + 1);
  return line;
}

RpcClient::Fill RpcClient::fill(std::chrono::steady_clock::time_point deadline) {
  for (;;) {
    const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - std::chrono::steady_clock::now());
    if (left.count() <= 0) return Fill::timeout;
    pollfd p{fd_, POLLIN, 0};
    const int r = ::poll(&p, 1, static_cast<int>(std::min<long>(left.count(), 60000)));
    if (r < 0 && errno == EINTR) continue;
    if (r <= 0) continue;  // loop re-checks the deadline
    char chunk[65536];
    const auto n = ::recv(fd_, chunk, sizeof chunk, 0);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) return Fill::closed;
    buffer_.append(chunk, static_cast<std::size_t>(n));
    if (buffer_.size() > max_reply_bytes) throw std::runtime_error("reply from juncod larger than 64 MiB");
    return Fill::data;
  }
}

std::optional<Json> RpcClient::read_message(std::chrono::steady_clock::time_point deadline) {
  for (;;) {
    if (auto line = take_line()) {
      Json msg = Json::parse(*line, nullptr, false);
      if (msg.is_discarded()) throw std::runtime_error("juncod sent a line that is not JSON");
      return msg;
    }
    const Fill f = fill(deadline);
    if (f == Fill::timeout) return std::nullopt;
    if (f == Fill::closed) throw ConnectError("juncod at " + path_ + " closed the connection");
  }
}

std::optional<std::string> RpcClient::read_line(std::chrono::milliseconds timeout) {
  const auto deadline = std::chrono::steady_clock::now() + timeout;
  for (;;) {
    if (auto line = take_line()) return line;
    if (fill(deadline) != Fill::data) return std::nullopt;
  }
}

Json RpcClient::read_json(std::chrono::milliseconds timeout) {
  auto line = read_line(timeout);
  if (!line) throw std::runtime_error("no reply from juncod within " + std::to_string(timeout.count()) + " ms");
  return Json::parse(*line);
}

Json RpcClient::request(const std::string& method, Json params, long id) {
  if (params.is_null()) params = Json::object();  // `{}` at a call site means "no params"
  send_raw(Json{{"jsonrpc", "2.0"}, {"id", id}, {"method", method}, {"params", std::move(params)}}.dump() + "\n");
  return read_json();
}

}  // namespace junco::cli
