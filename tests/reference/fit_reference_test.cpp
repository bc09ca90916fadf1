// Fit and derived figures against the worked examples in docs/references.md.
#include "fitting/derived.hpp"
#include "fitting/extract.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <vector>

using namespace junco::fitting;

TEST_CASE("E7 synthetic set: parameters recovered from the tabulated points", "[reference]") {
  // docs/references.md E7 [C]: IS = 1e-9 A, N = 1.8, RS = 0.5 Ω, T = 300 K; V from the explicit V(I), 7 digits.
  const std::vector<IvPoint> e7{{0.4285999, 10e-6}, {0.5357883, 100e-6}, {0.6433855, 1e-3}, {0.7550330, 10e-3},
                                {0.7922876, 20e-3}, {0.8499259, 50e-3},  {0.9071806, 100e-3}};
  FitOptions opt;
  opt.temp_k = 300.0;
  const auto r = fit_forward(e7, opt);
  REQUIRE(r.usable());
  CHECK(r.points_used == 7);
  CHECK(r.n.value == Approx(1.8).epsilon(1e-3));
  CHECK(r.rs_ohm.value == Approx(0.5).epsilon(0.01));
  CHECK(r.is_a.value == Approx(1e-9).epsilon(0.01));
}

TEST_CASE("E7 dV/dI row: small-signal resistance of the true parameters", "[reference]") {
  // docs/references.md E7 [C]: dV/dI at 10 µA … 100 mA.
  const DiodeParams p{1e-9, 1.8, 0.5};
  const double i[] = {10e-6, 100e-6, 1e-3, 10e-3, 20e-3, 50e-3, 100e-3};
  const double rd[] = {4653.395, 465.8313, 47.03355, 5.153360, 2.826680, 1.430672, 0.9653360};
  for (int k = 0; k < 7; ++k) {
    CHECK(small_signal_resistance_ohm(p, i[k], 300.0) == Approx(rd[k]).epsilon(2e-6));
    CHECK(current_for_resistance_a(p, rd[k], 300.0) == Approx(i[k]).epsilon(2e-6));
  }
}

TEST_CASE("E2 default card forward voltages", "[reference]") {
  // docs/references.md E2 [C]: IS = 1e-14, N = 1, 27 °C.
  const DiodeParams p{1e-14, 1.0, 0.0};
  CHECK(forward_voltage_v(p, 1e-6, 300.15) == Approx(0.476450).epsilon(2e-6));
  CHECK(forward_voltage_v(p, 1e-3, 300.15) == Approx(0.655118).epsilon(2e-6));
  CHECK(forward_voltage_v(p, 10e-3, 300.15) == Approx(0.714674).epsilon(2e-6));
}

TEST_CASE("rd = n·Vt/I at 300 K", "[reference]") {
  // docs/references.md §1 [C]: 258.52 Ω @100 µA … 0.51704 Ω @50 mA, n = 1, Rs = 0; "25.85 mV / I" is common practice.
  const DiodeParams p{1e-14, 1.0, 0.0};
  CHECK(small_signal_resistance_ohm(p, 100e-6, 300.0) == Approx(258.52).epsilon(1e-4));
  CHECK(small_signal_resistance_ohm(p, 1e-3, 300.0) == Approx(25.852).epsilon(1e-4));
  CHECK(small_signal_resistance_ohm(p, 10e-3, 300.0) == Approx(2.5852).epsilon(1e-4));
  CHECK(small_signal_resistance_ohm(p, 20e-3, 300.0) == Approx(1.2926).epsilon(1e-4));
  CHECK(small_signal_resistance_ohm(p, 50e-3, 300.0) == Approx(0.51704).epsilon(1e-4));
  // And the inverse: the current for rd = 2.5852 Ω is 10 mA.
  CHECK(current_for_resistance_a(p, 2.5852, 300.0) == Approx(10e-3).epsilon(1e-4));
}

TEST_CASE("E8 operating point: forward voltage with Rs at 10 mA", "[reference]") {
  // docs/references.md E8 [C]: IS = 1e-14, N = 1, RS = 1 Ω, 27 °C, 10 mA → Vd = 0.724674 V.
  CHECK(forward_voltage_v(DiodeParams{1e-14, 1.0, 1.0}, 10e-3, 300.15) == Approx(0.724674).epsilon(2e-6));
}
