// rpc_service() in the libFuzzer build: the front half of the real service
// (see rpc_service.hpp for why not all of it).
#include "tests/fuzz/rpc_service.hpp"

#include "daemon/plan.hpp"
#include "daemon/service_params.hpp"

namespace junco::fuzz {
namespace {

using daemon::Json;
using daemon::RequestError;
using daemon::RpcCode;

class NoEvents final : public daemon::EventBus {
 public:
  Token subscribe(std::function<void(const daemon::Event&)>) override { return 1; }
  void unsubscribe(Token) override {}
  void publish(const daemon::Event&) override {}
};

class FrontService final : public daemon::Service {
 public:
  Json call(std::string_view method, const Json& params, const daemon::Caller&) override {
    daemon::check_call(method, params);  // CoreService::call's first step
    if (method == "job.submit") {        // CoreService's submit up to the store
      if (!params.contains("plan")) throw RequestError(RpcCode::invalid_params, "plan: missing (required)", Json{{"field", "plan"}});
      const auto plan = daemon::parse_plan(params.at("plan"));
      daemon::check_plan(plan, config_);
    }
    throw RequestError(RpcCode::unavailable, std::string(method) + ": past the checks; the libFuzzer build has no store");
  }
  daemon::EventBus& events() override { return events_; }
  void shutdown() override {}

 private:
  daemon::Config config_ = fuzz_bench_config();
  NoEvents events_;
};

}  // namespace

daemon::Service& rpc_service() {
  static FrontService front;
  return front;
}

bool rpc_service_is_real() { return false; }

}  // namespace junco::fuzz
