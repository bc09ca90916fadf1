#include "daemon/bench.hpp"

#include "drivers/errors.hpp"
#include "drivers/factory.hpp"

#include <chrono>
#include <thread>

namespace junco::daemon {

namespace {

drivers::InstrumentSpec spec_of(const InstrumentConfig& ic, const Log& traffic) {
  drivers::InstrumentSpec s;
  s.name = ic.role;
  s.address = ic.address;
  s.dialect_path = ic.dialect_path.string();
  s.reply_timeout = std::chrono::milliseconds(ic.reply_timeout_ms);
  s.max_retries = ic.max_retries;
  // Only when someone reads it: the hook costs a string per line.
  if (traffic.enabled(LogLevel::debug))
    s.traffic_log = [traffic, role = ic.role](std::string_view direction, std::string_view line) {
      traffic.debug("scpi " + role + " " + std::string(direction) + " " + std::string(line));
    };
  s.transport.connect_timeout = std::chrono::milliseconds(ic.connect_timeout_ms);
  s.level_unit = ic.amplitude_unit;
  s.impedance_ohm = ic.impedance_ohm;
  return s;
}

// One make-safe step, retried while the instrument reports an error of its
// own (see kMakeSafeAttempts); the final failure is appended to `errors`.
template <typename F>
void attempt(std::string& errors, const Log& log, const char* what, F&& f) noexcept {
  auto fail = [&](const std::string& why) {
    if (!errors.empty()) errors += "; ";
    errors += std::string(what) + ": " + why;
  };
  for (int n = 1;; ++n) {
    try {
      f();
      if (n > 1) log.info(std::string("bench: make-safe step '") + what + "' succeeded on attempt " + std::to_string(n));
      return;
    } catch (const drivers::DriverError& e) {
      const bool again = !e.transient() && !e.permanent() && n < kMakeSafeAttempts;
      if (!again) return fail(e.what() + (n > 1 ? " (after " + std::to_string(n) + " attempts)" : std::string()));
      try {
        log.warn(std::string("bench: make-safe step '") + what + "' failed (" + e.what() + "); retrying, attempt " + std::to_string(n + 1) +
                     " of " + std::to_string(kMakeSafeAttempts));
      } catch (...) {
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(50 * n));
    } catch (const std::exception& e) {
      return fail(e.what());
    } catch (...) {
      return fail("unknown failure");
    }
  }
}

}  // namespace

std::string Bench::make_safe() noexcept {
  std::string errors;
  if (source) {
    attempt(errors, log, "source output off", [&] { source->set_output(false); });
    attempt(errors, log, "source voltage 0", [&] { source->set_voltage_v(0.0); });
  }
  if (siggen) attempt(errors, log, "siggen output off", [&] { siggen->set_output(false); });
  if (scanner) attempt(errors, log, "scanner open", [&] { scanner->disconnect_all(); });
  return errors;
}

std::string Bench::park_chamber(double idle_k) noexcept {
  std::string errors;
  if (chamber) attempt(errors, log, "chamber to its idle set point", [&] { chamber->set_temperature_k(idle_k); });
  return errors;
}

std::string Bench::clear_errors(const std::string& when, Roles roles) noexcept {
  std::string errors;
  auto one = [&](const char* role, drivers::Instrument* inst) {
    if (!inst) return;
    try {
      const auto found = inst->clear_errors();
      if (found.empty() || !log.enabled(LogLevel::warn)) return;
      std::string line = "bench: " + std::string(role) + " had " + std::to_string(found.size()) + " stale error" +
                         (found.size() == 1 ? "" : "s") + " in its queue " + when + ", cleared:";
      for (const auto& f : found) line += " " + f;
      log.warn(line);
    } catch (const std::exception& e) {
      if (!errors.empty()) errors += "; ";
      errors += std::string(role) + " clearing its error queue: " + e.what();
    } catch (...) {
      if (!errors.empty()) errors += "; ";
      errors += std::string(role) + " clearing its error queue: unknown failure";
    }
  };
  if (roles != Roles::others) {
    one("source", source.get());
    one("siggen", siggen.get());
    one("scanner", scanner.get());
  }
  if (roles != Roles::make_safe) {
    one("meter", meter.get());
    one("levelmeter", levelmeter.get());
    one("chamber", chamber.get());
    one("vectormeter", vectormeter.get());
  }
  return errors;
}

namespace {

const char* in_words(drivers::ErrorKind kind) {
  switch (kind) {
    case drivers::ErrorKind::timeout: return "does not answer (no reply in time: off, wrong address or port, or not speaking SCPI on this link)";
    case drivers::ErrorKind::disconnected: return "cannot be reached (connection refused or dropped: off, wrong address, or another program holds it)";
    case drivers::ErrorKind::garbled: return "answers garbage (wrong terminator, baud rate or protocol)";
    case drivers::ErrorKind::instrument: return "reports an error of its own";
    case drivers::ErrorKind::overrange: return "answers out of range";
    case drivers::ErrorKind::config: return "refused (wrong instrument for the dialect, or a bad address or dialect file)";
  }
  return "cannot be opened";
}

template <typename Role, typename Open>
void open_role(const Config& config, const Log& traffic, const char* role, Open open, std::unique_ptr<Role>& slot, Bench& b) {
  const auto* ic = config.instrument(role);
  if (!ic) return;  // optional role not configured
  try {
    slot = open(spec_of(*ic, traffic));
  } catch (const drivers::DriverError& e) {
    b.missing.push_back(std::string(role) + ": " + e.what());
    b.missing_why[role] = in_words(e.kind());
  } catch (const std::exception& e) {
    b.missing.push_back(std::string(role) + ": " + e.what());
    b.missing_why[role] = "cannot be opened";
  }
}

}  // namespace

std::unique_ptr<Bench> open_bench(const Config& config, const Log& traffic) {
  auto b = std::make_unique<Bench>();
  open_role(config, traffic, "source", drivers::open_source, b->source, *b);
  open_role(config, traffic, "meter", drivers::open_meter, b->meter, *b);
  open_role(config, traffic, "scanner", drivers::open_scanner, b->scanner, *b);
  open_role(config, traffic, "siggen", drivers::open_signal_gen, b->siggen, *b);
  open_role(config, traffic, "levelmeter", drivers::open_level_meter, b->levelmeter, *b);
  open_role(config, traffic, "chamber", drivers::open_chamber, b->chamber, *b);
  open_role(config, traffic, "vectormeter", drivers::open_vector_meter, b->vectormeter, *b);
  return b;
}

}  // namespace junco::daemon
