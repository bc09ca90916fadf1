#include "daemon/plan_estimate.hpp"

#include <algorithm>
#include <cmath>

namespace junco::daemon {

namespace {

// Instrument exchanges per reading, as the executor takes them
// (daemon/executor.cpp): set the supply, read V and I (× average) and the
// limit state; a current-targeted step corrects the supply ~2 times on
// average (at most 5); an AC reading sets the frequency and reads two levels.
double exchanges_per_dc(const Plan& p) {
  const double per_read = 1 + 2.0 * p.sweep.average + 1;
  return p.sweep.mode == SweepMode::current ? 2.0 * per_read : per_read;
}
constexpr double kExchangesPerAc = 3;

}  // namespace

PlanEstimate estimate_plan(const Plan& p, const Config& c) {
  PlanEstimate e;
  const auto& lim = c.safety;
  const SweepSpec& s = p.sweep;
  const double n_ac = p.ac ? static_cast<double>(p.ac->freqs_hz.size()) : 0.0;
  const double n_off = p.ac && p.ac->off_state ? static_cast<double>(p.ac->off_state->freqs_hz.size()) : 0.0;
  const double n_rev = static_cast<double>(p.reverse_v.size());
  const double parts = static_cast<double>(p.parts.size());
  e.points_per_part = static_cast<long>(steps_per_part(p));
  e.temperatures = temperature_count(p);
  e.points_total = e.points_per_part * static_cast<long>(p.parts.size()) * e.temperatures;
  e.min_duration_s = min_duration_s(p);
  e.soak_s = soak_s(p, c, true);
  // Heating options: a pulse adds output off and on (twice per correction of
  // a current-targeted step), a dwell reading reads V and I again, the sweep
  // down repeats the forward steps without their AC readings.
  const double pulsed = pulsed_steps(p), count = s.count;
  const double per_pulse = s.mode == SweepMode::current ? 2.0 * 2.0 : 2.0;
  const double dwell_reads = p.heating.dwell ? pulsed * 2.0 * (2.0 * s.average + 1) : 0.0;
  const double down = p.heating.down_sweep ? count * exchanges_per_dc(p) + pulsed * per_pulse : 0.0;
  const double exchanges_per_part = count * exchanges_per_dc(p) + (count - pulsed) * n_ac * kExchangesPerAc + pulsed * per_pulse +
                                    dwell_reads + down + n_rev * (4 + n_off * kExchangesPerAc) + 8;
  // The soak's ramps on top of min_duration_s, which holds the hold times already.
  e.duration_s = e.min_duration_s + (e.soak_s - soak_s(p, c, false)) + parts * e.temperatures * exchanges_per_part * kExchangeS;
  if (p.heating.pulse) {
    e.pulsed_steps_per_part = static_cast<long>(pulsed);
    e.pulse_from = pulse_from(p);
    const double on_s = std::max(p.heating.pulse->on_s, p.heating.dwell ? p.heating.dwell->long_s : 0.0);
    e.pulse_duty = on_s + p.heating.pulse->off_s > 0 ? on_s / (on_s + p.heating.pulse->off_s) : 1.0;
  }

  const double r_total = c.fixture.bias_resistor_ohm + c.fixture.dc_return_ohm;
  const double i_lim = compliance_a(p, c);
  const double hi = std::max(s.start, s.stop);
  if (s.mode == SweepMode::voltage) {
    e.peak_supply_v = hi;
    e.peak_current_a = r_total > 0 ? std::min(i_lim, hi / r_total) : i_lim;
    e.peak_power_w = std::min(hi, p.vf_max_v) * e.peak_current_a;
  } else {
    e.peak_current_a = hi;
    e.peak_supply_v = std::min(lim.max_supply_v, hi * r_total + p.vf_max_v);  // the executor clamps at the limit
    e.peak_power_w = p.vf_max_v * hi;
  }
  for (double r : p.reverse_v) e.peak_reverse_v = std::max(e.peak_reverse_v, r);

  // A sweep by voltage reaches the compliance when V/R passes it: the sweep
  // stops going up there (the reading is flagged and left out of the fit).
  const bool compliance_stops = s.mode == SweepMode::voltage && r_total > 0 && hi / r_total > i_lim;
  e.limits.push_back({"current_limit_a", lim.current_limit_a, s.mode == SweepMode::current ? hi : i_lim, "A",
                      compliance_stops || (s.mode == SweepMode::current ? hi : i_lim) >= lim.current_limit_a * 0.999,
                      compliance_stops ? "the supply's compliance (" + std::to_string(i_lim) + " A) will stop the sweep before its end"
                                       : "the compliance programmed before the output goes on"});
  const bool supply_clamped = s.mode == SweepMode::current && hi * r_total + p.vf_max_v > lim.max_supply_v;
  e.limits.push_back({"max_supply_v", lim.max_supply_v, e.peak_supply_v, "V", supply_clamped || e.peak_supply_v >= lim.max_supply_v * 0.999,
                      supply_clamped ? "a part with a high forward voltage may not reach the top current: the supply stops at the limit"
                                     : "the highest voltage programmed"});
  e.limits.push_back({"max_power_w", lim.max_power_w, e.peak_power_w, "W", e.peak_power_w >= lim.max_power_w * 0.999,
                      "bound on the power in the part (vf_max_v × current); a reading above the limit stops the sweep"});
  if (!p.reverse_v.empty())
    e.limits.push_back({"max_reverse_v", lim.max_reverse_v, e.peak_reverse_v, "V", e.peak_reverse_v >= lim.max_reverse_v * 0.999,
                        "the highest reverse bias"});
  if (!p.temps_k.empty()) {
    const double lo = *std::min_element(p.temps_k.begin(), p.temps_k.end());
    const double hi_t = *std::max_element(p.temps_k.begin(), p.temps_k.end());
    e.limits.push_back({"chamber_min_k", lim.chamber_min_k, lo, "K", lo <= lim.chamber_min_k * 1.0001, "the coldest set point"});
    e.limits.push_back({"chamber_max_k", lim.chamber_max_k, hi_t, "K", hi_t >= lim.chamber_max_k * 0.9999, "the hottest set point"});
    e.limits.push_back({"max_soak_s", lim.max_soak_s, p.soak.hold_s, "s", false,
                        "each soak waits for hold_s inside the tolerance and fails the job's part after max_soak_s"});
  }
  e.limits.push_back({"max_job_s", lim.max_job_s, e.duration_s, "s", e.duration_s >= lim.max_job_s,
                      e.duration_s >= lim.max_job_s ? "the job will likely be stopped by the limit before its end" : "the whole job, estimated"});
  return e;
}

}  // namespace junco::daemon
