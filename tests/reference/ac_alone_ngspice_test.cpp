// The AC-alone fit (fitting/joint_fit.hpp fit_ac_only) on readings
// made by a real ngspice small-signal (.ac) analysis of the fixture's series
// switch, with the junction capacitance in the diode. The fit must recover
// the netlist's N and RS when it is told Cj, and the plain dynamic-resistance
// line (docs/references.md §3), which neglects Cj, must be visibly off at the
// same frequency: the reason the refinement exists.
#include "fitting/joint_fit.hpp"

#include "tests/support/ngspice.hpp"

#include <catch2/catch.hpp>

#include <unistd.h>

#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <sstream>

using namespace junco::fitting;

namespace {

constexpr double t27_k = 300.15;
const DiodeParams part{2e-9, 1.8, 0.7};  // an invented part
constexpr double cjo_f = 2e-12;

// One copy of source → Rg → diode → RL per bias current, each with the DC
// that gives that current (docs/references.md §2 inverse: V = I·R + N·Vt·ln(1 +
// I/IS)); ngspice linearises each at its operating point and returns
// |v(k)| and |v(in)| at freq_hz. M is tiny so the depletion capacitance at
// the forward bias stays CJO (ngspice dioload.c: CJO·(1 − V/VJ)^−M, within
// 5e-4 at V = 0.75 V with VJ = 2 V, the largest VJ ngspice accepts; below
// FC·VJ = 1 V at every bias here); TT = 0, so there is no diffusion capacitance.
std::vector<AcPoint> ngspice_readings(const std::vector<double>& bias_a, double freq_hz) {
  const junco::test::Ngspice ng("acfit");
  const std::string out = ng.path("ac.txt");
  const double vt = thermal_voltage_v(t27_k);
  std::ostringstream f;
  {
    f.precision(15);
    f << "fixture series switch, small signal\n";
    std::string vectors;
    for (std::size_t k = 0; k < bias_a.size(); ++k) {
      const double i = bias_a[k];
      const double v_dc = i * (50.0 + 50.0 + part.rs_ohm) + part.n * vt * std::log1p(i / part.is_a);
      f << "V" << k << " s" << k << " 0 DC " << v_dc << " AC 1\n"
        << "Rg" << k << " s" << k << " in" << k << " 50\n"
        << "D" << k << " in" << k << " k" << k << " dut\n"
        << "RL" << k << " k" << k << " 0 50\n";
      vectors += " vm(k" + std::to_string(k) + ") vm(in" + std::to_string(k) + ")";
    }
    f << ".model dut D(IS=" << part.is_a << " N=" << part.n << " RS=" << part.rs_ohm << " CJO=" << cjo_f
      << " VJ=2 M=0.001 TT=0)\n"
      << ".options reltol=1e-9 abstol=1e-18 vntol=1e-12 temp=27 tnom=27\n"
      << ".control\nac lin 1 " << freq_hz << " " << freq_hz << "\nset wr_singlescale\nwrdata " << out << vectors
      << "\n.endc\n.end\n";
  }
  const auto run = ng.run(f.str(), "ac");
  INFO("ngspice exit " << run.exit_code << ", output:\n" << run.out);  // -b exits 1 without .print lines; the parsed data are the check
  std::ifstream data(out);
  std::string line;
  std::vector<AcPoint> points;
  while (std::getline(data, line)) {
    std::istringstream row(line);
    double freq;
    if (!(row >> freq)) continue;
    for (double i : bias_a) {
      AcPoint p;
      p.bias_i_a = i;
      p.freq_hz = freq;
      row >> p.vout >> p.vin;
      points.push_back(p);
    }
    REQUIRE(row);
  }
  REQUIRE(points.size() == bias_a.size());
  return points;
}

std::vector<double> log_spaced(double from, double to, int count) {
  std::vector<double> v;
  for (int k = 0; k < count; ++k) v.push_back(from * std::pow(to / from, k / double(count - 1)));
  return v;
}

}  // namespace

TEST_CASE("AC-alone fit with Cj recovers N and RS from an ngspice .ac analysis at 100 MHz") {
  // Source: ngspice (Debian package) small-signal analysis of the netlist
  // above; the true values are the netlist's N = 1.8, RS = 0.7 Ω.
  const auto readings = ngspice_readings(log_spaced(20e-6, 20e-3, 12), 100e6);
  JointFitOptions o;
  o.temp_k = t27_k;
  o.ac_sigma_db = 0.01;
  const Fixture fx;  // Rg = RL = 50 Ω, no shunts, as in the netlist

  o.cj_f = cjo_f;
  const SimpleFit with_cj = fit_ac_only(readings, fx, o);
  INFO(with_cj.message);
  REQUIRE(with_cj.ok);
  // Tolerances: the AC-alone model takes rj = N·Vt/I, and Is/I reaches 1e-4
  // at 20 µA here; the tiny M leaves Cj within 5e-4 of CJO (our bounds, no source).
  CHECK(with_cj.n.value == Approx(part.n).epsilon(5e-4));
  CHECK(with_cj.rs_ohm.value == Approx(part.rs_ohm).margin(2e-3));
  CHECK(with_cj.reduced_chi2 < 0.01);  // exact readings: the model describes them
  CHECK(std::isfinite(with_cj.n.std_error));

  // The plain line on the same readings: ω·Cj·rj reaches 0.6 at 20 µA, so
  // the low-bias readings look like extra resistance and the fit misses.
  o.cj_f = 0.0;
  const SimpleFit line = fit_ac_only(readings, fx, o);
  REQUIRE(line.ok);
  CHECK(std::abs(line.n.value - part.n) > 0.02);
  CHECK(line.reduced_chi2 > 100.0 * with_cj.reduced_chi2);
}

TEST_CASE("at 1 MHz Cj hardly matters and both fits agree with ngspice") {
  // Source: ngspice (Debian package), the same netlist at 1 MHz, where
  // ω·Cj·rj < 0.01 for every reading (docs/references.md §3: the line is valid
  // while ω·Cj·rd ≪ 1).
  const auto readings = ngspice_readings(log_spaced(20e-6, 20e-3, 12), 1e6);
  JointFitOptions o;
  o.temp_k = t27_k;
  const Fixture fx;
  const SimpleFit line = fit_ac_only(readings, fx, o);
  o.cj_f = cjo_f;
  const SimpleFit with_cj = fit_ac_only(readings, fx, o);
  REQUIRE(line.ok);
  REQUIRE(with_cj.ok);
  CHECK(line.n.value == Approx(part.n).epsilon(2e-3));
  CHECK(with_cj.n.value == Approx(part.n).epsilon(5e-4));
  CHECK(with_cj.rs_ohm.value == Approx(part.rs_ohm).margin(2e-3));
}
