// The job queue: persisted in the store, FIFO by job id, one job running at a
// time. Client requests (cancel, pause, resume) change queued/paused jobs
// directly; for the running job they set a request the executor picks up
// between readings (and during settle waits), so the executor alone touches
// the bench.
//
// States (JobState, daemon/rows.hpp): queued → running → done | failed |
// cancelled; running → paused (fault or request) → queued by resume;
// interrupted when the daemon died and the plan forbids resuming. Thread-safe.
#pragma once

#include "daemon/plan.hpp"
#include "daemon/service.hpp"
#include "daemon/store.hpp"

#include <chrono>
#include <condition_variable>
#include <functional>
#include <mutex>
#include <optional>

namespace junco::daemon {

enum class Control { none, pause, cancel, shutdown };

class JobQueue {
 public:
  JobQueue(Store& store, EventBus& events);

  // Persists a validated plan as a queued job.
  Id submit(const Plan& plan, long points_total, const Caller& caller);
  JobRecord cancel(Id id);  // throws NotFound / WrongState (daemon/errors.hpp)
  JobRecord pause(Id id);
  JobRecord resume(Id id);

  // After a restart: jobs left running become queued (plan allows resume) or
  // interrupted. Returns how many of each, for the log.
  std::pair<int, int> recover();

  // Executor side.
  std::optional<Id> wait_next();  // blocks; nullopt once stop() was called
  // The same, waiting at most `d`: nullopt on timeout too (check stopping()).
  std::optional<Id> wait_next_for(std::chrono::duration<double> d);
  // Moves a queued job to running and makes it the running job, atomically
  // with respect to cancel/pause; false when it was no longer queued.
  bool claim(Id id);
  void set_running(std::optional<Id> id);
  std::optional<Id> running() const;
  Control control() const;  // request for the running job
  // Sleeps up to `d`; returns early (false) when a request or stop arrives.
  bool sleep_for(std::chrono::duration<double> d);
  void stop();
  bool stopping() const;

  // State change persisted and published as job.state.
  void set_state(Id id, JobState state, const std::optional<std::string>& error = std::nullopt);
  // For the executor's stop states (paused, failed, done, ...): persisted like
  // set_state; when the store cannot write it (read-only, disk full), the
  // state and the error, with the storage error appended, are held in memory
  // by the store (job.get / job.list serve them with "persisted": false) and
  // published. Returns false then. Never throws StoreError.
  bool set_stop_state(Id id, JobState state, const std::optional<std::string>& error);

 private:
  JobRecord require(Id id);
  void publish_state(Id id, JobState state, const std::optional<std::string>& error);
  void wake();

  Store& store_;
  EventBus& events_;
  mutable std::mutex mutex_;
  std::condition_variable cv_;
  std::optional<Id> running_;
  Control control_ = Control::none;
  bool stop_ = false;
};

}  // namespace junco::daemon
