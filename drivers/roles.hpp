// What the daemon asks of each instrument, one small interface per role.
// Implementations map these to SCPI through a dialect file (dialect.hpp).
// Every method may throw DriverError; none returns a reading it could not
// verify (overload markers and unparsable replies are errors, not numbers).
#pragma once

#include <string>
#include <vector>

namespace junco::drivers {

// IEEE 488.2 *IDN? reply, split into its four fields.
struct Identity {
  std::string manufacturer;
  std::string model;
  std::string serial;
  std::string firmware;
};

enum class LevelUnit { vpp, vrms };

class Instrument {
 public:
  virtual ~Instrument() = default;
  virtual Identity identify() = 0;
  // Puts the instrument in a known state (*RST / *CLS as the dialect says).
  virtual void reset() = 0;
  // Empties the instrument's error queue so that an error left there by
  // someone else is not blamed on our next command; returns the entries that
  // were there ("-222,\"Data out of range\""), oldest first. Instruments
  // without an error queue return nothing.
  virtual std::vector<std::string> clear_errors() { return {}; }
};

// Bias supply. The daemon programs the current limit before output on.
class Source : public virtual Instrument {
 public:
  virtual void set_voltage_v(double volts) = 0;
  virtual void set_current_limit_a(double amps) = 0;
  virtual void set_output(bool on) = 0;
  virtual double measure_voltage_v() = 0;
  virtual double measure_current_a() = 0;
  // True when the supply reports it is regulating current (compliance).
  virtual bool in_current_limit() = 0;
};

enum class MeterFunction { dc_voltage, dc_current };

class Meter : public virtual Instrument {
 public:
  virtual double measure_dc_voltage_v() = 0;
  virtual double measure_dc_current_a() = 0;
  // range <= 0 selects autorange.
  virtual void set_range(MeterFunction function, double range) = 0;
  virtual void set_integration_nplc(double nplc) = 0;
  virtual void set_averaging(int count) = 0;  // 1 = off
};

// Fixture slot relays; slots are numbered from 1.
class Scanner : public virtual Instrument {
 public:
  virtual void connect_slot(int slot) = 0;
  virtual void disconnect_all() = 0;
};

class SignalGen : public virtual Instrument {
 public:
  virtual void set_frequency_hz(double hz) = 0;
  virtual void set_amplitude(double value, LevelUnit unit) = 0;
  virtual void set_output(bool on) = 0;
};

// AC level on two channels (1 = fixture input, 2 = fixture output).
class LevelMeter : public virtual Instrument {
 public:
  virtual double measure_level(int channel, LevelUnit unit) = 0;
};

// A temperature chamber or thermal plate around the fixture. Temperatures
// are in kelvin here; the dialect says what the instrument speaks
// (temperature_unit). Soaking (wait until stable) is the daemon's, not the
// driver's: the driver only sets and reads.
class Chamber : public virtual Instrument {
 public:
  virtual void set_temperature_k(double kelvin) = 0;
  virtual double measure_temperature_k() = 0;
  // Ramp-rate limit, when the dialect offers set_rate (has_rate_limit()).
  virtual bool has_rate_limit() const = 0;
  virtual void set_rate_k_per_min(double k_per_min) = 0;
};

}  // namespace junco::drivers
