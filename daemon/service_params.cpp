// Which params each method takes (see service_params.hpp), from the method
// rows of daemon/methods.hpp.
#include "daemon/service_params.hpp"

#include "daemon/methods.hpp"

#include <algorithm>

namespace junco::daemon {

const std::vector<MethodSpec>& method_specs() {
#define JUNCO_SPEC_SERVICE(name, handler, summary, params) MethodSpec{name, summary, JUNCO_METHOD_PARAMS params, false},
#define JUNCO_SPEC_TRANSPORT(name, handler, summary, params) MethodSpec{name, summary, JUNCO_METHOD_PARAMS params, true},
  static const std::vector<MethodSpec> specs{JUNCO_SERVICE_METHODS(JUNCO_SPEC_SERVICE) JUNCO_TRANSPORT_METHODS(JUNCO_SPEC_TRANSPORT)};
#undef JUNCO_SPEC_SERVICE
#undef JUNCO_SPEC_TRANSPORT
  return specs;
}

const MethodSpec* find_method(std::string_view name) {
  for (const auto& m : method_specs())
    if (m.name == name) return &m;
  return nullptr;
}

const std::map<std::string, std::set<std::string>>& known_params() {
  static const std::map<std::string, std::set<std::string>> table = [] {
    std::map<std::string, std::set<std::string>> t;
    for (const auto& m : method_specs())
      if (!m.transport) t[std::string(m.name)] = std::set<std::string>(m.params.begin(), m.params.end());
    return t;
  }();
  return table;
}

void check_call(std::string_view method, const Json& params) {
  const MethodSpec* spec = find_method(method);
  if (!spec) throw RequestError(RpcCode::method_not_found, "unknown method \"" + std::string(method) + "\"");
  if (!params.is_object() && !params.is_null())
    throw RequestError(RpcCode::invalid_params, std::string("params must be an object, not ") + params.type_name());
  if (!params.is_object()) return;
  for (const auto& [key, value] : params.items()) {
    (void)value;
    if (std::find(spec->params.begin(), spec->params.end(), key) == spec->params.end())
      throw RequestError(RpcCode::invalid_params, key + ": unknown param for " + std::string(method), Json{{"field", key}});
  }
}

}  // namespace junco::daemon
