// The Service behind juncod's socket: config, store, job queue and the sweep
// executor wired together. api's main.cpp calls make_service() once, serves
// Service::call() from its sessions and calls shutdown() on SIGINT/SIGTERM.
#pragma once

#include "daemon/config.hpp"
#include "daemon/log.hpp"
#include "daemon/service.hpp"

#include <functional>
#include <memory>
#include <string_view>

namespace junco::daemon {

struct Bench;  // daemon/bench.hpp

struct ServiceOptions {
  // Opens the instruments. Default: from config.bench through drivers/factory.hpp.
  // Tests pass in-process fakes here.
  std::function<std::unique_ptr<Bench>(const Config&)> open_bench;
  // Default: stderr at info and above (daemon/log.hpp).
  Log log;
};

// Turns every output off first (before the database is opened, so a damaged
// or huge database never holds an output on), then opens (and migrates) the
// store, recovers jobs left
// running by a previous daemon (resumed or marked interrupted) and starts the
// executor thread. Throws StoreError (daemon/store.hpp) if the database cannot
// be opened; an unreachable bench is logged, not fatal (jobs wait for it).
std::unique_ptr<Service> make_service(const Config& config, ServiceOptions options = {});

}  // namespace junco::daemon
