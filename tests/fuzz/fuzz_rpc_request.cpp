// Fuzz entry: the pure half of juncod's socket server (daemon/rpc_framing.hpp).
// The bytes are a client's stream, cut into chunks where the first byte says.
// Invariants:
//  - a small-limit LineFramer agrees exactly with a simple model (split at
//    '\n', strip one '\r', a line over the limit becomes one too_long) and
//    never yields a line longer than its limit, however the stream is chunked;
//  - parse_line never throws; every item is a request or a well-formed error
//    reply; a batch never exceeds max_batch_size;
//  - the replies a server would send (a fake Service: "echo" returns its
//    params, anything else is method_not_found) serialise with to_line to
//    exactly one line that parses back as JSON.
#include "tests/fuzz/entries.hpp"

#include "daemon/rpc_framing.hpp"

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

// A fake Service::call, enough to serialise realistic replies.
Json fake_reply(const rpc::Request& req) {
  if (req.method == "echo") return rpc::make_result(req.id, req.params);
  return rpc::make_error(req.id, RpcCode::method_not_found, "method not found: " + req.method, Json{{"method", req.method}});
}

void check_parse(std::string_view line) {
  const auto parsed = rpc::parse_line(line);
  const bool blank = line.find_first_not_of(" \t\r") == std::string_view::npos;
  require(blank == parsed.items.empty(), "parse_line: items empty must mean a blank line");
  require(!parsed.batch || parsed.items.size() <= rpc::max_batch_size, "parse_line: batch over max_batch_size");
  require(parsed.batch || parsed.items.size() <= 1, "parse_line: several items for a single message");
  Json batch_reply = Json::array();
  for (const auto& item : parsed.items) {
    if (!item.request) {
      check_error_reply(item.error_reply);
      batch_reply.push_back(item.error_reply);
      continue;
    }
    const auto& req = *item.request;
    require(req.params.is_object(), "parse_line accepted params that are not an object");
    require(req.id.is_null() || req.id.is_string() || req.id.is_number(), "parse_line accepted an unusable id");
    require(!req.notification || req.id.is_null(), "a notification carries an id");
    if (!req.notification) batch_reply.push_back(fake_reply(req));
  }
  if (!batch_reply.empty()) check_sent(parsed.batch ? batch_reply : batch_reply.front());
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
