// JSON-RPC 2.0 line framing and request validation (see framing.hpp).
#include "protocol/framing.hpp"

#include "formats/json_limits.hpp"

#include <functional>
#include <map>
#include <utility>

namespace junco::daemon::rpc {

std::vector<LineFramer::Line> LineFramer::feed(std::string_view bytes) {
  std::vector<Line> out;
  while (!bytes.empty()) {
    const auto nl = bytes.find('\n');
    const auto chunk = bytes.substr(0, nl);  // whole rest when no newline
    if (discarding_) {
      if (nl == std::string_view::npos) return out;
      discarding_ = false;
    } else if (buffer_.size() + chunk.size() > max_) {
      // Report once, then drop bytes until the newline that ends this line.
      buffer_.clear();
      out.push_back({LineKind::too_long, {}});
      if (nl == std::string_view::npos) {
        discarding_ = true;
        return out;
      }
    } else {
      buffer_.append(chunk);
      if (nl == std::string_view::npos) return out;
      if (!buffer_.empty() && buffer_.back() == '\r') buffer_.pop_back();
      out.push_back({LineKind::line, std::move(buffer_)});
      buffer_.clear();
    }
    bytes.remove_prefix(nl + 1);
  }
  return out;
}

namespace {

bool usable_id(const Json& id) { return id.is_string() || id.is_number() || id.is_null(); }

Item invalid(const Json& id, std::string_view why) {
  return Item{std::nullopt, make_error(id, RpcCode::invalid_request, why)};
}

// A notification gets no reply, whatever is wrong with its params.
Item silent() { return Item{std::nullopt, nullptr}; }

// Watches the parse of one line and discards, instead of building, every
// container opened deeper than max_params_depth levels below a request
// object (the request itself is level 0, its params level 1). The member of
// the request it belonged to is remembered per request, so the request can be
// refused by name — or, for a notification, ignored — with its id, which may
// come after the deep part. The parse goes on iteratively over the discarded
// part, so nothing deep is ever built, copied or destroyed.
class DepthScan {
 public:
  // Member of request `index` (0 for a single message) that nested too deep.
  std::map<std::size_t, std::string> too_deep;

  bool operator()(int depth, Json::parse_event_t event, const Json& parsed) {
    using E = Json::parse_event_t;
    if (depth == 0 && event == E::array_start) batch_ = true;
    const int request_depth = batch_ ? 1 : 0;
    const bool container = event == E::object_start || event == E::array_start;
    if (batch_ && depth == 1 && (container || event == E::value)) {
      ++element_;  // a new batch element starts
      member_.clear();
    }
    if (event == E::key && depth == request_depth + 1) member_ = parsed.is_string() ? parsed.get<std::string>() : "";
    if (container && depth - request_depth > max_params_depth) {
      const std::size_t index = batch_ ? static_cast<std::size_t>(element_) : 0;
      too_deep.try_emplace(index, member_.empty() ? "request" : member_);
      return false;  // discard: keep_stack grows by a bit, no value is built
    }
    return true;
  }

 private:
  bool batch_ = false;
  long element_ = -1;
  std::string member_;
};

// Validates one request object (a single message or a batch element).
// `too_deep`: the member that nested deeper than the limit (already removed
// from msg by the parse), or null.
Item parse_item(const Json& msg, const std::string* too_deep) {
  if (!msg.is_object()) return invalid(nullptr, "invalid request: a request must be a JSON object");
  if (too_deep && *too_deep == "id") return invalid(nullptr, "invalid request: " + too_deep_message("\"id\"", max_params_depth));
  Json id = nullptr;
  const bool has_id = msg.contains("id");
  if (has_id) {
    if (!usable_id(msg["id"])) return invalid(nullptr, "invalid request: \"id\" must be a string, a number or null");
    id = msg["id"];
  }
  if (too_deep && (*too_deep == "jsonrpc" || *too_deep == "method"))
    return invalid(id, "invalid request: " + too_deep_message("\"" + *too_deep + "\"", max_params_depth));
  const auto version = msg.find("jsonrpc");
  if (version == msg.end() || *version != "2.0") return invalid(id, "invalid request: \"jsonrpc\" must be \"2.0\"");
  const auto method = msg.find("method");
  if (method == msg.end()) return invalid(id, "invalid request: missing \"method\"");
  if (!method->is_string()) return invalid(id, "invalid request: \"method\" must be a string");
  // From here on it is a well-formed call: without an id it is a
  // notification, and a notification is never answered (JSON-RPC 2.0 §4.1),
  // not even when its params are refused.
  if (too_deep) {
    if (!has_id) return silent();
    if (*too_deep == "params")
      return Item{std::nullopt, make_error(id, RpcCode::invalid_params, "invalid params: " + too_deep_message("params", max_params_depth))};
    return invalid(id, "invalid request: " + too_deep_message("\"" + *too_deep + "\"", max_params_depth));
  }
  Request req;
  req.id = id;
  req.notification = !has_id;
  req.method = method->get<std::string>();
  if (const auto params = msg.find("params"); params != msg.end()) {
    if (params->is_array()) {
      if (!has_id) return silent();
      return Item{std::nullopt, make_error(id, RpcCode::invalid_params,
                                           "invalid params: junco methods take named params (a JSON object), not an array")};
    }
    if (!params->is_object()) {
      if (!has_id) return silent();
      return invalid(id, "invalid request: \"params\" must be an object");
    }
    req.params = *params;  // at most max_params_depth deep: the parse discarded anything deeper
  }
  return Item{std::move(req), nullptr};
}

}  // namespace

Parsed parse_line(std::string_view line) {
  Parsed parsed;
  if (line.find_first_not_of(" \t\r") == std::string_view::npos) return parsed;  // blank line: ignore
  DepthScan scan;
  Json msg = Json::parse(line.begin(), line.end(), std::ref(scan), /*allow_exceptions=*/false);
  if (msg.is_discarded()) {
    parsed.items.push_back(Item{std::nullopt, make_error(nullptr, RpcCode::parse_error, "parse error: the line is not valid JSON")});
    return parsed;
  }
  const auto deep = [&](std::size_t index) -> const std::string* {
    const auto it = scan.too_deep.find(index);
    return it == scan.too_deep.end() ? nullptr : &it->second;
  };
  if (!msg.is_array()) {
    parsed.items.push_back(parse_item(msg, deep(0)));
    return parsed;
  }
  if (msg.empty()) {
    parsed.items.push_back(invalid(nullptr, "invalid request: empty batch"));
    return parsed;
  }
  if (msg.size() > max_batch_size) {
    parsed.items.push_back(invalid(nullptr, "invalid request: batch of " + std::to_string(msg.size()) +
                                                " requests exceeds the limit of " + std::to_string(max_batch_size)));
    return parsed;
  }
  parsed.batch = true;
  for (std::size_t i = 0; i < msg.size(); ++i) parsed.items.push_back(parse_item(msg[i], deep(i)));
  return parsed;
}

std::optional<Json> respond(const Parsed& parsed, const std::function<Json(const Request&)>& run) {
  Json replies = Json::array();
  for (const auto& item : parsed.items) {
    if (!item.request) {
      if (!item.error_reply.is_null()) replies.push_back(item.error_reply);
      continue;
    }
    Json reply = run(*item.request);
    if (!item.request->notification) replies.push_back(std::move(reply));
  }
  if (replies.empty()) return std::nullopt;
  if (parsed.batch) return replies;
  return std::move(replies.front());
}

Json make_result(const Json& id, Json result) {
  return Json{{"jsonrpc", "2.0"}, {"id", id}, {"result", std::move(result)}};
}

Json make_error(const Json& id, RpcCode code, std::string_view message, const Json& data) {
  Json error{{"code", static_cast<int>(code)}, {"message", std::string(message)}};
  if (!data.is_null()) error["data"] = data;
  return Json{{"jsonrpc", "2.0"}, {"id", id}, {"error", std::move(error)}};
}

Json make_notification(std::string_view method, Json params) {
  return Json{{"jsonrpc", "2.0"}, {"method", std::string(method)}, {"params", std::move(params)}};
}

std::string to_line(const Json& message) {
  auto text = message.dump(-1, ' ', false, Json::error_handler_t::replace);
  text.push_back('\n');
  return text;
}

}  // namespace junco::daemon::rpc
