// Runs one JSON-RPC request on the Service (see rpc_answer.hpp).
#include "daemon/rpc_answer.hpp"

#include "daemon/error_codes.hpp"

#include <exception>
#include <string>
#include <utility>

namespace junco::daemon::rpc {

Json answer(Service& service, const Request& req, const Caller& caller, const LocalMethod& local,
            const std::function<void(const std::string&)>& on_internal_error) {
  try {
    if (local)
      if (auto result = local(req)) return make_result(req.id, std::move(*result));
    return make_result(req.id, service.call(req.method, req.params, caller));
  } catch (const RequestError& e) {
    return make_error(req.id, e.code(), e.what(), e.data());
  } catch (const DomainError& e) {  // a Service that did not map it itself
    const RequestError r = to_request_error(e);
    return make_error(req.id, r.code(), r.what(), r.data());
  } catch (const nlohmann::json::exception& e) {
    // A params member of the wrong type or missing reached the Service's
    // json accessors: the caller's mistake, not a daemon failure.
    return make_error(req.id, RpcCode::invalid_params, std::string("invalid params for ") + req.method + ": " + e.what());
  } catch (const std::exception& e) {
    if (on_internal_error) on_internal_error("internal error in " + req.method + ": " + e.what());
    return make_error(req.id, RpcCode::internal_error, std::string("internal error: ") + e.what());
  }
}

}  // namespace junco::daemon::rpc
