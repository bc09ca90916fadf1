#include "daemon/bench.hpp"

#include "drivers/factory.hpp"

namespace junco::daemon {

namespace {

drivers::InstrumentSpec spec_of(const InstrumentConfig& ic) {
  drivers::InstrumentSpec s;
  s.name = ic.role;
  s.address = ic.address;
  s.dialect_path = ic.dialect_path.string();
  s.reply_timeout = std::chrono::milliseconds(ic.reply_timeout_ms);
  s.max_retries = ic.max_retries;
  return s;
}

template <typename F>
void attempt(std::string& errors, const char* what, F&& f) noexcept {
  try {
    f();
  } catch (const std::exception& e) {
    if (!errors.empty()) errors += "; ";
    errors += std::string(what) + ": " + e.what();
  } catch (...) {
    if (!errors.empty()) errors += "; ";
    errors += std::string(what) + ": unknown failure";
  }
}

}  // namespace

std::string Bench::make_safe() noexcept {
  std::string errors;
  if (source) {
    attempt(errors, "source output off", [&] { source->set_output(false); });
    attempt(errors, "source voltage 0", [&] { source->set_voltage_v(0.0); });
  }
  if (siggen) attempt(errors, "siggen output off", [&] { siggen->set_output(false); });
  if (scanner) attempt(errors, "scanner open", [&] { scanner->disconnect_all(); });
  return errors;
}

std::unique_ptr<Bench> open_bench(const Config& config) {
  auto b = std::make_unique<Bench>();
  b->source = drivers::open_source(spec_of(*config.instrument("source")));
  b->meter = drivers::open_meter(spec_of(*config.instrument("meter")));
  b->scanner = drivers::open_scanner(spec_of(*config.instrument("scanner")));
  if (const auto* g = config.instrument("siggen")) b->siggen = drivers::open_signal_gen(spec_of(*g));
  if (const auto* l = config.instrument("levelmeter")) b->levelmeter = drivers::open_level_meter(spec_of(*l));
  return b;
}

}  // namespace junco::daemon
