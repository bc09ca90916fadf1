// junco-sim's vector-meter truth (tools/sim/fixture.hpp small_signal_transfer:
// the fixture, the slot's stray C and trace L, the package's Ls and Cp, the
// junction linearised at its DC point) against ngspice .ac of the same
// circuit; then the package fit (fitting/deembed.hpp) on that truth over
// 10 MHz – 1 GHz, where ω²·Ls·Cj is large enough to separate Ls from Cp.
#include "fitting/deembed.hpp"
#include "fitting/diode.hpp"
#include "tests/support/ngspice.hpp"
#include "tools/sim/fixture.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <fstream>
#include <sstream>
#include <vector>

using namespace junco;
using cplx = std::complex<double>;

namespace {

sim::FixtureConfig vector_fixture() {
  sim::FixtureConfig fx;
  fx.package_ls_h = 1.2e-9;
  fx.package_cp_f = 0.15e-12;
  fx.stray_c_f = 0.05e-12;
  fx.slot_ls_h = 2e-9;
  return fx;
}

sim::PartParams vector_part() {
  sim::PartParams p;
  p.vj_v = 0.7;
  p.m = 0.5;
  p.tt_s = 5e-9;
  return p;
}

// The reverse-biased DC point the sim would solve: junction at −v, leakage −IS.
sim::DcPoint reverse_point(const sim::PartParams& p, double v) {
  sim::DcPoint dc;
  dc.i_a = -p.is_a;
  dc.v_part_v = -v + dc.i_a * p.rs_ohm;
  return dc;
}

}  // namespace

TEST_CASE("the sim's vector transfer matches ngspice .ac of the fixture with package and slot parasitics", "[reference][ngspice][sim]") {
  // Source: ngspice (Debian package) .ac; the DC source in the generator's
  // loop reverse biases the diode (no current flows, so Rg drops nothing).
  const sim::FixtureConfig fx = vector_fixture();
  const sim::PartParams p = vector_part();
  const std::vector<double> biases{0.0, 2.0, 5.0};
  const test::Ngspice ng("simvec");
  const std::string out = ng.path("ac.txt");
  std::ostringstream f;
  f.precision(15);
  f << "fixture slot with a packaged diode\n";
  std::string vectors;
  for (std::size_t k = 0; k < biases.size(); ++k) {
    const std::string s = std::to_string(k);
    f << "V" << s << " s" << s << " 0 DC " << -biases[k] << " AC 1\nRg" << s << " s" << s << " a" << s << " " << fx.source_ohm << "\n"
      << "Cs" << s << " a" << s << " k" << s << " " << fx.stray_c_f << "\nLt" << s << " a" << s << " p" << s << " " << fx.slot_ls_h << "\n"
      << "Lp" << s << " p" << s << " q" << s << " " << fx.package_ls_h << "\nD" << s << " q" << s << " k" << s << " dut\n"
      << "Cp" << s << " p" << s << " k" << s << " " << fx.package_cp_f << "\nRl" << s << " k" << s << " 0 " << fx.load_ohm << "\n";
    vectors += " vr(a" + s + ") vi(a" + s + ") vr(k" + s + ") vi(k" + s + ")";
  }
  f << ".model dut D(IS=" << p.is_a << " N=" << p.n << " RS=" << p.rs_ohm << " CJO=" << p.cj0_f << " VJ=" << p.vj_v << " M=" << p.m
    << " FC=" << p.fc << " TT=" << p.tt_s << ")\n.options reltol=1e-9 abstol=1e-18 vntol=1e-12 temp=27 tnom=27\n"
    << ".control\nac dec 10 1e7 1e9\nset wr_singlescale\nwrdata " << out << vectors << "\n.endc\n.end\n";
  const auto run = ng.run(f.str(), "ac");
  INFO(run.out);
  std::ifstream data(out);
  std::string line;
  int rows = 0;
  double worst = 0;
  while (std::getline(data, line)) {
    std::istringstream row(line);
    double freq;
    if (!(row >> freq)) continue;
    ++rows;
    for (std::size_t k = 0; k < biases.size(); ++k) {
      double ar, ai, kr, ki;
      row >> ar >> ai >> kr >> ki;
      const cplx ref = cplx(kr, ki) / cplx(ar, ai);
      const cplx ours = sim::small_signal_transfer(fx, sim::SlotContent::part, &p, reverse_point(p, biases[k]), 300.15, freq);
      INFO(biases[k] << " V at " << freq << " Hz: ngspice " << ref << ", sim " << ours);
      CHECK(std::abs(ours - ref) < 1e-5 * std::abs(ref) + 1e-9);
      worst = std::max(worst, std::abs(ours - ref) / std::abs(ref));
    }
  }
  CHECK(rows == 21);
  WARN("largest relative difference of the sim's vector transfer from ngspice: " << worst);
}

TEST_CASE("Ls and Cp fitted from de-embedded readings at 10 MHz - 1 GHz come out at the sim's package", "[reference][sim]") {
  // Common practice, no source: the sim's exact transfer (checked against
  // ngspice above), de-embedded with its own open and short, must give back
  // the package it was built with.
  const sim::FixtureConfig fx = vector_fixture();
  const sim::PartParams p = vector_part();
  std::vector<fitting::PackagedOffReading> rs;
  const sim::DcPoint none;
  for (double v : {0.0, 1.0, 3.0, 10.0})
    for (double f = 10e6; f <= 1.0001e9; f *= std::pow(10.0, 0.25)) {
      const auto z = [&](sim::SlotContent c, const sim::DcPoint& dc) {
        return fitting::slot_impedance_ohm(sim::small_signal_transfer(fx, c, &p, dc, 300.15, f), fx.load_ohm);
      };
      const cplx z_dut = fitting::deembed_open_short(z(sim::SlotContent::part, reverse_point(p, v)), z(sim::SlotContent::open, none),
                                                     z(sim::SlotContent::short_link, none));
      rs.push_back({v, f, z_dut});
    }
  const fitting::PackageFit pf = fitting::fit_package(rs);
  INFO(pf.message << " rms " << pf.rms_relative);
  REQUIRE(pf.ok);
  CHECK(pf.package.cp_f == Approx(0.15e-12).epsilon(0.01));
  CHECK(pf.package.ls_h == Approx(1.2e-9).epsilon(0.01));
  WARN("fitted package: Cp " << pf.package.cp_f << " F, Ls " << pf.package.ls_h << " H, rms " << pf.rms_relative);
}
