// Time per answer of every design calculator (design/calculators.hpp),
// through the table as `junco design` and part.design call it, on junco-sim's
// nominal part with its junction capacitance and a 5 ns transit time, at
// 1 MHz, 100 MHz and 1 GHz. The target (issue 15) is ≤ 10 ms per answer,
// distortion included. Prints, per case over REPS runs, the median and worst
// wall-clock time and the median CPU time of the calling thread (on a shared,
// loaded machine the CPU time is what the calculator costs; the wall clock
// adds the time other processes had the core). Exits 1 when the worst median
// CPU time is above the target.
//   build/<preset>/bin/bench_design_speed [REPS]      (default 50)
#include "design/calculators.hpp"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <chrono>
#include <ctime>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

using namespace junco::fitting;
using Json = nlohmann::json;

namespace {

double thread_cpu_ms() {
  timespec ts{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return static_cast<double>(ts.tv_sec) * 1e3 + static_cast<double>(ts.tv_nsec) * 1e-6;
}

struct Case {
  std::string calculator;
  Json inputs;
};

}  // namespace

int main(int argc, char** argv) {
  const int reps = argc > 1 ? std::max(1, std::atoi(argv[1])) : 50;
  DesignPart part;
  part.label = "JX-41 with TT";
  part.dc = {2.5e-9, 1.85, 0.7};
  part.cap = {2e-12, 0.65, 0.4, 0.5};
  part.tt_s = 5e-9;

  std::vector<Case> cases{{"op", {{"supply_v", 5.0}, {"bias_resistor_ohm", 390.0}}},
                          {"bias-r", {{"supply_v", 5.0}, {"current_a", 10e-3}}},
                          {"headroom", {{"amplitude_v", 0.2}}},
                          {"power", {{"supply_v", 5.0}, {"bias_resistor_ohm", 390.0}, {"signal_peak_a", 4e-3}}}};
  for (double f : {1e6, 100e6, 1e9})
    for (const char* sw : {"series", "shunt"}) {
      cases.push_back({"loss", {{"switch", sw}, {"current_a", 1e-3}, {"freq_hz", f}}});
      cases.push_back({"bias-for-loss", {{"switch", sw}, {"target_db", std::string(sw) == "series" ? 1.0 : 20.0}, {"freq_hz", f}}});
      cases.push_back({"isolation", {{"switch", sw}, {"reverse_v", 5.0}, {"freq_hz", f}}});
      cases.push_back({"distortion", {{"switch", sw}, {"current_a", 1e-3}, {"amplitude_v", 0.2}, {"freq_hz", f}}});
      cases.push_back({"bias-for-thd", {{"switch", sw}, {"target_pct", 1.0}, {"amplitude_v", 0.2}, {"freq_hz", f}}});
    }

  std::printf("%-14s %-44s %10s %10s %10s\n", "calculator", "inputs", "median ms", "worst ms", "CPU ms");
  double worst_all = 0.0;
  std::string worst_case;
  for (const auto& c : cases) {
    std::vector<double> t, cpu;
    Json answer;
    for (int k = 0; k < reps; ++k) {
      const auto start = std::chrono::steady_clock::now();
      const double cpu_start = thread_cpu_ms();
      answer = run_design(c.calculator, &part, c.inputs);
      cpu.push_back(thread_cpu_ms() - cpu_start);
      t.push_back(std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - start).count());
    }
    std::sort(t.begin(), t.end());
    std::sort(cpu.begin(), cpu.end());
    const double median = t[t.size() / 2], worst = t.back(), cpu_median = cpu[cpu.size() / 2];
    std::string in = c.inputs.dump();
    if (in.size() > 44) in = in.substr(0, 41) + "...";
    std::printf("%-14s %-44s %10.3f %10.3f %10.3f%s\n", c.calculator.c_str(), in.c_str(), median, worst, cpu_median,
                answer.value("achievable", true) ? "" : "  (not achievable)");
    if (cpu_median > worst_all) {
      worst_all = cpu_median;
      worst_case = c.calculator + " " + c.inputs.dump();
    }
  }
  std::printf("\nslowest answer (median CPU time): %.3f ms (%s); target <= 10 ms: %s\n", worst_all, worst_case.c_str(),
              worst_all <= 10.0 ? "met" : "NOT MET");
  return worst_all <= 10.0 ? 0 : 1;
}
