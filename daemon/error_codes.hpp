// The one place a domain error (daemon/errors.hpp) becomes a JSON-RPC error:
// its code, message and data object. CoreService::call uses it for every
// method, and rpc::answer for anything a Service lets through.
#pragma once

#include "daemon/errors.hpp"
#include "daemon/service.hpp"

namespace junco::daemon {

inline RpcCode rpc_code(ErrorKind kind) {
  switch (kind) {
    case ErrorKind::bad_input: return RpcCode::invalid_params;
    case ErrorKind::plan_refused: return RpcCode::plan_refused;
    case ErrorKind::not_found: return RpcCode::not_found;
    case ErrorKind::wrong_state: return RpcCode::wrong_state;
    case ErrorKind::storage: return RpcCode::storage_error;
  }
  return RpcCode::internal_error;
}

// data: {"field"} for bad input; {"limit", "field"} (each when known) for a
// refused plan; {KEY: id or name} for not found and wrong state; none for
// storage. A storage message starts "store: ".
inline RequestError to_request_error(const DomainError& e) {
  Json data = nullptr;
  if (!e.field().empty()) data["field"] = e.field();
  if (!e.limit().empty()) data["limit"] = e.limit();
  if (!e.subject_key().empty()) {
    if (e.subject_id()) data[e.subject_key()] = *e.subject_id();
    else data[e.subject_key()] = e.subject_name();
  }
  const std::string message = e.kind() == ErrorKind::storage ? std::string("store: ") + e.what() : std::string(e.what());
  return RequestError(rpc_code(e.kind()), message, std::move(data));
}

}  // namespace junco::daemon
