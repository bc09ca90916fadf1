#include "fitting/temperature_fit.hpp"

#include <Eigen/Dense>

#include <algorithm>
#include <cmath>
#include <sstream>

namespace junco::fitting {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

struct Linear {
  Eigen::VectorXd beta;
  Eigen::MatrixXd cov;  // scaled by max(1, χ²/dof)
  double chi2 = 0.0;
  int dof = 0;
  Eigen::VectorXd residuals;
};

// Weighted linear least squares y ≈ X·β with σ per row, solved through QR
// of the whitened system (no normal equations: EG and XTI columns are nearly
// collinear). Standard errors from (XᵀWX)⁻¹, scaled up by the Birge ratio.
Linear weighted_fit(const Eigen::MatrixXd& x, const Eigen::VectorXd& y, const Eigen::VectorXd& sigma) {
  const Eigen::Index m = x.rows(), p = x.cols();
  Eigen::MatrixXd xw(m, p);
  Eigen::VectorXd yw(m);
  for (Eigen::Index i = 0; i < m; ++i) {
    xw.row(i) = x.row(i) / sigma(i);
    yw(i) = y(i) / sigma(i);
  }
  Linear out;
  const Eigen::ColPivHouseholderQR<Eigen::MatrixXd> qr(xw);
  out.beta = qr.solve(yw);
  out.residuals = y - x * out.beta;
  out.chi2 = (yw - xw * out.beta).squaredNorm();
  out.dof = static_cast<int>(m - p);
  out.cov = (xw.transpose() * xw).inverse();
  if (out.dof > 0 && out.chi2 / out.dof > 1.0) out.cov *= out.chi2 / out.dof;
  return out;
}

}  // namespace

TemperatureFit fit_temperature_law(const std::vector<TemperaturePoint>& points, const TemperatureFitOptions& o) {
  TemperatureFit f;
  std::vector<TemperaturePoint> use;
  for (const auto& p : points)
    if (std::isfinite(p.temp_k) && p.temp_k > 0 && p.is_a.value > 0 && std::isfinite(p.is_a.std_error) && p.is_a.std_error > 0 &&
        p.n.value > 0 && std::isfinite(p.n.std_error))
      use.push_back(p);
  for (const auto& p : use) f.temps_k.push_back(p.temp_k);
  if (static_cast<int>(use.size()) < o.min_temperatures) {
    f.message = "needs fits at " + std::to_string(o.min_temperatures) + " or more temperatures, has " + std::to_string(use.size());
    return f;
  }
  const double t_min = *std::min_element(f.temps_k.begin(), f.temps_k.end());
  const double t_max = *std::max_element(f.temps_k.begin(), f.temps_k.end());
  if (t_max - t_min < 10.0) {
    std::ostringstream os;
    os << "the temperatures span " << (t_max - t_min) << " K; at least 10 K are needed to see the law";
    f.message = os.str();
    return f;
  }
  // TNOM: as asked, else the measured temperature nearest 27 °C.
  f.tnom_k = o.tnom_k > 0 ? o.tnom_k : use.front().temp_k;
  if (o.tnom_k <= 0)
    for (const auto& p : use)
      if (std::fabs(p.temp_k - 300.15) < std::fabs(f.tnom_k - 300.15)) f.tnom_k = p.temp_k;
  const double t0 = f.tnom_k;

  // Common N: weighted mean of the per-temperature n.
  double sw = 0, swn = 0;
  for (const auto& p : use) {
    const double w = 1.0 / (p.n.std_error * p.n.std_error + 1e-300);
    sw += w;
    swn += w * p.n.value;
  }
  f.n = swn / sw;
  const double nn = f.n;
  const double ln_iref = std::log(o.i_ref_a);

  // ln Is at the common N, and its σ (fit covariance, and the ambient's
  // uncertainty through the law's slope d ln Is / dT at the held EG, XTI).
  const auto m = static_cast<Eigen::Index>(use.size());
  Eigen::VectorXd y(m), sigma(m);
  Eigen::MatrixXd x(m, 3);
  for (Eigen::Index i = 0; i < m; ++i) {
    const auto& p = use[static_cast<std::size_t>(i)];
    const double l = std::log(p.is_a.value), sl = p.is_a.std_error / p.is_a.value;
    const double a = p.n.value / nn, b = (l - ln_iref) / nn;
    y(i) = ln_iref + a * (l - ln_iref);
    double var = a * a * sl * sl + b * b * p.n.std_error * p.n.std_error + 2.0 * a * b * p.corr_is_n * sl * p.n.std_error;
    const double vt = p.temp_k * boltzmann_j_per_k / elementary_charge_c;
    const double slope = o.held.eg_ev / (nn * vt * p.temp_k) + o.held.xti / (nn * p.temp_k);
    var += slope * slope * p.temp_se_k * p.temp_se_k;
    sigma(i) = std::sqrt(std::max(var, 1e-300));
    x(i, 0) = 1.0;
    x(i, 1) = (p.temp_k / t0 - 1.0) / (nn * vt);  // ∂ ln Is / ∂ EG
    x(i, 2) = std::log(p.temp_k / t0) / nn;       // ∂ ln Is / ∂ XTI
  }

  // Joint (ln IS, EG, XTI) first: its XTI error says whether XTI is resolvable.
  const Linear joint = weighted_fit(x, y, sigma);
  const double se_eg_j = std::sqrt(joint.cov(1, 1)), se_xti_j = std::sqrt(joint.cov(2, 2));
  f.corr_eg_xti = joint.cov(1, 2) / (se_eg_j * se_xti_j);
  Linear used;
  // Three temperatures determine (ln IS, EG, XTI) exactly, with nothing left
  // to test the law against: XTI is fitted from four or more.
  if (joint.dof >= 1 && std::isfinite(se_xti_j) && se_xti_j < o.xti_resolvable_se) {
    used = joint;
    f.eg_ev = {joint.beta(1), se_eg_j};
    f.xti = {joint.beta(2), se_xti_j};
  } else {
    f.xti_held = true;
    Eigen::VectorXd y2 = y - o.held.xti * x.col(2);
    used = weighted_fit(x.leftCols(2), y2, sigma);
    f.eg_ev = {used.beta(1), std::sqrt(used.cov(1, 1))};
    f.xti = {o.held.xti, kNaN};
    std::ostringstream os;
    if (joint.dof < 1)
      os << "XTI held at " << o.held.xti << ": " << m << " temperatures leave no degree of freedom for it (fitted jointly: "
         << joint.beta(2) << " ± " << se_xti_j << ", EG–XTI correlation " << f.corr_eg_xti << ")";
    else
      os << "XTI held at " << o.held.xti << ": fitted jointly its standard error is " << se_xti_j << " (above "
         << o.xti_resolvable_se << "; EG–XTI correlation " << f.corr_eg_xti << ")";
    f.notes.push_back(os.str());
  }
  f.is_a = {std::exp(used.beta(0)), std::exp(used.beta(0)) * std::sqrt(used.cov(0, 0))};
  f.dof = used.dof;
  f.reduced_chi2 = used.dof > 0 ? used.chi2 / used.dof : 0.0;
  for (Eigen::Index i = 0; i < m; ++i) f.residuals_ln_is.push_back(used.residuals(i));

  // TRS1: RS(T) = RS0 + RS0·TRS1·(T − TNOM), linear in (RS0, RS0·TRS1).
  std::vector<const TemperaturePoint*> rs_points;
  for (const auto& p : use)
    if (std::isfinite(p.rs_ohm.value) && std::isfinite(p.rs_ohm.std_error) && p.rs_ohm.std_error > 0) rs_points.push_back(&p);
  if (rs_points.size() >= 2) {
    const auto k = static_cast<Eigen::Index>(rs_points.size());
    Eigen::MatrixXd xr(k, 2);
    Eigen::VectorXd yr(k), sr(k);
    for (Eigen::Index i = 0; i < k; ++i) {
      const auto& p = *rs_points[static_cast<std::size_t>(i)];
      xr(i, 0) = 1.0;
      xr(i, 1) = p.temp_k - t0;
      yr(i) = p.rs_ohm.value;
      sr(i) = p.rs_ohm.std_error;
    }
    const Linear r = weighted_fit(xr, yr, sr);
    const double rs0 = r.beta(0), slope = r.beta(1);
    const double se_rs0 = std::sqrt(r.cov(0, 0)), se_slope = std::sqrt(r.cov(1, 1)), cov = r.cov(0, 1);
    f.rs_ohm = {rs0, se_rs0};
    if (rs0 > 0) {
      // TRS1 = slope/RS0, its error by first-order propagation.
      const double trs = slope / rs0;
      const double var = (se_slope * se_slope) / (rs0 * rs0) + (slope * slope) * (se_rs0 * se_rs0) / std::pow(rs0, 4) -
                         2.0 * slope * cov / std::pow(rs0, 3);
      f.trs1_per_k = {trs, std::sqrt(std::max(var, 0.0))};
      f.trs_resolved = f.trs1_per_k.std_error < o.trs_resolvable_se_per_k;
    }
    if (!f.trs_resolved) {
      std::ostringstream os;
      os << "TRS1 not resolved (" << f.trs1_per_k.value << " ± " << f.trs1_per_k.std_error << " /K); the card leaves it at 0";
      f.notes.push_back(os.str());
    }
  } else {
    f.notes.push_back("TRS1 not fitted: fewer than two temperatures with a usable RS");
  }
  f.ok = std::isfinite(f.eg_ev.value) && std::isfinite(f.eg_ev.std_error);
  if (!f.ok) f.message = "the law's fit is singular (temperatures too close together?)";
  return f;
}

}  // namespace junco::fitting
