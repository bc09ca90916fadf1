// What a plan will do on this bench, before it is queued (plan.check, `junco
// submit --dry-run`): how many readings, about how long, the highest supply
// voltage, current and power in the part it can reach, and how close each
// safety limit comes to binding. Pure: a plan and a config in, numbers out.
#pragma once

#include "daemon/config.hpp"
#include "daemon/plan.hpp"

#include <string>
#include <vector>

namespace junco::daemon {

// Time per instrument exchange assumed by the estimate: a query or a
// command with its error check over LAN, USB or a fast serial line takes
// 5–30 ms on bench instruments (common practice, no source).
inline constexpr double kExchangeS = 0.02;

struct LimitUse {
  std::string limit;      // config key, "current_limit_a"
  double limit_value;     // the bench's limit, SI
  double plan_value;      // the most the plan can ask of it, SI
  std::string unit;       // "A", "V", "W", "s"
  bool binds;             // the plan reaches it (a sweep will stop there, or the value sits at the limit)
  std::string note;       // what that means, in words
};

struct PlanEstimate {
  long points_per_part = 0;     // per part and temperature
  long points_total = 0;
  int temperatures = 1;        // chamber set points (1 without a chamber)
  double soak_s = 0;           // the soaks: ramps (at the bench's rate limit or kAssumedChamberRateKPerMin) + hold times
  double min_duration_s = 0;   // settle times and hold times only
  double duration_s = 0;       // with kExchangeS per instrument exchange and the soaks
  double peak_supply_v = 0;    // highest supply voltage programmed
  double peak_current_a = 0;   // highest current the part can carry (the compliance bounds it)
  double peak_power_w = 0;     // bound on the power in the part (vf_max_v × current)
  double peak_reverse_v = 0;
  // plan.heating.pulse: pulsed forward steps per part, from which set value,
  // and the pulse duty (time on / (on + off), on = the longest dwell).
  long pulsed_steps_per_part = 0;
  double pulse_from = 0;
  double pulse_duty = 0;
  std::vector<LimitUse> limits;
};

// The plan must have passed check_plan (else the numbers mean little).
PlanEstimate estimate_plan(const Plan& plan, const Config& config);

}  // namespace junco::daemon
