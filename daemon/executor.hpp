// The sweep executor: one thread that takes the next queued job and drives
// the bench through it, committing each reading as it is taken.
//
// Safety order per part (see docs/daemon-core.md):
//   outputs off, scanner open → connect slot → current limit → voltage 0 →
//   output on → steps … → outputs off, scanner open
// and make_safe() again at the end of the job, on any fault, on cancel,
// pause, timeout and shutdown. Driver faults are retried per reading
// (kPointAttempts) unless permanent (config, SCPI command error), make-safe
// steps per step (kMakeSafeAttempts, bench.hpp); a persistent fault pauses
// the job with the error. Error queues are cleared at bench open and before
// each job. A part's fit and its run's end are one transaction, and runs an
// older juncod left done without a fit are fitted before any job runs.
// When make_safe() cannot reach every instrument (one stopped answering), the
// bench is "not known safe" and make_safe() is retried every
// kMakeSafeRetry while no job runs, until it succeeds. A store that cannot
// commit (read-only, disk full) pauses the job with outputs off; if the
// paused state cannot be written either, the store holds it in memory.
#pragma once

#include "daemon/bench.hpp"
#include "daemon/config.hpp"
#include "daemon/jobs.hpp"
#include "daemon/log.hpp"
#include "daemon/store.hpp"

#include <atomic>
#include <condition_variable>
#include <map>
#include <mutex>
#include <chrono>
#include <functional>
#include <memory>
#include <string_view>
#include <thread>

namespace junco::daemon {

// Attempts per reading before a fault counts as persistent.
inline constexpr int kPointAttempts = 4;
// Pause between make-safe attempts while the bench is not known safe.
inline constexpr std::chrono::milliseconds kMakeSafeRetry{500};
// The bench check (`junco bench`) opens each instrument with these, whatever
// the config says, and no retries: a mute instrument costs at most about
// connect + reply timeout, one that answers one reply per reading. Chosen to
// keep each instrument under 2 s (docs/bring-up.md has the measured figures).
inline constexpr std::chrono::milliseconds kCheckConnectTimeout{500};
inline constexpr std::chrono::milliseconds kCheckReplyTimeout{700};

using BenchOpener = std::function<std::unique_ptr<Bench>(const Config&)>;
using LogFn = Log;  // daemon/log.hpp

// The first thing juncod does, before the database is opened (a damaged or
// huge database must never hold an output on): open the bench and turn every
// output off. Needs no store; Executor::adopt_safe_start() takes the result.
struct SafeStart {
  std::unique_ptr<Bench> bench;  // null when it could not be opened at all
  std::string errors;            // "" = every output known off
};
SafeStart make_bench_safe_first(const Config& config, const BenchOpener& open, const LogFn& log);

class Executor {
 public:
  Executor(const Config& config, Store& store, JobQueue& queue, EventBus& events, BenchOpener open, LogFn log);
  ~Executor();  // stop()
  Executor(const Executor&) = delete;
  Executor& operator=(const Executor&) = delete;

  // Takes the bench make_bench_safe_first() opened and made safe: records
  // the instruments' *IDN? (now that the store is open) and clears their
  // error queues; a bench not known safe or incomplete is retried by the
  // executor thread. Runs on the caller's thread before start().
  void adopt_safe_start(SafeStart start);
  void start();
  // Stops the running job at the next safe point, outputs off; joins.
  void stop();

  // Instruments as last identified (role → {manufacturer, model, ...}); for bench.describe.
  Json identities() const;
  // bench.check (`junco bench`), from any thread: the executor thread closes
  // the bench's links, opens each instrument on its own with the check
  // timeouts, identifies it, takes one reading per role that changes
  // nothing (supply output state and readback, the meter's DC voltage, the
  // switch's state, the generator's output state, a level) and reopens the
  // bench. While a job runs, answers at once from what is known, saying
  // which job holds the bench. Several callers at once share one check.
  Json check_bench();
  bool bench_open() const { return bench_open_.load(); }
  // Why the bench is not open or a job cannot start, in words ("" when
  // nothing is wrong): the last problem the executor logged.
  std::string bench_problem() const;
  // False from a make_safe() that failed for some instrument until a retry succeeds.
  bool bench_known_safe() const { return !unsafe_.load(); }

 private:
  void loop();
  void run_job(Id id);
  bool ensure_bench();
  void drop_bench();
  void identify();
  // Records one identity (bench.describe, the store) and logs it when it is
  // new or changed.
  void note_identity(const std::string& role, const drivers::Identity& id);
  void serve_check();
  Json run_check();
  Json known_bench(const char* why) const;
  void refit_runs_without_fit();
  // Records the outcome of a make_safe(): "" = safe, else not known safe.
  void note_safety(const std::string& errors);
  void retry_make_safe();
  // make_safe() and, since no job runs after it, the chamber to its idle
  // set point (Bench::park_chamber); the failures of both, "" when none.
  std::string make_safe_and_park();
  // Logs a bench problem once, not again while it stays the same.
  void log_bench_problem(LogLevel level, const std::string& line);
  void set_bench_problem(const std::string& line);
  void stop_job(Id id, JobState state, const std::optional<std::string>& message);

  const Config& config_;
  Store& store_;
  JobQueue& queue_;
  EventBus& events_;
  BenchOpener open_;
  LogFn log_;
  std::unique_ptr<Bench> bench_;  // executor thread only (and before start())
  std::atomic<bool> bench_open_{false};
  std::atomic<bool> unsafe_{false};    // bench not known safe (written by the executor thread)
  std::string unsafe_errors_;          // the last make_safe() failures, executor thread only
  std::string last_bench_problem_;     // guarded by problem_mutex_ (read by daemon.status)
  mutable std::mutex problem_mutex_;
  bool reopen_before_job_ = false;     // after an instrument fault: reconnect before the next job
  mutable std::mutex ident_mutex_;
  Json identities_ = Json::object();
  std::map<std::string, std::string> logged_identity_;  // executor thread (and before start())
  // bench.check requests: asked > done while one waits; started = the
  // ticket being run. Guarded by check_mutex_.
  std::mutex check_mutex_;
  std::condition_variable check_cv_;
  long check_asked_ = 0, check_started_ = 0, check_done_ = 0;
  Json check_result_;
  std::thread thread_;
};

}  // namespace junco::daemon
