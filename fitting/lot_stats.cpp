#include "fitting/lot_stats.hpp"

#include "fitting/transfer.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <numeric>

namespace junco::fitting {

namespace {

double median_of(std::vector<double> x) {
  std::sort(x.begin(), x.end());
  const auto n = x.size();
  if (n == 0) return std::nan("");
  return n % 2 ? x[n / 2] : 0.5 * (x[n / 2 - 1] + x[n / 2]);
}

double mad_of(const std::vector<double>& x, double med) {
  std::vector<double> dev;
  dev.reserve(x.size());
  for (double v : x) dev.push_back(std::abs(v - med));
  return median_of(dev);
}

// log_scale: the outlier test works on log10 of the values.
QuantityStats describe(const std::string& name, const std::vector<std::string>& labels, const std::vector<double>& x,
                       bool log_scale) {
  QuantityStats q;
  q.name = name;
  q.count = x.size();
  if (x.empty()) return q;
  q.mean = std::accumulate(x.begin(), x.end(), 0.0) / static_cast<double>(x.size());
  double ss = 0.0;
  for (double v : x) ss += (v - q.mean) * (v - q.mean);
  q.std_dev = x.size() > 1 ? std::sqrt(ss / static_cast<double>(x.size() - 1)) : 0.0;
  const auto [lo, hi] = std::minmax_element(x.begin(), x.end());
  q.min = *lo;
  q.max = *hi;
  q.median = median_of(x);
  q.mad = mad_of(x, q.median);
  std::vector<double> t = x;
  if (log_scale)
    for (double& v : t) v = std::log10(v);
  const double t_med = median_of(t), t_mad = mad_of(t, t_med);
  for (std::size_t k = 0; k < t.size(); ++k) {
    const double d = t[k] - t_med;
    // Differences below a part per million are rounding, never outliers.
    const bool negligible = std::abs(d) <= 1e-6 * std::max(1.0, std::abs(t_med));
    const bool flagged = negligible ? false : t_mad > 0.0 ? std::abs(0.6745 * d / t_mad) > outlier_z_threshold
                                     : std::abs(d) > 1e-12 * std::max(1.0, std::abs(t_med));
    if (flagged) q.outliers.push_back(labels[k]);
  }
  return q;
}

std::string at_current(const char* what, double i_a) {
  char buf[64];
  std::snprintf(buf, sizeof buf, "%s@%gA", what, i_a);
  return buf;
}

LotStats one_lot(const std::string& lot, const std::vector<const LotPart*>& parts, const LotStatsOptions& o) {
  LotStats s;
  s.lot = lot;
  std::vector<double> is, n, rs;
  for (const auto* p : parts) {
    s.labels.push_back(p->label);
    is.push_back(p->params.is_a);
    n.push_back(p->params.n);
    rs.push_back(p->params.rs_ohm);
  }
  s.quantities.push_back(describe("is_a", s.labels, is, true));
  s.quantities.push_back(describe("n", s.labels, n, false));
  s.quantities.push_back(describe("rs_ohm", s.labels, rs, false));
  for (double i : o.currents_a) {
    std::vector<double> vf, rd;
    for (const auto* p : parts) {
      vf.push_back(diode_voltage_v(p->params, i, p->temp_k));
      rd.push_back(p->params.rs_ohm + junction_resistance_ohm(p->params, i, p->temp_k));
    }
    s.quantities.push_back(describe(at_current("vf_v", i), s.labels, vf, false));
    s.quantities.push_back(describe(at_current("rd_ohm", i), s.labels, rd, false));
  }
  std::vector<double> vf_match;
  for (const auto* p : parts) vf_match.push_back(diode_voltage_v(p->params, o.match_current_a, p->temp_k));
  s.matched = matched_sets(s.labels, vf_match, o.match_tolerance_v, o.set_size);
  s.nominal = DiodeParams{std::pow(10.0, median_of([&] {
                            std::vector<double> l;
                            for (double v : is) l.push_back(std::log10(v));
                            return l;
                          }())),
                          median_of(n), median_of(rs)};
  // The capacitance law, over the parts whose off-state readings gave one.
  std::vector<std::string> with_cap;
  std::vector<double> cj0, vj, m;
  for (const auto* p : parts)
    if (std::isfinite(p->cj0_f) && p->cj0_f > 0) {
      with_cap.push_back(p->label);
      cj0.push_back(p->cj0_f);
      vj.push_back(p->vj_v);
      m.push_back(p->m);
    }
  if (!with_cap.empty()) {
    s.quantities.push_back(describe("cj0_f", with_cap, cj0, false));
    s.quantities.push_back(describe("vj_v", with_cap, vj, false));
    s.quantities.push_back(describe("m", with_cap, m, false));
    s.nominal_cj0_f = median_of(cj0);
    s.nominal_vj_v = median_of(vj);
    s.nominal_m = median_of(m);
  }
  // The PIN law, over the parts fitted as PIN parts (K spans decades: its
  // outliers on log10, like Is); the off state over those that have one.
  std::vector<std::string> with_pin, with_off;
  std::vector<double> r0, k, x, tau, r1ma, ct, rp;
  for (const auto* p : parts) {
    if (!p->pin) continue;
    with_pin.push_back(p->label);
    r0.push_back(p->pin->law.r0_ohm);
    k.push_back(p->pin->law.k_ohm_a_x);
    x.push_back(p->pin->law.x);
    tau.push_back(p->pin->law.tau_s);
    r1ma.push_back(pin_rf_resistance_ohm(p->pin->law, 1e-3));
    if (p->pin->ct_f > 0 && std::isfinite(p->pin->rp_ohm)) {
      with_off.push_back(p->label);
      ct.push_back(p->pin->ct_f);
      rp.push_back(p->pin->rp_ohm);
    }
  }
  if (!with_pin.empty()) {
    s.quantities.push_back(describe("r0_ohm", with_pin, r0, false));
    s.quantities.push_back(describe("k_ohm_a_x", with_pin, k, true));
    s.quantities.push_back(describe("x", with_pin, x, false));
    s.quantities.push_back(describe("tau_s", with_pin, tau, true));
    s.quantities.push_back(describe("r_1ma_ohm", with_pin, r1ma, false));
  }
  if (!with_off.empty()) {
    s.quantities.push_back(describe("ct_f", with_off, ct, false));
    s.quantities.push_back(describe("rp_ohm", with_off, rp, true));
  }
  return s;
}

}  // namespace

std::vector<MatchedSet> matched_sets(const std::vector<std::string>& labels, const std::vector<double>& values,
                                     double tolerance, std::size_t set_size) {
  std::vector<std::size_t> order(values.size());
  std::iota(order.begin(), order.end(), 0);
  std::sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return values[a] < values[b]; });
  std::vector<MatchedSet> sets;
  if (set_size < 2) return sets;
  for (std::size_t i = 0; i + set_size <= order.size();) {
    const double spread = values[order[i + set_size - 1]] - values[order[i]];
    if (spread <= tolerance) {
      MatchedSet m;
      m.spread_v = spread;
      for (std::size_t k = 0; k < set_size; ++k) m.labels.push_back(labels[order[i + k]]);
      sets.push_back(std::move(m));
      i += set_size;
    } else {
      ++i;
    }
  }
  return sets;
}

std::vector<LotStats> lot_statistics(const std::vector<LotPart>& parts, const LotStatsOptions& options) {
  std::vector<std::string> lots;
  for (const auto& p : parts)
    if (std::find(lots.begin(), lots.end(), p.lot) == lots.end()) lots.push_back(p.lot);
  std::vector<LotStats> out;
  for (const auto& lot : lots) {
    std::vector<const LotPart*> members;
    for (const auto& p : parts)
      if (p.lot == lot) members.push_back(&p);
    out.push_back(one_lot(lot, members, options));
  }
  return out;
}

}  // namespace junco::fitting
