// Standard uncertainty of a design number from the fit's covariance: the GUM
// law of propagation (JCGM 100:2008 §5.1.2 uncorrelated, §5.2.2 correlated),
// u²(y) = cᵀ·V·c, with the sensitivity coefficients c taken by numerical
// differentiation of the calculator itself, and a Monte Carlo check
// (JCGM 101:2008 §7) over the same covariance.
//
// Step rule. The calculator is evaluated at x0 ± s_k, s_k = D·√λ_k·e_k for
// each eigenpair (λ_k, e_k) of the correlation matrix R (V = D·R·D, D the
// standard uncertainties): one standard deviation along each principal axis
// of the parameters' joint distribution. Then
//   u²(y) = Σ_k ((f(x0+s_k) − f(x0−s_k))/2)²,
// which equals cᵀ·V·c exactly when f is linear (Σ_k s_k·s_kᵀ = V). This is
// GUM §5.1.3 Note 2 (Z_i = ½[f(x_i + u(x_i)) − f(x_i − u(x_i))]) carried to
// correlated inputs. Why a step of one standard deviation and not a tiny h:
// (1) the fitted Is and N are typically correlated at 0.99+; steps along the
// principal axes stay on curves the readings allow, where a step in Is alone
// lands on a curve far from the data; (2) several calculators solve
// iteratively to ~1e-4 relative, so a small step would difference solver
// noise; (3) the difference then sees the function over the range the
// parameters actually spread over. The same three points give the curvature
// along each axis, d2_k = (f(x0+s_k) + f(x0−s_k) − 2·f(x0))/2 (the second-
// order term, GUM §5.1.2 Note); when √Σ d2_k² exceeds 10 % of u the line is
// flagged nonlinear (the linear law is then not to be trusted to 10 %; the
// Monte Carlo check is the way to a better figure).
#pragma once

#include <cstdint>
#include <functional>
#include <string>
#include <vector>

namespace junco::fitting {

// Covariance of named part parameters (SI units; names: is_a, n, rs_ohm,
// rsh_ohm, cj0_f, vj_v, m, tt_s). matrix is symmetric, names.size() square.
struct ParameterCovariance {
  std::vector<std::string> names;
  std::vector<std::vector<double>> matrix;
  std::string source;  // what it came from, for the answer ("fit 12: is_a, n, rs_ohm; tt_s")
  bool empty() const { return names.empty(); }
};

// A calculator as a function of the parameter vector (in names' order):
// one value per result line; NaN where the line has no value at that point
// (e.g. the target is not achievable there).
using DesignFunction = std::function<std::vector<double>(const std::vector<double>& x)>;

struct LinePropagation {
  double std_error = 0.0;  // NaN: not determined (an evaluation had no value)
  bool nonlinear = false;  // the curvature term is above 10 % of std_error
  double curvature = 0.0;  // √Σ d2_k²
};

struct Propagation {
  std::vector<LinePropagation> lines;
  int evaluations = 0;
};

// Eigen-decomposition of a symmetric matrix (Jacobi rotations; n ≤ 16):
// values[k] with vectors[k] (unit, columns of the rotation).
struct SymmetricEigen {
  std::vector<double> values;
  std::vector<std::vector<double>> vectors;
};
SymmetricEigen symmetric_eigen(const std::vector<std::vector<double>>& a);

// The law of propagation with the step rule above. y0 = f(x0) (already
// computed by the caller). A step that leaves the parameters' domain
// (valid(x) false, e.g. Is ≤ 0) is halved up to four times and the
// difference scaled back; still outside: std_error NaN for every line.
Propagation propagate_gum(const DesignFunction& f, const std::vector<double>& x0, const std::vector<double>& y0,
                          const ParameterCovariance& cov, const std::function<bool(const std::vector<double>&)>& valid = {});

// JCGM 101 Monte Carlo: `draws` samples x ~ N(x0, V) (the covariance's
// eigen-square-root times standard normals), f at each; per line the mean and
// the standard deviation of the values that are finite, and how many were not.
struct MonteCarloLine {
  double mean = 0.0, std_dev = 0.0;
  long finite = 0, missing = 0;
};
std::vector<MonteCarloLine> monte_carlo(const DesignFunction& f, const std::vector<double>& x0, const ParameterCovariance& cov,
                                        long draws, std::uint64_t seed = 1);

}  // namespace junco::fitting
