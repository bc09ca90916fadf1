// Shared by the drivers integration tests: InstrumentSpec for a role of a
// running junco-sim, and a traffic log that records lines.
#pragma once

#include "drivers/factory.hpp"
#include "tests/support/sim_process.hpp"

#include <string>
#include <vector>

namespace junco::test {

// Injects a fault through the control endpoint and checks the sim took it.
inline void inject_fault(SimProcess& sim, const std::string& role, const std::string& mode) {
  auto reply = sim.control("fault " + role + " " + mode);
  if (reply.contains("error")) throw std::runtime_error("junco-sim refused fault: " + reply.dump());
}

inline std::string dialect_file(const std::string& family) {
  return std::string(JUNCO_SOURCE_DIR) + "/drivers/dialects/" + family + ".json";
}

struct TrafficLog {
  std::vector<std::string> lines;
  void operator()(std::string_view direction, std::string_view line) {
    lines.push_back(std::string(direction) + " " + std::string(line));
  }
  bool contains(const std::string& text) const {
    for (const auto& l : lines)
      if (l.find(text) != std::string::npos) return true;
    return false;
  }
};

inline drivers::InstrumentSpec sim_spec(SimProcess& sim, const std::string& role, TrafficLog* log = nullptr,
                                        std::chrono::milliseconds timeout = std::chrono::milliseconds(1500)) {
  drivers::InstrumentSpec spec;
  spec.name = role;
  spec.address = sim.endpoint(role);
  spec.dialect_path = dialect_file(sim.family(role));
  spec.reply_timeout = timeout;
  if (log) spec.traffic_log = [log](std::string_view d, std::string_view l) { (*log)(d, l); };
  return spec;
}

}  // namespace junco::test
