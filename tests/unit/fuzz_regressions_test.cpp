// Replays every saved fuzz input through the same entry points the libFuzzer
// programs use (tests/fuzz/entries.hpp), built with gcc in the normal build:
//  - tests/fuzz/regressions/<target>/*: inputs that once crashed or broke an
//    invariant (docs/fuzzing.md says what each one found);
//  - tests/fuzz/corpus/<target>/*: the seeds, which must pass too.
// An entry throws InvariantBroken or an undocumented exception on failure.
#include <catch2/catch.hpp>

#include "tests/fuzz/entries.hpp"
#include "tests/fuzz/rpc_service.hpp"

#include <filesystem>
#include <fstream>
#include <sstream>

namespace fs = std::filesystem;

namespace {

std::string read_file(const fs::path& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

std::size_t replay(const junco::fuzz::Target& target, const fs::path& dir) {
  std::size_t count = 0;
  if (!fs::is_directory(dir)) return 0;
  for (const auto& entry : fs::directory_iterator(dir)) {
    if (!entry.is_regular_file()) continue;
    INFO(target.name << ": " << entry.path().string());
    const std::string data = read_file(entry.path());
    CHECK_NOTHROW(target.run(data));
    ++count;
  }
  return count;
}

const fs::path fuzz_dir = fs::path(JUNCO_SOURCE_DIR) / "tests" / "fuzz";

}  // namespace

TEST_CASE("every seed of every fuzz target passes its entry point", "[fuzz]") {
  for (const auto& target : junco::fuzz::targets) {
    INFO(target.name);
    // A target without seeds would fuzz from nothing: the corpus must exist.
    CHECK(replay(target, fuzz_dir / "corpus" / target.name) >= 3);
  }
}

TEST_CASE("every saved crashing fuzz input now passes", "[fuzz]") {
  std::size_t total = 0;
  for (const auto& target : junco::fuzz::targets) total += replay(target, fuzz_dir / "regressions" / target.name);
  CHECK(total >= 1);  // at least the plan finding (docs/fuzzing.md)
}

TEST_CASE("the plan entry holds every step to the limits, not only start and stop", "[fuzz]") {
  // A descending log sweep starting exactly at max_supply_v (10 V on the
  // entry's bench): exp(log(10)) is 10.000000000000002, so before the fix in
  // daemon/plan.cpp sweep_values the first step broke the limit check_plan had
  // accepted, and this entry threw InvariantBroken.
  CHECK_NOTHROW(junco::fuzz::plan(R"({"lot":"L","parts":[{"slot":1,"label":"a"}],
      "sweep":{"mode":"voltage","spacing":"log","start":10,"stop":0.01,"count":3,"compliance_a":0.02}})"));
  CHECK_THROWS_AS(junco::fuzz::require(false, "x"), junco::fuzz::InvariantBroken);
}

TEST_CASE("the rpc_request entry reaches the real CoreService in this build", "[fuzz]") {
  // tests/fuzz/rpc_service.hpp: in the normal build rpc_service() is the
  // daemon's make_service over a temporary database; prove it is not a stand-in.
  auto& service = junco::fuzz::rpc_service();
  const auto status = service.call("daemon.status", junco::daemon::Json::object(), {});
  CHECK(status.at("schema_version").get<int>() >= 1);  // read from the SQLite file
  CHECK(status.at("bench_open") == false);              // the opener opens nothing
  const auto submitted = service.call("job.submit", junco::daemon::Json::parse(R"({"plan":{"lot":"WREN-0912",
      "parts":[{"slot":1,"label":"k24b-01"}],"sweep":{"mode":"current","start":1e-5,"stop":1e-3,"count":3}}})"), {});
  const auto job = service.call("job.get", {{"job_id", submitted.at("job_id")}}, {});
  CHECK(job.at("state") == "queued");  // stored, waiting for a bench that never opens
  CHECK(job.at("points_total") == 3);
}
