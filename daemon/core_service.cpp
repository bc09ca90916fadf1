// Temporary stub so main.cpp links; the real service lands shortly.
#include "daemon/core_service.hpp"

namespace junco::daemon {
std::unique_ptr<Service> make_service(const Config&, ServiceOptions) {
  throw RequestError(RpcCode::unavailable, "core service not implemented yet");
}
}  // namespace junco::daemon
