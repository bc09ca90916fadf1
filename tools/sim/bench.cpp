#include "tools/sim/bench.hpp"

#include <time.h>

#include <algorithm>
#include <cmath>

namespace junco::sim {

Bench::Bench(SimConfig config)
    : config_(std::move(config)), chamber_setpoint_k_(config_.ambient_k), chamber_ramp_k_(config_.ambient_k),
      chamber_air_k_(config_.ambient_k), ambient_k_(config_.ambient_k) {
  lot_ = draw_lot(config_.nominal, config_.spread, config_.slots, config_.seed);
  for (const auto& o : config_.outliers) {
    if (o.slot < 1 || o.slot > config_.slots) continue;
    auto& p = lot_[static_cast<size_t>(o.slot - 1)].part;
    if (o.is_a) p.is_a = *o.is_a;
    if (o.n) p.n = *o.n;
    if (o.rs_ohm) p.rs_ohm = *o.rs_ohm;
    if (o.cj0_f) p.cj0_f = *o.cj0_f;
    if (o.pin) p.pin = *o.pin;
  }
  for (int s : config_.empty_slots)
    if (s >= 1 && s <= config_.slots) lot_[static_cast<size_t>(s - 1)].fitted = false;
  for (auto& s : lot_) s.part.tnom_k = config_.ambient_k;
  temp_k_.assign(lot_.size(), config_.ambient_k);
}

const PartParams* Bench::connected_part() const {
  if (slot_ < 1 || slot_ > static_cast<int>(lot_.size())) return nullptr;
  const auto& s = lot_[static_cast<size_t>(slot_ - 1)];
  return s.fitted ? &s.part : nullptr;
}

double Bench::junction_temp_k() const {
  return slot_ >= 1 ? temp_k_[static_cast<size_t>(slot_ - 1)] : ambient_k_;
}

void Bench::set_chamber_setpoint_k(double k) {
  advance(Clock::now());
  chamber_setpoint_k_ = k;
  if (chamber_rate_k_per_min_ <= 0) chamber_ramp_k_ = k;
}

void Bench::set_chamber_rate_k_per_min(double rate) {
  advance(Clock::now());
  chamber_rate_k_per_min_ = rate;
  if (rate <= 0) chamber_ramp_k_ = chamber_setpoint_k_;
}

double Bench::chamber_air_k(Clock::time_point now) {
  advance(now);
  return ambient_k_;
}

nlohmann::json Bench::chamber_json(Clock::time_point now) {
  advance(now);
  return {{"setpoint_k", chamber_setpoint_k_}, {"ramp_target_k", chamber_ramp_k_}, {"air_k", ambient_k_},
          {"air_without_drift_k", chamber_air_k_}, {"rate_k_per_min", chamber_rate_k_per_min_},
          {"tau_s", config_.chamber.tau_s}, {"drift_k", config_.chamber.drift_k}, {"drift_period_s", config_.chamber.drift_period_s}};
}

// The ramp target moves toward the set point at the programmed rate (at
// once without one); the air follows the target first order with the
// chamber's τ (exact for a target that stands still within dt, and dt is
// the time between two instrument commands); the drift is a slow sine of
// wall-clock time. With the defaults (set point = ambient_k, no drift) the
// ambient stays exactly ambient_k, so replies stay byte-identical.
void Bench::advance_chamber(double dt) {
  const double step = chamber_rate_k_per_min_ > 0 ? chamber_rate_k_per_min_ / 60.0 * dt : INFINITY;
  const double gap = chamber_setpoint_k_ - chamber_ramp_k_;
  chamber_ramp_k_ = std::abs(gap) <= step ? chamber_setpoint_k_ : chamber_ramp_k_ + std::copysign(step, gap);
  chamber_air_k_ = chamber_ramp_k_ + (chamber_air_k_ - chamber_ramp_k_) * std::exp(-dt / config_.chamber.tau_s);
  const auto& c = config_.chamber;
  const double t = std::chrono::duration<double>(last_ - started_).count();
  ambient_k_ = chamber_air_k_ + (c.drift_k > 0 ? c.drift_k * std::sin(2.0 * M_PI * t / c.drift_period_s) : 0.0);
}

namespace {

std::int64_t monotonic_ns() {
  timespec ts{};
  ::clock_gettime(CLOCK_MONOTONIC, &ts);
  return static_cast<std::int64_t>(ts.tv_sec) * 1000000000 + ts.tv_nsec;
}

}  // namespace

void Bench::note_switch(std::deque<Switch>& log, bool on) {
  log.push_back(Switch{on, monotonic_ns()});
  if (log.size() > kMaxSwitches) log.pop_front();
}

void Bench::set_bias(const BiasSetting& bias) {
  advance(Clock::now());
  if (bias.output_on != bias_.output_on) note_switch(source_switches_, bias.output_on);
  bias_ = bias;
  cached_.reset();
}

void Bench::select_slot(int slot) {
  advance(Clock::now());
  slot_ = slot;
  cached_.reset();
}

void Bench::set_drive(const AcDrive& drive) {
  advance(Clock::now());
  if (drive.on != drive_.on) note_switch(siggen_switches_, drive.on);
  drive_ = drive;
  cached_.reset();
}

double Bench::power_w_at(double temp_k) const {
  return solve_dc(config_.fixture, connected_part(), bias_, temp_k).power_w;
}

Bench::Target Bench::compute_target() {
  const double t = junction_temp_k();
  if (cached_ && std::abs(t - cached_temp_k_) < 1e-3) return *cached_;
  Target target;
  const auto ac = solve_ac(config_.fixture, connected_part(), bias_, t, drive_);
  target.dc = ac.dc;
  auto& r = target.readings;
  r.supply_v = ac.dc.supply_v;
  r.supply_i_a = ac.dc.supply_i_a;
  r.part_v = ac.dc.v_part_v;
  r.part_i_a = ac.dc.i_a;
  r.in_vrms = ac.in_vrms;
  r.in_vpp = ac.in_vpp;
  r.out_vrms = ac.out_vrms;
  r.out_vpp = ac.out_vpp;
  cached_ = target;
  cached_temp_k_ = t;
  return target;
}

void Bench::advance(Clock::time_point now) {
  const double dt = std::chrono::duration<double>(now - last_).count();
  if (dt <= 0) return;
  last_ = now;
  advance_chamber(dt);
  // Junction temperatures: the connected part heats toward ambient + θ·P,
  // the others cool toward ambient; first order with the thermal τ.
  const double tau = config_.thermal_tau_s, amb = ambient_k_, theta = config_.theta_k_per_w;
  for (size_t i = 0; i < temp_k_.size(); ++i) {
    double& t = temp_k_[i];
    if (static_cast<int>(i) + 1 != slot_ || !connected_part() || theta == 0.0) {
      t = amb + (t - amb) * std::exp(-dt / tau);
      continue;
    }
    if (dt > 20 * tau) {  // long enough: the self-consistent steady state
      for (int k = 0; k < 20; ++k) t = amb + theta * power_w_at(t);
      continue;
    }
    const int steps = std::clamp(static_cast<int>(std::ceil(dt / (tau / 8))), 1, 200);
    const double h = dt / steps;
    for (int k = 0; k < steps; ++k) {
      const double target = amb + theta * power_w_at(t);
      t = target + (t - target) * std::exp(-h / tau);
    }
  }
  // Without settling (settle_s 0) every reading is the target itself
  // (read()): nothing to relax, and no period solve until something is read
  // (it takes up to seconds for a PIN part at 1 GHz, and the vector meter
  // does not need it).
  if (config_.settle_s <= 0) return;
  const Readings target = compute_target().readings;
  const double keep = std::exp(-dt / config_.settle_s);
  auto relax = [&](double& obs, double tgt) { obs = tgt + (obs - tgt) * keep; };
  relax(observed_.supply_v, target.supply_v);
  relax(observed_.supply_i_a, target.supply_i_a);
  relax(observed_.part_v, target.part_v);
  relax(observed_.part_i_a, target.part_i_a);
  relax(observed_.in_vrms, target.in_vrms);
  relax(observed_.in_vpp, target.in_vpp);
  relax(observed_.out_vrms, target.out_vrms);
  relax(observed_.out_vpp, target.out_vpp);
}

std::optional<std::complex<double>> Bench::vector_transfer(Clock::time_point now) {
  advance(now);
  if (!drive_.on || !(drive_.freq_hz > 0)) return std::nullopt;
  // Linearised at the DC point without the signal (small signal): the DC
  // solve alone, not the level meter's period solve.
  const DcPoint dc = solve_dc(config_.fixture, connected_part(), bias_, junction_temp_k());
  SlotContent content = SlotContent::open;
  if (slot_ >= 1 && config_.short_slots.count(slot_)) content = SlotContent::short_link;
  else if (connected_part()) content = SlotContent::part;
  return small_signal_transfer(config_.fixture, content, connected_part(), dc, junction_temp_k(), drive_.freq_hz);
}

Readings Bench::read(Clock::time_point now) {
  advance(now);
  const Target target = compute_target();
  const Readings r = config_.settle_s == 0 ? target.readings : observed_;
  note_bias_read(r.supply_i_a, target.dc.current_limited);
  return r;
}

void Bench::note_bias_read(double i_a, bool current_limited) {
  if (!bias_.output_on) return;
  if (!bias_reads_.empty() && bias_reads_.back().slot == slot_ && bias_reads_.back().voltage_v == bias_.voltage_v) {
    bias_reads_.back().i_a = i_a;
    bias_reads_.back().current_limited = bias_reads_.back().current_limited || current_limited;
    return;
  }
  bias_reads_.push_back(BiasRead{slot_, bias_.voltage_v, i_a, current_limited});
  if (bias_reads_.size() > kMaxSwitches) bias_reads_.pop_front();
}

nlohmann::json Bench::bias_log_json() const {
  nlohmann::json a = nlohmann::json::array();
  for (const auto& b : bias_reads_)
    a.push_back({{"slot", b.slot}, {"voltage_v", b.voltage_v}, {"i_a", b.i_a}, {"current_limited", b.current_limited}});
  return {{"levels", a}};
}

bool Bench::current_limited(Clock::time_point now) {
  advance(now);
  return compute_target().dc.current_limited;
}

nlohmann::json Bench::state_json(Clock::time_point now) {
  advance(now);
  const auto target = compute_target();
  nlohmann::json j;
  j["source"] = {{"output_on", bias_.output_on},
                 {"voltage_v", bias_.voltage_v},
                 {"current_limit_a", bias_.current_limit_a},
                 {"in_current_limit", target.dc.current_limited}};
  j["scanner"] = {{"slot", slot_}};
  j["chamber"] = {{"setpoint_k", chamber_setpoint_k_}, {"air_k", ambient_k_}};
  j["siggen"] = {{"output_on", drive_.on}, {"freq_hz", drive_.freq_hz}, {"emf_vpp", drive_.emf_vpp}};
  j["diode"] = {{"v", target.dc.v_part_v}, {"i_a", target.dc.i_a}, {"temp_k", junction_temp_k()},
                {"connected", connected_part() != nullptr}};
  j["levels"] = {{"in_vrms", target.readings.in_vrms},
                 {"in_vpp", target.readings.in_vpp},
                 {"out_vrms", target.readings.out_vrms},
                 {"out_vpp", target.readings.out_vpp}};
  return j;
}

nlohmann::json Bench::outputs_json() const {
  auto list = [](const std::deque<Switch>& log) {
    nlohmann::json a = nlohmann::json::array();
    for (const auto& s : log) a.push_back({{"on", s.on}, {"t_ns", s.t_ns}});
    return a;
  };
  return {{"clock", "CLOCK_MONOTONIC"},
          {"now_ns", monotonic_ns()},
          {"source", {{"output_on", bias_.output_on}, {"switches", list(source_switches_)}}},
          {"siggen", {{"output_on", drive_.on}, {"switches", list(siggen_switches_)}}}};
}

nlohmann::json Bench::lot_json() const {
  nlohmann::json parts = nlohmann::json::array();
  for (const auto& s : lot_) {
    nlohmann::json p{{"slot", s.slot}, {"fitted", s.fitted}};
    if (s.fitted) {
      p["is_a"] = s.part.is_a;
      p["n"] = s.part.n;
      p["rs_ohm"] = s.part.rs_ohm;
      p["cj0_f"] = s.part.cj0_f;
      p["vj_v"] = s.part.vj_v;
      p["m"] = s.part.m;
      p["tt_s"] = s.part.tt_s;
      p["type"] = s.part.pin ? "pin" : "junction";
      if (s.part.pin) {
        // The ideal I-region's law R = K/I: K = W²/((µn + µp)·τ), x = 1, R0 = RS.
        p["i_region_width_m"] = s.part.i_region_width_m;
        p["mobility_sum_m2_per_v_s"] = s.part.mobility_sum_m2_per_v_s;
        p["k_ohm_a_x"] = s.part.tt_s > 0 ? s.part.i_region_width_m * s.part.i_region_width_m /
                                               (s.part.mobility_sum_m2_per_v_s * s.part.tt_s)
                                         : 0.0;
      }
      p["eg_ev"] = s.part.eg_ev;
      p["xti"] = s.part.xti;
      p["trs1_per_k"] = s.part.trs1_per_k;
      p["trs2_per_k2"] = s.part.trs2_per_k2;
      p["tnom_k"] = s.part.tnom_k;
      p["rth_k_per_w"] = config_.theta_k_per_w;  // the fixture's, the same for every slot
    }
    parts.push_back(p);
  }
  return {{"parts", parts}, {"seed", config_.seed}, {"rth_k_per_w", config_.theta_k_per_w}, {"thermal_tau_s", config_.thermal_tau_s}};
}

}  // namespace junco::sim
