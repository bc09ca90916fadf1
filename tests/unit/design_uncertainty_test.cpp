// Uncertainty of the design numbers (design/uncertainty.hpp): the
// law of propagation against GUM's worked relations (JCGM 100:2008 §5.1.6
// product/quotient, §5.2.2 eq. (13) correlated sum), the Shockley Vf with
// its sensitivity coefficients taken analytically (from memory: the partial
// derivatives of Vf = n·Vt·ln(I/Is) + I·Rs), and JCGM 101:2008 Monte Carlo
// over the same covariance for three calculators (agreement within 10 %).
#include "design/calculators.hpp"
#include "design/uncertainty.hpp"
#include "fitting/diode.hpp"

#include <catch2/catch.hpp>

#include <cmath>

using namespace junco::fitting;
using Json = nlohmann::json;

namespace {

ParameterCovariance covariance(std::vector<std::string> names, const std::vector<double>& u, const std::vector<std::vector<double>>& r) {
  ParameterCovariance c;
  c.names = std::move(names);
  c.matrix.assign(u.size(), std::vector<double>(u.size()));
  for (std::size_t a = 0; a < u.size(); ++a)
    for (std::size_t b = 0; b < u.size(); ++b) c.matrix[a][b] = r[a][b] * u[a] * u[b];
  c.source = "test";
  return c;
}

// A forward fit's covariance as the fits give it: Is and N strongly
// correlated (both set the slope of ln I against V), RS against both.
DesignPart fitted_part() {
  DesignPart p;
  p.label = "WREN-0912 #7";
  p.dc = {2.5e-9, 1.85, 0.7};
  p.temp_k = 300.15;
  p.cov = covariance({"is_a", "n", "rs_ohm"}, {0.05 * 2.5e-9, 0.01, 0.01},
                     {{1.0, 0.98, -0.5}, {0.98, 1.0, -0.6}, {-0.5, -0.6, 1.0}});
  return p;
}

const Json& line(const Json& answer, const std::string& key) {
  for (const auto& l : answer["result"])
    if (l["key"] == key) return l;
  FAIL("no line " << key << " in " << answer.dump());
  static const Json none;
  return none;
}

double quad(const std::vector<double>& c, const std::vector<std::vector<double>>& v) {
  double s = 0.0;
  for (std::size_t a = 0; a < c.size(); ++a)
    for (std::size_t b = 0; b < c.size(); ++b) s += c[a] * v[a][b] * c[b];
  return s;
}

}  // namespace

TEST_CASE("symmetric_eigen reconstructs the matrix (V = Σ λ e eᵀ)", "[design][uncertainty]") {
  const std::vector<std::vector<double>> a{{4.0, 1.0, -2.0}, {1.0, 3.0, 0.5}, {-2.0, 0.5, 5.0}};
  const auto e = symmetric_eigen(a);
  for (std::size_t i = 0; i < 3; ++i)
    for (std::size_t j = 0; j < 3; ++j) {
      double s = 0.0;
      for (std::size_t k = 0; k < 3; ++k) s += e.values[k] * e.vectors[k][i] * e.vectors[k][j];
      CHECK(s == Approx(a[i][j]).margin(1e-12));
    }
}

TEST_CASE("GUM 5.1.6: for a product/quotient the relative variances add", "[design][uncertainty]") {
  // Y = X1·X2/X3, uncorrelated: (u(y)/y)² = Σ (u(x_i)/x_i)² (JCGM 100:2008 eq. (12)).
  const std::vector<double> x0{5.0, 0.2, 40.0};
  const auto cov = covariance({"a", "b", "c"}, {0.005, 0.0004, 0.02}, {{1, 0, 0}, {0, 1, 0}, {0, 0, 1}});
  const DesignFunction f = [](const std::vector<double>& x) { return std::vector<double>{x[0] * x[1] / x[2]}; };
  const auto p = propagate_gum(f, x0, f(x0), cov);
  const double y = 5.0 * 0.2 / 40.0;
  const double rel = std::sqrt(std::pow(0.005 / 5.0, 2) + std::pow(0.0004 / 0.2, 2) + std::pow(0.02 / 40.0, 2));
  CHECK(p.lines[0].std_error == Approx(rel * y).epsilon(1e-4));
  CHECK_FALSE(p.lines[0].nonlinear);
  CHECK(p.evaluations == 6);
}

TEST_CASE("GUM 5.2.2: correlated inputs, u² = Σ c_i² u_i² + 2 Σ c_i c_j u_i u_j r_ij, exact for a linear f", "[design][uncertainty]") {
  const std::vector<double> x0{1.0, 2.0};
  const auto cov = covariance({"a", "b"}, {0.3, 0.2}, {{1, -0.7}, {-0.7, 1}});
  const DesignFunction f = [](const std::vector<double>& x) { return std::vector<double>{3.0 * x[0] + 2.0 * x[1]}; };
  const auto p = propagate_gum(f, x0, f(x0), cov);
  const double u2 = 9 * 0.09 + 4 * 0.04 + 2 * 3 * 2 * 0.3 * 0.2 * -0.7;
  CHECK(p.lines[0].std_error == Approx(std::sqrt(u2)).epsilon(1e-12));
}

TEST_CASE("the curvature flag: y = x² at x = 0 is all second-order term", "[design][uncertainty]") {
  const auto cov = covariance({"a"}, {0.1}, {{1}});
  const DesignFunction f = [](const std::vector<double>& x) { return std::vector<double>{x[0] * x[0], 2.0 * x[0] + x[0] * x[0]}; };
  const auto p = propagate_gum(f, {0.0}, f({0.0}), cov);
  CHECK(p.lines[0].std_error == Approx(0.0).margin(1e-15));
  CHECK(p.lines[0].nonlinear);
  CHECK(p.lines[1].std_error == Approx(0.2));  // 2·u
  CHECK_FALSE(p.lines[1].nonlinear);           // curvature u² = 0.01 is 5 % of 0.2
}

TEST_CASE("Vf = n·Vt·ln(I/Is) + I·Rs: the calculator's std_error matches the analytic sensitivity coefficients",
          "[design][uncertainty]") {
  // Sensitivities (from memory, the partial derivatives): ∂Vf/∂Is = −n·Vt/Is,
  // ∂Vf/∂n = Vt·ln(I/Is), ∂Vf/∂Rs = I; u² = cᵀ·V·c (GUM eq. (13)).
  const DesignPart part = fitted_part();
  for (double i_a : {1e-4, 1e-3, 1e-2}) {
    const Json a = run_design("bias-r", &part, {{"supply_v", 5.0}, {"current_a", i_a}});
    const double vt = thermal_voltage_v(part.temp_k);
    const std::vector<double> c{-part.dc.n * vt / part.dc.is_a, vt * std::log(i_a / part.dc.is_a), i_a};
    const double u = std::sqrt(quad(c, part.cov.matrix));
    INFO("I = " << i_a << " A: " << a.dump());
    const Json& vf = line(a, "diode_voltage_v");
    CHECK(vf["std_error"].get<double>() == Approx(u).epsilon(0.02));
    // Rb = (Vs − Vf)/I: its std_error is Vf's over I.
    CHECK(line(a, "bias_resistor_ohm")["std_error"].get<double>() == Approx(u / i_a).epsilon(0.02));
    CHECK(a["uncertainty"]["parameters"] == Json({"is_a", "n", "rs_ohm"}));
  }
}

TEST_CASE("linear propagation agrees with JCGM 101 Monte Carlo over the covariance (within 10 %)", "[design][uncertainty]") {
  DesignPart part = fitted_part();
  part.cap = {2e-12, 0.65, 0.4, 0.5};
  part.tt_s = 5e-9;
  struct Case {
    std::string calculator;
    Json inputs;
    std::string key;
  };
  const std::vector<Case> cases{{"op", {{"supply_v", 5.0}, {"bias_resistor_ohm", 390.0}}, "diode_voltage_v"},
                                {"op", {{"supply_v", 5.0}, {"bias_resistor_ohm", 390.0}}, "rd_ohm"},
                                {"bias-r", {{"supply_v", 3.3}, {"current_a", 2e-3}}, "bias_resistor_ohm"},
                                {"loss", {{"switch", "series"}, {"current_a", 1e-3}, {"freq_hz", 1e6}}, "loss_db"}};
  for (const auto& c : cases) {
    const Json a = run_design(c.calculator, &part, c.inputs);
    const double linear = line(a, c.key)["std_error"].get<double>();
    const auto f = design_function(c.calculator, part, c.inputs, {c.key});
    std::vector<double> x0;
    for (const auto& name : part.cov.names) x0.push_back(design_part_parameter(part, name));
    const auto mc = monte_carlo(f, x0, part.cov, 4000, 7);
    INFO(c.calculator << " " << c.key << ": linear " << linear << ", Monte Carlo " << mc[0].std_dev << " over " << mc[0].finite);
    CHECK(mc[0].missing == 0);
    CHECK(linear > 0);
    CHECK(std::abs(linear - mc[0].std_dev) <= 0.10 * mc[0].std_dev);
  }
}

TEST_CASE("explicit parameters carry no uncertainty, and say so", "[design][uncertainty]") {
  DesignPart part;
  part.dc = {1e-14, 1.0, 1.0};
  const Json a = run_design("op", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 390.0}});
  CHECK(a["uncertainty"]["method"] == "none");
  CHECK(a["uncertainty"]["note"] == "no uncertainty (explicit parameters)");
  for (const auto& l : a["result"]) CHECK_FALSE(l.contains("std_error"));
  // A part input given by value overrides the part's: no spread from it.
  DesignPart fitted = fitted_part();
  fitted.tt_s = 5e-9;
  fitted.cov = covariance({"is_a", "n", "rs_ohm", "tt_s"}, {0.05 * 2.5e-9, 0.01, 0.01, 1e-9},
                          {{1.0, 0.98, -0.5, 0}, {0.98, 1.0, -0.6, 0}, {-0.5, -0.6, 1.0, 0}, {0, 0, 0, 1}});
  const Json with_tt = run_design("loss", &fitted, {{"switch", "series"}, {"current_a", 1e-3}, {"freq_hz", 1e9}, {"cj0_f", 1e-12}});
  const Json fixed_tt = run_design("loss", &fitted, {{"switch", "series"}, {"current_a", 1e-3}, {"freq_hz", 1e9}, {"cj0_f", 1e-12}, {"tt_s", 5e-9}});
  CHECK(line(fixed_tt, "junction_c_f")["std_error"].get<double>() < 0.5 * line(with_tt, "junction_c_f")["std_error"].get<double>());
}

TEST_CASE("a target just achievable: std_error not determined, and the answer says why", "[design][uncertainty]") {
  // Series on-state loss is at least 20·log10(1 + RS/(Rg + RL)) as I → ∞:
  // a target a hair above the RS floor needs a bias that the part's RS spread
  // makes unreachable one standard deviation away.
  const DesignPart part = fitted_part();
  const double floor_db = 20 * std::log10(1 + 0.7 / 100.0);
  const Json a = run_design("bias-for-loss", &part, {{"switch", "series"}, {"target_db", floor_db * 1.02}, {"freq_hz", 1e6}});
  INFO(a.dump());
  REQUIRE(a["achievable"] == true);
  const Json& l = line(a, "bias_current_a");
  CHECK((l["std_error"].is_null() || l.value("nonlinear", false)));
  CHECK(a["uncertainty"].contains("note"));
}
