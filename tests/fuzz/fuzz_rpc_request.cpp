// Fuzz entry: the pure half of juncod's socket server (protocol/framing.hpp).
// The bytes are a client's stream, cut into chunks where the first byte says.
// Invariants:
//  - a small-limit LineFramer agrees exactly with a simple model (split at
//    '\n', strip one '\r', a line over the limit becomes one too_long) and
//    never yields a line longer than its limit, however the stream is chunked;
//  - parse_line never throws; every item is a request, a well-formed error
//    reply, or no reply (a refused notification); a batch never exceeds
//    max_batch_size; accepted params nest at most max_params_depth levels;
//  - every line goes through the server's own dispatch (rpc::respond +
//    rpc::answer, as daemon/rpc_server.cpp) to rpc_service() — the real
//    CoreService on a temporary SQLite store, in the libFuzzer build and the
//    normal one (tests/fuzz/rpc_service.hpp). No request is an internal error; every
//    request with an id gets exactly one reply with that id and either a
//    result or an error; notifications are never answered; the reply
//    serialises with to_line to exactly one line that parses back as JSON.
#include "tests/fuzz/entries.hpp"

#include "daemon/rpc_answer.hpp"
#include "tests/fuzz/rpc_service.hpp"

#include <algorithm>
#include <utility>
#include <vector>

namespace junco::fuzz {
namespace {

namespace rpc = daemon::rpc;
using daemon::Json;
using daemon::RpcCode;

constexpr std::size_t small_limit = 16;

// What the framer should yield for `stream`, independent of chunking.
std::vector<rpc::LineFramer::Line> model_lines(std::string_view stream, std::size_t limit) {
  std::vector<rpc::LineFramer::Line> out;
  while (true) {
    const auto nl = stream.find('\n');
    const auto line = stream.substr(0, nl);
    if (line.size() > limit) {
      out.push_back({rpc::LineFramer::LineKind::too_long, {}});
    } else if (nl != std::string_view::npos) {
      std::string text(line);
      if (!text.empty() && text.back() == '\r') text.pop_back();
      out.push_back({rpc::LineFramer::LineKind::line, std::move(text)});
    }
    if (nl == std::string_view::npos) return out;
    stream.remove_prefix(nl + 1);
  }
}

std::vector<rpc::LineFramer::Line> frame(std::string_view stream, std::size_t limit, std::size_t chunk) {
  rpc::LineFramer framer(limit);
  std::vector<rpc::LineFramer::Line> out;
  while (!stream.empty()) {
    const auto piece = stream.substr(0, chunk);
    for (auto& line : framer.feed(piece)) {
      require(line.kind == rpc::LineFramer::LineKind::too_long || line.text.size() <= limit,
              "framer yielded a line of " + std::to_string(line.text.size()) + " bytes over the limit " + std::to_string(limit));
      out.push_back(std::move(line));
    }
    require(framer.pending_bytes() <= limit, "framer buffers more than its limit");
    stream.remove_prefix(piece.size());
  }
  return out;
}

void check_framer(std::string_view stream, std::size_t chunk) {
  const auto got = frame(stream, small_limit, chunk);
  const auto want = model_lines(stream, small_limit);
  require(got.size() == want.size(), "framer yielded " + std::to_string(got.size()) + " lines, model " + std::to_string(want.size()));
  for (std::size_t i = 0; i < got.size(); ++i)
    require(got[i].kind == want[i].kind && got[i].text == want[i].text, "framer line " + std::to_string(i) + " differs from the model");
}

void check_sent(const Json& message) {
  const auto line = rpc::to_line(message);
  require(!line.empty() && line.back() == '\n' && line.find('\n') == line.size() - 1, "to_line did not give exactly one line");
  const auto back = Json::parse(line, nullptr, false);
  require(!back.is_discarded(), "to_line wrote JSON that does not parse: " + line.substr(0, 200));
}

void check_error_reply(const Json& reply) {
  require(reply.is_object() && reply.value("jsonrpc", "") == "2.0", "error reply without jsonrpc 2.0");
  require(reply.contains("id"), "error reply without an id member");
  const auto& error = reply.at("error");
  require(error.at("code").is_number_integer() && error.at("message").is_string(), "error reply without integer code and message");
  check_sent(reply);
}

// Depth of a json value, by an explicit stack (never recursion): parse_line
// must not hand out anything deeper than its limit.
int depth_of(const Json& value) {
  int deepest = 0;
  std::vector<std::pair<const Json*, int>> todo{{&value, 1}};
  while (!todo.empty()) {
    const auto [v, d] = todo.back();
    todo.pop_back();
    if (!v->is_structured()) continue;
    deepest = std::max(deepest, d);
    for (const auto& child : *v) todo.push_back({&child, d + 1});
  }
  return deepest;
}

void check_reply(const Json& reply, const Json& id) {
  require(reply.is_object() && reply.value("jsonrpc", "") == "2.0", "reply without jsonrpc 2.0");
  require(reply.contains("id") && reply.at("id") == id, "reply with another id than its request");
  require(reply.contains("result") != reply.contains("error"), "reply with both or neither of result and error");
  if (reply.contains("error")) check_error_reply(reply);
}

void check_parse(std::string_view line) {
  const auto parsed = rpc::parse_line(line);
  const bool blank = line.find_first_not_of(" \t\r") == std::string_view::npos;
  require(blank == parsed.items.empty(), "parse_line: items empty must mean a blank line");
  require(!parsed.batch || parsed.items.size() <= rpc::max_batch_size, "parse_line: batch over max_batch_size");
  require(parsed.batch || parsed.items.size() <= 1, "parse_line: several items for a single message");
  std::vector<Json> expected_ids;  // in order: one per reply that must be sent
  for (const auto& item : parsed.items) {
    if (!item.request) {
      if (item.error_reply.is_null()) continue;  // a refused notification: no reply
      check_error_reply(item.error_reply);
      expected_ids.push_back(item.error_reply.at("id"));
      continue;
    }
    const auto& req = *item.request;
    require(req.params.is_object(), "parse_line accepted params that are not an object");
    require(depth_of(req.params) <= rpc::max_params_depth, "parse_line accepted params deeper than max_params_depth");
    require(req.id.is_null() || req.id.is_string() || req.id.is_number(), "parse_line accepted an unusable id");
    require(!req.notification || req.id.is_null(), "a notification carries an id");
    if (!req.notification) expected_ids.push_back(req.id);
  }
  std::string internal;
  const auto run = [&](const rpc::Request& req) {
    return rpc::answer(rpc_service(), req, daemon::Caller{}, nullptr, [&](const std::string& what) { internal = what; });
  };
  const auto reply = rpc::respond(parsed, run);
  require(internal.empty(), "a request ended in internal_error: " + internal);
  // Independently of parse_line: a single well-formed notification (JSON-RPC
  // 2.0 §4.1) is never answered, whatever its params. (Parsing again is safe:
  // nlohmann's parse and destructor are iterative; only top-level members are read.)
  const Json raw = Json::parse(line.begin(), line.end(), nullptr, /*allow_exceptions=*/false);
  if (raw.is_object() && !raw.contains("id") && raw.contains("jsonrpc") && raw["jsonrpc"] == "2.0" && raw.contains("method") &&
      raw["method"].is_string())
    require(!reply, "a notification was answered");
  if (expected_ids.empty()) {
    require(!reply, "a reply was sent where none is due (notifications only, or blank)");
    return;
  }
  require(reply.has_value(), "no reply to a request with an id");
  if (parsed.batch) {
    require(reply->is_array() && reply->size() == expected_ids.size(), "batch reply does not have one entry per request with an id");
    for (std::size_t i = 0; i < expected_ids.size(); ++i) check_reply(reply->at(i), expected_ids[i]);
  } else {
    check_reply(*reply, expected_ids.front());
  }
  check_sent(*reply);
}

}  // namespace

void rpc_request(std::string_view data) {
  const std::size_t chunk = data.empty() ? 1 : 1 + static_cast<unsigned char>(data[0]) % 32;
  if (!data.empty()) data.remove_prefix(1);
  check_framer(data, chunk);
  // The real limit: lines as the server would see them.
  for (const auto& line : frame(data, rpc::default_max_line_bytes, chunk))
    if (line.kind == rpc::LineFramer::LineKind::line) check_parse(line.text);
  // An unterminated tail is what a client that hangs up mid-request leaves; parse it too.
  const auto nl = data.rfind('\n');
  check_parse(nl == std::string_view::npos ? data : data.substr(nl + 1));
}

}  // namespace junco::fuzz
