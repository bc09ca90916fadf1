// juncod's supervising process and its make-safe without a database
// (docs/daemon-core.md, "Supervision and make-safe after a death").
//
// Started by hand or by `junco demo`, juncod runs as two processes: this
// small supervisor, which holds no instrument and no database while the
// worker lives, and the worker (juncod itself, re-executed with
// --no-supervisor --worker-ready-fd N) which serves the socket and runs jobs.
// When the worker dies for any reason other than a clean stop the supervisor
// opens the bench at once, turns every output off, closes it again and
// starts a new worker: bounded back-off for workers that never served, a
// crash-rate limit for those that did; past either limit it gives up with
// the outputs off and exits 1. The worker is bound to the supervisor with
// PR_SET_PDEATHSIG (SIGTERM): a supervisor killed outright makes the worker
// stop the job and turn the outputs off itself.
//
// Under systemd (tools/systemd/juncod.service) systemd is the supervisor:
// juncod runs --no-supervisor and ExecStopPost= runs `juncod --make-safe`,
// i.e. make_bench_safe_alone() below.
#pragma once

#include "daemon/config.hpp"
#include "daemon/log.hpp"

#include <chrono>
#include <functional>
#include <string>
#include <string_view>
#include <vector>

namespace junco::daemon {

// Opens the instruments of config.bench (daemon/bench.hpp open_bench), makes
// them safe (Bench::make_safe: supply output off and 0 V, generator off,
// scanner open), closes them. Tries `attempts` times, `gap` apart, while any
// step fails. Never opens or creates the database. Returns "" when every
// configured instrument took the commands, else what failed. `log` gets the
// retries (warn) and the SCPI traffic (debug).
std::string make_bench_safe_alone(const Config& config, int attempts = 1,
                                  std::chrono::milliseconds gap = std::chrono::milliseconds(200), const Log& log = Log());

struct SupervisorOptions {
  // The worker's command line (argv[0] first, without --worker-ready-fd);
  // exec'd through `exe` so the same binary runs even if argv[0] is relative.
  std::vector<std::string> worker_argv;
  std::string exe = "/proc/self/exe";
  // A worker that dies before it serves (bad database, socket in use, crash
  // in start-up) is retried after start_backoff, doubled each time up to
  // start_backoff_max; after start_failure_limit such deaths in a row the
  // supervisor gives up (the error will not go away by itself).
  int start_failure_limit = 5;
  std::chrono::milliseconds start_backoff{500};
  std::chrono::milliseconds start_backoff_max{8000};
  // A worker that was serving is replaced after restart_delay (the job
  // resumes); more than crash_limit such deaths within crash_window is a
  // crash loop: give up.
  int crash_limit = 20;
  std::chrono::seconds crash_window{600};
  std::chrono::milliseconds restart_delay{200};
  // SIGTERM to the worker on stop; SIGKILL (then make-safe) after this.
  std::chrono::seconds stop_timeout{30};
  Log log;  // daemon/log.hpp
};

// Runs until SIGTERM, SIGINT or SIGHUP (the worker is stopped cleanly: exit
// 0), a worker that exits 0 by itself (exit 0), or a limit above (exit 1,
// outputs off). The first worker makes the bench safe at start itself
// (after it listens, before it opens the database); the supervisor does it
// after every death.
// Call from a single-threaded process (it forks).
int run_supervisor(const Config& config, const SupervisorOptions& options);

}  // namespace junco::daemon
