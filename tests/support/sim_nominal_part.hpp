// junco-sim's nominal part (docs/sim.md "JX-41") as the design calculators
// take it, for reference tests that put the same part into ngspice.
#pragma once

#include "design/calculators.hpp"

namespace junco::test {

inline constexpr double t27_k = 300.15;

// tt_s adds a transit time (0: none).
inline fitting::DesignPart sim_nominal_part(double tt_s) {
  fitting::DesignPart p;
  p.label = "JX-41";
  p.dc = {2.5e-9, 1.85, 0.7};
  p.temp_k = t27_k;
  p.cap = {2e-12, 0.65, 0.4, 0.5};
  p.tt_s = tt_s;
  return p;
}

}  // namespace junco::test
