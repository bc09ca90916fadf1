// The daemon's one door: everything a client can ask of juncod goes through
// Service::call. The JSON-RPC server (framing, sessions, subscriptions) lives
// on one side of it; config, store, job queue and executor on the other.
//
// Methods: one row each in daemon/methods.hpp (name, handler, params), their
// params and results in schema/api/NAME.json, described in docs/api.md.
// Events (published on the EventBus, sent as JSON-RPC notifications by the
// server to subscribed clients): job.state, job.progress, point.added.
#pragma once

#include "protocol/codes.hpp"

#include <nlohmann/json.hpp>

#include <functional>
#include <stdexcept>
#include <string>
#include <string_view>

namespace junco::daemon {

using Json = nlohmann::json;

class RequestError : public std::runtime_error {
 public:
  RequestError(RpcCode code, std::string message, Json data = nullptr)
      : std::runtime_error(std::move(message)), code_(code), data_(std::move(data)) {}
  RpcCode code() const { return code_; }
  const Json& data() const { return data_; }

 private:
  RpcCode code_;
  Json data_;
};

// Who is asking (from SO_PEERCRED); logged with each job submission.
struct Caller {
  int pid = -1;
  int uid = -1;
  int gid = -1;
};

struct Event {
  std::string kind;  // "job.state", "job.progress", "point.added"
  Json data;
};

// Thread-safe publish/subscribe; callbacks run on the publisher's thread and
// must not block (the server queues the notification and returns).
class EventBus {
 public:
  virtual ~EventBus() = default;
  using Token = unsigned long;
  virtual Token subscribe(std::function<void(const Event&)> callback) = 0;
  virtual void unsubscribe(Token token) = 0;
  virtual void publish(const Event& event) = 0;
};

class Service {
 public:
  virtual ~Service() = default;
  // Throws RequestError for anything the caller got wrong or that failed (the
  // domain's errors, daemon/errors.hpp, mapped by daemon/error_codes.hpp);
  // any other exception is a bug and maps to internal_error.
  virtual Json call(std::string_view method, const Json& params, const Caller& caller) = 0;
  virtual EventBus& events() = 0;
  // Stops the running job with outputs off; returns once the bench is safe.
  virtual void shutdown() = 0;
};

}  // namespace junco::daemon
