// The explicit diode solutions against outside references.
#include "fitting/diode.hpp"

#include <boost/math/special_functions/lambert_w.hpp>
#include <catch2/catch.hpp>

#include <cmath>

using namespace junco::fitting;

TEST_CASE("Vt from exact CODATA 2018 constants", "[reference]") {
  // docs/references.md §1 [C]: 25.85200 mV at 300 K, 25.86493 mV at 300.15 K.
  CHECK(thermal_voltage_v(300.0) == Approx(25.85200e-3).epsilon(2e-7));
  CHECK(thermal_voltage_v(300.15) == Approx(25.86493e-3).epsilon(2e-7));
}

TEST_CASE("Lambert-W current reproduces the Boost.Math diode example", "[reference]") {
  // boostorg/math example/lambert_w_diode.cpp (Banwell & Jayakumar data),
  // docs/references.md E1: IS = 25 fA, N = 1, Vt = 0.0257025 V, R = 249.3 Ω, 0.9 V → 1.0848517 mA.
  const double vt = 0.0257025;
  const double temp_k = vt / thermal_voltage_v(1.0);
  DiodeParams p{25e-15, 1.0, 249.3};
  CHECK(diode_current_a(p, 0.9, temp_k) == Approx(1.0848517e-3).epsilon(1e-6));
  p.rs_ohm = 0.3;
  CHECK(diode_current_a(p, 0.8, temp_k) == Approx(147.37976e-3).epsilon(1e-6));
  p.rs_ohm = 249.3;
  CHECK(diode_current_a(p, 0.5, temp_k) == Approx(6.5868904e-6).epsilon(1e-6));
}

TEST_CASE("W0(e^x) agrees with Boost.Math and stays finite past overflow", "[reference]") {
  for (double x = -30.0; x < 700.0; x += 7.3) {
    CHECK(lambert_w0_of_exp(x) == Approx(boost::math::lambert_w0(std::exp(x))).epsilon(1e-14));
  }
  // docs/references.md §2 [C]: W0(1e10) = 20.028685413304951; and w + ln w = x beyond 709.
  CHECK(lambert_w0_of_exp(std::log(1e10)) == Approx(20.028685413304951).epsilon(1e-14));
  const double w = lambert_w0_of_exp(5000.0);
  CHECK(w + std::log(w) == Approx(5000.0).epsilon(1e-15));
}

TEST_CASE("Explicit shunt form matches the published check values", "[reference]") {
  // docs/references.md §2 [C] (Ortiz-Conde et al. 2000 form): IS = 1e-14, N = 1,
  // RS = 10 Ω, Rsh = 1 MΩ, 300.15 K.
  const DiodeParams p{1e-14, 1.0, 10.0, 1e6};
  CHECK(diode_current_a(p, 0.3, 300.15) == Approx(3.010864334e-7).epsilon(1e-8));
  CHECK(diode_current_a(p, 0.6, 300.15) == Approx(1.141902898e-4).epsilon(1e-8));
  CHECK(diode_current_a(p, 0.8, 300.15) == Approx(8.849042462e-3).epsilon(1e-8));
}

TEST_CASE("Round trip V(I(V)) = V across the forward range", "[reference]") {
  const DiodeParams p{2e-9, 1.8, 0.5};
  for (double v = 0.05; v < 40.0; v *= 1.3) {
    const double i = diode_current_a(p, v, 300.0);
    CHECK(diode_voltage_v(p, i, 300.0) == Approx(v).epsilon(1e-10));
  }
}

TEST_CASE("Below Is the current stays exact: V(I(V)) = V down to a huge resistance", "[reference]") {
  // The W form subtracts Is from nVt/R·W, which cancels once I ≪ Is (found by
  // the design fuzzer: 5 V through 1.1e69 Ω gave 4e-25 A instead of 4.5e-69 A).
  // Checks: the §2 inverse V = I·R + N·Vt·ln(1 + I/IS) returns the applied V,
  // and deep in that range the junction is the linear conductance IS/(N·Vt)
  // (first term of the exponential; calculus, no source).
  const double temp_k = 300.15;
  const DiodeParams base{2.5e-9, 1.85, 0.7};
  const double nvt = base.n * thermal_voltage_v(temp_k);
  for (double r = 1.0; r < 1e80; r *= 37.0) {
    DiodeParams p = base;
    p.rs_ohm = r;
    for (double v : {-3.0, -1e-3, 1e-6, 1e-3, 0.05, 0.3, 5.0}) {
      const double i = diode_current_a(p, v, temp_k);
      INFO("R = " << r << " Ω, V = " << v << " V, I = " << i << " A");
      REQUIRE(std::isfinite(i));
      // Deep reverse bias (I → −Is) leaves V(I) ill-conditioned; there the
      // current is −Is while R is small against N·Vt/IS.
      if (i > -0.5 * p.is_a) CHECK(diode_voltage_v(p, i, temp_k) == Approx(v).epsilon(1e-9).margin(1e-300));
      else if (r < 1e5) CHECK(i == Approx(-p.is_a).epsilon(1e-6));
      if (std::abs(i) < 1e-6 * p.is_a) CHECK(i == Approx(v / (r + nvt / p.is_a)).epsilon(1e-6));
    }
  }
}

TEST_CASE("I(V) matches Banwell–Jayakumar evaluated directly with Boost.Math", "[reference]") {
  // Formula as in boostorg/math example/lambert_w_diode.cpp (docs/references.md §2):
  // I = (nVt/R)·W0[(Is·R/nVt)·exp((V + Is·R)/nVt)] − Is, computed here with
  // boost::math::lambert_w0 itself, where the argument is representable.
  const double temp_k = 300.15;
  for (const DiodeParams& p : {DiodeParams{2.52e-9, 1.752, 0.568}, DiodeParams{5e-11, 2.2, 3.5}, DiodeParams{1e-14, 1.0, 10.0}}) {
    const double nvt = p.n * thermal_voltage_v(temp_k);
    for (double v = 0.1; v < 1.6; v += 0.05) {
      const double arg = p.is_a * p.rs_ohm / nvt * std::exp((v + p.is_a * p.rs_ohm) / nvt);
      const double expected = nvt / p.rs_ohm * boost::math::lambert_w0(arg) - p.is_a;
      CHECK(diode_current_a(p, v, temp_k) == Approx(expected).epsilon(1e-12));
    }
  }
}

TEST_CASE("With a shunt, V(I) solves the implicit equation to full precision", "[reference]") {
  // Is·(exp(Vj/nVt) − 1) + Vj/Rsh = I with Vj = V − I·Rs; checked for a very
  // large Rsh, where a subtraction of two large terms would lose digits.
  const double temp_k = 300.15;
  for (double rsh : {1e4, 1e6, 1e9, 1e12}) {
    const DiodeParams p{1e-12, 1.3, 1.2, rsh};
    const double nvt = p.n * thermal_voltage_v(temp_k);
    for (double i = 1e-10; i < 0.2; i *= 3.7) {
      const double vj = diode_voltage_v(p, i, temp_k) - i * p.rs_ohm;
      const double back = p.is_a * std::expm1(vj / nvt) + vj / rsh;
      CHECK(back == Approx(i).epsilon(1e-11));
      CHECK(diode_current_a(p, diode_voltage_v(p, i, temp_k), temp_k) == Approx(i).epsilon(1e-9));
    }
  }
}

TEST_CASE("E2 default card and E7 set: explicit V(I)", "[reference]") {
  // docs/references.md E2 [C] (IS = 1e-14, N = 1, 27 °C) and E7 [C] (IS = 1e-9, N = 1.8, RS = 0.5, 300 K).
  const DiodeParams def{1e-14, 1.0, 0.0};
  CHECK(diode_voltage_v(def, 1e-6, 300.15) == Approx(0.476450).epsilon(2e-6));
  CHECK(diode_voltage_v(def, 1e-3, 300.15) == Approx(0.655118).epsilon(2e-6));
  const DiodeParams e7{1e-9, 1.8, 0.5};
  CHECK(diode_voltage_v(e7, 10e-6, 300.0) == Approx(0.4285999).epsilon(5e-7));
  CHECK(diode_voltage_v(e7, 100e-3, 300.0) == Approx(0.9071806).epsilon(5e-7));
  CHECK(dynamic_resistance_ohm(e7, 1e-3, 300.0) == Approx(47.03355).epsilon(2e-7));
}
