#include "daemon/jobs.hpp"

#include <algorithm>

namespace junco::daemon {

JobQueue::JobQueue(Store& store, EventBus& events) : store_(store), events_(events) {}

Id JobQueue::submit(const Plan& plan, long points_total, const Caller& caller) {
  const Id id = store_.insert_job(plan, points_total, caller.uid, caller.pid);
  publish_state(id, JobState::queued, std::nullopt);
  wake();
  return id;
}

JobRecord JobQueue::require(Id id) {
  auto j = store_.job(id);
  if (!j) throw NotFound("no job " + std::to_string(id), "job_id", id);
  return *j;
}

// Publishes the state just written (not re-read: another thread may already
// have moved the job on, and each event must describe its own transition).
void JobQueue::publish_state(Id id, JobState state, const std::optional<std::string>& error) {
  events_.publish({"job.state", {{"job_id", id}, {"state", to_string(state)}, {"error", error ? Json(*error) : Json(nullptr)}}});
}

void JobQueue::set_state(Id id, JobState state, const std::optional<std::string>& error) {
  store_.set_job_state(id, state, error);
  publish_state(id, state, error);
}

bool JobQueue::set_stop_state(Id id, JobState state, const std::optional<std::string>& error) {
  try {
    set_state(id, state, error);
    return true;
  } catch (const StoreError& e) {
    const std::string held = (error && !error->empty() ? *error + "; " : "") + "job state not saved: storage: " + e.what();
    store_.hold_job_state(id, state, held);
    publish_state(id, state, held);
    return false;
  }
}

JobRecord JobQueue::cancel(Id id) {
  std::unique_lock lock(mutex_);
  JobRecord j = require(id);
  if (running_ == id && j.state == JobState::running) {
    control_ = Control::cancel;
    lock.unlock();
    cv_.notify_all();
    return j;  // the executor reports "cancelled" once the bench is safe
  }
  if (j.state != JobState::queued && j.state != JobState::paused)
    throw WrongState("job " + std::to_string(id) + " is " + to_string(j.state) + "; only queued, running or paused jobs can be cancelled", "job_id", id);
  set_state(id, JobState::cancelled);
  return require(id);
}

JobRecord JobQueue::pause(Id id) {
  std::unique_lock lock(mutex_);
  JobRecord j = require(id);
  if (running_ == id && j.state == JobState::running) {
    control_ = Control::pause;
    lock.unlock();
    cv_.notify_all();
    return j;
  }
  if (j.state != JobState::queued)
    throw WrongState("job " + std::to_string(id) + " is " + to_string(j.state) + "; only queued or running jobs can be paused", "job_id", id);
  set_state(id, JobState::paused, "paused by request");
  return require(id);
}

JobRecord JobQueue::resume(Id id) {
  std::unique_lock lock(mutex_);
  JobRecord j = require(id);
  if (j.state != JobState::paused)
    throw WrongState("job " + std::to_string(id) + " is " + to_string(j.state) + "; only paused jobs can be resumed", "job_id", id);
  // Back in the queue at its original place (FIFO by id); the error is kept until it runs.
  set_state(id, JobState::queued);
  lock.unlock();
  wake();
  return require(id);
}

std::pair<int, int> JobQueue::recover() {
  int resumed = 0, interrupted = 0;
  for (const auto& j : store_.jobs(JobState::running)) {
    const bool may_resume = j.plan.resume;
    if (may_resume) {
      set_state(j.id, JobState::queued, "daemon restarted; resuming after the last committed reading");
      ++resumed;
    } else {
      set_state(j.id, JobState::interrupted, "daemon stopped while the job ran and the plan forbids resuming");
      ++interrupted;
    }
  }
  return {resumed, interrupted};
}

std::optional<Id> JobQueue::wait_next() {
  std::unique_lock lock(mutex_);
  for (;;) {
    if (stop_) return std::nullopt;
    if (auto id = store_.next_queued_job()) return id;
    cv_.wait_for(lock, std::chrono::seconds(1));
  }
}

std::optional<Id> JobQueue::wait_next_for(std::chrono::duration<double> d) {
  std::unique_lock lock(mutex_);
  const auto until = std::chrono::steady_clock::now() + std::chrono::duration_cast<std::chrono::steady_clock::duration>(d);
  for (;;) {
    if (stop_) return std::nullopt;
    if (auto id = store_.next_queued_job()) return id;
    if (std::chrono::steady_clock::now() >= until) return std::nullopt;
    cv_.wait_until(lock, std::min(until, std::chrono::steady_clock::now() + std::chrono::seconds(1)));
  }
}

bool JobQueue::claim(Id id) {
  {
    std::lock_guard lock(mutex_);
    if (!store_.transition_job(id, JobState::queued, JobState::running)) return false;
    running_ = id;
    control_ = Control::none;
  }
  publish_state(id, JobState::running, std::nullopt);
  return true;
}

void JobQueue::set_running(std::optional<Id> id) {
  std::lock_guard lock(mutex_);
  running_ = id;
  control_ = Control::none;
}

std::optional<Id> JobQueue::running() const {
  std::lock_guard lock(mutex_);
  return running_;
}

Control JobQueue::control() const {
  std::lock_guard lock(mutex_);
  return stop_ ? Control::shutdown : control_;
}

bool JobQueue::sleep_for(std::chrono::duration<double> d) {
  std::unique_lock lock(mutex_);
  const auto until = std::chrono::steady_clock::now() + std::chrono::duration_cast<std::chrono::steady_clock::duration>(d);
  return !cv_.wait_until(lock, until, [&] { return stop_ || control_ != Control::none; });
}

void JobQueue::stop() {
  {
    std::lock_guard lock(mutex_);
    stop_ = true;
  }
  cv_.notify_all();
}

bool JobQueue::stopping() const {
  std::lock_guard lock(mutex_);
  return stop_;
}

void JobQueue::wake() { cv_.notify_all(); }

}  // namespace junco::daemon
