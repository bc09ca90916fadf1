// The physical state behind all five simulated instruments: supply settings,
// the selected slot, the generator, the lot, junction temperatures, and the
// settled readings. One Bench per process; every call must hold mutex()
// (the instruments and the control endpoint take it per command line).
#pragma once

#include "tools/sim/config.hpp"
#include "tools/sim/fixture.hpp"

#include <nlohmann/json.hpp>

#include <chrono>
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
  // True while the supply regulates current (instantaneous, as its flag is).
  bool current_limited(Clock::time_point now);

  nlohmann::json state_json(Clock::time_point now);
  nlohmann::json lot_json() const;

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

  std::mutex mutex_;
  SimConfig config_;
  std::vector<Slot> lot_;
  std::vector<double> temp_k_;  // per slot (index slot-1)
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
