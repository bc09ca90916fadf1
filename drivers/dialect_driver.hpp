// One class drives every role from a dialect file: each role method names
// an operation, fills its placeholders, and runs it with retries. The
// factory hands it out as the role interface the dialect declares.
#pragma once

#include "drivers/dialect.hpp"
#include "drivers/factory.hpp"
#include "drivers/levels.hpp"
#include "drivers/scpi.hpp"

#include <functional>
#include <limits>
#include <optional>

namespace junco::drivers {

class DialectDriver final : public Source, public Meter, public Scanner, public SignalGen, public LevelMeter, public Chamber,
                            public VectorMeter {
 public:
  // Opens the transport (with retries), asks *IDN? and, when the dialect has
  // an idn_match, checks the answer against it. Throws DriverError.
  DialectDriver(InstrumentSpec spec, Dialect dialect);

  Identity identify() override;
  void reset() override;
  // *CLS and SYST:ERR? (ScpiSession::clear_error_queue), with retries; only
  // when the dialect drains errors in some operation (it has an error queue).
  std::vector<std::string> clear_errors() override;
  std::optional<std::string> query_state() override;

  // Source
  void set_voltage_v(double volts) override;
  void set_current_limit_a(double amps) override;
  void set_output(bool on) override;  // Source and SignalGen share the name
  double measure_voltage_v() override;
  double measure_current_a() override;
  bool in_current_limit() override;
  // Meter
  double measure_dc_voltage_v() override;
  double measure_dc_current_a() override;
  void set_range(MeterFunction function, double range) override;
  void set_integration_nplc(double nplc) override;
  void set_averaging(int count) override;
  // Scanner
  void connect_slot(int slot) override;
  void disconnect_all() override;
  // SignalGen
  void set_frequency_hz(double hz) override;
  void set_amplitude(double value, LevelUnit unit) override;
  std::string amplitude_units() const override;
  // LevelMeter
  Level measure_level(int channel, LevelUnit preferred) override;
  std::string level_units() const override;
  // VectorMeter
  Transfer measure_transfer() override;
  // Chamber
  void set_temperature_k(double kelvin) override;
  double measure_temperature_k() override;
  bool has_rate_limit() const override { return dialect_.find("set_rate") != nullptr; }
  void set_rate_k_per_min(double k_per_min) override;

  const Dialect& dialect() const { return dialect_; }

 private:
  struct Outcome {
    double number = 0.0;
    bool flag = false;
    std::string text;  // the query's reply as sent
  };
  Outcome run(const char* operation, const Placeholders& values = {});
  Outcome run_once(const Operation& op, const Placeholders& values);
  Outcome read_reply(const Operation& op, const std::string& query);
  // Runs `body` up to 1 + max_retries times, reconnecting between tries on
  // transient errors; the final error names instrument, operation, command.
  void with_retries(const char* operation, const std::function<void()>& body);
  [[noreturn]] void config_error(const std::string& what) const;
  std::string label() const;
  void ensure_session();
  void check_identity();
  // The unit set_amplitude programs for a plan asking `asked`: the config's
  // or the dialect's fixed unit, else `asked`.
  LevelScale amplitude_scale(LevelUnit asked) const;
  // The level reading to take for `preferred`: the config's unit, else
  // `preferred` when offered, else Vrms, dBm, Vpp in that order.
  LevelUnit level_unit_for(LevelUnit preferred) const;

  InstrumentSpec spec_;
  Dialect dialect_;
  TransportOptions transport_options_;
  std::unique_ptr<ScpiSession> session_;
  bool needs_reconnect_ = false;
  double current_limit_a_ = std::numeric_limits<double>::quiet_NaN();  // as last programmed
  std::optional<Identity> identity_;  // *IDN? of the current link (reset on reconnect)
  bool has_error_queue_ = false;  // some operation drains SYST:ERR?
};

}  // namespace junco::drivers
