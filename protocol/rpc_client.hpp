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

 private:
  std::optional<Json> read_message(std::chrono::steady_clock::time_point deadline);

  std::string path_;
  int fd_ = -1;
  long next_id_ = 1;
  std::string buffer_;
  std::deque<Json> notifications_;
};

}  // namespace junco::cli
