// The junction capacitance fit (fitting/junction_cap.hpp) on off-state
// readings made by a real ngspice small-signal (.ac) analysis of the
// fixture's series switch with the diode reverse biased. Each reading's C
// must be the netlist's own depletion law, and the fit must give back its
// CJO, VJ and M; with two biases only, the held law must say so.
#include "fitting/junction_cap.hpp"

#include "tests/support/ngspice.hpp"

#include <catch2/catch.hpp>

#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <sstream>

using namespace junco::fitting;

namespace {

// An invented part. IS is small so the junction conductance at zero bias
// (IS/(N·Vt) + GMIN ≈ 6e-11 S) is negligible next to ω·Cj ≥ 6e-5 S.
constexpr double is_a = 3e-12, n_ideality = 1.9, rs_ohm = 1.3;
constexpr double cjo_f = 2.4e-12, vj_v = 0.72, m_grading = 0.38;

// ngspice dioload.c (docs/references.md §2), below FC·VJ: C = CJO·(1 − V/VJ)^−M
// with V = −Vr; TT = 0, so no diffusion capacitance.
double netlist_law_f(double reverse_v) { return cjo_f * std::pow(1.0 + reverse_v / vj_v, -m_grading); }

// One copy of source → Rg → diode → RL per reverse bias, the source's DC at
// −Vr so the anode sits below the grounded cathode; |v(k)| and |v(in)| at
// 10 MHz and 100 MHz (ac dec 1 gives exactly those two points).
std::vector<OffStatePoint> ngspice_readings(const std::vector<double>& reverse_v) {
  const junco::test::Ngspice ng("cjfit");
  const std::string out = ng.path("cj.txt");
  std::ostringstream f;
  {
    f.precision(15);
    f << "fixture series switch, off state, small signal\n";
    std::string vectors;
    for (std::size_t k = 0; k < reverse_v.size(); ++k) {
      f << "V" << k << " s" << k << " 0 DC " << -reverse_v[k] << " AC 1\n"
        << "Rg" << k << " s" << k << " in" << k << " 50\n"
        << "D" << k << " in" << k << " k" << k << " dut\n"
        << "RL" << k << " k" << k << " 0 50\n";
      vectors += " vm(k" + std::to_string(k) + ") vm(in" + std::to_string(k) + ")";
    }
    f << ".model dut D(IS=" << is_a << " N=" << n_ideality << " RS=" << rs_ohm << " CJO=" << cjo_f << " VJ=" << vj_v
      << " M=" << m_grading << " TT=0)\n"
      << ".options reltol=1e-9 abstol=1e-18 vntol=1e-12 temp=27 tnom=27\n"
      << ".control\nac dec 1 10e6 100e6\nset wr_singlescale\nwrdata " << out << vectors << "\n.endc\n.end\n";
  }
  const auto run = ng.run(f.str(), "cj");
  INFO("ngspice exit " << run.exit_code << ", output:\n" << run.out);  // -b exits 1 without .print lines; the parsed data are the check
  std::ifstream data(out);
  std::string line;
  std::vector<OffStatePoint> points;
  while (std::getline(data, line)) {
    std::istringstream row(line);
    double freq;
    if (!(row >> freq)) continue;
    for (double vr : reverse_v) {
      OffStatePoint p;
      p.reverse_v = vr;
      p.freq_hz = freq;
      row >> p.vout >> p.vin;
      points.push_back(p);
    }
    REQUIRE(row);
  }
  REQUIRE(points.size() == 2 * reverse_v.size());
  return points;
}

}  // namespace

TEST_CASE("each off-state reading of an ngspice .ac analysis gives the netlist's Cj(Vr)") {
  // Source: ngspice (Debian package, ngspice-39) .ac analysis of the netlist
  // above; the expected C is the netlist's law (ngspice dioload.c,
  // docs/references.md §2). Tolerance 1e-7: wrdata prints 9 significant digits
  // (≤ 1e-8 in each ratio), d ln C / d ln|G| ≈ 1 at these isolations, and
  // the zero-bias junction conductance adds < 1e-8 (our bound, no source).
  const std::vector<double> biases{0.0, 0.5, 1.0, 2.0, 3.0, 5.0, 8.0};
  const auto readings = ngspice_readings(biases);
  const Fixture fx;  // Rg = RL = 50 Ω, no shunts, as in the netlist
  for (const auto& p : readings) {
    INFO("Vr " << p.reverse_v << " V at " << p.freq_hz << " Hz");
    CHECK(off_state_capacitance_f(p, fx, rs_ohm) == Approx(netlist_law_f(p.reverse_v)).epsilon(1e-7));
    CHECK(off_state_isolation_db(p) > 10.0);  // the diode isolates: every reading is usable
  }
}

TEST_CASE("the fit recovers CJO, VJ and M of the ngspice netlist") {
  // Source: ngspice (Debian package, ngspice-39) .ac analysis; true values
  // are the netlist's CJO = 2.4 pF, VJ = 0.72 V, M = 0.38.
  const std::vector<double> biases{0.0, 0.5, 1.0, 2.0, 3.0, 5.0, 8.0};
  const auto readings = ngspice_readings(biases);
  const JunctionCapFit fit = fit_junction_cap(readings, Fixture{}, rs_ohm);
  INFO(fit.message);
  REQUIRE(fit.ok);
  CHECK_FALSE(fit.law_held);
  CHECK(fit.points_used == readings.size());
  CHECK(std::count(fit.left_out.begin(), fit.left_out.end(), "") == static_cast<long>(readings.size()));
  // Tolerances (our bound, no source): a perturbation δ_k of ln C moves a
  // parameter by at most sqrt(C_ii)·sqrt(Σ w_k·δ_k²) (Cauchy–Schwarz on the
  // linearised solution; C the unscaled covariance, w_k = 1/σ_lnC,k²). With
  // |δ_k| ≤ 1e-7 (the case above), 14 readings at σ_lnC ≈ 1.15e-3 and this
  // design's unscaled errors (≈ 7.8e-4 in ln CJO, 5.7e-3 V in VJ, 1.1e-3 in
  // M at 0.01 dB) that is ≤ 2.5e-7 in CJO, 1.9e-6 V in VJ and 3.6e-7 in M;
  // the limits are about 5× those (seen: ~1e-8 on all three).
  CHECK(fit.cj0_f.value == Approx(cjo_f).epsilon(1.5e-6));
  CHECK(fit.vj_v.value == Approx(vj_v).margin(1e-5));
  CHECK(fit.m.value == Approx(m_grading).margin(2e-6));
  // Exact readings: |δ_k| ≤ 1e-7 keeps the reduced χ² below ~1e-8.
  CHECK(fit.reduced_chi2 < 1e-6);
  CHECK(std::isfinite(fit.vj_v.std_error));
  // Positive: a larger VJ flattens the curve, a larger M steepens it again
  // (seen: 0.94 for this design; our reasoning, no source).
  CHECK(fit.vj_m_correlation > 0.5);
}

TEST_CASE("two reverse biases only: VJ and M are held and CJO is what the held law allows") {
  // Source: ngspice (Debian package, ngspice-39) .ac analysis at Vr = 1 V and
  // 3 V. With VJ, M held at vh, mh, each reading k alone says
  // CJO_k = C_k·(1 + Vr_k/vh)^mh; the fit's CJO is a weighted mean of the
  // ln CJO_k, so it lies between the smallest and largest of them, taken
  // here from the netlist's law (ngspice dioload.c, docs/references.md §2) with
  // the 1e-7 of the first case as slack. The defaults (1 V, 0.5) are
  // ngspice's (docs/references.md §2).
  const auto readings = ngspice_readings({1.0, 3.0});
  const JunctionCapOptions o;
  const JunctionCapFit fit = fit_junction_cap(readings, Fixture{}, rs_ohm, o);
  INFO(fit.message);
  REQUIRE(fit.ok);
  CHECK(fit.law_held);
  CHECK(fit.message.find("held") != std::string::npos);
  CHECK(fit.vj_v.value == o.vj_v_held);
  CHECK(fit.m.value == o.m_held);
  CHECK(std::isnan(fit.vj_v.std_error));
  CHECK(std::isnan(fit.m.std_error));
  CHECK(std::isfinite(fit.cj0_f.std_error));
  const double lo = netlist_law_f(1.0) * std::pow(1.0 + 1.0 / o.vj_v_held, o.m_held);
  const double hi = netlist_law_f(3.0) * std::pow(1.0 + 3.0 / o.vj_v_held, o.m_held);
  REQUIRE(lo < hi);  // the held law (M 0.5 over 1 V) bends more than the netlist's here
  CHECK(fit.cj0_f.value >= lo * (1 - 1e-7));
  CHECK(fit.cj0_f.value <= hi * (1 + 1e-7));
  // Both readings at a bias agree, the biases do not: the held law misfits
  // by far more than one reading's σ, and χ² shows it.
  CHECK(fit.reduced_chi2 > 100.0);
}
