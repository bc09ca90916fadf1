// What juncod's socket serves while the daemon starts (docs/daemon-core.md,
// "Start-up order"). juncod listens before its first attempt to open the
// bench: making a bench safe whose instruments accept TCP but never answer
// takes reply timeout × retries per command (tens of seconds with the
// defaults), and a client must not wait that long to learn why. Until the
// Service is built (outputs off, then the store), daemon.status answers at
// once with what the start is doing; any other call waits for the start
// (a normal one takes well under a second, so a script that connects and
// submits at once still works) for at most kStartWait, then is refused as
// unavailable with that reason. From open() on every call goes to the Service.
#pragma once

#include "daemon/config.hpp"
#include "daemon/event_bus.hpp"
#include "daemon/service.hpp"

#include <atomic>
#include <chrono>
#include <condition_variable>
#include <mutex>
#include <string>

namespace junco::daemon {

// How long a call other than daemon.status waits for the start. It holds
// one of the server's threads meanwhile, so it is short.
inline constexpr std::chrono::seconds kStartWait{5};

class StartupGate final : public Service {
 public:
  explicit StartupGate(const Config& config);

  // The Service is up: calls go to it, its events reach this gate's subscribers.
  void open(Service& service);
  Service* service() const { return service_.load(); }
  // The latest warning or error of the start (a make-safe step retried, an
  // instrument that does not answer), shown in daemon.status until open().
  void note(std::string what);
  // The start failed (juncod exits): waiting calls are refused with `why`.
  void fail(std::string why);

  Json call(std::string_view method, const Json& params, const Caller& caller) override;
  EventBus& events() override { return events_; }
  void shutdown() override;

 private:
  Json starting_status() const;
  std::string doing() const;

  const Config& config_;
  std::chrono::steady_clock::time_point started_ = std::chrono::steady_clock::now();
  std::atomic<Service*> service_{nullptr};
  LocalEventBus events_;
  mutable std::mutex mutex_;
  std::condition_variable changed_;
  std::string note_;
  std::string failure_;  // "" unless fail()
};

}  // namespace junco::daemon
