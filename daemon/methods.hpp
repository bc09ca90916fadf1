// The JSON-RPC methods: one row per method, the only list of them in the code.
//
//   ROW(name, handler, summary, (params...))
//     name     the method on the wire
//     handler  the CoreService member that answers it (Json handler(const Json&
//              params, const Caller&)), or for the transport's own methods the
//              RPC server's
//     summary  one line: what it gives
//     params   every param it takes; anything else is refused with
//              invalid_params naming the field (check_call)
//
// The rows expand into the params table (daemon/service_params.cpp, also built
// into the libFuzzer front, which has no store) and the dispatch table
// (daemon/core_service.cpp). tests/integration/api_contract_test.cpp checks the
// rows against schema/api/*.json in both directions and against docs/api.md.
// A new method: a row here, its handler, schema/api/NAME.json, a section in
// docs/api.md, then tools/python/gen_wrappers.py.
#pragma once

#include <string_view>
#include <vector>

// clang-format off
#define JUNCO_SERVICE_METHODS(ROW)                                                                                          \
  ROW("daemon.status",  status,          "version, uptime, running job, queue, bench problem", ())                        \
  ROW("bench.describe", describe,        "instruments (+ *IDN?), fixture, safety limits, accuracy", ())                   \
  ROW("bench.check",    check_bench,     "each instrument opened, identified, one safe reading; why not (junco bench)", ()) \
  ROW("job.submit",     submit,          "queues a plan → job_id; a refused plan is plan_refused", ("plan"))              \
  ROW("plan.check",     check_plan_dry,  "job.submit's checks and the plan's estimate; nothing queued", ("plan"))         \
  ROW("job.list",       list_jobs,       "jobs, optionally in one state", ("state"))                                      \
  ROW("job.get",        get_job,         "one job with its runs", ("job_id"))                                             \
  ROW("job.cancel",     cancel_job,      "cancels a queued, running or paused job", ("job_id"))                           \
  ROW("job.pause",      pause_job,       "pauses a queued or running job", ("job_id"))                                    \
  ROW("job.resume",     resume_job,      "queues a paused job again", ("job_id"))                                         \
  ROW("lot.list",       list_lots,       "lots with their part counts", ())                                               \
  ROW("part.list",      list_parts,      "parts, optionally of one lot", ("lot"))                                         \
  ROW("part.readings",  readings,        "a run's readings (default: the part's latest run)", ("part_id", "run_id"))      \
  ROW("part.fit",       fit_of,          "the part's latest fit", ("part_id"))                                            \
  ROW("part.figures",   figures,         "Vf and rd with standard errors at given currents", ("part_id", "currents_a"))   \
  ROW("part.export",    export_part,     "model document, SPICE card or readings CSV", ("part_id", "format"))             \
  ROW("part.touchstone", touchstone,     "the part's two-port at one bias as Touchstone .s2p text",                        \
      ("part_id", "bias_i_a", "reverse_v", "freqs_hz", "mount", "z0_ohm", "ls_h", "cp_f"))                               \
  ROW("part.design",    design,          "a design calculator on the part's latest fit", ("part_id", "calculator", "inputs")) \
  ROW("design.run",     design_by_value, "a design calculator on a part given by value", ("calculator", "part", "inputs"))  \
  ROW("part.transfer",  transfer,        "AC readings against the model, and the joint AC+DC fit",                         \
      ("part_id", "run_id", "ac_sigma_db", "cj_f", "max_signal_ratio", "ac_floor_v"))                                     \
  ROW("lot.stats",      lot_stats,       "spread, outliers, matched sets and nominal of a lot",                           \
      ("lot", "currents_a", "match_current_a", "match_tolerance_v", "set_size"))                                          \
  ROW("lot.export",     lot_export,      "the lot nominal as a SPICE card or model document", ("lot", "format"))          \
  ROW("lot.design",     lot_design,      "a design calculator's worst case over a lot's fitted parts and corners",        \
      ("lot", "calculator", "inputs", "temps_k", "supply_tol", "resistor_tol"))

// Answered by the RPC server itself (daemon/rpc_server.cpp): they belong to
// the connection, not to the service.
#define JUNCO_TRANSPORT_METHODS(ROW)                                                                     \
  ROW("events.subscribe",   subscribe,   "job.state, job.progress, point.added notifications", ("kinds")) \
  ROW("events.unsubscribe", unsubscribe, "stops this connection's notifications", ())
// clang-format on

#define JUNCO_METHOD_PARAMS(...) {__VA_ARGS__}

namespace junco::daemon {

struct MethodSpec {
  std::string_view name;
  std::string_view summary;
  std::vector<std::string_view> params;
  bool transport = false;  // answered by the RPC server, not by Service::call
};

// Every row of both lists above, service methods first.
const std::vector<MethodSpec>& method_specs();
const MethodSpec* find_method(std::string_view name);

}  // namespace junco::daemon
