// Distortion of a series diode switch against E13 (docs/references.md) and
// against a real ngspice transient analysis with Fourier of the same circuit.
#include "design/distortion.hpp"

#include "tests/support/ngspice.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <sstream>
#include <string>
#include <unistd.h>

using namespace junco::fitting;

namespace {

double db(double ratio) { return 20.0 * std::log10(ratio); }

DistortionInput e13(double bias_a, double vhat_v) {
  DistortionInput in;
  in.part = {1e-14, 1.0, 0.0};
  in.bias_i_a = bias_a;
  in.source_peak_v = vhat_v;
  in.source_ohm = 50;
  in.load_ohm = 50;
  in.temp_k = 300.15;
  return in;
}

// Runs ngspice on the loop EMF(DC + sin) → Rg → diode → RL, the DC chosen so
// the diode carries bias_a, and returns the normalised magnitudes of
// harmonics 2 and 3 of v(RL) from its `fourier` command.
std::pair<double, double> ngspice_hd(const DistortionInput& in) {
  const double v_dc = diode_voltage_v(in.part, in.bias_i_a, in.temp_k) + in.bias_i_a * (in.source_ohm + in.load_ohm);
  std::ostringstream f;
  {
    f.precision(12);
    f << "series switch distortion\n"
      << "V1 src 0 DC " << v_dc << " SIN(" << v_dc << " " << in.source_peak_v << " 1k)\n"
      << "Rg src a " << in.source_ohm << "\nD1 a k dut\nRL k 0 " << in.load_ohm << "\n"
      << ".model dut D(IS=" << in.part.is_a << " N=" << in.part.n << " RS=" << in.part.rs_ohm << ")\n"
      << ".options reltol=1e-7 abstol=1e-15 vntol=1e-10 temp=27 tnom=27\n"
      << ".control\nset fourgridsize=1024\ntran 0.25u 3m 1m 0.25u\nfourier 1k v(k)\n.endc\n.end\n";
  }
  // ngspice -b exits 1 after a .control run with no .print lines, so the
  // exit status says nothing; the parsed table below is the check.
  const auto run = junco::test::run_ngspice(f.str());
  INFO("ngspice exit " << run.exit_code);
  std::istringstream printed(run.out);
  std::string line;
  double hd2 = NAN, hd3 = NAN;
  bool in_table = false;
  while (std::getline(printed, line)) {
    if (line.find("Fourier analysis for v(k)") != std::string::npos) in_table = true;
    if (!in_table) continue;
    std::istringstream row(line);
    int k;
    double freq, mag, phase, norm;
    if (row >> k >> freq >> mag >> phase >> norm) {
      if (k == 2) hd2 = norm;
      if (k == 3) hd3 = norm;
    }
  }
  REQUIRE(std::isfinite(hd2));
  REQUIRE(std::isfinite(hd3));
  return {hd2, hd3};
}

}  // namespace

TEST_CASE("E13: HD2 of a diode in series with 100 ohm at 10 mA, 0.1 V") {
  // Source: docs/references.md E13 — formula −64.23 dBc, 64-point harmonic
  // balance of the exact Lambert-W loop −64.19 dBc.
  const auto r = solve_distortion(e13(10e-3, 0.1));
  CHECK(r.load.dbc[2] == Approx(-64.19).margin(0.05));
  CHECK(r.mean_current_a == Approx(10e-3).epsilon(1e-9));  // steady state: blocks pass no DC
}

TEST_CASE("E13: HD2 at fixed signal current falls about 12 dB per bias doubling") {
  // Source: docs/references.md E13 (Î = 1 mA: −52.18/−64.01/−75.94/−87.93 dBc at
  // 5/10/20/40 mA; these are formula values, good where Î/I is small).
  const double bias[] = {5e-3, 10e-3, 20e-3, 40e-3};
  const double hd2[] = {-52.18, -64.01, -75.94, -87.93};
  for (int k = 0; k < 4; ++k) {
    auto in = e13(bias[k], 0.1);
    // Drive so the fundamental current through the loop is 1 mA.
    for (int it = 0; it < 4; ++it) {
      const auto r = solve_distortion(in);
      in.source_peak_v *= 1e-3 / (r.load_peak_v / in.load_ohm);
    }
    const auto r = solve_distortion(in);
    CHECK(r.load_peak_v / in.load_ohm == Approx(1e-3).epsilon(1e-6));
    CHECK(r.load.dbc[2] == Approx(hd2[k]).margin(k == 0 ? 0.6 : 0.2));
  }
}

TEST_CASE("E13: bare-junction limit, HD2 ≈ V/(4·N·Vt) and HD3 ≈ (V/(N·Vt))²/24") {
  // Source: docs/references.md E13: at V̂ = 1 mV across the junction, 300.15 K,
  // −40.30 and −84.11 dBc (series expansion of the exponential). A bare
  // junction is voltage-driven: make the loop resistance tiny against rj.
  auto in = e13(1e-6, 1e-3);
  in.source_ohm = 1e-3;
  in.load_ohm = 1e-3;
  in.samples = 512;
  const auto r = solve_distortion(in);
  CHECK(r.load.dbc[2] == Approx(-40.30).margin(0.05));
  CHECK(r.load.dbc[3] == Approx(-84.11).margin(0.1));
}

TEST_CASE("ngspice transient + fourier of the same circuit agrees on HD2 and HD3") {
  // Source: ngspice (Debian package) transient analysis of the circuit in
  // design_distortion.hpp with DC blocks held at their operating point.
  for (double bias : {2e-3, 10e-3}) {
    auto in = e13(bias, 0.2);
    in.part.rs_ohm = 0.7;
    in.hold_dc_point = true;
    const auto ours = solve_distortion(in);
    const auto [hd2, hd3] = ngspice_hd(in);
    INFO("bias " << bias);
    CHECK(ours.load.dbc[2] == Approx(db(hd2)).margin(0.02));
    CHECK(ours.load.dbc[3] == Approx(db(hd3)).margin(0.05));
  }
}

TEST_CASE("least bias for a target THD meets it and is the least") {
  auto in = e13(10e-3, 0.5);
  const auto i = bias_for_thd_a(in, 0.01);
  REQUIRE(i);
  in.bias_i_a = *i;
  CHECK(solve_distortion(in).load.thd <= 0.01 * (1 + 1e-9));
  in.bias_i_a = *i * 0.98;
  CHECK(solve_distortion(in).load.thd > 0.01);
}
