// The simulated bench's physics against independent references:
//  - DC operating point vs ngspice (a real `ngspice -b` run of the same
//    circuit and SPICE diode model, docs/references.md §2 model equations);
//  - small-signal transfer vs the series-element formula (docs/references.md §6,
//    rd = n·Vt/I + Rs, §1) including Cj from the SPICE C–V law (§2);
//  - high-bias transfer vs the resistive divider RL/(Rg + RL + Rs + rd);
//  - second harmonic vs an ngspice transient with `fourier` (§4 E13 context).
#include "tools/sim/fixture.hpp"
#include "tools/sim/part.hpp"

#include "tests/support/ngspice.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <regex>
#include <sstream>
#include <string>
#include <sys/wait.h>
#include <unistd.h>

using namespace junco::sim;

namespace {

std::string model_card(const PartParams& p) {
  std::ostringstream o;
  o.precision(12);
  o << ".model DUT D(IS=" << p.is_a << " N=" << p.n << " RS=" << p.rs_ohm << " CJO=" << p.cj0_f << " VJ=" << p.vj_v
    << " M=" << p.m << " FC=" << p.fc << " TT=" << p.tt_s << " EG=" << p.eg_ev << " XTI=" << p.xti << ")\n";
  return o.str();
}

// ngspice in batch mode on `netlist` (tests/support/ngspice.hpp): its
// combined output. It exits 1 after a .control block even on success, so the
// output is judged by its content; a missing ngspice throws.
std::string run_ngspice(const std::string& netlist) { return junco::test::run_ngspice(netlist).out; }

double printed(const std::string& output, const std::string& name) {
  const std::regex re("^" + std::regex_replace(name, std::regex(R"([()])"), R"(\$&)") + R"( = ([-+0-9.eE]+))",
                      std::regex::multiline);
  std::smatch m;
  if (!std::regex_search(output, m, re)) FAIL("ngspice printed no " << name << ":\n" << output);
  return std::stod(m[1]);
}

// Normalised magnitude of harmonic k from ngspice's fourier table.
double fourier_norm(const std::string& output, int k) {
  std::istringstream in(output.substr(output.find("Harmonic Frequency")));
  std::string line;
  while (std::getline(in, line)) {
    std::istringstream l(line);
    int h;
    double f, mag, ph, norm;
    if (l >> h >> f >> mag >> ph >> norm && h == k) return norm;
  }
  FAIL("no harmonic " << k << " in ngspice output");
  return 0;
}

// Amplitude of harmonic k of one period of samples (DFT).
double harmonic(const std::vector<double>& w, int k) {
  std::complex<double> s = 0;
  const double n = static_cast<double>(w.size());
  for (size_t i = 0; i < w.size(); ++i) s += w[i] * std::polar(1.0, -2 * M_PI * k * static_cast<double>(i) / n);
  return 2.0 * std::abs(s) / n;
}

}  // namespace

TEST_CASE("DC operating point agrees with ngspice's .op for the same circuit and model", "[sim][ngspice]") {
  // Source: ngspice (Debian package) solving the SPICE level-1 diode; the
  // constants differ from SI 2019 by 3.4e-7 relative (docs/references.md §1), so
  // currents are compared to 1e-4 relative, voltages to 20 µV.
  FixtureConfig fx;  // Rb 100 Ω, inductor return (0 Ω at DC)
  PartParams part;
  part.is_a = 3.1e-9;
  part.n = 1.83;
  part.rs_ohm = 0.8;
  struct Case { double vs, temp_c; };
  for (const Case c : {Case{0.5, 27}, Case{0.9, 27}, Case{2.0, 27}, Case{6.0, 27}, Case{2.0, 76.85}, Case{-5.0, 27}}) {
    const double temp_k = c.temp_c + 273.15;
    const DcPoint dc = solve_dc(fx, &part, BiasSetting{true, c.vs, 1.0}, temp_k);
    std::ostringstream net;
    net << "* junco-sim dc check\nV1 s 0 DC " << c.vs << "\nRb s a " << fx.rb_ohm << "\nD1 a k DUT\nVret k 0 DC 0\n"
        << model_card(part) << ".temp " << c.temp_c << "\n.control\nset numdgt=12\nop\nprint v(a) i(vret)\n.endc\n.end\n";
    const auto out = run_ngspice(net.str());
    const double va = printed(out, "v(a)"), i = printed(out, "i(vret)");
    INFO("Vs " << c.vs << " V, " << c.temp_c << " °C: sim " << dc.i_a << " A / " << dc.v_part_v << " V, ngspice " << i
               << " A / " << va << " V");
    CHECK(dc.v_part_v == Approx(va).margin(20e-6));
    if (c.vs > 0) CHECK(dc.i_a == Approx(i).epsilon(1e-4));
    else CHECK(dc.i_a == Approx(i).margin(1e-11));  // reverse: −Is (plus ngspice's GMIN·V)
  }
}

TEST_CASE("current limit: the supply regulates current and folds its voltage back", "[sim]") {
  // Compliance behaviour (common practice, no source): at the limit I = Ilim
  // and the supply voltage is what the load needs, V = Vd(Ilim) + Ilim·Rb.
  FixtureConfig fx;
  PartParams part;
  const DcPoint dc = solve_dc(fx, &part, BiasSetting{true, 10.0, 0.02}, 300.15);
  REQUIRE(dc.current_limited);
  CHECK(dc.i_a == 0.02);
  const double vd = junco::fitting::diode_voltage_v(dc_params(part, 300.15), 0.02, 300.15);
  CHECK(dc.supply_v == Approx(vd + 0.02 * fx.rb_ohm).epsilon(1e-12));
  CHECK(dc.supply_v < 10.0);
}

TEST_CASE("small-signal AC transfer matches the series-element formula with rd = n·Vt/I + Rs and Cj", "[sim]") {
  // Source: docs/references.md §6 (series element between Rg and RL:
  // out/EMF = RL/(Rg + RL + Z)) with Z = Rs + (rd ∥ 1/(jωC)), rd = n·Vt/I
  // (§1), C = C–V law at the junction bias (§2). 1 mV EMF keeps it linear.
  FixtureConfig fx;
  PartParams part;
  for (double vs : {0.7, 1.0, 3.0}) {
    for (double f : {1e5, 1e7, 1e8}) {
      const BiasSetting bias{true, vs, 1.0};
      const auto ac = solve_ac(fx, &part, bias, 300.15, AcDrive{true, 1e-3, f});
      REQUIRE(ac.converged);
      const double i = ac.dc.i_a;
      const double vt = junco::fitting::thermal_voltage_v(300.15);
      const double rd = part.n * vt / (i + part.is_a);
      const double vj = ac.dc.v_part_v - i * part.rs_ohm;
      const double c = junction_capacitance_f(part, vj, 1.0 / rd);
      const std::complex<double> zj = 1.0 / (1.0 / rd + std::complex<double>(0, 2 * M_PI * f * c));
      const std::complex<double> z = part.rs_ohm + zj;
      const double expect = std::abs(fx.load_ohm / (fx.source_ohm + fx.load_ohm + z));
      const double got = harmonic(ac.wave_out_v, 1) / 0.5e-3;
      INFO("Vs " << vs << " V, I " << i << " A, f " << f << " Hz, rd " << rd << " Ω, C " << c << " F");
      // BDF2 with 256 steps per period: phase error is second order, ~1e-4.
      CHECK(got == Approx(expect).epsilon(2e-3));
    }
  }
}

TEST_CASE("at high bias the transfer approaches the resistive divider RL/(Rg + RL + Rs + rd)", "[sim]") {
  // Source: docs/references.md §6 series element with a purely resistive Z
  // (Cj shorted by the small rd at 1 MHz); rd = n·Vt/I (§1).
  FixtureConfig fx;
  PartParams part;
  const auto ac = solve_ac(fx, &part, BiasSetting{true, 6.0, 1.0}, 300.15, AcDrive{true, 0.1, 1e6});
  REQUIRE(ac.dc.i_a > 0.04);
  const double rd = part.n * junco::fitting::thermal_voltage_v(300.15) / ac.dc.i_a;
  const double divider = fx.load_ohm / (fx.source_ohm + fx.load_ohm + part.rs_ohm + rd);
  CHECK(harmonic(ac.wave_out_v, 1) / 0.05 == Approx(divider).epsilon(1e-3));
  // Channel 1 is the generator terminal after Rg: EMF·(Z + RL)/(Rg + Z + RL).
  CHECK(harmonic(ac.wave_in_v, 1) / 0.05 ==
        Approx((fx.load_ohm + part.rs_ohm + rd) / (fx.source_ohm + fx.load_ohm + part.rs_ohm + rd)).epsilon(1e-3));
  // And Vrms of a nearly pure sine is Vpp/(2√2) (definition).
  CHECK(ac.out_vrms == Approx(ac.out_vpp / (2 * std::sqrt(2.0))).epsilon(1e-3));
}

TEST_CASE("unbiased, a large signal is rectified, clipped and distorted", "[sim]") {
  // Physical expectation (common practice, no source): with no bias the
  // diode conducts only on peaks; the output is far below the divider and
  // rich in harmonics; rectification drives the anode's mean negative.
  FixtureConfig fx;
  PartParams part;
  const auto ac = solve_ac(fx, &part, BiasSetting{false, 0.0, 0.1}, 300.15, AcDrive{true, 2.0, 1e6});
  REQUIRE(ac.converged);
  const double fund = harmonic(ac.wave_out_v, 1);
  CHECK(fund < 0.2 * 1.0 * fx.load_ohm / (fx.source_ohm + fx.load_ohm));
  CHECK(harmonic(ac.wave_out_v, 2) > 0.05 * fund);
  CHECK(ac.dc.v_part_v < -0.1);
  CHECK(std::abs(ac.dc.i_a) < 1e-6);  // no DC path: the mean diode current is zero
}

TEST_CASE("second harmonic at 10 mA agrees with an ngspice transient and fourier", "[sim][ngspice]") {
  // Source: ngspice transient of the same fixture (chokes 10 H, blocks 1 mF,
  // which are ideal at 1 MHz) with `fourier`; tolerance 0.5 dB on HD2.
  FixtureConfig fx;
  PartParams part;
  const double vs = 2.0, emf_vpp = 0.2, f = 1e6;
  const auto ac = solve_ac(fx, &part, BiasSetting{true, vs, 1.0}, 300.15, AcDrive{true, emf_vpp, f});
  REQUIRE(ac.converged);
  std::ostringstream net;
  net << "* junco-sim distortion check\nV1 s 0 DC " << vs << "\nRb s b " << fx.rb_ohm << "\nLb b a 10\n"
      << "Vg g 0 DC 0 SIN(0 " << emf_vpp / 2 << " " << f << ")\nRg g gt " << fx.source_ohm << "\nC1 gt a 1e-3\n"
      << "D1 a k DUT\nLr k 0 10\nC2 k o 1e-3\nRL o 0 " << fx.load_ohm << "\n" << model_card(part)
      << ".options reltol=1e-7 abstol=1e-15 vntol=1e-9\n.control\nset numdgt=12\n"
      << "tran 1e-9 20e-6 10e-6 1e-9\nfourier " << f << " v(o)\n.endc\n.end\n";
  const auto out = run_ngspice(net.str());
  const double hd2_ng = fourier_norm(out, 2);
  const double hd2_sim = harmonic(ac.wave_out_v, 2) / harmonic(ac.wave_out_v, 1);
  INFO("HD2 sim " << 20 * std::log10(hd2_sim) << " dBc, ngspice " << 20 * std::log10(hd2_ng) << " dBc");
  CHECK(std::abs(20 * std::log10(hd2_sim / hd2_ng)) < 0.5);
}

TEST_CASE("IS(T) follows the ngspice temperature law (docs/references.md E3 values)", "[sim]") {
  // Source: docs/references.md §4 E3 [C]: IS = 1e-14, N = 1, XTI = 3, EG = 1.11,
  // TNOM = 27 °C → IS(100 °C) = 8.5073276e-11 A, IS(0 °C) = 1.0836673e-16 A.
  PartParams p;
  p.is_a = 1e-14;
  p.n = 1;
  p.xti = 3;
  p.eg_ev = 1.11;
  p.tnom_k = 300.15;
  CHECK(saturation_current_a(p, 373.15) == Approx(8.5073276e-11).epsilon(1e-6));
  CHECK(saturation_current_a(p, 273.15) == Approx(1.0836673e-16).epsilon(1e-6));
}

TEST_CASE("junction capacitance follows the SPICE C–V law (docs/references.md E5 values)", "[sim]") {
  // Source: docs/references.md §4 E5 [C]: CJO 1 pF, VJ 1 V, M 0.5, FC 0.5.
  PartParams p;
  p.cj0_f = 1e-12;
  p.vj_v = 1;
  p.m = 0.5;
  p.fc = 0.5;
  p.tt_s = 0;
  CHECK(junction_capacitance_f(p, -4, 0) == Approx(0.447214e-12).epsilon(1e-5));
  CHECK(junction_capacitance_f(p, 0.5, 0) == Approx(1.414214e-12).epsilon(1e-5));
  CHECK(junction_capacitance_f(p, 0.8, 0) == Approx(1.838478e-12).epsilon(1e-5));
  // The charge is the integral of C: its numerical derivative must agree.
  for (double v : {-3.0, 0.2, 0.49, 0.51, 0.9}) {
    const double h = 1e-6;
    const double dq = (junction_charge_c(p, v + h, 0) - junction_charge_c(p, v - h, 0)) / (2 * h);
    CHECK(dq == Approx(junction_capacitance_f(p, v, 0)).epsilon(1e-6));
  }
}
