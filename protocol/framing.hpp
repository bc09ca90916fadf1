// JSON-RPC 2.0 over newline-delimited lines: the pure half of the socket
// server. No I/O here, so every odd input can be tested from a table and fed
// to a fuzzer.
//
//   bytes ──LineFramer──▶ lines (or "too long") ──parse_line──▶ Parsed
//                                                                 │
//   Parsed = one Request, a batch of Requests, or an error reply  ▼
//            that must be sent as is (parse error, invalid request).
//
// Rules (JSON-RPC 2.0, https://www.jsonrpc.org/specification):
//  - a request is an object with "jsonrpc":"2.0", a string "method", optional
//    "params" (object or array; we accept only objects, an absent params is
//    {}), optional "id" (string, number or null). No "id" = notification:
//    it is executed but never answered — not even when its params are
//    refused (array, not an object, nested too deep) or the method fails.
//  - invalid JSON → -32700 with id null; valid JSON that is not a request →
//    -32600 (with the request's id when it had a usable one).
//  - a batch (array) is answered by an array of the replies, notifications
//    omitted; an empty array is one -32600 error; a batch with only
//    notifications gets no reply at all.
//  - depth: params may nest at most max_params_depth levels (params itself is
//    level 1). Deeper containers are discarded while the line is parsed —
//    never built, copied or destroyed recursively — and the request is
//    refused (invalid_params "params nested deeper than 64 levels"), or
//    ignored when it is a notification. formats/json_limits.hpp has the
//    limit and its wording for every JSON reader.
#pragma once

#include "protocol/codes.hpp"
#include "formats/json_limits.hpp"

#include <sys/stat.h>  // stat: which default socket exists
#include <unistd.h>    // geteuid

#include <cerrno>
#include <cstddef>
#include <cstdlib>
#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace junco::daemon::rpc {

// Longest accepted line, newline excluded. Big enough for any plan or export
// request by orders of magnitude; bounds a connection's memory.
inline constexpr std::size_t default_max_line_bytes = 1u << 20;  // 1 MiB
// Longest accepted batch; each element costs a Service call.
inline constexpr std::size_t max_batch_size = 256;
// Deepest params accepted (and deepest anything else in a request).
inline constexpr int max_params_depth = max_json_depth;

// Splits a byte stream into lines. A line longer than the limit is reported
// once (LineKind::too_long) and the rest of it, up to the next newline, is
// discarded, so the connection can carry on with the next message.
class LineFramer {
 public:
  explicit LineFramer(std::size_t max_line_bytes = default_max_line_bytes) : max_(max_line_bytes) {}

  enum class LineKind { line, too_long };
  struct Line {
    LineKind kind;
    std::string text;  // without the "\n" (and without a trailing "\r")
  };

  // Appends bytes and returns every complete line (or overflow notice) now available.
  std::vector<Line> feed(std::string_view bytes);
  // Bytes buffered for an incomplete line (0 while discarding an overlong one).
  std::size_t pending_bytes() const { return buffer_.size(); }

 private:
  std::size_t max_;
  std::string buffer_;
  bool discarding_ = false;  // inside an overlong line, waiting for its newline
};

struct Request {
  Json id;                  // the request's id (null for notifications)
  bool notification = false;  // no "id" member: execute, send no reply
  std::string method;
  Json params = Json::object();
};

// A request, or a ready-made error reply when the item was not one.
struct Item {
  std::optional<Request> request;
  Json error_reply;  // when !request: the reply, or null for a refused notification (no reply)
};

struct Parsed {
  bool batch = false;
  std::vector<Item> items;  // one for a single message; may be empty only for an empty line
};

// The socket path clients use when none is given: $JUNCO_SOCKET; else, as
// root, /run/junco/juncod.sock (the daemon's default, daemon/config.cpp
// default_paths, and the service's); else the user's own daemon's socket,
// $XDG_RUNTIME_DIR/junco/juncod.sock or
// ${XDG_STATE_HOME:-$HOME/.local/state}/junco/juncod.sock, when one is there;
// else the service's /run/junco/juncod.sock when it exists, so a member of
// the service's group needs no option (a non-member gets EACCES for it,
// which the client explains); else the user's path (for the message).
// Inline so the CLI shares the convention without linking the daemon.
inline std::string default_socket_path() {
  constexpr const char* service_socket = "/run/junco/juncod.sock";
  if (const char* env = std::getenv("JUNCO_SOCKET"); env && *env) return env;
  if (geteuid() == 0) return service_socket;
  std::string own;
  if (const char* xdg = std::getenv("XDG_RUNTIME_DIR"); xdg && *xdg) own = std::string(xdg) + "/junco/juncod.sock";
  else if (const char* state = std::getenv("XDG_STATE_HOME"); state && *state) own = std::string(state) + "/junco/juncod.sock";
  else {
    const char* home = std::getenv("HOME");
    own = std::string(home ? home : "/tmp") + "/.local/state/junco/juncod.sock";
  }
  struct stat st{};
  if (::stat(own.c_str(), &st) == 0 && S_ISSOCK(st.st_mode)) return own;
  if (::stat(service_socket, &st) == 0 ? S_ISSOCK(st.st_mode) : errno == EACCES) return service_socket;
  return own;
}

// Parses one line. Never throws.
Parsed parse_line(std::string_view line);

// The reply a line gets: each request is run by `run` (which returns its
// reply, see answer()); notifications' replies are dropped, refused
// notifications have none. A batch gets an array, a single message one
// object; nullopt = send nothing. The server and the fuzz target share it.
std::optional<Json> respond(const Parsed& parsed, const std::function<Json(const Request&)>& run);

// Reply and notification builders (objects; the caller serialises with dump()).
Json make_result(const Json& id, Json result);
Json make_error(const Json& id, RpcCode code, std::string_view message, const Json& data = nullptr);
Json make_notification(std::string_view method, Json params);

// Serialises a message as one line: compact JSON plus "\n". Invalid UTF-8 in
// strings is replaced, never thrown on.
std::string to_line(const Json& message);

}  // namespace junco::daemon::rpc
