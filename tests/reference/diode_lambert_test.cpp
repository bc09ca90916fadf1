// The explicit diode solutions against outside references.
#include "fitting/diode.hpp"

#include <boost/math/special_functions/lambert_w.hpp>
#include <catch2/catch.hpp>

#include <cmath>

using namespace junco::fitting;

TEST_CASE("Vt from exact CODATA 2018 constants", "[reference]") {
  // REFERENCES.md §1 [C]: 25.85200 mV at 300 K, 25.86493 mV at 300.15 K.
  CHECK(thermal_voltage_v(300.0) == Approx(25.85200e-3).epsilon(2e-7));
  CHECK(thermal_voltage_v(300.15) == Approx(25.86493e-3).epsilon(2e-7));
}

TEST_CASE("Lambert-W current reproduces the Boost.Math diode example", "[reference]") {
  // boostorg/math example/lambert_w_diode.cpp (Banwell & Jayakumar data),
  // REFERENCES.md E1: IS = 25 fA, N = 1, Vt = 0.0257025 V, R = 249.3 Ω, 0.9 V → 1.0848517 mA.
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
  // REFERENCES.md §2 [C]: W0(1e10) = 20.028685413304951; and w + ln w = x beyond 709.
  CHECK(lambert_w0_of_exp(std::log(1e10)) == Approx(20.028685413304951).epsilon(1e-14));
  const double w = lambert_w0_of_exp(5000.0);
  CHECK(w + std::log(w) == Approx(5000.0).epsilon(1e-15));
}

TEST_CASE("Explicit shunt form matches the published check values", "[reference]") {
  // REFERENCES.md §2 [C] (Ortiz-Conde et al. 2000 form): IS = 1e-14, N = 1,
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
