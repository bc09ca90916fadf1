// Test helpers for the socket API: a scriptable fake Service (so the server
// is tested without config, store or bench) and a raw line client that sends
// exactly the bytes a test gives it.
#pragma once

#include "daemon/rpc_server.hpp"
#include "daemon/service.hpp"
#include "protocol/rpc_client.hpp"

#include <boost/asio/executor_work_guard.hpp>
#include <boost/asio/io_context.hpp>
#include <boost/asio/local/stream_protocol.hpp>

#include <poll.h>
#include <sys/socket.h>
#include <sys/un.h>
#include <unistd.h>

#include <atomic>
#include <chrono>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <map>
#include <mutex>
#include <optional>
#include <stdexcept>
#include <string>
#include <thread>
#include <vector>

namespace junco::test {

using daemon::Json;

class FakeBus : public daemon::EventBus {
 public:
  Token subscribe(std::function<void(const daemon::Event&)> callback) override {
    std::lock_guard lock(mutex_);
    subscribers_[++next_] = std::move(callback);
    return next_;
  }
  void unsubscribe(Token token) override {
    std::lock_guard lock(mutex_);
    subscribers_.erase(token);
  }
  void publish(const daemon::Event& event) override {
    std::lock_guard lock(mutex_);
    for (auto& [token, callback] : subscribers_) callback(event);
  }
  std::size_t subscriber_count() {
    std::lock_guard lock(mutex_);
    return subscribers_.size();
  }

 private:
  std::mutex mutex_;
  std::map<Token, std::function<void(const daemon::Event&)>> subscribers_;
  Token next_ = 0;
};

// Methods: daemon.status, test.echo {..} → params, test.caller → caller,
// job.get {job_id:int} (only 1 exists), test.internal (throws a plain
// exception), test.sleep {s}.
class FakeService : public daemon::Service {
 public:
  Json call(std::string_view method, const Json& params, const daemon::Caller& caller) override {
    ++calls;
    if (method == "daemon.status") return Json{{"version", "test"}, {"uptime_s", 1.5}};
    if (method == "test.echo") return params;
    if (method == "test.caller") return Json{{"pid", caller.pid}, {"uid", caller.uid}, {"gid", caller.gid}};
    if (method == "job.get") {
      const int id = params.at("job_id").get<int>();  // wrong type → json exception → invalid_params
      if (id != 1) throw daemon::RequestError(daemon::RpcCode::not_found, "no job with id " + std::to_string(id));
      return Json{{"job_id", 1}, {"state", "running"}};
    }
    if (method == "test.internal") throw std::logic_error("deliberate bug");
    if (method == "test.sleep") {
      std::this_thread::sleep_for(std::chrono::duration<double>(params.value("s", 0.1)));
      return Json{{"slept", true}};
    }
    throw daemon::RequestError(daemon::RpcCode::method_not_found, "unknown method '" + std::string(method) + "'");
  }
  daemon::EventBus& events() override { return bus; }
  void shutdown() override { shut = true; }

  FakeBus bus;
  std::atomic<int> calls{0};
  std::atomic<bool> shut{false};
};

// Checks `value` against the subset of JSON Schema used in schema/api/
// (type, required, properties, items). Returns "" or the first problem,
// with its JSON pointer.
inline std::string schema_problem(const Json& schema, const Json& value, const std::string& where = "") {
  if (schema.contains("type")) {
    const Json types = schema["type"].is_array() ? schema["type"] : Json::array({schema["type"]});
    bool ok = false;
    for (const auto& t : types) {
      const std::string name = t;
      ok = ok || (name == "object" && value.is_object()) || (name == "array" && value.is_array()) ||
           (name == "string" && value.is_string()) || (name == "boolean" && value.is_boolean()) ||
           (name == "null" && value.is_null()) || (name == "number" && value.is_number()) ||
           (name == "integer" && value.is_number_integer());
    }
    if (!ok) return (where.empty() ? "/" : where) + ": expected " + types.dump() + ", got " + value.type_name();
  }
  if (value.is_object()) {
    if (const auto req = schema.find("required"); req != schema.end())
      for (std::size_t i = 0; i < req->size(); ++i) {
        const std::string key = (*req)[i];
        if (!value.contains(key)) return where + "/" + key + ": missing";
      }
    if (const auto props = schema.find("properties"); props != schema.end())
      for (auto it = props->begin(); it != props->end(); ++it)
        if (value.contains(it.key()))
          if (auto p = schema_problem(it.value(), value[it.key()], where + "/" + it.key()); !p.empty()) return p;
  }
  if (value.is_array() && schema.contains("items"))
    for (std::size_t i = 0; i < value.size(); ++i)
      if (auto p = schema_problem(schema["items"], value[i], where + "/" + std::to_string(i)); !p.empty()) return p;
  return "";
}

// schema/api/NAME.json (NAME: a method, or event.KIND).
inline Json api_schema(const std::string& name) {
  std::ifstream in(std::string(JUNCO_SOURCE_DIR) + "/schema/api/" + name + ".json");
  if (!in) throw std::runtime_error("no schema/api/" + name + ".json");
  return Json::parse(in);
}

// A fresh scratch directory under /tmp (short: sun_path is 108 bytes).
inline std::filesystem::path scratch_dir(const std::string& tag) {
  auto base = std::filesystem::temp_directory_path() / ("junco-" + tag + "-" + std::to_string(::getpid()) + "-" +
                                                         std::to_string(std::chrono::steady_clock::now().time_since_epoch().count() % 1000000));
  std::filesystem::remove_all(base);
  std::filesystem::create_directories(base);
  return base;
}

// A server on its own io_context with `threads` threads, stopped in the destructor.
struct RunningServer {
  RunningServer(daemon::Service& service, daemon::ServerOptions options, int threads = 2)
      : server(io, service, std::move(options)) {
    server.start();
    for (int i = 0; i < threads; ++i) pool.emplace_back([this] { io.run(); });
  }
  ~RunningServer() {
    server.stop();
    work.reset();
    io.stop();
    for (auto& t : pool) t.join();
  }
  boost::asio::io_context io;
  std::optional<boost::asio::executor_work_guard<boost::asio::io_context::executor_type>> work{io.get_executor()};
  daemon::RpcServer server;
  std::vector<std::thread> pool;
};

}  // namespace junco::test
