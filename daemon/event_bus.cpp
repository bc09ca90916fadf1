#include "daemon/event_bus.hpp"

#include <vector>

namespace junco::daemon {

EventBus::Token LocalEventBus::subscribe(std::function<void(const Event&)> callback) {
  std::lock_guard lock(mutex_);
  const Token t = next_++;
  subscribers_[t] = std::make_shared<std::function<void(const Event&)>>(std::move(callback));
  return t;
}

void LocalEventBus::unsubscribe(Token token) {
  std::lock_guard lock(mutex_);
  subscribers_.erase(token);
}

void LocalEventBus::publish(const Event& event) {
  std::vector<Callback> targets;
  {
    std::lock_guard lock(mutex_);
    for (const auto& [t, cb] : subscribers_) {
      (void)t;
      targets.push_back(cb);
    }
  }
  // A subscriber's failure must not stop the executor that publishes.
  for (const auto& cb : targets) {
    try {
      (*cb)(event);
    } catch (...) {
    }
  }
}

}  // namespace junco::daemon
