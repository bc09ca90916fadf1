// JSON-RPC 2.0 line framing and request validation (see rpc_framing.hpp).
#include "daemon/rpc_framing.hpp"

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

// Validates one request object (a single message or a batch element).
Item parse_item(const Json& msg) {
  if (!msg.is_object()) return invalid(nullptr, "invalid request: a request must be a JSON object");
  Json id = nullptr;
  const bool has_id = msg.contains("id");
  if (has_id) {
    if (!usable_id(msg["id"])) return invalid(nullptr, "invalid request: \"id\" must be a string, a number or null");
    id = msg["id"];
  }
  const auto version = msg.find("jsonrpc");
  if (version == msg.end() || *version != "2.0") return invalid(id, "invalid request: \"jsonrpc\" must be \"2.0\"");
  const auto method = msg.find("method");
  if (method == msg.end()) return invalid(id, "invalid request: missing \"method\"");
  if (!method->is_string()) return invalid(id, "invalid request: \"method\" must be a string");
  Request req;
  req.id = id;
  req.notification = !has_id;
  req.method = method->get<std::string>();
  if (const auto params = msg.find("params"); params != msg.end()) {
    if (params->is_array())
      return Item{std::nullopt, make_error(id, RpcCode::invalid_params,
                                           "invalid params: junco methods take named params (a JSON object), not an array")};
    if (!params->is_object()) return invalid(id, "invalid request: \"params\" must be an object");
    req.params = *params;
  }
  return Item{std::move(req), nullptr};
}

}  // namespace

Parsed parse_line(std::string_view line) {
  Parsed parsed;
  if (line.find_first_not_of(" \t\r") == std::string_view::npos) return parsed;  // blank line: ignore
  Json msg = Json::parse(line.begin(), line.end(), nullptr, /*allow_exceptions=*/false);
  if (msg.is_discarded()) {
    parsed.items.push_back(Item{std::nullopt, make_error(nullptr, RpcCode::parse_error, "parse error: the line is not valid JSON")});
    return parsed;
  }
  if (!msg.is_array()) {
    parsed.items.push_back(parse_item(msg));
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
  for (const auto& element : msg) parsed.items.push_back(parse_item(element));
  return parsed;
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
