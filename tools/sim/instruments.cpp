// The five simulated instruments and their two command families each
// (docs/command-sets.md). Physical settings live in the Bench; what is
// only the instrument's own (meter function, ranges, units) lives here.
#include "tools/sim/instrument.hpp"

#include <cmath>
#include <stdexcept>

namespace junco::sim {
namespace {

double need_number(const std::string& args) {
  if (trim(args).empty()) throw ScpiError{-109, "Missing parameter"};
  const auto v = parse_number(args);
  if (!v) throw ScpiError{-104, "Data type error"};
  return *v;
}

bool need_bool(const std::string& args) {
  if (trim(args).empty()) throw ScpiError{-109, "Missing parameter"};
  const auto b = parse_bool(args);
  if (!b) throw ScpiError{-224, "Illegal parameter value"};
  return *b;
}

void check_range(double v, double lo, double hi) {
  if (!(v >= lo && v <= hi)) throw ScpiError{-222, "Data out of range"};
}

// "(@3)" → 3
int channel_list_single(const std::string& args) {
  const std::string t = trim(args);
  if (t.size() < 4 || t.front() != '(' || t[1] != '@' || t.back() != ')') throw ScpiError{-104, "Data type error"};
  const auto v = parse_number(t.substr(2, t.size() - 3));
  if (!v || *v != std::floor(*v)) throw ScpiError{-104, "Data type error"};
  return static_cast<int>(*v);
}

double quantise(double v, double step) { return step > 0 ? std::round(v / step) * step : v; }

// ---------------------------------------------------------------- source
class SourceSim : public SimInstrument {
 public:
  SourceSim(const std::string& family, Bench& bench, std::uint64_t seed)
      : SimInstrument("source", family,
                      family == "psu-compact" ? "junco-sim,PSU-C2,SIM-S002,2.1"
                      : family == "scpi99"    ? "Sim Bench Works,ML-3303P,ML33A0571,4.07.2"
                                              : "junco-sim,SRC-100,SIM-S001,1.0",
                      bench, seed) {
    const bool compact = family == "psu-compact";
    const double v_min = compact ? std::max(0.0, bench.config().source.v_min_v) : bench.config().source.v_min_v;
    auto set_v = [this, v_min](const std::string& a) {
      const double v = need_number(a);
      check_range(v, v_min, bench_.config().source.v_max_v);
      auto b = bench_.bias();
      b.voltage_v = v;
      bench_.set_bias(b);
      return std::optional<std::string>{};
    };
    auto set_i = [this](const std::string& a) {
      const double i = need_number(a);
      check_range(i, bench_.config().source.i_limit_min_a, bench_.config().source.i_limit_max_a);
      auto b = bench_.bias();
      b.current_limit_a = i;
      bench_.set_bias(b);
      return std::optional<std::string>{};
    };
    auto set_out = [this](bool on) {
      auto b = bench_.bias();
      b.output_on = on;
      bench_.set_bias(b);
    };
    if (compact) {
      add("VSET", set_v);
      add("ISET", set_i);
      add("VSET?", [this](const std::string&) { return format_nr2(bench_.bias().voltage_v, 3); });
      add("ISET?", [this](const std::string&) { return format_nr2(bench_.bias().current_limit_a, 4); });
      add("OUT", [set_out](const std::string& a) {
        const auto v = need_number(a);
        if (v != 0 && v != 1) throw ScpiError{-224, "Illegal parameter value"};
        set_out(v == 1);
        return std::optional<std::string>{};
      });
      add("OUT?", [this](const std::string&) { return std::string(bench_.bias().output_on ? "1" : "0"); });
      // 1 mV / 0.1 mA readback resolution, as a compact supply's display.
      add("VOUT?", [this](const std::string&) { return format_nr2(read_v(), 3); });
      add("IOUT?", [this](const std::string&) { return format_nr2(read_i(), 4); });
      add("MODE?", [this](const std::string&) { return std::string(limited() ? "CC" : "CV"); });
    } else {
      add("SOURce:VOLTage", set_v);
      add("VOLTage", set_v);
      add("SOURce:CURRent", set_i);
      add("CURRent", set_i);
      if (family == "scpi99") {
        // The whole SCPI-99 tree, optional nodes spelt out:
        // [SOURce:]VOLTage[:LEVel][:IMMediate][:AMPLitude], the same for CURRent.
        for (const char* prefix : {"", "SOURce:"})
          for (const char* level : {":LEVel", ":LEVel:IMMediate", ":LEVel:IMMediate:AMPLitude"}) {
            add(std::string(prefix) + "VOLTage" + level, set_v);
            add(std::string(prefix) + "CURRent" + level, set_i);
          }
        add("OUTPut:STATe", [set_out](const std::string& a) {
          set_out(need_bool(a));
          return std::optional<std::string>{};
        });
        add("MEASure:SCALar:VOLTage:DC?", [this](const std::string&) { return format_nr3(quantise(read_v(), 1e-4), 5); });
        add("MEASure:SCALar:CURRent:DC?", [this](const std::string&) { return format_nr3(quantise(read_i(), 1e-6), 5); });
      }
      for (const char* prefix : {"", "SOURce:"}) {
        add(std::string(prefix) + "VOLTage?", [this](const std::string&) { return format_nr3(bench_.bias().voltage_v, 6); });
        add(std::string(prefix) + "CURRent?",
            [this](const std::string&) { return format_nr3(bench_.bias().current_limit_a, 6); });
      }
      add("OUTPut", [set_out](const std::string& a) {
        set_out(need_bool(a));
        return std::optional<std::string>{};
      });
      add("OUTPut?", [this](const std::string&) { return std::string(bench_.bias().output_on ? "1" : "0"); });
      add("MEASure:VOLTage?", [this](const std::string&) { return format_nr3(quantise(read_v(), 1e-5), 6); });
      add("MEASure:CURRent?", [this](const std::string&) { return format_nr3(quantise(read_i(), 1e-7), 6); });
      // STATus:QUEStionable:CONDition? bit 1 (value 2) = current limited.
      add("STATus:QUEStionable:CONDition?", [this](const std::string&) { return std::string(limited() ? "2" : "0"); });
    }
  }

 protected:
  void reset_settings() override { bench_.set_bias(BiasSetting{}); }  // output off, 0 V, 0.1 A

 private:
  double read_v() { return bench_.read(Clock::now()).supply_v + 20e-6 * gaussian(); }
  double read_i() { return bench_.read(Clock::now()).supply_i_a + 0.2e-6 * gaussian(); }
  bool limited() { return bench_.current_limited(Clock::now()); }
};

// ----------------------------------------------------------------- meter
class MeterSim : public SimInstrument {
 public:
  MeterSim(const std::string& family, Bench& bench, std::uint64_t seed)
      : SimInstrument("meter", family,
                      family == "dmm-prefixed" ? "junco-sim,DMM-P7,SIM-M002,3.0"
                      : family == "scpi99"     ? "Sim Bench Works,ML-6510,ML65B0119,2.3"
                                               : "junco-sim,DMM-6,SIM-M001,1.0",
                      bench, seed) {
    prefixed_ = family == "dmm-prefixed";
    if (family == "scpi99") {
      // A bare SCPI-99 meter: MEASure queries only, no range, integration
      // time or averaging commands (anything else answers -113), so a
      // driver that sends what the plan did not ask for fails here.
      for (const char* scalar : {"", "SCALar:"}) {
        add(std::string("MEASure:") + scalar + "VOLTage:DC?", [this](const std::string&) { return reading(0); });
        add(std::string("MEASure:") + scalar + "CURRent:DC?", [this](const std::string&) { return reading(1); });
        add(std::string("MEASure:") + scalar + "VOLTage?", [this](const std::string&) { return reading(0); });
      }
      return;
    }
    const std::string p = prefixed_ ? "SENSe:" : "";
    for (int f = 0; f < 2; ++f) {
      const std::string fn = f == 0 ? "VOLTage:DC" : "CURRent:DC";
      add(p + fn + ":RANGe", [this, f](const std::string& a) {
        const double r = need_number(a);
        if (r <= 0) range_[f] = 0;
        else {
          check_range(r, 0, f == 0 ? 1000.0 : 3.0);
          range_[f] = pick_range(f, r);
        }
        return std::optional<std::string>{};
      });
      add(p + fn + ":RANGe:AUTO", [this, f](const std::string& a) {
        if (need_bool(a)) range_[f] = 0;
        else range_[f] = range_[f] > 0 ? range_[f] : last_auto_[f];
        return std::optional<std::string>{};
      });
      add(p + fn + ":NPLCycles", [this](const std::string& a) {
        const double n = need_number(a);
        check_range(n, 0.01, 100);
        nplc_ = n;
        return std::optional<std::string>{};
      });
    }
    // Both families spell averaging under SENSe (docs/command-sets.md).
    add("SENSe:AVERage:COUNt", [this](const std::string& a) {
      const double c = need_number(a);
      check_range(c, 1, 100);
      count_ = static_cast<int>(c);
      return std::optional<std::string>{};
    });
    add("SENSe:AVERage:STATe", [this](const std::string& a) {
      averaging_on_ = need_bool(a);
      return std::optional<std::string>{};
    });
    if (prefixed_) {
      averaging_on_ = true;  // this family has no separate state switch
      add("SENSe:FUNCtion", [this](const std::string& a) {
        std::string t = upper(trim(a));
        if (t.size() >= 2 && (t.front() == '\'' || t.front() == '"')) t = t.substr(1, t.size() - 2);
        if (header_matches("VOLTage:DC", t)) function_ = 0;
        else if (header_matches("CURRent:DC", t)) function_ = 1;
        else throw ScpiError{-224, "Illegal parameter value"};
        return std::optional<std::string>{};
      });
      add("READ?", [this](const std::string&) { return reading(function_) + (function_ == 0 ? "VDC" : "ADC"); });
    } else {
      add("MEASure:VOLTage:DC?", [this](const std::string&) { return reading(0); });
      add("MEASure:CURRent:DC?", [this](const std::string&) { return reading(1); });
    }
  }

 protected:
  void reset_settings() override {
    range_[0] = range_[1] = 0;
    nplc_ = 1;
    count_ = 1;
    averaging_on_ = prefixed_;
    function_ = 0;
  }

 private:
  static constexpr double v_ranges[] = {0.1, 1, 10, 100, 1000};
  static constexpr double i_ranges[] = {1e-6, 1e-5, 1e-4, 1e-3, 1e-2, 0.1, 1, 3};
  static double pick_range(int f, double value) {
    const double a = std::abs(value);
    if (f == 0) {
      for (double r : v_ranges)
        if (a <= r) return r;
      return 1000;
    }
    for (double r : i_ranges)
      if (a <= r) return r;
    return 3;
  }

  std::string reading(int f) {
    const Readings r = bench_.read(Clock::now());
    const double truth = f == 0 ? r.part_v : r.part_i_a;
    const double range = range_[f] > 0 ? range_[f] : pick_range(f, truth);
    if (range_[f] <= 0) last_auto_[f] = range;
    if (std::abs(truth) > 1.2 * range) return format_nr3(scpi_overload, 6);
    // Noise: 1 ppm of range at 1 NPLC (falls as √(NPLC·count)) plus 2 ppm
    // of reading; resolution 1 ppm of range (10 ppm below 1 NPLC).
    const int n = averaging_on_ ? count_ : 1;
    const double sigma = range * 1e-6 / std::sqrt(nplc_ * n) + std::abs(truth) * 2e-6;
    const double value = truth + sigma * gaussian();
    return format_nr3(quantise(value, range * (nplc_ < 1 ? 1e-5 : 1e-6)), 7);
  }

  bool prefixed_ = false;
  double range_[2] = {0, 0};  // 0 = auto
  double last_auto_[2] = {10, 0.1};
  double nplc_ = 1;
  int count_ = 1;
  bool averaging_on_ = false;
  int function_ = 0;  // 0 volts, 1 amps
};

// --------------------------------------------------------------- scanner
class ScannerSim : public SimInstrument {
 public:
  ScannerSim(const std::string& family, Bench& bench, std::uint64_t seed)
      : SimInstrument("scanner", family,
                      family == "relay-bank" ? "junco-sim,RB-8,SIM-X002,1.4"
                      : family == "scpi99"   ? "Sim Bench Works,ML-7016,ML70C0033,1.12"
                                             : "junco-sim,SW-20,SIM-X001,1.0",
                      bench, seed) {
    auto select = [this](int slot) {
      check_range(slot, 1, bench_.config().slots);
      bench_.select_slot(slot);  // break before make: the old slot opens first
      return std::optional<std::string>{};
    };
    if (family == "relay-bank") {
      add("RELay:SELect", [select](const std::string& a) {
        const double v = need_number(a);
        if (v != std::floor(v)) throw ScpiError{-104, "Data type error"};
        return select(static_cast<int>(v));
      });
      add("RELay:SELect?", [this](const std::string&) { return std::to_string(bench_.slot()); });
      add("RELay:OFF", [this](const std::string&) {
        bench_.select_slot(0);
        return std::optional<std::string>{};
      });
    } else {
      add("ROUTe:CLOSe", [select](const std::string& a) { return select(channel_list_single(a)); });
      add("ROUTe:CLOSe:STATe?", [this](const std::string&) {
        return bench_.slot() ? "(@" + std::to_string(bench_.slot()) + ")" : std::string("(@)");
      });
      add("ROUTe:OPEN:ALL", [this](const std::string&) {
        bench_.select_slot(0);
        return std::optional<std::string>{};
      });
    }
  }

 protected:
  void reset_settings() override { bench_.select_slot(0); }
};

// ---------------------------------------------------------------- siggen
// Frequency range 1 Hz … 3 GHz: the package's Ls shows only toward 1 GHz
// (ω²·Ls·Cj), so the vector readings that fit it need the generator there.
constexpr double kSigGenMinFreqHz = 1.0, kSigGenMaxFreqHz = 3e9;

class SigGenSim : public SimInstrument {
 public:
  SigGenSim(const std::string& family, Bench& bench, std::uint64_t seed)
      : SimInstrument("siggen", family, family == "gen-channel" ? "junco-sim,GEN-C2,SIM-G002,5.2"
                                        : family == "gen-vpp"   ? "junco-sim,GEN-P1,SIM-G003,2.0"
                                                                : "junco-sim,GEN-1,SIM-G001,1.0",
                      bench, seed) {
    const std::string p = family == "gen-channel" ? "SOURce1:" : "";
    auto set_freq = [this](const std::string& a) {
      const double f = need_number(a);
      check_range(f, kSigGenMinFreqHz, kSigGenMaxFreqHz);
      auto d = bench_.drive();
      d.freq_hz = f;
      bench_.set_drive(d);
      return std::optional<std::string>{};
    };
    add(p + "FREQuency", set_freq);
    add(p + "FREQuency?", [this](const std::string&) { return format_nr3(bench_.drive().freq_hz, 9); });
    if (family == "gen-channel") {
      add("SOURce1:VOLTage", [this](const std::string& a) {
        if (trim(a).empty()) throw ScpiError{-109, "Missing parameter"};
        const auto v = parse_number_with_suffix(a);
        if (!v) throw ScpiError{-104, "Data type error"};
        const std::string unit = v->second.empty() ? unit_ : v->second;
        if (unit != "VPP" && unit != "VRMS") throw ScpiError{-131, "Invalid suffix"};
        set_amplitude(v->first, unit);
        return std::optional<std::string>{};
      });
      add("OUTPut1", [this](const std::string& a) { return set_on(need_bool(a)); });
      add("OUTPut1?", [this](const std::string&) { return std::string(bench_.drive().on ? "1" : "0"); });
    } else if (family == "gen-vpp") {
      // A generator that takes its amplitude in Vpp only: no VOLT:UNIT (an
      // undefined header, -113), VOLT is always peak to peak.
      add("VOLTage", [this](const std::string& a) {
        set_amplitude(need_number(a), "VPP");
        return std::optional<std::string>{};
      });
      add("VOLTage?", [this](const std::string&) { return format_nr3(bench_.drive().emf_vpp, 6); });
      add("OUTPut", [this](const std::string& a) { return set_on(need_bool(a)); });
      add("OUTPut?", [this](const std::string&) { return std::string(bench_.drive().on ? "1" : "0"); });
    } else {
      add("VOLTage:UNIT", [this](const std::string& a) {
        const std::string u = upper(trim(a));
        if (u != "VPP" && u != "VRMS") throw ScpiError{-224, "Illegal parameter value"};
        unit_ = u;
        return std::optional<std::string>{};
      });
      add("VOLTage:UNIT?", [this](const std::string&) { return unit_; });
      add("VOLTage", [this](const std::string& a) {
        set_amplitude(need_number(a), unit_);
        return std::optional<std::string>{};
      });
      add("VOLTage?", [this](const std::string&) {
        const double vpp = bench_.drive().emf_vpp;
        return format_nr3(unit_ == "VPP" ? vpp : vpp / (2 * std::sqrt(2.0)), 6);
      });
      add("OUTPut", [this](const std::string& a) { return set_on(need_bool(a)); });
      add("OUTPut?", [this](const std::string&) { return std::string(bench_.drive().on ? "1" : "0"); });
    }
  }

 protected:
  void reset_settings() override {
    unit_ = "VPP";
    bench_.set_drive(AcDrive{false, 0.1, 1e6});
  }

 private:
  void set_amplitude(double v, const std::string& unit) {
    // The amplitude is the EMF (open circuit); a sine is generated, so Vrms
    // converts exactly.
    const double vpp = unit == "VPP" ? v : v * 2 * std::sqrt(2.0);
    check_range(vpp, 1e-3, 20.0);
    auto d = bench_.drive();
    d.emf_vpp = vpp;
    bench_.set_drive(d);
  }
  std::optional<std::string> set_on(bool on) {
    auto d = bench_.drive();
    d.on = on;
    bench_.set_drive(d);
    return std::nullopt;
  }
  std::string unit_ = "VPP";
};

// ------------------------------------------------------------ levelmeter
// The resistance the acv-dbm family states its dBm into (docs/sim.md).
constexpr double kDbmReferenceOhm = 50.0;

class LevelMeterSim : public SimInstrument {
 public:
  LevelMeterSim(const std::string& family, Bench& bench, std::uint64_t seed)
      : SimInstrument("levelmeter", family, family == "scope-meas" ? "junco-sim,SCOPE-4,SIM-L002,1.1"
                                            : family == "acv-dbm"    ? "junco-sim,LVL-D2,SIM-L003,1.0"
                                                                   : "junco-sim,ACV-2,SIM-L001,1.0",
                      bench, seed) {
    if (family == "scope-meas") {
      // Scope-grade: 0.03 % of reading plus 50 µV.
      add(":MEASure:VRMS?", [this](const std::string& a) { return level(chan_arg(a), false, 3e-4, 50e-6); });
      add(":MEASure:VPP?", [this](const std::string& a) { return level(chan_arg(a), true, 3e-4, 50e-6); });
    } else if (family == "acv-dbm") {
      // A level meter that reads power only, in dBm into its stated
      // kDbmReferenceOhm: 10·log10(Vrms²/R / 1 mW) of the true-RMS level.
      add("MEASure:POWer:AC?", [this](const std::string& a) {
        const double vrms = std::stod(level(channel_list_single(a), false, 1e-4, 2e-6));
        return format_nr3(10.0 * std::log10(vrms * vrms / kDbmReferenceOhm / 1e-3), 6);
      });
    } else {
      // AC voltmeter: 0.01 % of reading plus 2 µV.
      add("MEASure:VOLTage:AC?", [this](const std::string& a) { return level(channel_list_single(a), false, 1e-4, 2e-6); });
    }
  }

 protected:
  void reset_settings() override {}

 private:
  static int chan_arg(const std::string& a) {
    const std::string t = upper(trim(a));
    if (t.rfind("CHAN", 0) != 0) throw ScpiError{t.empty() ? -109 : -104, t.empty() ? "Missing parameter" : "Data type error"};
    std::string digits = t.substr(4);
    if (digits.rfind("NEL", 0) == 0) digits = digits.substr(3);  // CHANnel
    const auto v = parse_number(digits);
    if (!v) throw ScpiError{-104, "Data type error"};
    return static_cast<int>(*v);
  }
  std::string level(int ch, bool vpp, double rel, double floor_v) {
    if (ch != 1 && ch != 2) throw ScpiError{-222, "Data out of range"};
    const Readings r = bench_.read(Clock::now());
    const double truth = ch == 1 ? (vpp ? r.in_vpp : r.in_vrms) : (vpp ? r.out_vpp : r.out_vrms);
    // The noise floor adds in quadrature, as a true-RMS detector's does.
    const double noisy = truth * (1 + rel * gaussian());
    const double floor = floor_v * std::abs(gaussian());
    return format_nr3(std::sqrt(noisy * noisy + floor * floor), 6);
  }
};

// ------------------------------------------------------------ vectormeter
// Vector voltmeter (family scpi-vvm): ch2/ch1 at the generator's frequency
// as the linear ratio (MEAS:RAT?) and the phase in degrees (MEAS:PHAS?), the
// small-signal transfer of fixture + part with the package and the slot's
// parasitics (Bench::vector_transfer). Noise: 0.02 % of the ratio and
// 0.02 degrees, each query its own draw. Generator off: -221 (no reference).
class VectorMeterSim : public SimInstrument {
 public:
  VectorMeterSim(const std::string& family, Bench& bench, std::uint64_t seed)
      : SimInstrument("vectormeter", family, "junco-sim,VVM-2,SIM-V001,1.0", bench, seed) {
    add("MEASure:RATio?", [this](const std::string&) { return format_nr3(std::abs(transfer()) * (1 + 2e-4 * gaussian()), 7); });
    add("MEASure:PHASe?", [this](const std::string&) {
      return format_nr3(std::arg(transfer()) * 180.0 / 3.14159265358979323846 + 0.02 * gaussian(), 7);
    });
  }

 protected:
  void reset_settings() override {}

 private:
  std::complex<double> transfer() {
    const auto h = bench_.vector_transfer(Clock::now());
    if (!h) throw ScpiError{-221, "Settings conflict"};
    return *h;
  }
};

// ---------------------------------------------------------------- chamber
// A temperature chamber in degrees Celsius, as chamber controllers show it:
// set point, ramp-rate limit (K/min, 0 = none) and the air sensor's reading
// (0.01 °C resolution, small noise). *RST leaves the set point alone: a
// reset must not swing a chamber full of parts.
class ChamberSim : public SimInstrument {
 public:
  ChamberSim(const std::string& family, Bench& bench, std::uint64_t seed)
      : SimInstrument("chamber", family, "junco-sim,CHB-40,SIM-C001,1.0", bench, seed) {
    auto set_c = [this](const std::string& a) {
      const double c = need_number(a);
      check_range(c, bench_.config().chamber.min_c, bench_.config().chamber.max_c);
      bench_.set_chamber_setpoint_k(c + kZeroCelsiusK);
      return std::optional<std::string>{};
    };
    auto set_rate = [this](const std::string& a) {
      const double r = need_number(a);
      check_range(r, 0.0, 100.0);
      bench_.set_chamber_rate_k_per_min(r);
      return std::optional<std::string>{};
    };
    auto read_c = [this](const std::string&) {
      const double k = bench_.chamber_air_k(Clock::now()) + bench_.config().chamber.readback_noise_k * gaussian();
      return format_nr2(quantise(k - kZeroCelsiusK, 0.01), 2);
    };
    add("TEMPerature:SETPoint", set_c);
    add("TEMPerature:SETPoint?", [this](const std::string&) { return format_nr2(bench_.chamber_setpoint_k() - kZeroCelsiusK, 2); });
    add("TEMPerature:RATE", set_rate);
    add("TEMPerature:RATE?", [this](const std::string&) { return format_nr2(bench_.chamber_rate_k_per_min(), 2); });
    add("MEASure:TEMPerature?", read_c);
    add("TEMPerature?", read_c);
  }

 protected:
  void reset_settings() override {}

 private:
  static constexpr double kZeroCelsiusK = 273.15;
};

}  // namespace

std::unique_ptr<SimInstrument> make_instrument(const std::string& role, const std::string& family, Bench& bench,
                                               std::uint64_t seed) {
  std::unique_ptr<SimInstrument> inst;
  if (role == "source") inst = std::make_unique<SourceSim>(family, bench, seed);
  else if (role == "meter") inst = std::make_unique<MeterSim>(family, bench, seed);
  else if (role == "scanner") inst = std::make_unique<ScannerSim>(family, bench, seed);
  else if (role == "siggen") inst = std::make_unique<SigGenSim>(family, bench, seed);
  else if (role == "levelmeter") inst = std::make_unique<LevelMeterSim>(family, bench, seed);
  else if (role == "chamber") inst = std::make_unique<ChamberSim>(family, bench, seed);
  else if (role == "vectormeter") inst = std::make_unique<VectorMeterSim>(family, bench, seed);
  else throw std::invalid_argument("unknown role " + role);
  return inst;
}

}  // namespace junco::sim
