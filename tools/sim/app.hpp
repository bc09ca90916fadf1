// The junco-sim process minus main(): the bench, its five instruments, the
// fault logic around each instrument line, and the control endpoint.
#pragma once

#include "tools/sim/bench.hpp"
#include "tools/sim/instrument.hpp"
#include "tools/sim/server.hpp"

#include <nlohmann/json.hpp>

#include <functional>
#include <map>
#include <memory>
#include <string>

namespace junco::sim {

class SimApp {
 public:
  explicit SimApp(SimConfig config);

  // Starts every endpoint; returns the ready line (one JSON object).
  std::string start();

  // One instrument line with faults applied (thread-safe).
  LineOutcome instrument_line(const std::string& role, const std::string& line);
  // One control line → one JSON reply (thread-safe). `quit` calls on_quit.
  std::string control_line(const std::string& line);
  // Applies a fault command; throws std::invalid_argument on bad input.
  void apply_fault(const FaultSpec& fault);

  std::function<void()> on_quit = [] {};
  Bench& bench() { return bench_; }

 private:
  Bench bench_;
  std::map<std::string, std::unique_ptr<SimInstrument>> instruments_;
};

}  // namespace junco::sim
