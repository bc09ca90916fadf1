// The numbers a JSON-RPC error carries on juncod's socket: the daemon sends
// them (daemon/error_codes.hpp maps its domain errors onto them), the CLI and
// the tests read them. Kept in junco::daemon, where they were born, so no
// caller changes spelling.
#pragma once

#include <nlohmann/json.hpp>

namespace junco::daemon {

using Json = nlohmann::json;

// JSON-RPC error codes. The -326xx ones are the standard's; the -320xx
// range is ours ("server error" range reserved for implementations).
enum class RpcCode : int {
  parse_error = -32700,
  invalid_request = -32600,
  method_not_found = -32601,
  invalid_params = -32602,
  internal_error = -32603,
  not_found = -32001,      // unknown job/part/lot/run id
  plan_refused = -32002,   // plan violates a safety limit or is malformed
  wrong_state = -32003,    // e.g. resume a job that is not paused
  storage_error = -32004,  // the store could not do what was asked
  unavailable = -32005,    // e.g. bench not reachable
};

}  // namespace junco::daemon
