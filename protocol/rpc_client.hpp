// A blocking JSON-RPC 2.0 client on juncod's Unix socket (one message per
// line, protocol/framing.hpp): the junco CLI's and the tests' way in.
#pragma once

#include <nlohmann/json.hpp>

#include <chrono>
#include <deque>
#include <optional>
#include <stdexcept>
#include <string>

namespace junco::cli {

using Json = nlohmann::json;

// The daemon answered with a JSON-RPC error.
class RpcError : public std::runtime_error {
 public:
  RpcError(int code, const std::string& message, Json data)
      : std::runtime_error(message), code_(code), data_(std::move(data)) {}
  int code() const { return code_; }
  const Json& data() const { return data_; }

 private:
  int code_;
  Json data_;
};

// The daemon could not be reached, or went away; what() is the whole
// user-facing sentence (path, reason, how to start it).
class ConnectError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

class RpcClient {
 public:
  // Connects; throws ConnectError.
  explicit RpcClient(const std::string& socket_path);
  ~RpcClient();
  RpcClient(const RpcClient&) = delete;
  RpcClient& operator=(const RpcClient&) = delete;

  // Sends a request and waits for its reply; notifications that arrive
  // meanwhile are kept for next_notification(). Throws RpcError,
  // ConnectError (daemon gone) or std::runtime_error (timeout).
  Json call(const std::string& method, Json params = Json::object(),
            std::chrono::milliseconds timeout = std::chrono::seconds(30));

  // Next notification ({"method":..,"params":..}), or nullopt on timeout.
  // Throws ConnectError when the daemon closes the connection.
  std::optional<Json> next_notification(std::chrono::milliseconds timeout);

  const std::string& path() const { return path_; }

  // ---- The wire itself -------------------------------------------------------
  // For tests of the protocol (garbage, oversize and half lines, pipelining,
  // an error reply as received); the CLI uses call() only. One receive buffer
  // serves both, so mixing them loses no bytes.

  // Sends exactly these bytes (no newline added). Throws ConnectError.
  void send_raw(const std::string& bytes);
  // The next line as received, without its newline; nullopt on timeout or
  // when juncod closed the connection (never throws for either).
  std::optional<std::string> read_line(std::chrono::milliseconds timeout = std::chrono::seconds(3));
  // The next line as JSON: std::runtime_error when none came in time,
  // nlohmann::json::parse_error when it is not JSON.
  Json read_json(std::chrono::milliseconds timeout = std::chrono::seconds(3));
  // Sends one request with this id and returns the next line as JSON: the
  // reply as received, an error not thrown. params null is sent as {}.
  Json request(const std::string& method, Json params = Json::object(), long id = 1);
  // The socket, for a test that shuts one direction (shutdown(2)) or polls it.
  int fd() const { return fd_; }

 private:
  enum class Fill { data, timeout, closed };
  // Reads what is there into buffer_, waiting until deadline at most.
  Fill fill(std::chrono::steady_clock::time_point deadline);
  std::optional<std::string> take_line();
  std::optional<Json> read_message(std::chrono::steady_clock::time_point deadline);

  std::string path_;
  int fd_ = -1;
  long next_id_ = 1;
  std::string buffer_;
  std::deque<Json> notifications_;
};

}  // namespace junco::cli
