#include "design/network.hpp"

#include "design/bias.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>
#include <stdexcept>

namespace junco::fitting {

using cplx = std::complex<double>;

namespace {

constexpr double two_pi = 2.0 * std::numbers::pi;

bool present(double r_ohm) { return r_ohm > 0.0 && std::isfinite(r_ohm); }

cplx parallel(cplx a, cplx b) { return a * b / (a + b); }

// Nodal analysis of a small linear network: Y·V = J, node 0 is ground.
class Nodal {
 public:
  explicit Nodal(int nodes) : y_(nodes, std::vector<cplx>(nodes)), j_(nodes) {}
  void admittance(int a, int b, cplx y) {
    if (a > 0) y_[a - 1][a - 1] += y;
    if (b > 0) y_[b - 1][b - 1] += y;
    if (a > 0 && b > 0) {
      y_[a - 1][b - 1] -= y;
      y_[b - 1][a - 1] -= y;
    }
  }
  void current_into(int a, cplx i) { j_[a - 1] += i; }
  // Gaussian elimination with partial pivoting; returns V[node − 1].
  std::vector<cplx> solve() {
    const std::size_t n = j_.size();
    auto y = y_;
    auto v = j_;
    for (std::size_t c = 0; c < n; ++c) {
      std::size_t pivot = c;
      for (std::size_t r = c + 1; r < n; ++r)
        if (std::abs(y[r][c]) > std::abs(y[pivot][c])) pivot = r;
      std::swap(y[c], y[pivot]);
      std::swap(v[c], v[pivot]);
      if (std::abs(y[c][c]) == 0.0) throw std::runtime_error("bias network: singular nodal matrix");
      for (std::size_t r = c + 1; r < n; ++r) {
        const cplx f = y[r][c] / y[c][c];
        for (std::size_t k = c; k < n; ++k) y[r][k] -= f * y[c][k];
        v[r] -= f * v[c];
      }
    }
    for (std::size_t c = n; c-- > 0;) {
      for (std::size_t k = c + 1; k < n; ++k) v[c] -= y[c][k] * v[k];
      v[c] /= y[c][c];
    }
    return v;
  }

 private:
  std::vector<std::vector<cplx>> y_;
  std::vector<cplx> j_;
};

}  // namespace

double emf_peak_from_power_v(double power_w, double source_ohm) { return 2.0 * std::sqrt(2.0 * power_w * source_ohm); }

cplx element_current_a(SwitchKind kind, cplx z, double emf_peak_v, double source_ohm, double load_ohm) {
  if (kind == SwitchKind::series) return emf_peak_v / (source_ohm + load_ohm + z);
  const cplx zp = parallel(z, cplx(load_ohm));
  return emf_peak_v * zp / (source_ohm + zp) / z;
}

OffHeadroom off_headroom(SwitchKind kind, const DiodeParams& p, const JunctionCharge& charge, double reverse_v,
                         double emf_peak_v, double source_ohm, double load_ohm, double freq_hz, const Parasitics& par,
                         double temp_k, std::optional<double> bv_v, double margin_v, double onset_a) {
  constexpr double inf = std::numeric_limits<double>::infinity();
  const cplx z = diode_off_impedance(p, charge, reverse_v, freq_hz, par, temp_k);
  const cplx zj = 1.0 / junction_admittance_at_voltage_s(p, charge, -reverse_v, freq_hz, temp_k);
  OffHeadroom h;
  h.junction_peak_v = std::abs(element_current_a(kind, z, emf_peak_v, source_ohm, load_ohm) * zj);
  h.forward_margin_v = reverse_v - h.junction_peak_v;
  h.min_reverse_v = h.junction_peak_v + margin_v;
  h.forward_ok = h.forward_margin_v >= margin_v;
  h.conduction_peak_v = reverse_v + p.n * thermal_voltage_v(temp_k) * std::log1p(onset_a / p.is_a);
  h.breakdown_margin_v = bv_v ? *bv_v - reverse_v - h.junction_peak_v : inf;
  h.max_reverse_v = bv_v ? *bv_v - h.junction_peak_v - margin_v : inf;
  h.breakdown_peak_v = bv_v ? *bv_v - reverse_v : inf;
  h.breakdown_ok = h.breakdown_margin_v >= margin_v;
  return h;
}

JunctionHeating junction_heating(SwitchKind kind, const DiodeParams& p_tnom, const JunctionCharge& charge_tnom,
                                 double tnom_k, const TemperatureLaw& law, double bias_i_a, double emf_peak_v,
                                 double source_ohm, double load_ohm, double freq_hz, const Parasitics& par, double ambient_k,
                                 double theta_k_per_w) {
  JunctionHeating h;
  h.tj_k = ambient_k;
  for (int k = 0; k < 500; ++k) {
    const DiodeParams p = diode_at_temperature(p_tnom, tnom_k, h.tj_k, law);
    JunctionCharge charge = charge_tnom;
    if (charge.cap.cj0_f > 0) {
      const auto d = depletion_at_temperature(charge.cap.cj0_f, charge.cap.vj_v, charge.cap.m, tnom_k, h.tj_k);
      charge.cap.cj0_f = d.cj0_f;
      charge.cap.vj_v = d.vj_v;
    }
    const cplx z = diode_small_signal_impedance(p, charge, bias_i_a, freq_hz, h.tj_k) + cplx(0.0, two_pi * freq_hz * par.ls_h);
    h.dc_w = bias_i_a * diode_voltage_v(p, bias_i_a, h.tj_k);
    h.rf_w = 0.5 * std::norm(element_current_a(kind, z, emf_peak_v, source_ohm, load_ohm)) * z.real();
    const double next = ambient_k + theta_k_per_w * h.total_w();
    if (!std::isfinite(next) || next <= 0.0) return h;
    const bool settled = std::abs(next - h.tj_k) < 1e-9;
    h.tj_k = next;
    if (settled) {
      h.converged = true;
      return h;
    }
  }
  return h;
}

double block_capacitor_f(double freq_low_hz, double source_ohm, double load_ohm, double ratio) {
  return ratio / (two_pi * freq_low_hz * std::min(source_ohm, load_ohm));
}

double choke_inductance_h(double freq_low_hz, double source_ohm, double load_ohm, double ratio) {
  return ratio * std::max(source_ohm, load_ohm) / (two_pi * freq_low_hz);
}

NetworkBias network_bias(const BiasNetwork& net, const DiodeParams& p, double temp_k) {
  NetworkBias b;
  if (present(net.rground_ohm)) {
    b.thevenin_v = net.supply_v * net.rground_ohm / (net.rbias_ohm + net.rground_ohm);
    b.thevenin_ohm = net.rbias_ohm * net.rground_ohm / (net.rbias_ohm + net.rground_ohm);
  } else {
    b.thevenin_v = net.supply_v;
    b.thevenin_ohm = net.rbias_ohm;
  }
  // Two equal diodes in series are one diode of 2N and 2RS (same IS): the
  // voltages add at the same current (no shunt resistance assumed).
  DiodeParams loop = p;
  if (net.feed_diode) {
    loop.n = 2.0 * p.n;
    loop.rs_ohm = 2.0 * p.rs_ohm;
  }
  b.i_a = operating_point(loop, b.thevenin_v, b.thevenin_ohm, 0.0, temp_k).i_a;
  b.vd_v = diode_voltage_v(p, b.i_a, temp_k);
  return b;
}

NetworkResponse network_response(const BiasNetwork& net, const DiodeParams& p, const JunctionCharge& charge,
                                 double bias_i_a, double freq_hz, double temp_k) {
  const cplx zd = diode_small_signal_impedance(p, charge, bias_i_a, freq_hz, temp_k);
  return network_response(net, zd, zd, freq_hz);
}

NetworkResponse network_response(const BiasNetwork& net, cplx zd, cplx z_feed, double freq_hz) {
  const double w = two_pi * freq_hz;
  const cplx y_block(0.0, w * net.cblock_f);
  const cplx y_choke = 1.0 / cplx(0.0, w * net.choke_h) + (present(net.ferrite_r_ohm) ? 1.0 / net.ferrite_r_ohm : 0.0);
  const bool series = net.mount == SwitchKind::series;
  // Nodes, series: 1 source side of the first block, 2 anode, 3 cathode, 4
  // load, 5 feed point F, 6 G (the supply side of the isolating diode; G = F
  // without it). Shunt: 1 source side, 2 the line (anode), 3 load, 4 F, 5 G.
  const int p1 = 1, a = 2, k = series ? 3 : 0, p2 = series ? 4 : 3, f = series ? 5 : 4;
  const int g = net.feed_diode ? f + 1 : f;
  Nodal n(g);
  n.current_into(p1, 1.0 / net.source_ohm);  // EMF 1 V behind Rg, as a Norton source
  n.admittance(p1, 0, 1.0 / net.source_ohm);
  n.admittance(p1, a, y_block);
  n.admittance(a, k, 1.0 / zd);  // shunt: k is ground
  n.admittance(series ? k : a, p2, y_block);
  n.admittance(p2, 0, 1.0 / net.load_ohm);
  n.admittance(a, f, y_choke);
  if (series) n.admittance(k, 0, y_choke);
  if (net.feed_diode) n.admittance(f, g, 1.0 / z_feed);
  n.admittance(g, 0, 1.0 / net.rbias_ohm);
  if (present(net.rground_ohm)) n.admittance(g, 0, 1.0 / net.rground_ohm);
  if (net.cbypass_f > 0) n.admittance(g, 0, cplx(0.0, w * net.cbypass_f));
  const auto v = n.solve();
  const double direct = net.load_ohm / (net.source_ohm + net.load_ohm);
  NetworkResponse r;
  r.loss_db = 20.0 * std::log10(direct / std::abs(v[p2 - 1]));
  r.bare_loss_db = switch_loss_db(net.mount, zd, net.source_ohm, net.load_ohm);
  r.supply_leak_db = 20.0 * std::log10(std::abs(v[g - 1]) / direct);
  return r;
}

double series_shunt_db(cplx zs, cplx zsh, double source_ohm, double load_ohm) {
  const cplx zp = parallel(zsh, cplx(load_ohm));
  const cplx v_load = zp / (source_ohm + zs + zp);
  return 20.0 * std::log10(load_ohm / (source_ohm + load_ohm) / std::abs(v_load));
}

double pin_resistance_ohm(const PinLaw& law, double i_a) { return law.r0_ohm + law.k_ohm_a_x * std::pow(i_a, -law.x); }

std::optional<double> pin_current_for_resistance_a(const PinLaw& law, double r_ohm) {
  if (!(r_ohm > law.r0_ohm)) return std::nullopt;
  return std::pow(law.k_ohm_a_x / (r_ohm - law.r0_ohm), 1.0 / law.x);
}

PadResistors matched_pad(PadKind kind, double a_db, double z0_ohm) {
  const double k = std::pow(10.0, a_db / 20.0);
  if (kind == PadKind::tee) return {z0_ohm * (k - 1.0) / (k + 1.0), 2.0 * z0_ohm * k / (k * k - 1.0)};
  return {z0_ohm * (k * k - 1.0) / (2.0 * k), z0_ohm * (k + 1.0) / (k - 1.0)};
}

PadResponse pad_response(PadKind kind, const PadResistors& r, double source_ohm, double load_ohm) {
  // ABCD of the cascade: series Z is [1 Z; 0 1], shunt Z is [1 0; 1/Z 1].
  struct Abcd {
    double a, b, c, d;
    Abcd operator*(const Abcd& o) const {
      return {a * o.a + b * o.c, a * o.b + b * o.d, c * o.a + d * o.c, c * o.b + d * o.d};
    }
  };
  const Abcd series{1.0, r.series_ohm, 0.0, 1.0}, shunt{1.0, 0.0, 1.0 / r.shunt_ohm, 1.0};
  const Abcd m = kind == PadKind::tee ? series * shunt * series : shunt * series * shunt;
  const double v_load = load_ohm / (m.a * load_ohm + m.b + m.c * source_ohm * load_ohm + m.d * source_ohm);
  const double z_in = (m.a * load_ohm + m.b) / (m.c * load_ohm + m.d);
  PadResponse out;
  out.loss_db = 20.0 * std::log10(load_ohm / (source_ohm + load_ohm) / v_load);
  out.reflection = std::abs((z_in - source_ohm) / (z_in + source_ohm));
  out.return_loss_db = -20.0 * std::log10(out.reflection);
  return out;
}

}  // namespace junco::fitting
