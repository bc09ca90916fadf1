#include "daemon/startup_gate.hpp"

#include "daemon/service_params.hpp"

#include "junco/version.hpp"

namespace junco::daemon {

StartupGate::StartupGate(const Config& config) : config_(config) {}

void StartupGate::open(Service& service) {
  // Subscribers that came during the start keep their subscription: the
  // Service's events are republished here (one hop, no queue).
  service.events().subscribe([this](const Event& e) { events_.publish(e); });
  {
    std::lock_guard lock(mutex_);
    service_.store(&service);
  }
  changed_.notify_all();
}

void StartupGate::fail(std::string why) {
  {
    std::lock_guard lock(mutex_);
    failure_ = std::move(why);
  }
  changed_.notify_all();
}

void StartupGate::note(std::string what) {
  std::lock_guard lock(mutex_);
  note_ = std::move(what);
}

std::string StartupGate::doing() const {
  std::lock_guard lock(mutex_);
  return "juncod is starting: opening the bench to turn every output off, then the database" +
         (note_.empty() ? std::string() : " (last: " + note_ + ")");
}

Json StartupGate::starting_status() const {
  // The daemon.status shape (schema/api/daemon.status.json): the store is not
  // open yet, so no queue and schema version 0.
  return {{"version", junco::version},
          {"uptime_s", std::chrono::duration<double>(std::chrono::steady_clock::now() - started_).count()},
          {"running_job", nullptr},
          {"queue", Json::array()},
          {"bench_open", false},
          {"bench_problem", doing()},
          {"database", config_.paths.database.string()},
          {"schema_version", 0},
          {"lab", {{"enabled", !config_.lab.database.empty()}}}};
}

Json StartupGate::call(std::string_view method, const Json& params, const Caller& caller) {
  if (Service* s = service_.load()) return s->call(method, params, caller);
  if (method == "daemon.status") {
    check_call(method, params);  // the same refusals as once the service is open
    return starting_status();
  }
  {
    std::unique_lock lock(mutex_);
    changed_.wait_for(lock, kStartWait, [this] { return service_.load() || !failure_.empty(); });
    if (!failure_.empty()) throw RequestError(RpcCode::unavailable, "juncod could not start: " + failure_);
  }
  if (Service* s = service_.load()) return s->call(method, params, caller);
  throw RequestError(RpcCode::unavailable, doing() + "; try again in a few seconds (junco status shows the progress)");
}

void StartupGate::shutdown() {
  if (Service* s = service_.load()) s->shutdown();
}

}  // namespace junco::daemon
