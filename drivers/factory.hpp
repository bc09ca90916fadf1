// Opening a role driver from configuration: an address (transport.hpp), a
// dialect file (drivers/dialects/*.json) and timeouts. This is the only
// entry point the daemon needs; the concrete classes stay inside drivers/.
#pragma once

#include "drivers/roles.hpp"
#include "drivers/transport.hpp"

#include <chrono>
#include <functional>
#include <memory>
#include <optional>
#include <string>

namespace junco::drivers {

struct InstrumentSpec {
  std::string name;          // label used in logs, e.g. "bias"
  std::string address;       // see transport.hpp
  std::string dialect_path;  // a dialect file
  TransportOptions transport;
  std::chrono::milliseconds reply_timeout{2000};
  int max_retries = 2;  // transient failures retried (reconnecting) per operation
  // Siggen / levelmeter: the amplitude unit the bench config states for this
  // instrument (overrides the dialect's), and the resistance of its dBm.
  std::optional<LevelUnit> level_unit;
  double impedance_ohm = 0.0;  // 0: the dialect's
  // When set, every line sent and received is passed here (traffic log).
  std::function<void(std::string_view direction, std::string_view line)> traffic_log;
};

std::unique_ptr<Source> open_source(const InstrumentSpec& spec);
std::unique_ptr<Meter> open_meter(const InstrumentSpec& spec);
std::unique_ptr<Scanner> open_scanner(const InstrumentSpec& spec);
std::unique_ptr<SignalGen> open_signal_gen(const InstrumentSpec& spec);
std::unique_ptr<LevelMeter> open_level_meter(const InstrumentSpec& spec);
std::unique_ptr<Chamber> open_chamber(const InstrumentSpec& spec);
std::unique_ptr<VectorMeter> open_vector_meter(const InstrumentSpec& spec);

}  // namespace junco::drivers
