// The daemon's half of a JSON-RPC request: run it on the Service and turn
// the outcome into a reply. The wire's half (framing, parsing, replies) is
// protocol/framing.hpp, shared with the CLI and the tests.
#pragma once

#include "daemon/service.hpp"
#include "protocol/framing.hpp"

#include <functional>
#include <optional>
#include <string>

namespace junco::daemon::rpc {

// Methods the transport answers itself (events.subscribe on the socket):
// returns the result, or nullopt when `req` is not one of them. May throw
// RequestError like Service::call.
using LocalMethod = std::function<std::optional<Json>(const Request&)>;

// Runs one request: `local` first (may be empty), else service.call. Maps
// RequestError to its code, a nlohmann::json exception from the Service's
// accessors to invalid_params, anything else to internal_error (reported to
// on_internal_error, which may be empty). Never throws.
Json answer(Service& service, const Request& req, const Caller& caller, const LocalMethod& local,
            const std::function<void(const std::string&)>& on_internal_error);

}  // namespace junco::daemon::rpc
