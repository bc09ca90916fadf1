// The first check of every Service call, shared by CoreService::call and the
// rpc_request fuzz target's build (which cannot link the store and the fits):
// which params each method takes. schema/api/*.json say the same
// (additionalProperties false).
#pragma once

#include "daemon/service.hpp"

#include <map>
#include <set>
#include <string>
#include <string_view>

namespace junco::daemon {

// Method → the params it takes. Anything else is refused, not ignored: a
// misspelt option, or a field that looks like a safety limit or a file path,
// must never pass as if it had been honoured.
const std::map<std::string, std::set<std::string>>& known_params();

// Throws RequestError: method_not_found for a method not in known_params(),
// invalid_params for params that are neither an object nor null, or that
// name a param the method does not take (data {"field": KEY}).
void check_call(std::string_view method, const Json& params);

}  // namespace junco::daemon
