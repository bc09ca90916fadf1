// ctest: RUN_SERIAL (many clients and a job at once: load and latency figures)
// A short run of the mixed-query load (tests/bench/load_mixed.hpp): 16
// clients for a few seconds while a job runs on a real juncod + junco-sim.
// Correctness only (every reply a result, the job's readings the same as the
// unloaded baseline's); timing is bench_load_mixed's job, not a test's.
#include "tests/bench/load_mixed.hpp"

#include <catch2/catch.hpp>

TEST_CASE("16 clients of mixed queries during a job: every reply a result, readings as in the baseline", "[abuse][load]") {
  junco::test::LoadOptions o;
  o.seconds = 5;
  o.parts = 4;
  junco::test::LiveBenchOptions bo;
  bo.sim_args = {"--settle-ms", "0", "--config", std::string(JUNCO_SOURCE_DIR) + "/tools/sim/no-heating.json"};
  junco::test::LiveBench b("load-short", bo);
  b.start_daemon();
  const auto r = junco::test::run_load(o, b);
  junco::test::print_report(r, o);
  INFO("problems: " << r.problems);
  CHECK(r.problems.empty());
  CHECK(r.baseline.points_done > 0);
  CHECK(r.loaded.readings_per_part.size() == 4);
  for (const auto& m : junco::test::load_methods()) {
    INFO(m);
    REQUIRE(r.methods.count(m));
    CHECK(r.methods.at(m).latency_s.size() > 10);
  }
}
