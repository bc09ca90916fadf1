// The Service behind the rpc_request fuzz entry.
//
// Normal build (gcc, unit.fuzz_regressions_test): rpc_service_real.cpp — the
// real CoreService (daemon/core_service.hpp make_service) over a temporary
// SQLite database, with a bench opener that opens nothing, so every request
// goes through the daemon's real method table, params checks, plan checks and
// store, and a submitted job waits for a bench that never comes.
//
// libFuzzer build (clang, no Ceres/SQLite/Boost — docs/fuzzing.md): the real
// CoreService needs the store (SQLite) and the fits (Ceres), so
// rpc_service_front.cpp links the front half only: the daemon's own
// check_call (daemon/service_params.hpp: method table and params) and, for
// job.submit, parse_plan + check_plan with the limits; past those checks it
// answers `unavailable`.
#pragma once

#include "daemon/config.hpp"
#include "daemon/service.hpp"

namespace junco::fuzz {

daemon::Service& rpc_service();
// True when rpc_service() is the real CoreService.
bool rpc_service_is_real();

// A bench like tools/examples/bench.jsonc, built in code (invented values):
// 8 slots, 100 Ω + 10 Ω, limits 10 V / 0.1 A / 0.25 W / 5 V reverse / 86400 s,
// default job limits. Shared by the plan and rpc_request entries.
inline daemon::Config fuzz_bench_config() {
  daemon::Config c;
  for (const char* role : {"source", "meter", "scanner", "siggen", "levelmeter"})
    c.bench[role] = daemon::InstrumentConfig{role, "sim", {}, 2000, 2};
  c.fixture.bias_resistor_ohm = 100.0;
  c.fixture.dc_return_ohm = 10.0;
  c.fixture.slots = 8;
  c.safety = daemon::SafetyLimits{10.0, 0.1, 0.25, 5.0, 86400.0};
  return c;
}

}  // namespace junco::fuzz
