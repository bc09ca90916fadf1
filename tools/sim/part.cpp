#include "tools/sim/part.hpp"

#include <algorithm>
#include <cmath>
#include <random>

namespace junco::sim {

double saturation_current_a(const PartParams& p, double temp_k) {
  const double ratio = temp_k / p.tnom_k;
  const double vt = fitting::thermal_voltage_v(temp_k);
  return p.is_a * std::pow(ratio, p.xti / p.n) * std::exp((ratio - 1.0) * p.eg_ev / (p.n * vt));
}

fitting::DiodeParams dc_params(const PartParams& p, double temp_k, double extra_series_ohm) {
  fitting::DiodeParams d;
  d.is_a = saturation_current_a(p, temp_k);
  d.n = p.n;
  d.rs_ohm = p.rs_ohm + extra_series_ohm;
  return d;
}

namespace {
// Depletion charge, SPICE form: below FC·VJ the integral of CJO(1−V/VJ)^−M;
// above, the integral of the linear extension, joined continuously.
double depletion_charge(const PartParams& p, double v) {
  const double vj = p.vj_v;
  const double fcv = p.fc * vj;
  auto q_below = [&](double x) { return p.cj0_f * vj / (1.0 - p.m) * (1.0 - std::pow(1.0 - x / vj, 1.0 - p.m)); };
  if (v < fcv) return q_below(v);
  const double f2 = std::pow(1.0 - p.fc, 1.0 + p.m);
  const double f3 = 1.0 - p.fc * (1.0 + p.m);
  const double dv = v - fcv;
  return q_below(fcv) + p.cj0_f / f2 * (f3 * dv + p.m / (2.0 * vj) * (v * v - fcv * fcv));
}
double depletion_capacitance(const PartParams& p, double v) {
  const double fcv = p.fc * p.vj_v;
  if (v < fcv) return p.cj0_f * std::pow(1.0 - v / p.vj_v, -p.m);
  const double f2 = std::pow(1.0 - p.fc, 1.0 + p.m);
  const double f3 = 1.0 - p.fc * (1.0 + p.m);
  return p.cj0_f / f2 * (f3 + p.m * v / p.vj_v);
}
}  // namespace

double junction_charge_c(const PartParams& p, double v, double diode_current_a) {
  return depletion_charge(p, v) + p.tt_s * diode_current_a;
}

double junction_capacitance_f(const PartParams& p, double v, double diode_conductance_s) {
  return depletion_capacitance(p, v) + p.tt_s * diode_conductance_s;
}

std::vector<Slot> draw_lot(const PartParams& nominal, const LotSpread& spread, int slots, std::uint64_t seed) {
  // A fixed engine and hand-written normal draws (Box–Muller) so the lot is
  // the same on every standard library for the same seed.
  std::mt19937_64 rng(seed ^ 0x6a756e636f4c4f54ull);
  auto uniform = [&] { return (static_cast<double>(rng() >> 11) + 0.5) * (1.0 / 9007199254740992.0); };
  auto normal = [&] {
    const double u1 = uniform(), u2 = uniform();
    return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * M_PI * u2);
  };
  std::vector<Slot> lot;
  for (int s = 1; s <= slots; ++s) {
    Slot slot;
    slot.slot = s;
    slot.part = nominal;
    slot.part.is_a = nominal.is_a * std::exp(spread.is_ln_sigma * normal());
    slot.part.n = std::clamp(nominal.n + spread.n_sigma * normal(), 1.0, 2.5);
    slot.part.rs_ohm = std::max(0.05, nominal.rs_ohm * (1.0 + spread.rs_rel_sigma * normal()));
    slot.part.cj0_f = std::max(0.0, nominal.cj0_f * (1.0 + spread.cj0_rel_sigma * normal()));
    lot.push_back(slot);
  }
  return lot;
}

}  // namespace junco::sim
