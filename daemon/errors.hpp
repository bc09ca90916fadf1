// The daemon's domain errors: what went wrong in words of the bench, not of
// the protocol. The plan parser, the plan checks, the job queue and the store
// throw these; they know nothing of JSON-RPC. One place turns them into a
// JSON-RPC error (rpc::answer, protocol/framing.cpp: rpc_code()), so a code
// is chosen once for each kind.
#pragma once

#include <cstdint>
#include <optional>
#include <stdexcept>
#include <string>

namespace junco::daemon {

enum class ErrorKind {
  bad_input,     // a request's value has the wrong type or shape (field names it)
  plan_refused,  // the plan breaks a range or a safety limit (field and limit name them)
  not_found,     // no such job, part, lot, run or fit
  wrong_state,   // e.g. resume a job that is not paused
  storage,       // the store could not read or write, or found stored data damaged
};

class DomainError : public std::runtime_error {
 public:
  DomainError(ErrorKind kind, const std::string& message) : std::runtime_error(message), kind_(kind) {}
  ErrorKind kind() const { return kind_; }
  // What the error is about, for the client's data object; "" when nothing.
  const std::string& field() const { return field_; }    // "plan.sweep.stop"
  const std::string& limit() const { return limit_; }    // "max_supply_v"
  // The thing not found or in the wrong state: key "job_id", "part_id",
  // "run_id" with a number, or "lot" with a name.
  const std::string& subject_key() const { return subject_key_; }
  const std::optional<std::int64_t>& subject_id() const { return subject_id_; }
  const std::string& subject_name() const { return subject_name_; }

 protected:
  std::string field_, limit_, subject_key_, subject_name_;
  std::optional<std::int64_t> subject_id_;

 private:
  ErrorKind kind_;
};

// A value of the input has the wrong type, is missing or unknown.
class BadInput : public DomainError {
 public:
  BadInput(std::string field, const std::string& problem) : DomainError(ErrorKind::bad_input, field + ": " + problem) {
    field_ = std::move(field);
  }
};

// The plan is well formed but may not run on this bench: a range, a size
// limit or a safety limit. field: the plan's value (may be ""), limit: the
// bench's limit it breaks (may be "").
class PlanRefused : public DomainError {
 public:
  explicit PlanRefused(const std::string& message, std::string limit = "", std::string field = "")
      : DomainError(ErrorKind::plan_refused, message) {
    limit_ = std::move(limit);
    field_ = std::move(field);
  }
};

class NotFound : public DomainError {
 public:
  NotFound(const std::string& message, std::string key, std::int64_t id) : DomainError(ErrorKind::not_found, message) {
    subject_key_ = std::move(key);
    subject_id_ = id;
  }
  NotFound(const std::string& message, std::string key, std::string name) : DomainError(ErrorKind::not_found, message) {
    subject_key_ = std::move(key);
    subject_name_ = std::move(name);
  }
};

class WrongState : public DomainError {
 public:
  WrongState(const std::string& message, std::string key, std::int64_t id) : DomainError(ErrorKind::wrong_state, message) {
    subject_key_ = std::move(key);
    subject_id_ = id;
  }
};

// The store failed, or what it read back is not what it wrote (a damaged
// row). Its message names the file or the row.
class StoreError : public DomainError {
 public:
  explicit StoreError(const std::string& message) : DomainError(ErrorKind::storage, message) {}
};

}  // namespace junco::daemon
