// rpc_service(): the real CoreService (see rpc_service.hpp).
#include "tests/fuzz/rpc_service.hpp"

#include "daemon/bench.hpp"
#include "daemon/core_service.hpp"

#include <stdlib.h>  // mkdtemp

#include <filesystem>
#include <memory>
#include <stdexcept>

namespace junco::fuzz {
namespace {

namespace fs = std::filesystem;

// Created on first use, removed with its directory at exit.
struct RealService {
  fs::path dir;
  std::unique_ptr<daemon::Service> service;

  RealService() {
    std::string tmpl = (fs::temp_directory_path() / "junco-fuzz-rpc-XXXXXX").string();
    if (!::mkdtemp(tmpl.data())) throw std::runtime_error("fuzz: cannot create a temporary directory");
    dir = tmpl;
    daemon::Config config = fuzz_bench_config();
    config.paths.database = dir / "fuzz.db";
    daemon::ServiceOptions options;
    // No instruments: the executor logs nothing (log below) and jobs wait.
    options.open_bench = [](const daemon::Config&) -> std::unique_ptr<daemon::Bench> {
      throw std::runtime_error("fuzz: no bench");
    };
    options.log = [](std::string_view) {};
    service = daemon::make_service(config, std::move(options));
  }
  ~RealService() {
    service.reset();  // stops the executor thread, closes the store
    std::error_code ignored;
    fs::remove_all(dir, ignored);
  }
  RealService(const RealService&) = delete;
  RealService& operator=(const RealService&) = delete;
};

}  // namespace

daemon::Service& rpc_service() {
  static RealService real;
  return *real.service;
}

}  // namespace junco::fuzz
