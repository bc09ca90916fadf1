// Which params each method takes (see service_params.hpp).
#include "daemon/service_params.hpp"

namespace junco::daemon {

const std::map<std::string, std::set<std::string>>& known_params() {
  static const std::map<std::string, std::set<std::string>> table{
      {"daemon.status", {}},           {"bench.describe", {}},           {"bench.check", {}},
      {"job.submit", {"plan"}},
      {"plan.check", {"plan"}},
      {"job.list", {"state"}},         {"job.get", {"job_id"}},          {"job.cancel", {"job_id"}},
      {"job.pause", {"job_id"}},       {"job.resume", {"job_id"}},       {"lot.list", {}},
      {"part.list", {"lot"}},          {"part.readings", {"part_id", "run_id"}},
      {"part.fit", {"part_id"}},       {"part.figures", {"part_id", "currents_a"}},
      {"part.export", {"part_id", "format"}},
      {"part.design", {"part_id", "calculator", "inputs"}},
      {"design.run", {"calculator", "part", "inputs"}},
      {"lot.stats", {"lot", "currents_a", "match_current_a", "match_tolerance_v", "set_size"}},
      {"lot.export", {"lot", "format"}},
      {"part.transfer", {"part_id", "run_id", "ac_sigma_db", "cj_f", "max_signal_ratio", "ac_floor_v"}}};
  return table;
}

void check_call(std::string_view method, const Json& params) {
  const auto it = known_params().find(std::string(method));
  if (it == known_params().end()) throw RequestError(RpcCode::method_not_found, "unknown method \"" + std::string(method) + "\"");
  if (!params.is_object() && !params.is_null())
    throw RequestError(RpcCode::invalid_params, std::string("params must be an object, not ") + params.type_name());
  if (!params.is_object()) return;
  for (const auto& [key, value] : params.items()) {
    (void)value;
    if (!it->second.count(key))
      throw RequestError(RpcCode::invalid_params, key + ": unknown param for " + std::string(method), Json{{"field", key}});
  }
}

}  // namespace junco::daemon
