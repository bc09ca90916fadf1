// The set of instruments the executor drives, one per role. siggen and
// levelmeter are optional (null when the config has none). Owned by the
// executor thread; nothing else talks to the instruments.
#pragma once

#include "daemon/config.hpp"
#include "drivers/roles.hpp"

#include <functional>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

namespace junco::daemon {

struct Bench {
  std::unique_ptr<drivers::Source> source;
  std::unique_ptr<drivers::Meter> meter;
  std::unique_ptr<drivers::Scanner> scanner;
  std::unique_ptr<drivers::SignalGen> siggen;         // may be null
  std::unique_ptr<drivers::LevelMeter> levelmeter;    // may be null
  // Instruments of the config that could not be opened ("scanner: why");
  // a bench with any is incomplete: it can be made safe, never run a job.
  std::vector<std::string> missing;

  // Supply output off, generator output off, scanner open — in that order
  // (never switch relays with current flowing). Every step is attempted even
  // when an earlier one fails; returns "" or the failures joined by "; ".
  std::string make_safe() noexcept;
};

// Opens every instrument of config.bench through drivers/factory.hpp, each
// on its own: one that does not answer is listed in Bench::missing and the
// others stay usable, so a supply left on by a killed daemon can be turned
// off even while, say, the scanner is mute.
std::unique_ptr<Bench> open_bench(const Config& config);

}  // namespace junco::daemon
