// bench_load_mixed: 16 clients issuing mixed queries for 60 s while a job
// runs on a real juncod + junco-sim bench; throughput and p50/p99 latency per
// method, and the job's readings compared with an unloaded baseline run of
// the same plan (count per part, contiguity, duration within a tolerance).
// Figures and how to reproduce them: docs/security-load.md.
#include "tests/bench/load_mixed.hpp"

#include <cstring>
#include <iostream>

namespace {

constexpr const char* usage_text =
    "usage: bench_load_mixed [--seconds S] [--clients N] [--parts N] [--settle-s S] [--tolerance F]\n"
    "\n"
    "Starts junco-sim and juncod (from the build's bin directory), runs a job\n"
    "alone (the baseline), then the same plan again while N clients query the\n"
    "daemon for S seconds. Prints queries/s and p50/p99/max latency per method\n"
    "and compares the two jobs. Exit 0 when the readings are unaffected and the\n"
    "loaded job took at most (1 + F) times the baseline; 1 otherwise.\n"
    "\n"
    "  --seconds S    query time and approximate job length (default 60)\n"
    "  --clients N    concurrent query clients (default 16)\n"
    "  --parts N      parts in the plan, 1..8 (default 8)\n"
    "  --settle-s S   settle time per point in the plan (default 0.02)\n"
    "  --tolerance F  allowed relative slow-down of the job (default 0.2)\n";

}  // namespace

int main(int argc, char** argv) {
  junco::test::LoadOptions o;
  double tolerance = 0.2;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    if (a == "--help" || a == "-h") {
      std::cout << usage_text;
      return 0;
    }
    if (i + 1 >= argc) {
      std::cerr << "bench_load_mixed: " << a << " needs a value (see --help)\n";
      return 2;
    }
    try {
      const std::string v = argv[++i];
      if (a == "--seconds") o.seconds = std::stod(v);
      else if (a == "--clients") o.clients = std::stoi(v);
      else if (a == "--parts") o.parts = std::stoi(v);
      else if (a == "--settle-s") o.settle_s = std::stod(v);
      else if (a == "--tolerance") tolerance = std::stod(v);
      else {
        std::cerr << "bench_load_mixed: unknown option '" << a << "' (see --help)\n";
        return 2;
      }
    } catch (const std::exception&) {
      std::cerr << "bench_load_mixed: " << a << " needs a number, not '" << argv[i] << "'\n";
      return 2;
    }
  }
  if (!(o.seconds > 0) || o.clients < 1 || o.parts < 1 || o.parts > 8 || o.settle_s < 0 || tolerance < 0) {
    std::cerr << "bench_load_mixed: --seconds > 0, --clients >= 1, --parts 1..8, --settle-s >= 0, --tolerance >= 0\n";
    return 2;
  }
  try {
    junco::test::LiveBenchOptions bo;
    bo.sim_args = {"--settle-ms", "0", "--config", std::string(JUNCO_SOURCE_DIR) + "/tools/sim/no-heating.json"};
    junco::test::LiveBench b("load", bo);
    b.start_daemon();
    const auto r = junco::test::run_load(o, b);
    junco::test::print_report(r, o);
    const double ratio = r.loaded.duration_s / r.baseline.duration_s;
    if (!r.problems.empty()) return 1;
    if (ratio > 1 + tolerance) {
      std::printf("job under load took %.1f %% longer than the baseline (tolerance %.0f %%)\n", 100 * (ratio - 1), 100 * tolerance);
      return 1;
    }
    return 0;
  } catch (const std::exception& e) {
    std::cerr << "bench_load_mixed: " << e.what() << "\n";
    return 1;
  }
}
