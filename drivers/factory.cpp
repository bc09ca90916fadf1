#include "drivers/factory.hpp"

#include "drivers/dialect_driver.hpp"
#include "drivers/errors.hpp"

namespace junco::drivers {

namespace {

std::unique_ptr<DialectDriver> open_as(const InstrumentSpec& spec, Role role) {
  Dialect dialect = load_dialect(spec.dialect_path);
  if (dialect.role != role)
    throw DriverError(ErrorKind::config, "instrument '" + spec.name + "': dialect " + spec.dialect_path +
                                             " is for role " + to_string(dialect.role) + ", not " + to_string(role));
  return std::make_unique<DialectDriver>(spec, std::move(dialect));
}

}  // namespace

std::unique_ptr<Source> open_source(const InstrumentSpec& spec) { return open_as(spec, Role::source); }
std::unique_ptr<Meter> open_meter(const InstrumentSpec& spec) { return open_as(spec, Role::meter); }
std::unique_ptr<Scanner> open_scanner(const InstrumentSpec& spec) { return open_as(spec, Role::scanner); }
std::unique_ptr<SignalGen> open_signal_gen(const InstrumentSpec& spec) { return open_as(spec, Role::siggen); }
std::unique_ptr<LevelMeter> open_level_meter(const InstrumentSpec& spec) { return open_as(spec, Role::levelmeter); }
std::unique_ptr<Chamber> open_chamber(const InstrumentSpec& spec) { return open_as(spec, Role::chamber); }
std::unique_ptr<VectorMeter> open_vector_meter(const InstrumentSpec& spec) { return open_as(spec, Role::vectormeter); }

}  // namespace junco::drivers
