// Shared by the drivers integration tests: InstrumentSpec for a role of a
// running junco-sim, and a traffic log that records lines.
#pragma once

#include "drivers/factory.hpp"
#include "drivers/transport.hpp"
#include "tests/support/process.hpp"

#include <nlohmann/json.hpp>

#include <memory>
#include <string>
#include <vector>

namespace junco::test {

// junco-sim as a real process (ready line, endpoints, control endpoint).
// The control link goes through the drivers' own TCP transport. (Not
// tests/support/sim_process.hpp: at 03975b8 its LineClient does not compile.)
class SimProcess {
 public:
  explicit SimProcess(std::vector<std::string> args) {
    std::vector<std::string> argv{std::string(JUNCO_BIN_DIR) + "/junco-sim"};
    argv.insert(argv.end(), args.begin(), args.end());
    process_ = std::make_unique<ChildProcess>(argv);
    auto line = process_->read_line(std::chrono::seconds(10));
    if (!line) throw std::runtime_error("junco-sim printed no ready line");
    ready_ = nlohmann::json::parse(*line);
    if (!ready_.value("ready", false)) throw std::runtime_error("junco-sim not ready: " + *line);
  }
  std::string endpoint(const std::string& role) const { return ready_.at("endpoints").at(role); }
  std::string family(const std::string& role) const { return ready_.at("families").at(role); }
  nlohmann::json control(const std::string& line) {
    if (!control_) control_ = drivers::open_transport(endpoint("control"));
    control_->write_message(line);
    return nlohmann::json::parse(control_->read_message(std::chrono::seconds(5)));
  }
  // Injects a fault and checks the sim took it.
  void fault(const std::string& role, const std::string& mode) {
    auto reply = control("fault " + role + " " + mode);
    if (reply.contains("error")) throw std::runtime_error("junco-sim refused fault: " + reply.dump());
  }
  ChildProcess& process() { return *process_; }

 private:
  std::unique_ptr<ChildProcess> process_;
  nlohmann::json ready_;
  std::unique_ptr<drivers::Transport> control_;
};

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
