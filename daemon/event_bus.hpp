// In-process EventBus (daemon/service.hpp): a list of callbacks under a mutex.
// publish() calls every subscriber on the publisher's thread, outside the
// lock, so a callback may subscribe or unsubscribe without deadlock.
#pragma once

#include "daemon/service.hpp"

#include <map>
#include <memory>
#include <mutex>

namespace junco::daemon {

class LocalEventBus final : public EventBus {
 public:
  Token subscribe(std::function<void(const Event&)> callback) override;
  void unsubscribe(Token token) override;
  void publish(const Event& event) override;

 private:
  using Callback = std::shared_ptr<std::function<void(const Event&)>>;
  std::mutex mutex_;
  Token next_ = 1;
  std::map<Token, Callback> subscribers_;
};

}  // namespace junco::daemon
