#include "tools/sim/part.hpp"

#include <algorithm>
#include <cmath>
#include <random>

namespace junco::sim {

double saturation_current_a(const PartParams& p, double temp_k) {
  return fitting::saturation_current_at_a(p.is_a, p.n, p.tnom_k, temp_k, p.law());
}

double series_resistance_ohm(const PartParams& p, double temp_k) {
  return fitting::series_resistance_at_ohm(p.rs_ohm, p.tnom_k, temp_k, p.law());
}

fitting::DiodeParams dc_params(const PartParams& p, double temp_k, double extra_series_ohm) {
  fitting::DiodeParams d;
  d.is_a = saturation_current_a(p, temp_k);
  d.n = p.n;
  d.rs_ohm = series_resistance_ohm(p, temp_k) + extra_series_ohm;
  return d;
}

// Depletion charge, SPICE form: below FC·VJ the integral of CJO(1−V/VJ)^−M;
// above, the integral of the linear extension, joined continuously.
DepletionLaw::DepletionLaw(const PartParams& p)
    : cj0_f_(p.cj0_f), vj_v_(p.vj_v), m_(p.m), fcv_(p.fc * p.vj_v), q_scale_(p.cj0_f * p.vj_v / (1.0 - p.m)),
      q_fcv_(q_scale_ * (1.0 - std::pow(1.0 - p.fc, 1.0 - p.m))), c_lin_(p.cj0_f / std::pow(1.0 - p.fc, 1.0 + p.m)),
      f3_(1.0 - p.fc * (1.0 + p.m)) {}

DepletionLaw::At DepletionLaw::at(double v) const {
  if (v < fcv_) {
    const double t = 1.0 - v / vj_v_;
    const double t_m = std::pow(t, -m_);  // (1 − V/VJ)^−M; t·t_m = (1 − V/VJ)^(1−M)
    return {q_scale_ * (1.0 - t * t_m), cj0_f_ * t_m};
  }
  const double dv = v - fcv_;
  return {q_fcv_ + c_lin_ * (f3_ * dv + m_ / (2.0 * vj_v_) * (v * v - fcv_ * fcv_)), c_lin_ * (f3_ + m_ * v / vj_v_)};
}

double junction_charge_c(const PartParams& p, double v, double diode_current_a) {
  return DepletionLaw(p).at(v).q_c + p.tt_s * diode_current_a;
}

double junction_capacitance_f(const PartParams& p, double v, double diode_conductance_s) {
  return DepletionLaw(p).at(v).c_f + p.tt_s * diode_conductance_s;
}

double i_region_resistance_ohm(const PartParams& p, double q_c) {
  if (!p.pin || !(q_c > 0.0)) return 0.0;
  return std::min(p.i_region_width_m * p.i_region_width_m / (p.mobility_sum_m2_per_v_s * q_c), p.pin_r_max_ohm);
}

double i_region_drop_v(const PartParams& p, double i_a) { return i_a * i_region_resistance_ohm(p, p.tt_s * i_a); }

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
