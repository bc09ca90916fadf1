// The set of instruments the executor drives, one per role. siggen,
// levelmeter, chamber and vectormeter are optional (null when the config has none). Owned by the
// executor thread; nothing else talks to the instruments.
#pragma once

#include "daemon/config.hpp"
#include "daemon/log.hpp"
#include "drivers/roles.hpp"

#include <functional>
#include <map>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

namespace junco::daemon {

// Attempts per make-safe step when the instrument reports an error of its
// own (e.g. one stray -222 as the part ends). Timeouts and dropped links are
// not retried again here: the driver already retried them (1 + max_retries,
// reconnecting), so a mute instrument costs no more than before. Config and
// SCPI command errors (-1xx) are never retried.
inline constexpr int kMakeSafeAttempts = 3;

struct Bench {
  std::unique_ptr<drivers::Source> source;
  std::unique_ptr<drivers::Meter> meter;
  std::unique_ptr<drivers::Scanner> scanner;
  std::unique_ptr<drivers::SignalGen> siggen;         // may be null
  std::unique_ptr<drivers::LevelMeter> levelmeter;    // may be null
  std::unique_ptr<drivers::Chamber> chamber;          // may be null
  std::unique_ptr<drivers::VectorMeter> vectormeter;  // may be null (plan.vector needs it)
  // Instruments of the config that could not be opened ("scanner: why");
  // a bench with any is incomplete: it can be made safe, never run a job.
  std::vector<std::string> missing;
  // The same per role in a few words for people ("does not answer",
  // "cannot be reached", "refused: wrong instrument or dialect"), from the
  // driver's error kind; `junco bench` prints it before the details.
  std::map<std::string, std::string> missing_why;
  // Where make_safe() and clear_errors() report retries and stale errors
  // (one line each); may be empty.
  Log log;  // daemon/log.hpp

  // Supply output off, generator output off, scanner open — in that order
  // (never switch relays with current flowing). Every step is attempted even
  // when an earlier one fails, each up to kMakeSafeAttempts times (retries
  // logged); returns "" or the failures joined by "; ".
  std::string make_safe() noexcept;
  // The chamber's safe state: its set point back to safety.chamber_idle_k
  // (a controlled return toward room temperature; never switched off, which
  // would leave a cold chamber to warm uncontrolled and wet the parts).
  // Called whenever no job runs: at a job's end however it ends (done,
  // cancelled, paused, failed, shutdown), when juncod stops, and by the
  // supervisor after a worker died. Not part of make_safe(), which runs
  // between parts in the middle of a soaked temperature. "" or the failure.
  std::string park_chamber(double idle_k) noexcept;
  // Empties every instrument's error queue (Instrument::clear_errors) so an
  // error someone else left there is not blamed on our next command. What
  // was found is logged as a warning naming `when`; returns the failures
  // ("" = all cleared), which the caller treats like any bench fault.
  // At start the make-safe roles (source, siggen, scanner) are cleared just
  // before make_safe() and the others after it, so that a mute meter cannot
  // delay turning the supply off.
  enum class Roles { all, make_safe, others };
  std::string clear_errors(const std::string& when, Roles roles = Roles::all) noexcept;
};

// Opens every instrument of config.bench through drivers/factory.hpp, each
// on its own: one that does not answer is listed in Bench::missing and the
// others stay usable, so a supply left on by a killed daemon can be turned
// off even while, say, the scanner is mute. With `traffic` enabled at debug,
// every line to and from each instrument is logged there ("scpi ROLE > LINE").
std::unique_ptr<Bench> open_bench(const Config& config, const Log& traffic = Log());

}  // namespace junco::daemon
