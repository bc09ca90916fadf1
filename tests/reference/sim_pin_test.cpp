// junco-sim's PIN part (tools/sim/part.hpp: charge control, dQ/dt = i − Q/τ,
// I-region conductance (µn + µp)·Q/W²) in the periodic time-domain solve,
// against published relations:
//  - well above the knee 1/(2π τ) the part is the resistance of an ideal
//    I-region, R = W²/((µn + µp)·τ·I) (Bhat and Borrego 1977; the textbook PIN
//    relation, J. F. White, Microwave Semiconductor Engineering — from memory),
//    in series with RS, between Rg and RL (docs/references.md §6 series element);
//  - well below it the part is a junction: rd = N·Vt/I (docs/references.md §1);
//  - between them the linearised charge-control impedance of
//    fitting/pin_diode.hpp (our derivation; the time-domain solve does not use it);
//  - a large signal well above the knee is hardly distorted while its charge
//    per half cycle Î/(π f) is small next to the stored I·τ (Caverly and Hiller,
//    IEEE Trans. MTT 35(5), 1987, qualitatively — from memory), where a junction
//    diode at the same bias and drive is clipped.
#include "fitting/pin_diode.hpp"
#include "tools/sim/fixture.hpp"
#include "tools/sim/part.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <vector>

using namespace junco::sim;

namespace {

// Amplitude of harmonic k of one period of samples (DFT).
double harmonic(const std::vector<double>& w, int k) {
  std::complex<double> s = 0;
  const double n = static_cast<double>(w.size());
  for (size_t i = 0; i < w.size(); ++i) s += w[i] * std::polar(1.0, -2 * M_PI * k * static_cast<double>(i) / n);
  return 2.0 * std::abs(s) / n;
}

PartParams pin_part() {
  PartParams p;
  p.pin = true;
  p.n = 2.0;
  p.is_a = 1e-12;
  p.rs_ohm = 0.3;
  p.tt_s = 200e-9;  // lifetime τ: knee 0.80 MHz
  p.cj0_f = 0.2e-12;
  p.i_region_width_m = 30e-6;
  p.mobility_sum_m2_per_v_s = (1350.0 + 480.0) * 1e-4;  // silicon, 300 K (Sze, from memory)
  return p;
}

}  // namespace

TEST_CASE("PIN part: DC drop of the I-region is W²/((µn+µp)τ), independent of the current", "[sim]") {
  const PartParams p = pin_part();
  const double k = 30e-6 * 30e-6 / (0.183 * 200e-9);  // 24.6 mΩ·A → 24.6 mV
  CHECK(i_region_drop_v(p, 1e-3) == Approx(k).epsilon(1e-9));
  CHECK(i_region_drop_v(p, 10e-3) == Approx(k).epsilon(1e-9));
  FixtureConfig fx;
  const auto dc = solve_dc(fx, &p, BiasSetting{true, 2.0, 1.0}, 300.15);
  // Across the part: the junction's N·Vt·ln(1 + I/IS) + I·RS + the I-region's drop.
  const double vt = junco::fitting::thermal_voltage_v(300.15);
  CHECK(dc.v_part_v == Approx(2.0 * vt * std::log1p(dc.i_a / 1e-12) + dc.i_a * 0.3 + k).epsilon(1e-9));
}

TEST_CASE("PIN part: small-signal transfer is the I-region resistance above the knee and rd below it", "[sim]") {
  const PartParams p = pin_part();
  FixtureConfig fx;
  const double vt = junco::fitting::thermal_voltage_v(300.15);
  for (double vs : {1.2, 2.0}) {
    for (double f : {10e3, 1e6, 100e6}) {
      const auto ac = solve_ac(fx, &p, BiasSetting{true, vs, 1.0}, 300.15, AcDrive{true, 1e-3, f});
      REQUIRE(ac.converged);
      const double i = ac.dc.i_a;
      const double r_i = 30e-6 * 30e-6 / (0.183 * 200e-9 * i);  // published ideal I-region
      const double rd = 2.0 * vt / i;
      const double got = harmonic(ac.wave_out_v, 1) / 0.5e-3;
      const junco::fitting::PinLaw law{2.0, 200e-9, 0.3, 30e-6 * 30e-6 / (0.183 * 200e-9), 1.0};
      const auto z = junco::fitting::pin_on_impedance(law, i, f, 300.15);
      const double charge_control = std::abs(fx.load_ohm / (fx.source_ohm + fx.load_ohm + z));
      INFO("Vs " << vs << " V, I " << i << " A, f " << f << " Hz, R_I " << r_i << " rd " << rd);
      CHECK(got == Approx(charge_control).epsilon(3e-3));
      if (f >= 100e6) CHECK(got == Approx(fx.load_ohm / (fx.source_ohm + fx.load_ohm + 0.3 + r_i)).epsilon(3e-3));
      if (f <= 10e3) CHECK(got == Approx(fx.load_ohm / (fx.source_ohm + fx.load_ohm + 0.3 + rd)).epsilon(3e-3));
    }
  }
}

TEST_CASE("PIN part: 2 Vpp at 10 mA and 100 MHz is hardly distorted; a junction diode there clips", "[sim]") {
  FixtureConfig fx;
  PartParams pin = pin_part();
  PartParams junction;  // junco-sim's nominal junction part, no stored charge
  const auto thd = [&](const PartParams& p, double vs) {
    const auto ac = solve_ac(fx, &p, BiasSetting{true, vs, 1.0}, 300.15, AcDrive{true, 4.0, 100e6});
    REQUIRE(ac.converged);
    INFO("I " << ac.dc.i_a);
    const double h1 = harmonic(ac.wave_out_v, 1), h2 = harmonic(ac.wave_out_v, 2), h3 = harmonic(ac.wave_out_v, 3);
    return std::hypot(h2, h3) / h1;
  };
  // Supply voltages that give about 10 mA through Rb = 100 Ω.
  const double pin_thd = thd(pin, 1.75), junction_thd = thd(junction, 1.75);
  INFO("PIN THD " << pin_thd << ", junction THD " << junction_thd);
  // The RF charge per half cycle at ~20 mA peak: 20 mA/(π·100 MHz) = 64 pC against 2 nC stored.
  CHECK(pin_thd < 0.01);
  CHECK(junction_thd > 0.05);
}

TEST_CASE("PIN part: the vector meter's small-signal transfer is the charge-control impedance, R_I above the knee", "[sim]") {
  // The vector meter's own solve (small_signal_transfer, linearised at the DC
  // point) against the linearised charge-control impedance of
  // fitting/pin_diode.hpp and, well above the knee, the published ideal
  // I-region R = W²/((µn + µp)·τ·I) in series with RS. The depletion
  // capacitance (0.2 pF) is under 1e-4 of τ·gd at these currents.
  const PartParams p = pin_part();
  FixtureConfig fx;  // no package, no slot parasitics
  const junco::fitting::PinLaw law{2.0, 200e-9, 0.3, 30e-6 * 30e-6 / (0.183 * 200e-9), 1.0};
  for (double vs : {1.0, 1.5, 3.0}) {
    const auto dc = solve_dc(fx, &p, BiasSetting{true, vs, 1.0}, 300.15);
    REQUIRE(dc.i_a > 1e-4);
    for (double f : {10e3, 300e3, 1e6, 3e6, 100e6}) {
      const std::complex<double> h = small_signal_transfer(fx, SlotContent::part, &p, dc, 300.15, f);
      const std::complex<double> z = fx.load_ohm * (1.0 / h - 1.0);  // the slot into RL (inductor return: open at AC)
      const std::complex<double> want = junco::fitting::pin_on_impedance(law, dc.i_a, f, 300.15);
      INFO("Vs " << vs << " V, I " << dc.i_a << " A, f " << f << " Hz: sim " << z << ", charge control " << want);
      CHECK(std::abs(z - want) < 1e-3 * std::abs(want));
    }
    const std::complex<double> z_hi = fx.load_ohm * (1.0 / small_signal_transfer(fx, SlotContent::part, &p, dc, 300.15, 1e9) - 1.0);
    CHECK(z_hi.real() == Approx(0.3 + 30e-6 * 30e-6 / (0.183 * 200e-9 * dc.i_a)).epsilon(1e-3));
  }
}
