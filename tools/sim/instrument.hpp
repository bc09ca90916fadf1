// A simulated instrument: the IEEE 488.2 common commands and status model,
// plus a table of family-specific commands (instruments.cpp). Handles one
// line at a time; the caller holds the Bench mutex for the whole call.
#pragma once

#include "tools/sim/bench.hpp"
#include "tools/sim/scpi.hpp"

#include <functional>
#include <memory>
#include <optional>
#include <random>
#include <string>
#include <vector>

namespace junco::sim {

// Thrown by a command handler: pushed into the error queue, nothing changes.
struct ScpiError {
  int code;
  std::string text;
};

// Faults injected on one instrument; guarded by the Bench mutex.
struct FaultState {
  int drop_after = -1;  // commands still answered before the drop; -1 = none
  int late_ms = 0;      // delay of the next reply (one shot)
  int garble = 0;       // replies still to corrupt
  bool silent = false;
};

class SimInstrument {
 public:
  using Handler = std::function<std::optional<std::string>(const std::string& args)>;

  SimInstrument(std::string role, std::string family, std::string idn, Bench& bench, std::uint64_t seed);
  virtual ~SimInstrument() = default;

  // One program message (may hold several ';'-separated commands); returns
  // the reply line without terminator when at least one query answered.
  std::optional<std::string> handle_line(std::string_view line);

  const std::string& role() const { return role_; }
  const std::string& family() const { return family_; }
  StatusModel& status() { return status_; }
  FaultState& faults() { return faults_; }
  // Corrupts a reply so that it can never parse as a number (or as the
  // original token): characters flipped, truncated with junk, or binary.
  std::string garble(const std::string& reply);

 protected:
  void add(std::string pattern, Handler handler);
  virtual void reset_settings() = 0;  // *RST (and power-on)
  double gaussian() { return normal_(rng_); }
  Bench& bench_;

 private:
  std::optional<std::string> dispatch(const ScpiCommand& cmd);
  std::optional<std::string> common(const ScpiCommand& cmd, bool& handled);

  std::string role_, family_, idn_;
  StatusModel status_;
  FaultState faults_;
  std::vector<std::pair<std::string, Handler>> routes_;
  std::mt19937_64 rng_;
  std::normal_distribution<double> normal_{0.0, 1.0};
  int ese_ = 0;
  unsigned garble_count_ = 0;
};

// Throws std::invalid_argument for an unknown family.
std::unique_ptr<SimInstrument> make_instrument(const std::string& role, const std::string& family, Bench& bench,
                                               std::uint64_t seed);

}  // namespace junco::sim
