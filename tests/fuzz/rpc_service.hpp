// The Service behind the rpc_request fuzz entry, in both builds (the libFuzzer
// one and the normal one, where unit.fuzz_regressions_test replays the corpus):
// rpc_service_real.cpp — the real CoreService (daemon/core_service.hpp
// make_service) over a temporary SQLite database, with a bench opener that
// opens nothing, so every request goes through the daemon's real method table,
// params checks, plan checks and store, and a submitted job waits for a bench
// that never comes.
#pragma once

#include "daemon/config.hpp"
#include "daemon/service.hpp"

namespace junco::fuzz {

daemon::Service& rpc_service();

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
