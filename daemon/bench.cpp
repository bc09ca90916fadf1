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

namespace {

template <typename Role, typename Open>
void open_role(const Config& config, const char* role, Open open, std::unique_ptr<Role>& slot, std::vector<std::string>& missing) {
  const auto* ic = config.instrument(role);
  if (!ic) return;  // optional role not configured
  try {
    slot = open(spec_of(*ic));
  } catch (const std::exception& e) {
    missing.push_back(std::string(role) + ": " + e.what());
  }
}

}  // namespace

std::unique_ptr<Bench> open_bench(const Config& config) {
  auto b = std::make_unique<Bench>();
  open_role(config, "source", drivers::open_source, b->source, b->missing);
  open_role(config, "meter", drivers::open_meter, b->meter, b->missing);
  open_role(config, "scanner", drivers::open_scanner, b->scanner, b->missing);
  open_role(config, "siggen", drivers::open_signal_gen, b->siggen, b->missing);
  open_role(config, "levelmeter", drivers::open_level_meter, b->levelmeter, b->missing);
  return b;
}

}  // namespace junco::daemon
