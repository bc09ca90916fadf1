// Switch loss, isolation and bias-resistor calculators against the outside
// check values of docs/references.md (E8–E12, relations of §6).
#include "design/bias.hpp"
#include "design/switch.hpp"
#include "fitting/transfer.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <numbers>

using namespace junco::fitting;
using cplx = std::complex<double>;

namespace {
constexpr double t27_k = 300.15;
double two_pi_f(double f) { return 2.0 * std::numbers::pi * f; }
}  // namespace

TEST_CASE("E9: PIN switch loss and isolation, series and shunt, 2/3/4 GHz") {
  // Source: docs/references.md E9 (course solution, coursehero 6235364), recomputed
  // with the §6 relations: Cj 0.1 pF, Rf 1 Ω, Rr 4 Ω, Ls 0.3 nH, Z0 50 Ω.
  const double freqs[] = {2e9, 3e9, 4e9};
  const double series_il[] = {0.0925, 0.1000, 0.1106}, series_iso[] = {18.05, 14.57, 12.13};
  const double shunt_il[] = {0.0057, 0.0130, 0.0234}, shunt_iso[] = {16.57, 13.32, 11.03};
  const Parasitics off{0.3e-9, 4.0};
  for (int k = 0; k < 3; ++k) {
    const double w = two_pi_f(freqs[k]);
    const cplx z_on(1.0, w * 0.3e-9);
    const cplx z_off = off_impedance(0.1e-12, freqs[k], off);
    CHECK(series_loss_db(z_on, 50, 50) == Approx(series_il[k]).margin(6e-4));
    CHECK(series_loss_db(z_off, 50, 50) == Approx(series_iso[k]).margin(6e-3));
    CHECK(shunt_loss_db(z_off, 50, 50) == Approx(shunt_il[k]).margin(6e-5));
    CHECK(shunt_loss_db(z_on, 50, 50) == Approx(shunt_iso[k]).margin(6e-3));
  }
}

TEST_CASE("E10: 6 GHz series, shunt and series-shunt SPST") {
  // Source: docs/references.md E10 (askfilo student solution, recomputed [C]).
  const Parasitics off{0.3e-9, 0.0};
  const double w = two_pi_f(6e9);
  const cplx z_on(1.0, w * 0.3e-9);
  cplx z_off = off_impedance(0.1e-12, 6e9, off);
  z_off += 1.0;  // the page's off state keeps Rf = 1 Ω in series
  CHECK(z_on.imag() == Approx(11.310).margin(1e-3));
  CHECK(z_off.imag() == Approx(-253.949).margin(1e-3));
  CHECK(series_shunt_loss_db(z_on, z_off, 50) == Approx(0.0946).margin(1e-4));
  CHECK(series_shunt_loss_db(z_off, z_on, 50) == Approx(21.20).margin(6e-3));
  CHECK(series_loss_db(z_on, 50, 50) == Approx(0.1405).margin(1e-4));
  CHECK(series_loss_db(z_off, 50, 50) == Approx(8.73).margin(6e-3));
  CHECK(shunt_loss_db(z_off, 50, 50) == Approx(0.0452).margin(1e-4));
  CHECK(shunt_loss_db(z_on, 50, 50) == Approx(7.95).margin(6e-3));
}

TEST_CASE("E11: signal diode in 50 ohm, loss against bias, series and shunt") {
  // Source: docs/references.md E11 [C] (N = 1, RS = 1 Ω, 27 °C, rd = N·Vt/I).
  const DiodeParams d{1e-14, 1.0, 1.0};
  const double bias[] = {1e-3, 5e-3, 10e-3, 20e-3, 50e-3};
  const double il[] = {2.067, 0.520, 0.306, 0.197, 0.131};
  const double iso[] = {5.71, 14.07, 18.03, 21.51, 24.85};
  for (int k = 0; k < 5; ++k) {
    CHECK(on_state_loss_db(SwitchKind::series, d, {}, bias[k], 50, 50, 1e6, {}, t27_k) == Approx(il[k]).margin(6e-4));
    CHECK(on_state_loss_db(SwitchKind::shunt, d, {}, bias[k], 50, 50, 1e6, {}, t27_k) == Approx(iso[k]).margin(6e-3));
    // The fixture model with no shunts is the same series switch.
    const AcPart part{d, 0.0};
    CHECK(insertion_loss_db(Fixture{}, part, bias[k], 1e6, t27_k) == Approx(il[k]).margin(6e-4));
  }
  const DiodeParams n2{1e-14, 2.0, 1.0};
  CHECK(on_state_loss_db(SwitchKind::series, n2, {}, 10e-3, 50, 50, 1e6, {}, t27_k) == Approx(0.520).margin(6e-4));
}

TEST_CASE("E11 inverted: bias for a target loss returns the table's bias") {
  // Source: docs/references.md E11; the inverse must land on the tabulated bias
  // within the table's rounding (3 decimals of dB).
  const DiodeParams d{1e-14, 1.0, 1.0};
  auto i = bias_for_loss_a(SwitchKind::series, d, {}, 0.306, 50, 50, 1e6, {}, t27_k);
  REQUIRE(i);
  CHECK(*i == Approx(10e-3).epsilon(5e-3));
  i = bias_for_loss_a(SwitchKind::shunt, d, {}, 18.03, 50, 50, 1e6, {}, t27_k);
  REQUIRE(i);
  CHECK(*i == Approx(10e-3).epsilon(5e-3));
  std::string why;
  // Rs = 1 Ω alone costs 0.0864 dB (E12), so 0.05 dB is out of reach.
  CHECK_FALSE(bias_for_loss_a(SwitchKind::series, d, {}, 0.05, 50, 50, 1e6, {}, t27_k, &why));
  CHECK(why.find("cannot be reached") != std::string::npos);
}

TEST_CASE("E12: off-state isolation from Cj, on-state resistors") {
  // Source: docs/references.md E12 [C].
  const cplx z03 = off_impedance(0.3e-12, 1e9, {});
  CHECK(std::abs(z03) == Approx(530.52).margin(0.01));
  CHECK(series_loss_db(z03, 50, 50) == Approx(14.646).margin(6e-4));
  CHECK(shunt_loss_db(z03, 50, 50) == Approx(0.00963).margin(6e-6));
  CHECK(series_loss_db(off_impedance(1e-12, 100e6, {}), 50, 50) == Approx(24.054).margin(6e-4));
  CHECK(series_loss_db(1.0, 50, 50) == Approx(0.0864).margin(6e-5));
  CHECK(shunt_loss_db(1.0, 50, 50) == Approx(28.30).margin(6e-3));
}

TEST_CASE("E5: junction capacitance law for the reverse-bias isolation option") {
  // Source: docs/references.md E5 [C], ngspice dioload.c C–V law.
  const JunctionCap c{1e-12, 1.0, 0.5, 0.5};
  CHECK(junction_capacitance_f(c, -20) == Approx(0.218218e-12).epsilon(1e-5));
  CHECK(junction_capacitance_f(c, -4) == Approx(0.447214e-12).epsilon(1e-5));
  CHECK(junction_capacitance_f(c, 0.5) == Approx(1.414214e-12).epsilon(1e-5));
  CHECK(junction_capacitance_f(c, 0.8) == Approx(1.838478e-12).epsilon(1e-5));
  CHECK(junction_capacitance_f({1e-12, 0.7, 1.0 / 3.0, 0.5}, -5) == Approx(0.497059e-12).epsilon(1e-5));
}

TEST_CASE("E8: bias resistor for 10 mA from 5 V, and the operating point it gives back") {
  // Source: docs/references.md E8 [C]: IS 1e-14, N 1, RS 1 Ω, 27 °C → 427.533 Ω.
  const DiodeParams d{1e-14, 1.0, 1.0};
  const auto r = bias_resistor_ohm(d, 5.0, 10e-3, 0.0, t27_k);
  REQUIRE(r);
  CHECK(*r == Approx(427.533).margin(1e-3));
  const OperatingPoint op = operating_point(d, 5.0, *r, 0.0, t27_k);
  CHECK(op.i_a == Approx(10e-3).epsilon(1e-6));
  CHECK(op.vd_v == Approx(0.724674).margin(1e-6));
  std::string why;
  CHECK_FALSE(bias_resistor_ohm(d, 0.6, 10e-3, 0.0, t27_k, &why));
  CHECK(why.find("cannot drive") != std::string::npos);
}
