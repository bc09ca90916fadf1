// Fuzz entry: daemon/plan.hpp on a fixed bench. The bytes are a plan as JSON
// (comments allowed, as in tools/examples/plan.jsonc). parse_plan may refuse
// with invalid_params and check_plan with plan_refused; nothing else may
// escape. Invariants on an accepted plan — the safety limits hold for every
// step the executor would program, not just for start and stop:
//  - voltage sweep: 0 <= V <= max_supply_v, power bound <= max_power_w;
//  - current sweep: 0 < I <= compliance <= current_limit_a, I·R_total <=
//    max_supply_v, vf_max_v·I <= max_power_w;
//  - reverse and off-state steps: |V| <= max_reverse_v and <= max_supply_v;
//    off-state steps at a good frequency, their signal peak at most |V| + 0.1 V;
//  - min_duration_s <= max_job_s; to_json round-trips through parse_plan and
//    the round-tripped plan is accepted too.
#include "tests/fuzz/entries.hpp"

#include "daemon/plan.hpp"
#include "formats/json_limits.hpp"
#include "tests/fuzz/rpc_service.hpp"  // fuzz_bench_config

#include <algorithm>
#include <cmath>
#include <cstdio>

namespace junco::fuzz {
namespace {

using daemon::Json;
using daemon::DomainError;
using daemon::ErrorKind;

const daemon::Config& bench() {
  static const daemon::Config config = fuzz_bench_config();
  return config;
}

void check_steps(const daemon::Plan& p, const daemon::Config& c) {
  const auto& lim = c.safety;
  const double r_total = c.fixture.bias_resistor_ohm + c.fixture.dc_return_ohm;
  const double i_lim = daemon::compliance_a(p, c);
  require(i_lim > 0 && i_lim <= lim.current_limit_a, "accepted compliance outside (0, current_limit_a]");
  require(daemon::min_duration_s(p) <= lim.max_job_s, "accepted a plan longer than max_job_s");
  // Bound the work: a fuzzed count × frequencies may be large but legal.
  const double n_steps = p.sweep.count * (1.0 + (p.ac ? static_cast<double>(p.ac->freqs_hz.size()) : 0.0));
  if (n_steps > 200000) return;
  const auto values = daemon::sweep_values(p.sweep);
  require(static_cast<int>(values.size()) == p.sweep.count, "sweep_values gave a different count");
  for (const auto& step : daemon::expand_steps(p)) {
    const double x = step.set_value;
    require(std::isfinite(x), "a step with a non-finite set value");
    char value[32];
    std::snprintf(value, sizeof value, "%.17g", x);
    const std::string at = std::string(daemon::to_string(step.kind)) + " step " + value;
    if (step.kind == daemon::Step::Kind::reverse || step.kind == daemon::Step::Kind::reverse_ac) {
      require(x <= 0 && -x <= lim.max_reverse_v && -x <= lim.max_supply_v, at + " exceeds a reverse limit");
    } else if (p.sweep.mode == daemon::SweepMode::voltage) {
      require(x >= 0 && x <= lim.max_supply_v, at + " V outside 0..max_supply_v");
      const double i_max = std::min(i_lim, x / r_total);
      require(std::min(x, p.vf_max_v) * i_max <= lim.max_power_w, at + " V may exceed max_power_w");
    } else {
      require(x > 0 && x <= i_lim, at + " A outside (0, compliance]");
      require(x * r_total <= lim.max_supply_v, at + " A needs more than max_supply_v");
      require(p.vf_max_v * x <= lim.max_power_w, at + " A may exceed max_power_w");
    }
    if (step.kind == daemon::Step::Kind::ac || step.kind == daemon::Step::Kind::reverse_ac)
      require(step.freq_hz > 0 && step.freq_hz <= 1e10, at + " at a bad frequency");
    if (step.kind == daemon::Step::Kind::reverse_ac) {
      // The signal peak stays within the smallest reverse bias + 0.1 V (check_plan).
      const auto& off = *p.ac->off_state;
      const double peak = p.ac->unit == drivers::LevelUnit::vrms ? off.amplitude * std::sqrt(2.0) : off.amplitude / 2.0;
      require(peak <= -x + 0.1 + 1e-12 * peak, at + " with a signal peak that forward-biases the junction");
    }
  }
}

void check_round_trip(const daemon::Plan& p, const daemon::Config& c) {
  const Json j = daemon::to_json(p);
  daemon::Plan again;
  try {
    again = daemon::parse_plan(j);
    daemon::check_plan(again, c);
  } catch (const DomainError& e) {
    throw InvariantBroken(std::string("to_json of an accepted plan is refused: ") + e.what() + " in " + j.dump());
  }
  require(daemon::to_json(again) == j, "to_json → parse_plan → to_json changed the plan: " + j.dump());
}

}  // namespace

void plan(std::string_view data) {
  // As plans reach juncod: depth-limited (a plan file through junco submit,
  // or params on the socket).
  Json j;
  try {
    j = parse_json_limited(data, "plan", /*ignore_comments=*/true);
  } catch (const JsonLimitError&) {
    return;
  } catch (const Json::exception&) {
    return;
  }
  const auto& c = bench();
  daemon::Plan p;
  try {
    p = daemon::parse_plan(j);
  } catch (const DomainError& e) {
    require(e.kind() == ErrorKind::bad_input, std::string("parse_plan refused with an error other than bad input: ") + e.what());
    return;
  }
  try {
    daemon::check_plan(p, c);
  } catch (const DomainError& e) {
    require(e.kind() == ErrorKind::plan_refused, std::string("check_plan refused with an error other than plan refused: ") + e.what());
    return;
  }
  check_steps(p, c);
  check_round_trip(p, c);
}

}  // namespace junco::fuzz
