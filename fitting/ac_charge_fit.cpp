#include "fitting/ac_charge_fit.hpp"

#include "fitting/joint_fit.hpp"

#include <Eigen/Dense>

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>
#include <set>
#include <vector>

namespace junco::fitting {

namespace {

constexpr double nan = std::numeric_limits<double>::quiet_NaN();

// Parameters in well-scaled units: N, RS [Ω], TT [ns], Cj [pF].
struct Model {
  std::span<const AcPoint> ac;
  const Fixture& fixture;
  const AcChargeFitOptions& o;

  double model_db(const AcPoint& p, const Eigen::VectorXd& x) const {
    AcPart part;
    part.dc = {o.is_a, x[0], x[1]};
    part.tt_s = std::max(x[2], 0.0) * 1e-9;
    part.cap = o.cap;
    part.cj_f = o.cj_f + (o.fit_cj ? std::max(x[3], 0.0) * 1e-12 : 0.0);
    return to_db(fixture_gain(fixture, diode_on_impedance(part, p.bias_i_a, p.freq_hz, o.temp_k)));
  }
  Eigen::VectorXd residuals(const Eigen::VectorXd& x) const {
    Eigen::VectorXd r(static_cast<Eigen::Index>(ac.size()));
    for (std::size_t k = 0; k < ac.size(); ++k)
      r[static_cast<Eigen::Index>(k)] = (20.0 * std::log10(ac[k].vout / ac[k].vin) - model_db(ac[k], x)) / o.ac_sigma_db;
    return r;
  }
  Eigen::MatrixXd jacobian(const Eigen::VectorXd& x, const Eigen::VectorXd& r0) const {
    Eigen::MatrixXd j(r0.size(), x.size());
    for (Eigen::Index c = 0; c < x.size(); ++c) {
      Eigen::VectorXd xp = x;
      const double h = 1e-6 * std::max(std::abs(x[c]), 1e-3);
      xp[c] += h;
      j.col(c) = (residuals(xp) - r0) / h;
    }
    return j;
  }
};

bool in_bounds(const Eigen::VectorXd& x) {
  return x[0] >= 0.3 && x[0] <= 10.0 && x[1] >= 0.0 && x[1] <= 1e4 && x[2] >= 0.0 && (x.size() < 4 || x[3] >= 0.0);
}

}  // namespace

AcChargeFit fit_ac_stored_charge(std::span<const AcPoint> ac_in, const Fixture& fixture, const AcChargeFitOptions& o) {
  AcChargeFit f;
  std::vector<AcPoint> ac;
  std::set<double> freqs;
  for (const auto& p : ac_in)
    if (p.usable() && p.freq_hz > 0.0) {
      ac.push_back(p);
      freqs.insert(p.freq_hz);
    }
  f.points = ac.size();
  f.frequencies = freqs.size();
  const Eigen::Index np = o.fit_cj ? 4 : 3;
  if (freqs.size() < 2) {
    f.message = "need AC readings at 2 or more frequencies to separate the stored charge from rd";
    return f;
  }
  if (ac.size() <= static_cast<std::size_t>(np)) {
    f.message = "need more AC readings than the " + std::to_string(np) + " parameters";
    return f;
  }
  const Model model{ac, fixture, o};

  // Start: N and RS from the dynamic-resistance line, TT from a log grid.
  JointFitOptions line_options;
  line_options.temp_k = o.temp_k;
  line_options.ac_sigma_db = o.ac_sigma_db;
  const SimpleFit line = fit_ac_only(ac, fixture, line_options);
  Eigen::VectorXd x(np);
  x[0] = line.ok ? std::clamp(line.n.value, 0.5, 5.0) : 1.5;
  x[1] = line.ok ? std::clamp(line.rs_ohm.value, 0.0, 100.0) : 1.0;
  if (o.fit_cj) x[3] = 0.0;
  double best_cost = std::numeric_limits<double>::infinity(), best_tt = 0.0;
  for (double tt_ns = 1e-3; tt_ns <= 1e4; tt_ns *= std::sqrt(10.0)) {
    x[2] = tt_ns;
    const double c = model.residuals(x).squaredNorm();
    if (c < best_cost) best_cost = c, best_tt = tt_ns;
  }
  x[2] = best_tt;

  // Levenberg–Marquardt with projection onto the bounds.
  Eigen::VectorXd r = model.residuals(x);
  double cost = r.squaredNorm(), lambda = 1e-3;
  Eigen::MatrixXd jac = model.jacobian(x, r);
  bool converged = false;
  for (int it = 0; it < o.max_iterations && !converged; ++it) {
    const Eigen::MatrixXd jtj = jac.transpose() * jac;
    const Eigen::VectorXd jtr = jac.transpose() * r;
    bool stepped = false;
    for (int tries = 0; tries < 20 && !stepped; ++tries) {
      Eigen::MatrixXd a = jtj;
      a.diagonal() += lambda * jtj.diagonal().cwiseMax(1e-12);
      const Eigen::VectorXd step = a.ldlt().solve(-jtr);
      Eigen::VectorXd next = x + step;
      next[0] = std::clamp(next[0], 0.3, 10.0);
      next[1] = std::clamp(next[1], 0.0, 1e4);
      next[2] = std::max(next[2], 0.0);
      if (np == 4) next[3] = std::max(next[3], 0.0);
      const Eigen::VectorXd rn = model.residuals(next);
      const double cn = rn.squaredNorm();
      if (std::isfinite(cn) && cn <= cost) {
        converged = (cost - cn) <= 1e-12 * std::max(cost, 1e-300) + 1e-20 || (next - x).norm() <= 1e-12 * (1.0 + x.norm());
        x = next;
        r = rn;
        cost = cn;
        jac = model.jacobian(x, r);
        lambda = std::max(lambda / 3.0, 1e-12);
        stepped = true;
      } else {
        lambda *= 4.0;
      }
    }
    if (!stepped) converged = true;  // no step lowers the cost: at the minimum within round-off
  }
  if (!in_bounds(x) || !std::isfinite(cost)) {
    f.message = "the stored-charge fit left its bounds";
    return f;
  }
  const double dof = static_cast<double>(ac.size()) - static_cast<double>(np);
  f.reduced_chi2 = cost / dof;
  const Eigen::MatrixXd jtj = jac.transpose() * jac;
  Eigen::MatrixXd cov = jtj.ldlt().solve(Eigen::MatrixXd::Identity(np, np));
  cov *= std::max(1.0, f.reduced_chi2);
  const auto se = [&](Eigen::Index k) {
    const double v = cov(k, k);
    return std::isfinite(v) && v >= 0.0 ? std::sqrt(v) : nan;
  };
  f.n = {x[0], se(0)};
  f.rs_ohm = {x[1], se(1)};
  f.tt_s = {x[2] * 1e-9, se(2) * 1e-9};
  if (o.fit_cj) f.cj_f = {x[3] * 1e-12, se(3) * 1e-12};
  f.ok = true;
  f.message = converged ? "converged" : "stopped at the iteration limit";
  return f;
}

}  // namespace junco::fitting
