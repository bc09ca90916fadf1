// The daemon's one door: everything a client can ask of juncod goes through
// Service::call. The JSON-RPC server (framing, sessions, subscriptions) lives
// on one side of it; config, store, job queue and executor on the other.
//
// Methods (params and result are JSON objects; documented in schema/api/):
//   daemon.status     {}                          → version, uptime, running job, queue
//   bench.describe    {}                          → instruments (+ *IDN?), fixture, safety limits
//   bench.check       {}                          → each instrument opened, identified, one safe reading; why not (`junco bench`)
//   job.submit        {plan}                      → {job_id}; refused plans → RequestError(plan_refused)
//   job.list          {state?}                    → {jobs:[...]}
//   job.get           {job_id}                    → job
//   job.cancel | job.pause | job.resume {job_id}  → job
//   lot.list          {}                          → {lots:[...]}
//   part.list         {lot?}                      → {parts:[...]}
//   part.readings     {part_id, run_id?}          → {points:[...]}
//   part.fit          {part_id}                   → latest fit
//   part.figures      {part_id, currents_a?:[..]} → Vf and rd at those currents
//   part.export       {part_id, format}           → {format, content}
//   part.design       {part_id, calculator, inputs} → a design calculator's answer on the latest fit
//   design.run        {calculator, part?, inputs} → the same, on a part given by value
//   part.transfer     {part_id, run_id?, ac_sigma_db?, cj_f?, ...} → AC readings vs model, joint AC+DC fit
//   lot.stats         {lot, currents_a?, match_current_a?, ...} → spread, outliers, matched sets, nominal
//   lot.export        {lot, format}               → the lot nominal as a SPICE card or model document
// Events (published on the EventBus, sent as JSON-RPC notifications by the
// server to subscribed clients): job.state, job.progress, point.added.
#pragma once

#include <nlohmann/json.hpp>

#include <functional>
#include <stdexcept>
#include <string>
#include <string_view>

namespace junco::daemon {

using Json = nlohmann::json;

// JSON-RPC error codes. The -326xx ones are the standard's; the -320xx
// range is ours ("server error" range reserved for implementations).
enum class RpcCode : int {
  parse_error = -32700,
  invalid_request = -32600,
  method_not_found = -32601,
  invalid_params = -32602,
  internal_error = -32603,
  not_found = -32001,      // unknown job/part/lot/run id
  plan_refused = -32002,   // plan violates a safety limit or is malformed
  wrong_state = -32003,    // e.g. resume a job that is not paused
  storage_error = -32004,  // the store could not do what was asked
  unavailable = -32005,    // e.g. bench not reachable
};

class RequestError : public std::runtime_error {
 public:
  RequestError(RpcCode code, std::string message, Json data = nullptr)
      : std::runtime_error(std::move(message)), code_(code), data_(std::move(data)) {}
  RpcCode code() const { return code_; }
  const Json& data() const { return data_; }

 private:
  RpcCode code_;
  Json data_;
};

// Who is asking (from SO_PEERCRED); logged with each job submission.
struct Caller {
  int pid = -1;
  int uid = -1;
  int gid = -1;
};

struct Event {
  std::string kind;  // "job.state", "job.progress", "point.added"
  Json data;
};

// Thread-safe publish/subscribe; callbacks run on the publisher's thread and
// must not block (the server queues the notification and returns).
class EventBus {
 public:
  virtual ~EventBus() = default;
  using Token = unsigned long;
  virtual Token subscribe(std::function<void(const Event&)> callback) = 0;
  virtual void unsubscribe(Token token) = 0;
  virtual void publish(const Event& event) = 0;
};

class Service {
 public:
  virtual ~Service() = default;
  // Throws RequestError for anything the caller got wrong or that failed;
  // any other exception is a bug and maps to internal_error.
  virtual Json call(std::string_view method, const Json& params, const Caller& caller) = 0;
  virtual EventBus& events() = 0;
  // Stops the running job with outputs off; returns once the bench is safe.
  virtual void shutdown() = 0;
};

}  // namespace junco::daemon
