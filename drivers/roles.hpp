// What the daemon asks of each instrument, one small interface per role.
// Implementations map these to SCPI through a dialect file (dialect.hpp).
// Every method may throw DriverError; none returns a reading it could not
// verify (overload markers and unparsable replies are errors, not numbers).
#pragma once

#include <complex>
#include <optional>
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

// AC amplitude units. Vpp and Vrms of a sine differ by 2·√2; dBm is the
// power into a stated resistance (drivers/levels.hpp converts them).
enum class LevelUnit { vpp, vrms, dbm };

// An AC level as an instrument gave it: the unit says truly what was
// measured (never converted through an assumed waveform).
struct Level {
  double value = 0.0;
  LevelUnit unit = LevelUnit::vrms;
};

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
  // For the bench check (`junco bench`): the instrument's answer to the
  // state query its dialect offers ("query_state", e.g. OUTP? on a supply,
  // ROUT:CLOS:STAT? on a switch), as sent; nullopt when it offers none.
  // Changes nothing on the instrument.
  virtual std::optional<std::string> query_state() { return std::nullopt; }
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
  // `value` in `unit` (vpp or vrms, as the plan states it); the driver
  // converts to the unit the generator takes (it makes a sine, so the
  // conversion is exact).
  virtual void set_amplitude(double value, LevelUnit unit) = 0;
  virtual void set_output(bool on) = 0;
  // The unit the generator is programmed in, for the record: "vpp", "vrms",
  // "dbm into 50 ohm", or "as asked" when the dialect names the unit.
  virtual std::string amplitude_units() const { return "as asked"; }
};

// AC level on two channels (1 = fixture input, 2 = fixture output).
// The reading comes back in `preferred` when the instrument measures it, else
// in what it does measure (dBm becomes Vrms exactly); the caller stores the
// unit it got, so a Vrms reading is never relabelled Vpp through an assumed
// sine (a biased diode does not pass one).
class LevelMeter : public virtual Instrument {
 public:
  virtual Level measure_level(int channel, LevelUnit preferred) = 0;
  // What the meter reads, for the record: "vrms", "vpp, vrms", "dbm into 50 ohm".
  virtual std::string level_units() const { return ""; }
};

// Complex transfer of the fixture: channel 2 (output) relative to channel 1
// (input) at the generator's frequency, as a network analyser's transmission
// or a vector voltmeter's B/A reads it. Magnitude as a linear ratio, phase in
// degrees (positive: channel 2 leads). The ratio's noise is the meter's; the
// phase keeps what a magnitude-only level meter loses (docs/command-sets.md,
// VectorMeter).
struct Transfer {
  double ratio = 0.0;      // |V2/V1|
  double phase_deg = 0.0;  // arg(V2/V1)
  std::complex<double> value() const { return std::polar(ratio, phase_deg * 3.14159265358979323846 / 180.0); }
};

class VectorMeter : public virtual Instrument {
 public:
  virtual Transfer measure_transfer() = 0;
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
