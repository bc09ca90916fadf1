// The physical state behind all five simulated instruments: supply settings,
// the selected slot, the generator, the lot, junction temperatures, and the
// settled readings. One Bench per process; every call must hold mutex()
// (the instruments and the control endpoint take it per command line).
#pragma once

#include "tools/sim/config.hpp"
#include "tools/sim/fixture.hpp"

#include <nlohmann/json.hpp>

#include <chrono>
#include <cstdint>
#include <deque>
#include <mutex>
#include <optional>
#include <vector>

namespace junco::sim {

using Clock = std::chrono::steady_clock;

// What the instruments can observe, noise-free, after settling.
struct Readings {
  double supply_v = 0, supply_i_a = 0;
  double part_v = 0, part_i_a = 0;
  double in_vrms = 0, in_vpp = 0, out_vrms = 0, out_vpp = 0;
};

class Bench {
 public:
  explicit Bench(SimConfig config);
  std::mutex& mutex() { return mutex_; }
  const SimConfig& config() const { return config_; }

  // Settings (each change first advances time with the old settings).
  void set_bias(const BiasSetting& bias);
  const BiasSetting& bias() const { return bias_; }
  void select_slot(int slot);  // 0 = none
  int slot() const { return slot_; }
  void set_drive(const AcDrive& drive);
  const AcDrive& drive() const { return drive_; }

  // Settled readings at `now` (first-order approach to the target).
  Readings read(Clock::time_point now);
  // The vector meter's reading (noise-free): ch2/ch1 at the generator's
  // frequency, small signal at the settled DC point (fixture.hpp
  // small_signal_transfer); nullopt while the generator is off.
  std::optional<std::complex<double>> vector_transfer(Clock::time_point now);
  // True while the supply regulates current (instantaneous, as its flag is).
  bool current_limited(Clock::time_point now);

  nlohmann::json state_json(Clock::time_point now);
  nlohmann::json lot_json() const;
  // Every switch of the supply and generator outputs since start, stamped on
  // CLOCK_MONOTONIC (ns): the clock the tests' std::chrono::steady_clock
  // reads, so a test can measure how long an output stayed on after it
  // killed the daemon (control command `outputs?`, docs/sim.md).
  nlohmann::json outputs_json() const;
  // Every supply level read while its output was on, in order (consecutive
  // reads of one level and slot are one entry, the last read kept): the
  // voltage as programmed, the current read and whether the supply was in
  // its current limit (control command `bias?`, docs/sim.md). A test sees
  // from it how the daemon approached a current-targeted step.
  nlohmann::json bias_log_json() const;

  // The chamber (docs/sim.md, "Chamber"): set point and ramp rate as
  // programmed, the air as it is (true) and as the chamber's sensor reads it.
  void set_chamber_setpoint_k(double k);
  double chamber_setpoint_k() const { return chamber_setpoint_k_; }
  void set_chamber_rate_k_per_min(double rate);  // 0 = no limit
  double chamber_rate_k_per_min() const { return chamber_rate_k_per_min_; }
  double chamber_air_k(Clock::time_point now);   // true air temperature = the parts' ambient
  nlohmann::json chamber_json(Clock::time_point now);

  // For tests and the control endpoint: the part in the selected slot, if any.
  const PartParams* connected_part() const;
  double junction_temp_k() const;

 private:
  struct Target {
    Readings readings;
    DcPoint dc;
  };
  void advance(Clock::time_point now);
  Target compute_target();
  double power_w_at(double temp_k) const;
  void advance_chamber(double dt);

  // One output switch (on or off) and when it happened.
  struct Switch {
    bool on;
    std::int64_t t_ns;  // CLOCK_MONOTONIC
  };
  static constexpr std::size_t kMaxSwitches = 100000;  // oldest dropped beyond this
  static void note_switch(std::deque<Switch>& log, bool on);
  // One supply level as read (bias_log_json).
  struct BiasRead {
    int slot;
    double voltage_v, i_a;
    bool current_limited;
  };
  void note_bias_read(double i_a, bool current_limited);

  std::mutex mutex_;
  SimConfig config_;
  std::deque<Switch> source_switches_, siggen_switches_;
  std::deque<BiasRead> bias_reads_;  // the last kMaxSwitches
  std::vector<Slot> lot_;
  std::vector<double> temp_k_;  // per slot (index slot-1)
  // Chamber: set point, the ramp's present target, the air without drift,
  // and the ambient the parts see (air + drift). All start at ambient_k.
  double chamber_setpoint_k_, chamber_ramp_k_, chamber_air_k_, ambient_k_;
  double chamber_rate_k_per_min_ = 0.0;
  Clock::time_point started_ = Clock::now();
  BiasSetting bias_;
  int slot_ = 0;
  AcDrive drive_{false, 0.1, 1e6};  // power-up: off, 0.1 Vpp EMF, 1 MHz
  Readings observed_;
  Clock::time_point last_ = Clock::now();
  // Cache of the last target (the AC solve costs milliseconds).
  std::optional<Target> cached_;
  double cached_temp_k_ = 0;
};

}  // namespace junco::sim
